"""Self-contained HTML reports (jinja2, autoescaped; no external URLs, scripts or fonts).

Evidence is expandable with the built-in <details> element, so the page
needs no script at all; charts are inline SVG drawn from the numbers.
"""
from __future__ import annotations

from functools import lru_cache
from typing import Any

from qacheck.reports.views import excerpt, sentence_views
from qacheck.results import CAUTION


@lru_cache(maxsize=1)
def _env():
    from jinja2 import Environment, PackageLoader, select_autoescape

    env = Environment(loader=PackageLoader("qacheck", "reports/templates"),
                      autoescape=select_autoescape(["html", "j2"]), trim_blocks=True,
                      lstrip_blocks=True)
    env.filters["fmt"] = lambda v: "-" if v is None else f"{v:.2f}"
    env.globals.update(sentence_views=sentence_views, excerpt=excerpt)
    return env


def histogram(scores: list[float], bins: int = 10) -> list[dict[str, Any]]:
    """Bars for an inline SVG histogram of scores in [0, 1]."""
    counts = [0] * bins
    for s in scores:
        counts[min(bins - 1, int(s * bins))] += 1
    top = max(counts) or 1
    return [{"x": i * 30, "h": round(100 * c / top), "count": c,
             "label": f"{i / bins:.1f}-{(i + 1) / bins:.1f}"} for i, c in enumerate(counts)]


def render(template: str, **context: Any) -> str:
    """Render a report template with the caution always present."""
    return _env().get_template(template).render(caution=CAUTION, **context)
