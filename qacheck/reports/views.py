"""The one "flagged sentence" view every report renders: label, rule, deciding number, fix.

Text, Markdown, JUnit, HTML and the version comparison all show a flagged
sentence the same way, so they read it from here rather than each walking
the result on its own.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from qacheck.results import FLAGGED

#: how each rule is named to a reader
RULE_NAMES = {"value": "value conflict", "opposite": "opposite word", "negation": "negation",
              "name": "different name", "evidence": "weighed evidence"}


@dataclass(frozen=True)
class SentenceView:
    """One sentence as a report shows it; ``questions`` are the ones worth showing."""

    text: str
    label: str
    score: float | None
    rule: str
    why: str
    cut: float | None
    suggestion: str | None
    questions: list[dict[str, Any]]
    novel_words: list[str]


def cut_of(*results: dict[str, Any] | None) -> float | None:
    """The cut the sentences of these results were judged against (from their reasons), or
    None when none was judged; every report shows it beside the scores."""
    return next((s["reason"]["cut"] for r in results for s in (r or {}).get("sentences", [])
                 if s.get("reason")), None)


def marked_excerpt(source: str, start: int, end: int | None, width: int = 70
                   ) -> tuple[str, str, str]:
    """(before, answer, after): the stretch of source around an answer, the answer apart so
    that each view can mark it in its own way."""
    end = end or start
    a, b = max(0, start - width), min(len(source), end + width)
    return (("..." if a > 0 else "") + source[a:start], source[start:end],
            source[end:b] + ("..." if b < len(source) else ""))


def sentence_views(result: dict[str, Any] | None, verbose: bool = False) -> list[SentenceView]:
    """The flagged sentences of a result (every sentence when ``verbose``), with their reasons.

    A flagged sentence shows its questions that did not come back supported
    (for a typed conflict, the conflicting question first); ``verbose`` shows
    every question of every sentence.
    """
    out = []
    for s in (result or {}).get("sentences", []):
        if s["label"] not in FLAGGED and not verbose:
            continue
        reason = s.get("reason") or {}
        qs = s["questions"] if verbose else [q for q in s["questions"] if q["outcome"] != "supported"]
        hit = reason.get("question")
        if hit is not None and not verbose:
            qs = [s["questions"][hit]] + [q for q in qs if q is not s["questions"][hit]]
        out.append(SentenceView(s["text"], s["label"], s["score"],
                                RULE_NAMES.get(reason.get("rule"), "-"), reason.get("text", ""),
                                reason.get("cut"), reason.get("suggestion"), qs,
                                s.get("novel_words", [])))
    return out
