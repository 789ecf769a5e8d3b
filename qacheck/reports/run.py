"""Writes the report files of a run folder: Markdown, JUnit XML and HTML."""
from __future__ import annotations

from pathlib import Path
from typing import Any

from qacheck.reports.html import histogram, render
from qacheck.reports.junit import render_junit
from qacheck.reports.markdown import render_run
from qacheck.reports.views import cut_of
from qacheck.results import FLAGGED, PairResult


#: the order cases are listed in: what did not pass first
STATUS_RANK = {"error": 0, "fail": 1, "unscored": 2, "pass": 3}
#: report.html shows at most this many cases (what did not pass first, lowest scores first), so
#: a page for a large set stays readable and small; every case is in results.jsonl and junit.xml
HTML_CASES = 500


def write_run_reports(folder: Path, summary: dict[str, Any], records: list[dict[str, Any]],
                      gate_messages: list[str] | None = None) -> list[Path]:
    """summary.md, junit.xml and report.html beside results.jsonl; returns their paths.

    ``gate_messages`` is None when no baseline was given (the reports say so).
    """
    ordered = sorted(records, key=lambda r: (STATUS_RANK.get(r["status"], 9),
                                             r["score"] if r["score"] is not None else -1.0))
    cases = []
    for r in ordered[:HTML_CASES]:
        pair = PairResult.from_dict(r["result"]) if r.get("result") else None
        cases.append({"record": r, "pair": pair, "rank": STATUS_RANK.get(r["status"], 9),
                      "flagged": sum(s.label in FLAGGED for s in pair.sentences) if pair else 0})
    scores = [r["score"] for r in records if r["score"] is not None]
    cut = cut_of(*(r.get("result") for r in ordered))
    files = {
        "summary.md": render_run(summary, ordered, gate_messages),
        "junit.xml": render_junit(summary, records),
        "report.html": render("run.html.j2", title=f"qacheck: {summary['set']}", summary=summary,
                              cases=cases, bars=histogram(scores), gate_messages=gate_messages,
                              cut=cut, left_out=len(ordered) - len(cases)),
    }
    paths = []
    for name, text in files.items():
        (folder / name).write_text(text, encoding="utf-8")
        paths.append(folder / name)
    return paths
