"""Where in the source can the answer be? Rank source windows for each question and claim.

The source is cut into windows of whole sentences (``WINDOW_WORDS`` words at
most, each window starting one sentence after the last), ranked by BM25 (the
``rank_bm25`` package) over Porter stems, so the cost of reading does not
grow with the source:

* a claim (an output sentence) is read by the entailment model against each
  of its ``TOP_K`` best windows;
* a question is answered by the QA model on its ``QA_TOP_K`` best windows,
  merged in source order into one ``Passage``; a source no longer than those
  windows is read whole, as before.

Output sentences and in-situ questions repeat most of their evidence's
words, which is what a lexical ranker needs.  ``benchmarks/bench_retrieval.py``
measures the recall behind ``QA_TOP_K`` on whole SQuAD dev articles.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

from qacheck.words import content_stems

WINDOW_WORDS = 120
TOP_K = 3
#: windows a question's answer is looked for in: recall@4 of 120-word windows on whole SQuAD dev
#: articles (mean 5,287 words) is 0.888 for the dataset's paraphrased questions and 0.991 for
#: in-situ ones, reading 4.7% of the article (benchmarks/bench_retrieval.py)
QA_TOP_K = 4


@dataclass(frozen=True)
class Passage:
    """What a question reads: stretches of the source joined in source order.

    ``pieces`` holds (offset in ``text``, start in the source, end in the
    source) for each stretch; stretches are joined by ``GAP``.
    """

    text: str
    pieces: tuple[tuple[int, int, int], ...]

    GAP = "\n\n"

    def to_source(self, i: int) -> int:
        """The source offset of passage offset ``i`` (an offset inside a gap maps to the end of
        the stretch before it)."""
        for at, start, stop in reversed(self.pieces):
            if i >= at:
                return start + min(i - at, stop - start)
        return self.pieces[0][1]


@dataclass(frozen=True)
class Window:
    """A stretch of the source: character offsets and its text."""

    start: int
    end: int
    text: str


@lru_cache(maxsize=64)
def windows(source: str, size: int = WINDOW_WORDS) -> tuple[Window, ...]:
    """Overlapping windows of whole source sentences, at most ``size`` words each."""
    from qacheck.segment import sentence_bounds

    bounds = sentence_bounds(source)
    out = []
    for i in range(len(bounds)):
        start, end = bounds[i]
        words = len(source[start:end].split())
        j = i + 1
        while j < len(bounds) and words + len(source[bounds[j][0]:bounds[j][1]].split()) <= size:
            words += len(source[bounds[j][0]:bounds[j][1]].split())
            end = bounds[j][1]
            j += 1
        out.append(Window(start, end, source[start:end]))
        if j >= len(bounds):
            break
    return tuple(out)


@lru_cache(maxsize=64)
def _index(source: str, size: int):
    from rank_bm25 import BM25Okapi

    wins = windows(source, size)
    return BM25Okapi([content_stems(w.text) or ["_"] for w in wins]), wins


def best_windows(source: str, query: str, k: int = TOP_K, size: int = WINDOW_WORDS
                 ) -> list[Window]:
    """The ``k`` windows of at most ``size`` words most likely to hold what ``query`` asks or
    claims, best first."""
    bm25, wins = _index(source, size)
    scores = bm25.get_scores(content_stems(query) or ["_"])
    order = sorted(range(len(wins)), key=lambda i: (-scores[i], i))
    return [wins[i] for i in order[:k]]


def passage(source: str, query: str, k: int | None = None, size: int = WINDOW_WORDS) -> Passage:
    """The union of the ``k`` (default ``QA_TOP_K``) best windows for ``query``, merged and in
    source order."""
    spans = sorted((w.start, w.end) for w in best_windows(source, query, k or QA_TOP_K, size))
    merged: list[list[int]] = []
    for a, b in spans:
        if merged and a <= merged[-1][1]:
            merged[-1][1] = max(merged[-1][1], b)
        else:
            merged.append([a, b])
    if not merged:
        return Passage(source, ((0, 0, len(source)),))
    if merged[0][0] <= len(source) - len(source.lstrip()) and \
            merged[-1][1] >= len(source.rstrip()) and len(merged) == 1:
        return Passage(source, ((0, 0, len(source)),))  # the whole source: read it as it is
    parts, pieces, at = [], [], 0
    for a, b in merged:
        pieces.append((at, a, b))
        parts.append(source[a:b])
        at += b - a + len(Passage.GAP)
    return Passage(Passage.GAP.join(parts), tuple(pieces))
