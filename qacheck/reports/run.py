"""Writes the report files a person reads beside results.jsonl: Markdown and HTML.

junit.xml is written as the run goes (``qacheck.reports.junit.JUnitStream``);
these two come from the run's tally: the totals of every case and the worst
cases in full (``qacheck.tally.WORST_KEPT``), so a set of any size gives a
page that stays readable and small.  Every case is in results.jsonl and
junit.xml.
"""
from __future__ import annotations

from pathlib import Path
from typing import Any

from qacheck.reports.html import histogram, render
from qacheck.reports.markdown import render_run
from qacheck.reports.views import cut_of
from qacheck.results import FLAGGED, PairResult
from qacheck.tally import STATUS_RANK, RunTally


def write_run_reports(folder: Path, summary: dict[str, Any], tally: RunTally,
                      gate_messages: list[str] | None = None) -> list[Path]:
    """summary.md and report.html beside results.jsonl; returns their paths.

    ``gate_messages`` is None when no baseline was given (the reports say so).
    """
    worst = tally.worst()
    cases = []
    for r in worst:
        pair = PairResult.from_dict(r["result"]) if r.get("result") else None
        cases.append({"record": r, "pair": pair, "rank": STATUS_RANK.get(r["status"], 9),
                      "flagged": sum(s.label in FLAGGED for s in pair.sentences) if pair else 0})
    files = {
        "summary.md": render_run(summary, worst, gate_messages, tally.left_out),
        "report.html": render("run.html.j2", title=f"qacheck: {summary['set']}", summary=summary,
                              cases=cases, bars=histogram(tally.scores()),
                              gate_messages=gate_messages,
                              cut=cut_of(*(r.get("result") for r in worst)),
                              left_out=tally.left_out),
    }
    paths = []
    for name, text in files.items():
        (folder / name).write_text(text, encoding="utf-8")
        paths.append(folder / name)
    return paths
