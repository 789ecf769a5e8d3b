"""JUnit XML: one test case per scenario case, failing when it breaks its expectations.

Written as the run goes: each case's element is appended to a part file the
moment its record arrives, and ``close`` wraps the suite element (whose counts
are known only at the end) around it, so a large run never holds its cases to
write this file.
"""
from __future__ import annotations

import os
import shutil
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any

from qacheck.reports.views import sentence_views

JUNIT_FILE = "junit.xml"


def _flagged(record: dict[str, Any]) -> str:
    lines = []
    for v in sentence_views(record.get("result")):
        lines.append(f"{v.label} ({v.rule}): {v.text}")
        lines.append(f"    why: {v.why}")
        if v.suggestion:
            lines.append(f"    fix: {v.suggestion}")
    return "\n".join(lines)


def testcase(set_name: str, record: dict[str, Any]) -> ET.Element:
    """The <testcase> of one run record: failure, error or skipped by its status."""
    tc = ET.Element("testcase", classname=f"qacheck.{set_name}", name=record["id"])
    score = "-" if record["score"] is None else f"{record['score']:.3f}"
    reasons = "; ".join(record.get("reasons", []))
    if record["status"] == "fail":
        ET.SubElement(tc, "failure", message=reasons).text = _flagged(record)
    elif record["status"] == "error":
        ET.SubElement(tc, "error", message=reasons)
    elif record["status"] == "unscored":
        ET.SubElement(tc, "skipped", message=reasons)
    warnings = "".join(f"\nwarning: {w}" for w in (record.get("result") or {}).get("warnings", []))
    ET.SubElement(tc, "system-out").text = f"score {score} label {record['label']}{warnings}"
    return tc


class JUnitStream:
    """junit.xml of a run folder, one <testcase> appended per record as it arrives."""

    def __init__(self, folder: Path, set_name: str) -> None:
        """Open the part file; parts left by a killed run are removed (the caller holds the
        folder's lock, so no other run is writing one)."""
        self.path = folder / JUNIT_FILE
        self.set_name = set_name
        for stale in folder.glob(f".{JUNIT_FILE}.*.part"):
            stale.unlink(missing_ok=True)
        self._part = folder / f".{JUNIT_FILE}.{os.getpid()}.part"
        self._fh = open(self._part, "w", encoding="utf-8")
        self.cases = 0

    def add(self, record: dict[str, Any]) -> None:
        tc = testcase(self.set_name, record)
        ET.indent(tc, level=1)
        self._fh.write("  " + ET.tostring(tc, encoding="unicode").rstrip() + "\n")
        self.cases += 1

    def close(self, summary: dict[str, Any]) -> Path:
        """Wrap the cases in their <testsuite> (counts, time, signature) and move it into place."""
        self._fh.close()
        counts = summary["status"]
        suite = ET.Element("testsuite", name=f"qacheck.{summary['set']}.{summary['outputs']}",
                           tests=str(self.cases), failures=str(counts.get("fail", 0)),
                           errors=str(counts.get("error", 0)),
                           skipped=str(counts.get("unscored", 0)),
                           time=str(summary.get("seconds", 0)))
        props = ET.SubElement(suite, "properties")
        ET.SubElement(props, "property", name="signature", value=summary["signature"]["text"])
        ET.SubElement(props, "property", name="signature_id", value=summary["signature"]["id"])
        ET.indent(suite)
        head, _, _ = ET.tostring(suite, encoding="unicode").rpartition("</testsuite>")
        tmp = self._part.with_suffix(".xml")
        with open(tmp, "w", encoding="utf-8") as out, open(self._part, encoding="utf-8") as body:
            out.write("<?xml version='1.0' encoding='utf-8'?>\n" + head.rstrip() + "\n")
            shutil.copyfileobj(body, out)
            out.write("</testsuite>\n")
        os.replace(tmp, self.path)
        self._part.unlink()
        return self.path

    def discard(self) -> None:
        """Drop the part file of a run that did not finish."""
        self._fh.close()
        self._part.unlink(missing_ok=True)
