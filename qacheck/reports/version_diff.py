"""Renderers for a version comparison: text, Markdown, HTML (with an SVG scatter plot)."""
from __future__ import annotations

from qacheck.reports.html import render
from qacheck.reports.markdown import _md
from qacheck.results import CAUTION
from qacheck.version_diff import Comparison, flagged


def _figures(c: Comparison) -> list[tuple[str, str]]:
    s = c.stats
    return [("cases paired", str(s.n)), (f"mean A ({c.a_name})", f"{s.mean_a:.3f}"),
            (f"mean B ({c.b_name})", f"{s.mean_b:.3f}"),
            ("B - A", f"{s.diff:+.3f} [{s.ci_low:+.3f}, {s.ci_high:+.3f}] (95% paired bootstrap)"),
            ("p (approximate randomisation)", f"{s.p_randomisation:.4f}"),
            ("p (Wilcoxon signed-rank)", "-" if s.p_wilcoxon is None else f"{s.p_wilcoxon:.4f}"),
            ("better / worse / tied", f"{s.better} / {s.worse} / {s.tied}"),
            ("contradicted sentences A / B",
             f"{c.sentence_counts['A']['contradicted']} / {c.sentence_counts['B']['contradicted']}"),
            ("unverifiable sentences A / B",
             f"{c.sentence_counts['A']['unverifiable']} / {c.sentence_counts['B']['unverifiable']}")]


def render_text(c: Comparison) -> str:
    lines = [f"qacheck compare on set {c.set_name}: A = {c.a_name}, B = {c.b_name}", "",
             c.verdict, ""]
    lines += [f"  {k:<32} {v}" for k, v in _figures(c)]
    for title, rows in (("Top regressions", c.regressions), ("Top improvements", c.improvements)):
        lines += ["", f"{title}:"]
        for p in rows:
            lines.append(f"  {p['id']}: {p['score_a']:.3f} -> {p['score_b']:.3f} ({p['diff']:+.3f})")
            for side, rec in (("A", p["a"]), ("B", p["b"])):
                for f in flagged(rec):
                    lines.append(f"    {side} [{f['label']}] {f['text']}")
                    for e in f["evidence"]:
                        lines.append(f"        {e['question']}  output: {e['output_answer']!r}  "
                                     f"source: {e['source_answer']!r}")
    if c.only_a or c.only_b:
        lines += ["", f"only in A: {', '.join(c.only_a) or '-'}; only in B: {', '.join(c.only_b) or '-'}"]
    lines += ["", f"{c.signature['text']}; "
              f"{c.stats.resamples} resamples, seed {c.stats.seed}", CAUTION]
    return "\n".join(lines)


def render_markdown(c: Comparison) -> str:
    out = [f"### qacheck: {_md(c.b_name)} vs {_md(c.a_name)} on `{_md(c.set_name)}`", "",
           f"**{_md(c.verdict)}**", "", "| figure | value |", "|---|---|"]
    out += [f"| {_md(k)} | {_md(v)} |" for k, v in _figures(c)]
    for title, rows in (("Top regressions", c.regressions), ("Top improvements", c.improvements)):
        if not rows:
            continue
        out += ["", f"#### {title}", "", "| case | A | B | change | flagged in B |", "|---|---|---|---|---|"]
        for p in rows:
            fl = "<br>".join(f"{f['label']}: {_md(f['text'])}" for f in flagged(p["b"])) or "-"
            out.append(f"| {_md(p['id'])} | {p['score_a']:.3f} | {p['score_b']:.3f} | {p['diff']:+.3f} | {fl} |")
    if c.only_a or c.only_b:
        out += ["", f"Only in A: {_md(', '.join(c.only_a)) or '-'}; only in B: {_md(', '.join(c.only_b)) or '-'}"]
    out += ["", f"<sub>{c.signature['text']}; {c.stats.resamples} "
            f"resamples, seed {c.stats.seed}. {CAUTION}</sub>", ""]
    return "\n".join(out)


def render_html(c: Comparison) -> str:
    points = [{"x": round(20 + 260 * p["score_a"], 1), "y": round(280 - 260 * p["score_b"], 1),
               "id": p["id"], "a": p["score_a"], "b": p["score_b"],
               "cls": "contradicted" if p["diff"] < 0 else ("supported" if p["diff"] > 0 else "unchecked")}
              for p in c.pairs]
    return render("compare.html.j2", title=f"qacheck compare: {c.set_name}", c=c,
                  figures=_figures(c), points=points, flagged=flagged)
