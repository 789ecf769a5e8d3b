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
