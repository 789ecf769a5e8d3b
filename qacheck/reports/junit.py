"""JUnit XML: one test case per scenario case, failing when it breaks its expectations."""
from __future__ import annotations

import xml.etree.ElementTree as ET
from typing import Any

from qacheck.reports.views import sentence_views


def _flagged(record: dict[str, Any]) -> str:
    lines = []
    for v in sentence_views(record.get("result")):
        lines.append(f"{v.label} ({v.rule}): {v.text}")
        lines.append(f"    why: {v.why}")
        if v.suggestion:
            lines.append(f"    fix: {v.suggestion}")
    return "\n".join(lines)


def render_junit(summary: dict[str, Any], records: list[dict[str, Any]]) -> str:
    """The XML text; scores and signature go into properties and system-out."""
    counts = summary["status"]
    suite = ET.Element("testsuite", name=f"qacheck.{summary['set']}.{summary['outputs']}",
                       tests=str(len(records)), failures=str(counts.get("fail", 0)),
                       errors=str(counts.get("error", 0)), skipped=str(counts.get("unscored", 0)),
                       time=str(summary.get("seconds", 0)))
    props = ET.SubElement(suite, "properties")
    ET.SubElement(props, "property", name="signature", value=summary["signature"]["text"])
    ET.SubElement(props, "property", name="signature_id", value=summary["signature"]["id"])
    for r in records:
        tc = ET.SubElement(suite, "testcase", classname=f"qacheck.{summary['set']}", name=r["id"])
        score = "-" if r["score"] is None else f"{r['score']:.3f}"
        if r["status"] == "fail":
            el = ET.SubElement(tc, "failure", message="; ".join(r["reasons"]))
            el.text = _flagged(r)
        elif r["status"] == "error":
            ET.SubElement(tc, "error", message="; ".join(r["reasons"]))
        elif r["status"] == "unscored":
            ET.SubElement(tc, "skipped", message="; ".join(r["reasons"]))
        warnings = "".join(f"\nwarning: {w}" for w in (r.get("result") or {}).get("warnings", []))
        ET.SubElement(tc, "system-out").text = f"score {score} label {r['label']}{warnings}"
    ET.indent(suite)
    return ET.tostring(suite, encoding="unicode", xml_declaration=True) + "\n"
