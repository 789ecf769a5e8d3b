"""Renderers for a version comparison: text, Markdown, HTML (with an SVG scatter plot)."""
from __future__ import annotations

from qacheck.reports.html import render, scatter
from qacheck.reports.markdown import _md
from qacheck.reports.views import cut_of
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


#: the two lists every view shows, in this order and under these names
SECTIONS = ("Largest drops from A to B", "Largest gains from A to B")


def _sections(c: Comparison):
    return zip(SECTIONS, (c.regressions, c.improvements))


def _not_compared(c: Comparison) -> list[str]:
    lines = [f"{n['id']}: A {n['a']}, B {n['b']} (no score on one side)" for n in c.not_compared]
    if c.only_a:
        lines.append(f"only in A: {', '.join(c.only_a)}")
    if c.only_b:
        lines.append(f"only in B: {', '.join(c.only_b)}")
    return lines


def render_text(c: Comparison) -> str:
    lines = [f"qacheck compare on set {c.set_name}: A = {c.a_name}, B = {c.b_name}", "",
             c.verdict, ""]
    lines += [f"  {k:<32} {v}" for k, v in _figures(c)]
    for title, rows in _sections(c):
        lines += ["", f"{title}:"] + ([] if rows else ["  none"])
        for p in rows:
            lines.append(f"  {p['id']}: {p['score_a']:.3f} -> {p['score_b']:.3f} ({p['diff']:+.3f})")
            for side, rec in (("A", p["a"]), ("B", p["b"])):
                for f in flagged(rec):
                    lines.append(f"    {side} {f['label']} by {f['rule']}: {f['text']}")
                    for e in f["evidence"]:
                        lines.append(f"        {e['question']}  output: {e['output_answer']!r}  "
                                     f"source: {e['source_answer']!r}")
    lines += ["", "Not compared:"] + [f"  {x}" for x in _not_compared(c) or ["none"]]
    lines += ["", f"{c.signature['text']}; "
              f"{c.stats.resamples} resamples, seed {c.stats.seed}", CAUTION]
    return "\n".join(lines)


def render_markdown(c: Comparison) -> str:
    out = [f"### qacheck compare on `{_md(c.set_name)}`: A = {_md(c.a_name)}, B = {_md(c.b_name)}",
           "", f"**{_md(c.verdict)}**", "", "| figure | value |", "|---|---|"]
    out += [f"| {_md(k)} | {_md(v)} |" for k, v in _figures(c)]
    for title, rows in _sections(c):
        out += ["", f"#### {title}", ""]
        if not rows:
            out.append("none")
            continue
        out += ["| case | A | B | change | flagged in B |", "|---|---|---|---|---|"]
        for p in rows:
            fl = "<br>".join(f"{f['label']}: {_md(f['text'])}" for f in flagged(p["b"])) or "-"
            out.append(f"| {_md(p['id'])} | {p['score_a']:.3f} | {p['score_b']:.3f} | {p['diff']:+.3f} | {fl} |")
    out += ["", "#### Not compared", ""] + [f"- {_md(x)}" for x in _not_compared(c) or ["none"]]
    out += ["", f"<sub>{c.signature['text']}; {c.stats.resamples} "
            f"resamples, seed {c.stats.seed}. {CAUTION}</sub>", ""]
    return "\n".join(out)


#: the scatter draws at most this many cases (those that changed most), so the page of a large
#: set stays small; the figures above it use every case
PLOT_POINTS = 2000


def render_html(c: Comparison) -> str:
    drawn = sorted(c.pairs, key=lambda p: -abs(p["diff"]))[:PLOT_POINTS]
    plot = scatter([(p["id"], p["score_a"], p["score_b"]) for p in drawn])
    cut = cut_of(*(r.get("result") for r in c.records["B"].values()))
    return render("compare.html.j2", title=f"qacheck compare: {c.set_name}", c=c,
                  figures=_figures(c), plot=plot, flagged=flagged, cut=cut,
                  not_drawn=len(c.pairs) - len(drawn))
