"""Scoring one pair end to end on invented pairs with planted errors."""
from __future__ import annotations

import json

import pytest
from click.testing import CliRunner

from qacheck.cli import main
from qacheck.errors import InputError

SOURCE = ("The Port of Caldreth Authority handled 412 vessel calls in January 2026. Harbour master "
          "Ilse Marrow reported that the north basin dredging began on 6 January. Two pilot boats "
          "were out of service for maintenance.")


def _labels(result):
    return [s.label for s in result.sentences]


def test_planted_contradiction_is_contradicted(checker):
    r = checker.check(SOURCE, "The Port of Caldreth Authority handled 517 vessel calls in January 2026.")
    assert _labels(r) == ["contradicted"]
    faithful = checker.check(SOURCE, "The Port of Caldreth Authority handled 412 vessel calls in January 2026.")
    assert r.score < faithful.score
    q = next(q for q in r.sentences[0].questions if q.outcome == "contradicted")
    assert q.source_answer and "412" in q.source_answer


def test_planted_addition_is_unverifiable(checker):
    r = checker.check(SOURCE, "The dredging was paid for by a grant from the Halden Trust.")
    assert _labels(r) == ["unverifiable"]


def test_faithful_paraphrase_is_supported(checker):
    r = checker.check(SOURCE, "In January 2026 the authority handled 412 vessel calls.")
    assert _labels(r) == ["supported"]
    assert r.label == "consistent"


def test_a_sentence_without_questions_is_judged_by_its_words_and_counted(checker):
    r = checker.check(SOURCE, "Well, that is it. The authority handled 412 vessel calls.")
    assert [s.checked for s in r.sentences] == [False, True] and r.unchecked_share == 0.5
    s = r.sentences[0]
    assert s.evidence["qa_mean"] == 0.0 and s.score is not None and s.reason is not None


def test_same_input_same_json(checker):
    out = "Ilse Marrow began the dredging on 9 January. Two pilot boats were out of service."
    a = json.dumps(checker.check(SOURCE, out).to_dict(), sort_keys=True)
    b = json.dumps(checker.check(SOURCE, out).to_dict(), sort_keys=True)
    assert a == b


def test_json_layout_and_signature(checker):
    d = checker.check(SOURCE, "Ilse Marrow is the harbour master.").to_dict()
    assert {"score", "label", "sentences", "signature"} <= set(d)
    s = d["sentences"][0]
    assert {"text", "start", "end", "score", "label", "questions"} <= set(s)
    for q in s["questions"]:
        assert {"question", "output_answer", "source_answer", "no_answer_prob", "f1",
                "outcome"} <= set(q)
    assert set(d["signature"]["models"]) >= {"qa", "judge"} and "thresholds" in d["signature"]
    rt = d["signature"]["runtime"]
    assert rt["qa"]["window"] == checker.qa.max_len and rt["precision"] in ("bf16", "fp32")
    assert {"torch", "transformers", "spacy", "spacy_model"} <= set(rt)
    assert "|" not in d["signature"]["text"] and d["signature"]["id"] in d["signature"]["text"]


def test_batch_equals_one_by_one(checker):
    outs = ["The authority handled 412 vessel calls.", "Two pilot boats were repaired in Brack.",
            "Ilse Marrow began the dredging on 9 January, and the work stopped in a storm."]
    batch = checker.check_many([(SOURCE, o) for o in outs])
    single = [checker.check(SOURCE, o) for o in outs]
    assert [r.to_dict() for r in batch] == [r.to_dict() for r in single]


def test_answers_do_not_depend_on_what_else_is_in_the_batch(qa_model):
    """Every forward pass has the same shape, so a question's answer is the same alone or
    among many (it once differed in the fourth decimal)."""
    pairs = [("Who began the dredging?", SOURCE), ("How many vessel calls were handled?", SOURCE),
             ("What stopped the work?", SOURCE * 6)]
    together = qa_model.answer(pairs)
    alone = [qa_model.answer([p])[0] for p in pairs]
    crowd = qa_model.answer(pairs + [("Who is the harbour master?", SOURCE)] * 40)[:3]
    assert together == alone == crowd


def test_empty_text_is_refused(checker):
    with pytest.raises(InputError, match="empty"):
        checker.check(SOURCE, "   ")


def test_cli_score_json_and_bad_input(tmp_path):
    src = tmp_path / "source.txt"
    src.write_text(SOURCE, encoding="utf-8")
    out = tmp_path / "output.txt"
    out.write_text("The authority handled 412 vessel calls in January 2026.", encoding="utf-8")
    runner = CliRunner()
    res = runner.invoke(main, ["score", str(src), str(out), "--format", "json"])
    assert res.exit_code == 0, res.output
    assert json.loads(res.output)["label"] == "consistent"
    bad = tmp_path / "bad.txt"
    bad.write_bytes(b"caf\xe9 au lait\n")
    res = runner.invoke(main, ["score", str(src), str(bad)])
    assert res.exit_code == 2 and "not UTF-8" in res.output and "bad.txt" in res.output
    empty = tmp_path / "empty.txt"
    empty.write_text("\n")
    res = runner.invoke(main, ["score", str(src), str(empty)])
    assert res.exit_code == 2 and "empty" in res.output


def test_cli_text_view_shows_evidence_and_caution():
    runner = CliRunner()
    res = runner.invoke(main, ["score", "--source-text", SOURCE,
                               "--output-text", "The authority handled 517 vessel calls in January 2026."])
    assert res.exit_code == 0, res.output
    assert "contradicted" in res.output and "412" in res.output
    assert "not proof" in res.output
