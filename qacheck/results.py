"""Result objects of a check; ``to_dict`` gives the documented JSON layout."""
from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Any

CAUTION = ("An automatic faithfulness score is not proof of correctness: it can miss errors and "
           "flag correct text. Medical, legal and financial text needs review by a qualified person.")


@dataclass
class QuestionResult:
    """One question asked of both texts, with both answers and the outcome."""

    question: str
    drafter: str  # "seq2seq" or "rules"
    span: str
    span_kind: str
    output_answer: str
    source_answer: str | None
    source_start: int | None
    source_end: int | None
    no_answer_prob: float
    f1: float
    value_kind: str  # how the answers were compared: "text", "number", "date" or "quantity"
    same_value: bool  # the two answers name the same text or value
    outcome: str  # supported | contradicted | unverifiable
    score: float


@dataclass
class SentenceResult:
    text: str
    start: int
    end: int
    score: float | None
    label: str  # supported | contradicted | unverifiable | unchecked
    questions: list[QuestionResult] = field(default_factory=list)
    spans_considered: int = 0
    #: the pair model's P(consistent) for this sentence alone; None when unchecked
    probability: float | None = None
    #: content words of the sentence that the source never uses (stemmed match)
    novel_words: list[str] = field(default_factory=list)


@dataclass
class PairResult:
    score: float | None
    label: str  # consistent | inconsistent | unscored
    sentences: list[SentenceResult]
    signature: dict[str, Any]
    counts: dict[str, int] = field(default_factory=dict)
    source: str = ""
    output: str = ""
    #: the named features the pair score was computed from (``qacheck.pairmodel.FEATURES``)
    evidence: dict[str, float] = field(default_factory=dict)

    def to_dict(self, include_texts: bool = False) -> dict[str, Any]:
        d = asdict(self)
        if not include_texts:
            d.pop("source")
            d.pop("output")
        d["caution"] = CAUTION
        return d

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> "PairResult":
        sents = [SentenceResult(**{**s, "questions": [QuestionResult(**q) for q in s["questions"]]})
                 for s in d["sentences"]]
        return cls(d["score"], d["label"], sents, d["signature"], d.get("counts", {}),
                   d.get("source", ""), d.get("output", ""), d.get("evidence", {}))

    def source_excerpt(self, q: QuestionResult, width: int = 90) -> str:
        """The stretch of source around the source answer, for evidence views."""
        if q.source_start is None or not self.source:
            return ""
        a = max(0, q.source_start - width)
        b = min(len(self.source), (q.source_end or q.source_start) + width)
        return ("..." if a > 0 else "") + self.source[a:b] + ("..." if b < len(self.source) else "")
