"""Bad input gets one clear line naming file, line and field, and exit 2; text is made inert.

Markdown escaping is checked by rendering with markdown-it-py, a CommonMark
implementation (the reference for how a CI page will render the summary).
"""
from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from qacheck.cli import main
from qacheck.errors import InputError
from qacheck.scenarios import load_set

PORT = Path(__file__).resolve().parent.parent / "scenarios" / "caldreth-port"


def _set(tmp_path: Path, manifest: str) -> Path:
    d = tmp_path / "set"
    shutil.copytree(PORT, d)
    (d / "set.toml").write_text(manifest)
    return d


@pytest.mark.parametrize("manifest,where,field", [
    ('name = "x"\n[gaet]\ntolerance = 0.03\n', ":2", "gaet"),
    ('name = "x"\n[gate]\ntolerence = 0.03\n', ":3", "gate.tolerence"),
    ('name = "x"\ntagz = ["a"]\n', ":2", "tagz"),
    ('name = "x"\n[gate]\ntolerance = "high"\n', ":3", "gate.tolerance"),
    ('name = "x"\ntags = "demo"\n', ":2", "tags"),
])
def test_every_typo_in_set_toml_is_an_error_naming_file_line_and_field(tmp_path, manifest, where,
                                                                        field):
    d = _set(tmp_path, manifest)
    with pytest.raises(InputError) as err:
        load_set(d)
    assert f"set.toml{where}" in str(err.value) and f"'{field}'" in str(err.value)


def test_a_malformed_case_line_stays_a_counted_error_case(tmp_path):
    d = _set(tmp_path, 'name = "x"\n')
    lines = (d / "cases.jsonl").read_text().splitlines()
    lines.insert(1, '{"id": "broken", "source": ')
    (d / "cases.jsonl").write_text("\n".join(lines) + "\n")
    s = load_set(d, "writer-v1")
    bad = [c for c in s.cases if c.error and "not valid JSON" in c.error]
    assert len(bad) == 1 and bad[0].id == "cases.jsonl:2"
    assert len(s.cases) == len(lines)  # every line is a case, the broken one too
    assert [c.id for c in s.cases].index("cases.jsonl:2") == 1  # in file order


def test_nul_bytes_are_an_input_error(tmp_path):
    src = tmp_path / "source.txt"
    src.write_bytes(b"The ferry leaves at 9 am.\n\x00\x00binary")
    out = tmp_path / "out.txt"
    out.write_text("The ferry leaves at 9 am.")
    res = CliRunner().invoke(main, ["score", str(src), str(out)])
    assert res.exit_code == 2 and "NUL" in res.output and "source.txt:2" in res.output


def test_a_missing_output_folder_is_refused_before_scoring(tmp_path):
    res = CliRunner().invoke(main, ["score", "--source-text", "A ferry.", "--output-text",
                                    "A ferry.", "--format", "html", "--out",
                                    str(tmp_path / "missing" / "x.html")])
    assert res.exit_code == 2 and "missing" in res.output and "Traceback" not in res.output


def test_source_given_twice_is_refused(tmp_path):
    src = tmp_path / "s.txt"
    src.write_text("A ferry.")
    res = CliRunner().invoke(main, ["score", str(src), str(src), "--source-text", "Other."])
    assert res.exit_code == 2 and "--source-text" in res.output


def test_outputs_not_found_says_where_it_looked(tmp_path):
    with pytest.raises(InputError) as err:
        load_set(PORT, "writer-v9")
    assert "writer-v9" in str(err.value) and "outputs" in str(err.value)


def test_markdown_summary_keeps_input_text_inert():
    from markdown_it import MarkdownIt

    from qacheck.reports.markdown import render_run

    evil = '<script>alert(1)</script> <img src=x onerror="alert(2)"> **loud** [link](javascript:x)'
    result = {"sentences": [{"text": evil, "label": "contradicted", "score": 0.1,
                             "questions": [], "reason": {"rule": "value", "text": evil,
                                                         "suggestion": evil, "cut": 0.4}}]}
    summary = {"set": evil, "outputs": "v1", "status": {"fail": 1}, "cases": 1,
               "mean_score": 0.1, "problems": [evil],
               "signature": {"text": "signature 0123", "id": "0123"}}
    records = [{"id": evil, "status": "fail", "score": 0.1, "reasons": [evil], "result": result}]
    page = MarkdownIt("commonmark").enable("table").render(render_run(summary, records, [evil]))
    assert "<script" not in page and "<img" not in page and "<strong>loud" not in page
    assert 'href="javascript' not in page
    assert "&lt;script&gt;" in page  # shown as text


class _FakeScorer:
    """Stands in for the models: every pair gets the same canned result (score 0.8)."""

    signature = {"id": "fake", "text": "signature fake"}

    def __init__(self):
        self.scored = 0

    def key(self, source, output):
        return f"{len(source)}-{len(output)}"

    def score(self, pairs):
        for i, _ in enumerate(pairs):
            self.scored += 1
            yield i, {"score": 0.8, "label": "consistent", "sentences": [],
                      "signature": self.signature}


def test_a_resumed_run_derives_status_from_the_current_expectations(tmp_path):
    from qacheck.runner import run_set

    d = _set(tmp_path, 'name = "x"\n')
    first = run_set(load_set(d, "writer-v1"), tmp_path / "out", _FakeScorer())
    assert {r.status for r in first.tally.rows.values()} == {"pass"}
    lines = [json.loads(x) for x in (d / "cases.jsonl").read_text().splitlines()]
    lines[0]["expect"] = {"min_score": 0.9}
    (d / "cases.jsonl").write_text("\n".join(json.dumps(x) for x in lines) + "\n")
    again = _FakeScorer()
    second = run_set(load_set(d, "writer-v1"), tmp_path / "out", again)
    assert again.scored == 0  # nothing rescored
    worst = second.tally.worst()[0]
    assert worst["status"] == "fail" and "min_score" in worst["reasons"][0]


def test_one_run_per_results_folder(tmp_path):
    from qacheck.runner import folder_lock, run_set

    out = tmp_path / "out"
    out.mkdir()
    with folder_lock(out):
        with pytest.raises(InputError, match="another qacheck run"):
            run_set(load_set(PORT, "writer-v1"), out, _FakeScorer())


def _baseline(folder: Path, records: list[dict]) -> Path:
    folder.mkdir()
    scores = [r["score"] for r in records if r["score"] is not None]
    (folder / "summary.json").write_text(json.dumps({
        "signature": {"id": "fake", "text": "signature fake"},
        "mean_score": sum(scores) / len(scores) if scores else None}))
    (folder / "results.jsonl").write_text("\n".join(json.dumps(r) for r in records) + "\n")
    return folder


def _rec(cid, status, score):
    return {"id": cid, "status": status, "score": score, "reasons": [f"{status} reason"]}


def _row(cid, status, score):
    from qacheck.tally import CaseRow

    return CaseRow(cid, status, score)


def test_gate_fails_when_nothing_was_scored_and_pairs_cases_by_id(tmp_path):
    from qacheck.runner import gate

    base = _baseline(tmp_path / "base", [_rec("a", "pass", 0.9), _rec("b", "pass", 0.5)])
    current = {"signature": {"id": "fake", "text": "signature fake"}}
    unscored = [_row("a", "unscored", None), _row("b", "unscored", None)]
    g = gate(current, unscored, base, 0.03, False)
    assert not g.ok and any("no case was scored" in m for m in g.messages)
    assert {r.id for r in g.newly_failing} == {"a", "b"}  # pass -> unscored is a regression
    # only case b is scored now, at its old score: the mean over shared cases did not drop,
    # although the mean over all scored cases fell from 0.7 to 0.5
    g = gate(current, [_row("a", "error", None), _row("b", "pass", 0.5)], base, 0.03, False)
    assert g.mean_drop == 0.0 and [r.id for r in g.newly_failing] == ["a"]


@pytest.mark.parametrize("text,english", [
    ("The harbour board met on Tuesday and approved a new pilot boat for the outer basin.", True),
    ("Der Hafenrat trat am Dienstag zusammen und genehmigte ein neues Lotsenboot.", False),
    ("港口委员会周二开会，批准了一艘新的引航船用于外港。", False),
    ("Le conseil du port s'est réuni mardi et a approuvé un nouveau bateau pilote.", False),
    ("Ilse Marrow chaired.", True),  # too short to judge
])
def test_language_check_on_invented_sentences(text, english):
    from qacheck.language import looks_english

    assert looks_english(text) is english


def test_text_that_is_not_english_is_scored_with_a_warning(checker):
    src = "Der Hafenrat trat am Dienstag zusammen und genehmigte ein neues Lotsenboot für Caldreth."
    r = checker.check(src, "Der Hafenrat genehmigte am Dienstag ein neues Lotsenboot.")
    assert len(r.warnings) == 2 and "English" in r.warnings[0]
    assert r.to_dict()["warnings"] == r.warnings


@pytest.mark.parametrize("name", ["qa", "qg"])
def test_a_tampered_model_stops_a_warm_run_before_any_result_is_written(tmp_path, monkeypatch,
                                                                        name):
    """With every answer in the cache, no model would load; the files are checked anyway."""
    from qacheck.models import lock

    cache = tmp_path / "cache.sqlite"
    args = ["run", str(PORT), "--outputs", "writer-v1", "--cache", str(cache)]
    warm = CliRunner().invoke(main, args + ["--results", str(tmp_path / "first")])
    assert warm.exit_code == 0, warm.output
    genuine = lock.entry(name)
    copy = tmp_path / "tampered"
    shutil.copytree(genuine.folder, copy)
    data = bytearray((copy / "model.safetensors").read_bytes())
    data[len(data) // 2] ^= 0xFF
    (copy / "model.safetensors").write_bytes(bytes(data))
    real_entry = lock.entry
    monkeypatch.setattr(lock, "entry", lambda n: (
        lock.ModelEntry(n, copy, genuine.files, genuine.meta) if n == name else real_entry(n)))
    res = CliRunner().invoke(main, args + ["--results", str(tmp_path / "second")])
    assert res.exit_code == 2 and "refusing to load" in res.output, res.output
    assert not (tmp_path / "second").exists()


@pytest.mark.parametrize("option", ["--results", "--cache"])
def test_unwritable_output_paths_are_refused_before_scoring(tmp_path, option):
    """A path under a plain file can be written by nobody, root included (as CI runs)."""
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    target = blocker / ("out" if option == "--results" else "cache.sqlite")
    res = CliRunner().invoke(main, ["run", str(PORT), "--outputs", "writer-v1", option, str(target)])
    assert res.exit_code == 2 and "not a writable folder" in res.output and "a-file" in res.output
    assert "Traceback" not in res.output


def test_compare_into_a_missing_folder_is_refused_first(tmp_path):
    res = CliRunner().invoke(main, ["compare", "writer-v1", "writer-v2", "--set", str(PORT),
                                    "--out", str(tmp_path / "missing" / "c.html")])
    assert res.exit_code == 2 and "does not exist" in res.output
