"""Comparing two generator versions on the demo set where B carries planted errors."""
from __future__ import annotations

import json
from pathlib import Path

import pytest
from click.testing import CliRunner

from qacheck.cli import main

ROOT = Path(__file__).resolve().parent.parent
PORT = ROOT / "scenarios" / "caldreth-port"
PLANTED = {"ops-2026-01", "safety-2026-03", "env-2026-05", "cargo-2026-07", "staff-2026-06",
           "ops-2026-02", "events-2026-08"}


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    """Both versions scored once for the module (their own cache file)."""
    tmp = tmp_path_factory.mktemp("versions")
    runner = CliRunner()
    for v in ("writer-v1", "writer-v2"):
        runner.invoke(main, ["run", str(PORT), "--outputs", v, "--results", str(tmp / v),
                             "--cache", str(tmp / "cache.sqlite")])
    return tmp / "writer-v1", tmp / "writer-v2"


def test_b_with_planted_errors_is_reported_worse(runs):
    a, b = runs
    res = CliRunner().invoke(main, ["compare", str(a), str(b), "--format", "json", "--seed", "3"])
    assert res.exit_code == 0, res.output
    d = json.loads(res.output)
    assert d["diff"] < 0 and d["ci_high"] < 0, d["verdict"]
    assert d["verdict"].startswith("B is less faithful")
    top = {r["id"] for r in d["regressions"]}
    assert len(top) >= 3 and top <= PLANTED
    assert d["sentences"]["B"]["contradicted"] > d["sentences"]["A"]["contradicted"]
    # the unchanged case is tied
    assert next(c for c in d["cases"] if c["id"] == "board-2026-04")["diff"] == 0


def test_same_seed_same_figures_and_all_formats(runs):
    a, b = runs
    runner = CliRunner()
    one = runner.invoke(main, ["compare", str(a), str(b), "--format", "json", "--seed", "5"]).output
    two = runner.invoke(main, ["compare", str(a), str(b), "--format", "json", "--seed", "5"]).output
    assert one == two
    md = runner.invoke(main, ["compare", str(a), str(b), "--format", "markdown"]).output
    assert "| figure | value |" in md and "Largest drops from A to B" in md
    html = runner.invoke(main, ["compare", str(a), str(b), "--format", "html"]).output
    assert "<svg" in html and "<circle" in html
    same = runner.invoke(main, ["compare", str(a), str(a), "--format", "json"]).output
    d = json.loads(same)
    assert d["diff"] == 0 and d["p_randomisation"] == 1.0


def test_mismatched_sets_are_refused(runs, tmp_path):
    a, _ = runs
    other = ROOT / "scenarios" / "tessaly-libraries"
    CliRunner().invoke(main, ["run", str(other), "--results", str(tmp_path / "lib")])
    res = CliRunner().invoke(main, ["compare", str(a), str(tmp_path / "lib")])
    assert res.exit_code == 2 and "same set" in res.output


def _folder(path: Path, outputs: str, scores: dict[str, float]) -> Path:
    path.mkdir()
    (path / "summary.json").write_text(json.dumps({
        "set": "big", "outputs": outputs, "signature": {"id": "s", "text": "signature s"}}))
    with open(path / "results.jsonl", "w") as fh:
        for cid, score in scores.items():
            fh.write(json.dumps({"id": cid, "status": "pass", "score": score, "label": "consistent",
                                 "reasons": [], "result": None}) + "\n")
    return path


def test_a_large_comparison_uses_every_case_and_draws_the_largest_changes(tmp_path):
    from qacheck.reports.version_diff import PLOT_POINTS, render_html
    from qacheck.version_diff import compare_runs

    n = PLOT_POINTS + 500
    a = {f"c{i}": round(0.5 + 0.4 * ((i * 37) % 101) / 101, 4) for i in range(n)}
    b = {cid: round(min(1.0, max(0.0, s + (((i * 53) % 41) - 20) / 400)), 4)
         for i, (cid, s) in enumerate(a.items())}
    c = compare_runs(_folder(tmp_path / "a", "v1", a), _folder(tmp_path / "b", "v2", b),
                     resamples=200, top=3)
    diffs = sorted(b[k] - a[k] for k in a)
    assert c.stats.n == n and abs(c.stats.diff - sum(diffs) / n) < 1e-9
    # the largest drops, computed here without the library, with both records attached
    assert [round(p["diff"], 6) for p in c.regressions] == [round(d, 6) for d in diffs[:3]]
    assert all(p["a"]["id"] == p["b"]["id"] == p["id"] for p in c.regressions)
    page = render_html(c)
    drawn = page.count("<circle") + page.count("(worse)</title></path>")
    assert drawn == PLOT_POINTS and f"{n - PLOT_POINTS} more, with smaller changes" in page
