"""Where in the source can a claim's evidence be? Rank source windows for each output sentence.

The source is cut into windows of whole sentences (``WINDOW_WORDS`` words at
most, each window starting one sentence after the last); a claim reads only
its ``TOP_K`` best windows, ranked by BM25 (the ``rank_bm25`` package) over
Porter stems, so the cost of reading does not grow with the source.  Output
sentences repeat most of their evidence's words, which is what a lexical
ranker needs.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

WINDOW_WORDS = 120
TOP_K = 3


@dataclass(frozen=True)
class Window:
    """A stretch of the source: character offsets and its text."""

    start: int
    end: int
    text: str


def _stems(text: str) -> list[str]:
    from qacheck.words import _WORD, _stem, _stop_words

    stop = _stop_words()
    return [_stem(w.lower()) for w in _WORD.findall(text) if w.lower() not in stop]


@lru_cache(maxsize=64)
def windows(source: str) -> tuple[Window, ...]:
    """Overlapping windows of whole source sentences, at most ``WINDOW_WORDS`` words each."""
    from qacheck.segment import sentence_bounds

    bounds = sentence_bounds(source)
    out = []
    for i in range(len(bounds)):
        start, end = bounds[i]
        words = len(source[start:end].split())
        j = i + 1
        while j < len(bounds) and words + len(source[bounds[j][0]:bounds[j][1]].split()) <= WINDOW_WORDS:
            words += len(source[bounds[j][0]:bounds[j][1]].split())
            end = bounds[j][1]
            j += 1
        out.append(Window(start, end, source[start:end]))
        if j >= len(bounds):
            break
    return tuple(out)


@lru_cache(maxsize=64)
def _index(source: str):
    from rank_bm25 import BM25Okapi

    wins = windows(source)
    return BM25Okapi([_stems(w.text) or ["_"] for w in wins]), wins


def best_windows(source: str, claim: str, k: int = TOP_K) -> list[Window]:
    """The ``k`` windows most likely to hold the claim's evidence, best first."""
    bm25, wins = _index(source)
    scores = bm25.get_scores(_stems(claim) or ["_"])
    order = sorted(range(len(wins)), key=lambda i: (-scores[i], i))
    return [wins[i] for i in order[:k]]
