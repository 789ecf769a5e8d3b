"""Scenario sets and nightly runs: files written, resume, cache, gate, bad input, kills."""
from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from click.testing import CliRunner

from qacheck.cli import main
from qacheck.runner import Scorer, run_set
from qacheck.scenarios import load_set

ROOT = Path(__file__).resolve().parent.parent
PORT = ROOT / "scenarios" / "caldreth-port"
QACHECK = [sys.executable, "-m", "qacheck.cli"]


def _run(*args):
    return CliRunner().invoke(main, ["run", *map(str, args)])


def test_run_writes_results_summary_markdown_junit_html(tmp_path):
    res = _run(PORT, "--outputs", "writer-v1", "--results", tmp_path / "v1")
    assert res.exit_code == 0, res.output
    folder = tmp_path / "v1"
    lines = (folder / "results.jsonl").read_text().splitlines()
    assert len(lines) == 8
    summary = json.loads((folder / "summary.json").read_text())
    assert summary["cases"] == 8 and summary["status"] == {"pass": 8}
    assert "signature" in summary and summary["signature"]["models"]["qa"]
    suite = ET.parse(folder / "junit.xml").getroot()
    assert suite.tag == "testsuite" and suite.get("tests") == "8" and suite.get("failures") == "0"
    assert "8 passed" in (folder / "summary.md").read_text()
    page = (folder / "report.html").read_text()
    # self-contained: its one script is inline (sorting and filtering), nothing is fetched
    assert page.count("<script") == 1 and "<script src" not in page
    assert "http://" not in page and "https://" not in page


def test_gate_fails_on_planted_regressions_and_lists_them(tmp_path):
    assert _run(PORT, "--outputs", "writer-v1", "--results", tmp_path / "v1").exit_code == 0
    res = _run(PORT, "--outputs", "writer-v2", "--results", tmp_path / "v2",
               "--baseline", tmp_path / "v1")
    assert res.exit_code == 1, res.output
    assert "passed in the baseline" in res.output and "safety-2026-03" in res.output
    suite = ET.parse(tmp_path / "v2" / "junit.xml").getroot()
    failed = {tc.get("name") for tc in suite.iter("testcase") if tc.find("failure") is not None}
    assert {"safety-2026-03", "env-2026-05", "cargo-2026-07"} <= failed


def test_gate_refuses_other_signature_unless_told(tmp_path):
    assert _run(PORT, "--outputs", "writer-v1", "--results", tmp_path / "v1").exit_code == 0
    base = tmp_path / "v1" / "summary.json"
    s = json.loads(base.read_text())
    s["signature"]["id"], s["signature"]["text"] = "000000000000", "qacheck 0.0.0 | qa:deadbeef"
    base.write_text(json.dumps(s))
    res = _run(PORT, "--outputs", "writer-v1", "--results", tmp_path / "again", "--baseline",
               tmp_path / "v1")
    assert res.exit_code == 2 and "signatures" in res.output
    res = _run(PORT, "--outputs", "writer-v1", "--results", tmp_path / "again", "--baseline",
               tmp_path / "v1", "--allow-signature-mismatch")
    assert res.exit_code == 0 and "SIGNATURES DIFFER" in res.output


def _bad_set(tmp_path: Path) -> Path:
    d = tmp_path / "bad-set"
    (d / "outputs").mkdir(parents=True)
    (d / "set.toml").write_text('name = "bad-set"\n')
    src = "The Felwick library opened in 1962. It holds 40,000 books."
    lines = [
        json.dumps({"id": "good-1", "source": src}),
        '{"id": "broken", "source": ',                       # line 2: malformed JSON
        json.dumps({"id": "good-1", "source": src}),         # line 3: duplicate id
        json.dumps({"id": "no-source"}),                     # line 4: missing field
        json.dumps({"id": "good-2", "source": src}),
        json.dumps({"id": "empty-out", "source": src}),
    ]
    (d / "cases.jsonl").write_text("\n".join(lines) + "\n")
    outs = [json.dumps({"id": "good-1", "output": "The Felwick library opened in 1962."}),
            json.dumps({"id": "ghost", "output": "No such case."}),   # line 2: unknown id
            json.dumps({"id": "good-2", "output": "It holds 40,000 books."}),
            json.dumps({"id": "empty-out", "output": "  "})]          # line 4: empty text
    (d / "outputs" / "v1.jsonl").write_text("\n".join(outs) + "\n")
    return d


def test_bad_input_is_named_and_never_aborts_good_cases(tmp_path):
    d = _bad_set(tmp_path)
    res = _run(d, "--outputs", "v1", "--results", tmp_path / "out")
    assert res.exit_code == 2, res.output
    text = res.output
    assert "cases.jsonl:2" in text and "not valid JSON" in text
    assert "cases.jsonl:3" in text and "duplicate id 'good-1'" in text
    assert "cases.jsonl:4" in text and "field 'source'" in text
    assert "v1.jsonl:2" in text and "ghost" in text
    assert "v1.jsonl:4" in text and "empty text" in text
    recs = {json.loads(x)["id"]: json.loads(x)
            for x in (tmp_path / "out" / "results.jsonl").read_text().splitlines()}
    assert recs["good-1"]["status"] == "pass" and recs["good-2"]["status"] == "pass"
    assert recs["no-source"]["status"] == "error" and recs["empty-out"]["status"] == "error"
    assert recs["cases.jsonl:2"]["status"] == "error"  # the malformed line is counted, not lost


def test_bad_manifest_names_the_file(tmp_path):
    d = tmp_path / "s"
    d.mkdir()
    (d / "set.toml").write_text("name = \n")
    (d / "cases.jsonl").write_text("")
    res = _run(d)
    assert res.exit_code == 2 and "set.toml" in res.output


class _Counting:
    """Wraps the real checker and counts the pairs it is asked to score."""

    def __init__(self, inner):
        self.inner, self.pairs = inner, 0

    @property
    def signature(self):
        return self.inner.signature

    @property
    def evidence_signature(self):
        return self.inner.evidence_signature

    @property
    def model(self):
        return self.inner.model

    def check_many(self, pairs):
        self.pairs += len(pairs)
        return self.inner.check_many(pairs)


def test_resume_and_cache_skip_finished_cases(tmp_path, checker):
    from qacheck.cache import ResultCache

    sset = load_set(PORT, "writer-v1")
    counting = _Counting(checker)
    cache = ResultCache(tmp_path / "c.sqlite")
    scorer = Scorer(checker.thresholds, cache, checker=counting)
    first = run_set(sset, tmp_path / "r", scorer)
    assert counting.pairs == 8
    again = run_set(sset, tmp_path / "r", scorer)            # resume: nothing left to do
    assert counting.pairs == 8 and again.summary["cases"] == 8
    warm = run_set(sset, tmp_path / "other", scorer)          # new folder, warm cache
    assert counting.pairs == 8
    strip = lambda out: sorted(out.tally.rows.values(), key=lambda r: r.id)  # noqa: E731
    assert strip(first) == strip(again) == strip(warm)


@pytest.fixture(scope="module")
def uninterrupted(tmp_path_factory) -> list[tuple[str, float, str]]:
    """(id, score, status) of every case of a run that nobody stopped."""
    tmp = tmp_path_factory.mktemp("ref")
    env = {**os.environ, "QACHECK_CACHE": str(tmp / "unused.sqlite")}
    ref = subprocess.run([*QACHECK, "run", str(PORT), "--outputs", "writer-v2", "--no-cache",
                          "--results", str(tmp / "ref")], env=env, capture_output=True, text=True,
                         timeout=600)
    assert ref.returncode == 1, ref.stderr  # writer-v2 has failing cases
    return [(r["id"], r["score"], r["status"]) for r in
            map(json.loads, (tmp / "ref" / "results.jsonl").read_text().splitlines())]


@pytest.mark.parametrize("sig, batch, after", [
    (signal.SIGKILL, 1, 3),   # between cases
    (signal.SIGINT, 1, 3),    # Ctrl-C
    (signal.SIGKILL, 8, 0),   # inside the one batch of the set's 8 cases, nothing finished
    (signal.SIGKILL, 4, 4),   # after a whole batch
])
def test_killed_run_loses_nothing_and_resumes_to_same_results(tmp_path, uninterrupted, sig,
                                                               batch, after):
    env = {**os.environ, "QACHECK_CACHE": str(tmp_path / "c.sqlite")}
    args = [*QACHECK, "run", str(PORT), "--outputs", "writer-v2", "--batch-size", str(batch),
            "--results", str(tmp_path / "killed")]
    proc = subprocess.Popen(args, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    results = tmp_path / "killed" / "results.jsonl"
    deadline = time.time() + 300
    while time.time() < deadline:
        if results.exists() and len(results.read_text().splitlines()) >= after:
            break
        time.sleep(0.05)
    proc.send_signal(sig)
    proc.wait(timeout=60)
    saved = [json.loads(x) for x in results.read_text().splitlines() if x.strip()]
    assert after <= len(saved) < len(uninterrupted)  # finished cases are on disk, not all ran
    reference = {i: (i, score, status) for i, score, status in uninterrupted}
    assert all((r["id"], r["score"], r["status"]) == reference[r["id"]] for r in saved)
    resumed = subprocess.run(args, env=env, capture_output=True, text=True, timeout=600)
    assert resumed.returncode == 1, resumed.stderr
    final = [json.loads(x) for x in results.read_text().splitlines()]
    assert [(r["id"], r["score"], r["status"]) for r in final] == uninterrupted
    # junit.xml, written as cases arrive, holds every case once; no part file is left behind
    cases = ET.parse(tmp_path / "killed" / "junit.xml").getroot().findall("testcase")
    assert sorted(c.get("name") for c in cases) == sorted(i for i, _, _ in uninterrupted)
    assert not list((tmp_path / "killed").glob(".*.part"))


def test_set_thresholds_must_be_known(tmp_path):
    d = tmp_path / "s"
    shutil.copytree(PORT, d)
    (d / "set.toml").write_text('name = "x"\n[thresholds]\nno_anwser = 0.3\n')
    res = _run(d, "--outputs", "writer-v1", "--results", tmp_path / "o")
    assert res.exit_code == 2 and "no_anwser" in res.output


def test_workers_give_the_same_results_as_one_process(tmp_path):
    serial = _run(PORT, "--outputs", "writer-v2", "--results", tmp_path / "one", "--no-cache")
    parallel = _run(PORT, "--outputs", "writer-v2", "--results", tmp_path / "two", "--no-cache",
                    "--workers", "2", "--batch-size", "2")
    assert serial.exit_code == parallel.exit_code == 1
    # results arrive in the order batches finish: compared case by case
    read = lambda d: sorted((r["id"], r["score"], r["status"]) for r in  # noqa: E731
                            map(json.loads, (d / "results.jsonl").read_text().splitlines()))
    one, two = read(tmp_path / "one"), read(tmp_path / "two")
    assert [(i, st) for i, _, st in one] == [(i, st) for i, _, st in two]
    # bf16 sums differ in the last bits between 1 and 2 threads per process
    assert all(abs(a[1] - b[1]) < 0.02 for a, b in zip(one, two))


def test_failure_reason_names_each_flagged_sentence_and_its_rule():
    """A case fails because sentences were flagged; the reason must say which and why."""
    from qacheck.runner import case_status
    from qacheck.scenarios import Case

    case = Case("c1", "source text", "output text")
    flagged = {"label": "contradicted", "text": "Calls rose to 517.",
               "reason": {"text": "a different value: the source says 412"}}
    fine = {"label": "supported", "text": "The quay reopened.", "reason": {"text": "-"}}
    bad = case_status(case, {"label": "inconsistent", "score": 0.2, "sentences": [flagged, fine]})
    ok = case_status(case, {"label": "consistent", "score": 0.81, "sentences": [fine]})
    assert bad == ("fail", ['label inconsistent: contradicted "Calls rose to 517." '
                            '(a different value: the source says 412)'])
    assert ok == ("pass", [])


def test_a_second_run_into_the_same_folder_is_refused_while_the_first_runs(tmp_path):
    """Two real processes: the second is refused with the first's process id; the first's
    results are complete and its own."""
    env = {**os.environ, "QACHECK_CACHE": str(tmp_path / "unused.sqlite")}
    out = tmp_path / "shared-out"
    args = [*QACHECK, "run", str(PORT), "--outputs", "writer-v1", "--no-cache",
            "--results", str(out)]
    first = subprocess.Popen(args, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                             text=True)
    lock = out / ".lock"
    deadline = time.time() + 300
    while time.time() < deadline and not (lock.exists() and lock.read_text().strip()):
        time.sleep(0.05)
    second = subprocess.run(args, env=env, capture_output=True, text=True, timeout=600)
    assert first.wait(timeout=600) == 0, first.stderr.read()
    assert second.returncode == 2 and f"pid {first.pid}" in second.stderr, second.stderr
    results = [json.loads(x) for x in (out / "results.jsonl").read_text().splitlines()]
    assert len(results) == len({r["id"] for r in results}) == 8


def test_a_rerun_served_from_the_cache_loads_no_model_library(tmp_path):
    """Issue: a nightly rerun where nothing changed must not import torch, transformers or
    spaCy (seconds each), nor load a model; its results equal the first run's."""
    env = {**os.environ, "QACHECK_CACHE": str(tmp_path / "c.sqlite")}
    cold = subprocess.run([*QACHECK, "run", str(PORT), "--outputs", "writer-v1", "--results",
                           str(tmp_path / "cold")], env=env, capture_output=True, text=True,
                          timeout=600)
    assert cold.returncode == 0, cold.stderr
    probe = ("import sys\nfrom qacheck.cli import main\n"
             f"try:\n    main(['run', {str(PORT)!r}, '--outputs', 'writer-v1', '--results', "
             f"{str(tmp_path / 'warm')!r}])\nexcept SystemExit as e:\n    code = e.code\n"
             "print('loaded', sorted(m for m in ('torch', 'transformers', 'spacy', 'nltk') "
             "if m in sys.modules), 'exit', code)\n")
    warm = subprocess.run([sys.executable, "-c", probe], env=env, capture_output=True, text=True,
                          timeout=600)
    assert warm.stdout.strip().endswith("loaded [] exit 0"), warm.stdout + warm.stderr
    read = lambda d: [(r["id"], r["score"], r["status"]) for r in  # noqa: E731
                      map(json.loads, (tmp_path / d / "results.jsonl").read_text().splitlines())]
    assert read("warm") == read("cold")


def test_the_html_report_of_a_large_set_shows_the_worst_cases_and_says_where_the_rest_are(
        tmp_path):
    import random

    from qacheck.reports.junit import JUnitStream
    from qacheck.reports.run import write_run_reports
    from qacheck.tally import WORST_KEPT, RunTally

    n = WORST_KEPT + 40
    records = [{"id": f"case-{i}", "status": "fail" if i % 50 == 0 else "pass",
                "score": round(0.5 + 0.4 * ((i * 7) % n) / n, 4), "label": "consistent",
                "reasons": ["planted"] if i % 50 == 0 else [], "tags": [], "result": None}
               for i in range(n)]
    fails = sum(r["status"] == "fail" for r in records)
    summary = {"set": "big", "outputs": "v1", "description": "", "cases": n,
               "status": {"pass": n - fails, "fail": fails}, "mean_score": 0.7, "problems": [],
               "seconds": 1.0, "signature": {"id": "x", "text": "signature x"}}
    junit = JUnitStream(tmp_path, "big")
    tally = RunTally(sinks=(junit,))
    for r in records:
        tally.add(r)
    junit.close(summary)
    write_run_reports(tmp_path, summary, tally)
    page = (tmp_path / "report.html").read_text()
    assert page.count('<tr data-status=') == WORST_KEPT
    assert f"{n - WORST_KEPT} more, further down this order, are in results.jsonl" in page
    # what did not pass is always on the page, and JUnit keeps every case
    assert all(f'data-id="case-{i}"' in page for i in range(0, n, 50))
    suite = ET.parse(tmp_path / "junit.xml").getroot()
    assert len(suite.findall("testcase")) == n and suite.get("failures") == str(fails)
    assert len(suite.findall("testcase/failure")) == fails
    assert not list(tmp_path.glob(".*.part"))
    # the cases kept do not depend on the order the results arrived in (the Ray engine's
    # order is not the set's); the lowest scores are the ones kept
    shuffled = RunTally()
    for r in random.Random(3).sample(records, n):
        shuffled.add(r)
    assert shuffled.worst() == tally.worst()
    passing = sorted(r["score"] for r in records if r["status"] == "pass")
    kept_passing = [r["score"] for r in tally.worst() if r["status"] == "pass"]
    assert max(kept_passing) == passing[WORST_KEPT - fails - 1]
