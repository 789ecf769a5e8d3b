"""Self-contained HTML reports (jinja2, autoescaped; no external URLs, files or fonts).

Sentences are shown as a ledger with a margin mark and a worded tag per
label (never colour alone); a source answer is underlined where it stands.
Charts are inline SVG drawn from the numbers; the run page sorts and filters
its case table with a small inline script and reads fine without it.
"""
from __future__ import annotations

from functools import lru_cache
from typing import Any

from qacheck.reports.views import marked_excerpt, sentence_views
from qacheck.results import CAUTION


@lru_cache(maxsize=1)
def _env():
    from jinja2 import Environment, PackageLoader, select_autoescape

    env = Environment(loader=PackageLoader("qacheck", "reports/templates"),
                      autoescape=select_autoescape(["html", "j2"]), trim_blocks=True,
                      lstrip_blocks=True)
    env.filters["fmt"] = lambda v: "-" if v is None else f"{v:.2f}"
    env.globals.update(sentence_views=sentence_views, marked_excerpt=marked_excerpt,
                       source_pieces=source_pieces)
    return env


def source_pieces(pair, views) -> list[tuple[str, str]]:
    """The source cut into (text, marks) pieces: ``ans`` where a source answer shown in the
    views stands, ``ev`` inside the window the entailment reader judged a flagged sentence on.
    """
    flagged = {v.text for v in views}
    marks: list[tuple[int, int, str]] = [
        (q["source_start"], q["source_end"], "ans") for v in views for q in v.questions
        if q.get("source_start") is not None and q.get("source_end") is not None]
    marks += [(s.claim.start, s.claim.end, "ev") for s in pair.sentences
              if s.claim is not None and s.text in flagged]
    cuts = sorted({0, len(pair.source), *(a for a, _, _ in marks), *(b for _, b, _ in marks)})
    out = []
    for a, b in zip(cuts, cuts[1:]):
        kinds = sorted({k for x, y, k in marks if x <= a and b <= y})
        if b > a:
            out.append((pair.source[a:b], " ".join(kinds)))
    return out


def histogram(scores: list[float], bins: int = 10) -> list[dict[str, Any]]:
    """Bars for an inline SVG histogram of scores in [0, 1]: position, height, count, range."""
    counts = [0] * bins
    for s in scores:
        counts[min(bins - 1, int(s * bins))] += 1
    top = max(counts) or 1
    return [{"x": 40 + i * 36, "h": round(120 * c / top), "count": c,
             "lo": f"{i / bins:.1f}", "label": f"{i / bins:.1f}-{(i + 1) / bins:.1f}"}
            for i, c in enumerate(counts)]


def scatter(points: list[tuple[str, float, float]], size: int = 320, pad: int = 44
            ) -> dict[str, Any]:
    """An SVG scatter of (id, a, b) scaled to the data (with a margin), ticks and a diagonal."""
    values = [v for _, a, b in points for v in (a, b)] or [0.0, 1.0]
    lo, hi = min(values), max(values)
    margin = max(0.02, (hi - lo) * 0.08)
    lo, hi = max(0.0, lo - margin), min(1.0, hi + margin)
    if hi - lo < 1e-6:
        lo, hi = max(0.0, lo - 0.05), min(1.0, hi + 0.05)
    span = size - 2 * pad

    def x(v: float) -> float:
        return round(pad + span * (v - lo) / (hi - lo), 1)

    def y(v: float) -> float:
        return round(size - pad - span * (v - lo) / (hi - lo), 1)

    ticks = [lo + (hi - lo) * i / 4 for i in range(5)]
    return {"size": size, "pad": pad, "span": span,
            "ticks": [{"v": f"{t:.2f}", "x": x(t), "y": y(t)} for t in ticks],
            "diag": (x(lo), y(lo), x(hi), y(hi)),
            "points": [{"id": i, "a": a, "b": b, "x": x(a), "y": y(b),
                        "cls": "worse" if b < a else ("better" if b > a else "tied")}
                       for i, a, b in points]}


def render(template: str, **context: Any) -> str:
    """Render a report template with the caution always present."""
    return _env().get_template(template).render(caution=CAUTION, **context)
