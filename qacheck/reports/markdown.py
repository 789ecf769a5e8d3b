"""Markdown for CI pages and pull-request comments."""
from __future__ import annotations

import html
import re
from typing import Any

from qacheck.reports.views import sentence_views
from qacheck.results import CAUTION


def _f(v: float | None) -> str:
    return "-" if v is None else f"{v:.3f}"


_MD_SPECIAL = re.compile(r"([\\`*_\[\]|~#!])")


def _md(text: str) -> str:
    """Input text made inert in Markdown: HTML escaped (a CI page renders raw HTML), Markdown
    punctuation backslash-escaped, kept on one line."""
    return _MD_SPECIAL.sub(r"\\\1", html.escape(str(text), quote=False)).replace("\n", " ")


def render_run(summary: dict[str, Any], records: list[dict[str, Any]],
               gate_messages: list[str] | None = None, left_out: int = 0) -> str:
    """A run summary: totals, failing cases with their flagged sentences, signature.

    ``records`` are the cases kept whole, worst first (all of a small run);
    ``left_out`` counts the others, which are only in results.jsonl and junit.xml.
    """
    st = summary["status"]
    out = [f"## qacheck: {_md(summary['set'])} / {_md(summary['outputs'])}", "",
           f"**{st.get('pass', 0)} passed, {st.get('fail', 0)} failed, {st.get('error', 0)} errors, "
           f"{st.get('unscored', 0)} unscored** of {summary['cases']} cases; "
           f"mean score {_f(summary['mean_score'])}", ""]
    if gate_messages is None:
        out += ["Regression gate: no baseline given.", ""]
    elif gate_messages:
        out += ["### Regression gate", ""] + [f"- {_md(m)}" for m in gate_messages] + [""]
    else:
        out += ["Regression gate: passed, no regression against the baseline.", ""]
    bad = [r for r in records if r["status"] in ("fail", "error", "unscored")]
    not_passed = sum(st.get(k, 0) for k in ("fail", "error", "unscored"))
    if not not_passed:
        out += ["Cases that did not pass: none.", ""]
    elif not_passed > len(bad):
        out += [f"Cases that did not pass, worst first: {len(bad)} listed here, "
                f"{not_passed - len(bad)} more in results.jsonl and junit.xml.", ""]
    if bad:
        out += ["| case | status | score | why |", "|---|---|---|---|"]
        out += [f"| {_md(r['id'])} | {r['status']} | {_f(r['score'])} | {_md('; '.join(r['reasons']))} |"
                for r in bad]
        out.append("")
        for r in bad:
            views = sentence_views(r.get("result"))
            if views:
                out.append(f"<details><summary>{_md(r['id'])}: flagged sentences</summary>\n")
                for v in views:
                    out.append(f"- **{v.label}** ({v.rule}): {_md(v.text)}")
                    out.append(f"  - why: {_md(v.why)}")
                    if v.suggestion:
                        out.append(f"  - fix: {_md(v.suggestion)}")
                out.append("\n</details>\n")
    texts = {r["id"]: r["result"]["warnings"] for r in records
             if (r.get("result") or {}).get("warnings")}
    if summary.get("warned_cases"):
        out += ["### Warnings", ""] + [f"- {_md(cid)}: {_md(w)}" for cid in summary["warned_cases"]
                                       for w in texts.get(cid, ["see its result"])] + [""]
    if summary["problems"]:
        out += ["### Input problems", ""] + [f"- {_md(p)}" for p in summary["problems"]] + [""]
    out += [f"<sub>{summary['signature']['text']}. "
            f"{CAUTION}</sub>", ""]
    return "\n".join(out)
