"""Writes the report files of a run folder: Markdown, JUnit XML and HTML."""
from __future__ import annotations

from pathlib import Path
from typing import Any

from qacheck.reports.html import histogram, render
from qacheck.reports.junit import render_junit
from qacheck.reports.markdown import render_run
from qacheck.results import PairResult


def write_run_reports(folder: Path, summary: dict[str, Any], records: list[dict[str, Any]],
                      gate_messages: list[str] | None = None) -> list[Path]:
    """summary.md, junit.xml and report.html beside results.jsonl; returns their paths."""
    cases = [{"record": r, "pair": PairResult.from_dict(r["result"]) if r.get("result") else None}
             for r in records]
    scores = [r["score"] for r in records if r["score"] is not None]
    files = {
        "summary.md": render_run(summary, records, gate_messages),
        "junit.xml": render_junit(summary, records),
        "report.html": render("run.html.j2", title=f"qacheck: {summary['set']}", summary=summary,
                              cases=cases, bars=histogram(scores), gate_messages=gate_messages),
    }
    paths = []
    for name, text in files.items():
        (folder / name).write_text(text, encoding="utf-8")
        paths.append(folder / name)
    return paths
