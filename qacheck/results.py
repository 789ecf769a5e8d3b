"""The records of a check, from questions to the pair; ``to_dict`` gives the documented JSON.

Labels are ``Literal`` types so that a misspelt label is a type error, and
every flagged sentence carries the rule that flagged it (``Reason``).
"""
from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Any, Literal

QuestionOutcome = Literal["supported", "contradicted", "unverifiable"]
SentenceLabel = Literal["supported", "contradicted", "unverifiable"]
PairLabel = Literal["consistent", "inconsistent", "unscored"]
#: which rule set a sentence's label: a typed conflict on one question, or the sentence model
Rule = Literal["value", "opposite", "negation", "name", "evidence"]
FLAGGED: tuple[SentenceLabel, ...] = ("contradicted", "unverifiable")

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
    match_kind: str  # how the answers were compared: text | amount | time | date | name | predicate
    same: bool  # the two answers name the same text or value
    conflict: str | None  # a typed conflict: value | opposite | negation | name
    conflict_detail: str
    outcome: QuestionOutcome
    score: float
    #: the span holds a content word whose stem the source never uses at all
    novel_span: bool = False


@dataclass(frozen=True)
class ClaimResult:
    """The entailment reader on one sentence: its best-supporting source window and readings.

    ``start``/``end`` are character offsets of the window in the source;
    the three probabilities are the reader's on that window.
    """

    start: int
    end: int
    entailed: float
    contradicted: float
    not_supported: float


@dataclass(frozen=True)
class Reason:
    """Why a sentence got its label: the rule, the number that decided it, and what to fix.

    ``question`` indexes the sentence's questions for a typed conflict;
    ``value`` is the number compared with ``cut`` for the ``evidence`` rule
    (the sentence model's P(faithful)) and that same score otherwise.
    """

    rule: Rule
    text: str
    value: float
    cut: float
    question: int | None = None
    suggestion: str | None = None


@dataclass
class SentenceResult:
    text: str
    start: int
    end: int
    #: P(faithful) on the documented scale (README, "How the numbers are made")
    score: float | None
    label: SentenceLabel
    questions: list[QuestionResult] = field(default_factory=list)
    spans_considered: int = 0
    #: content words of the sentence that the source never uses (stemmed match), and how many
    #: content words the sentence has: evidence found with the questions, read by the judge
    novel_words: list[str] = field(default_factory=list)
    content_words: int = 0
    #: the sentence model's inputs, by name (``qacheck.judge.FEATURES``)
    evidence: dict[str, float] = field(default_factory=dict)
    reason: Reason | None = None
    #: the entailment reader's verdict on the sentence (None when no reader is shipped)
    claim: ClaimResult | None = None

    @property
    def checked(self) -> bool:
        """At least one question survived the round trip."""
        return bool(self.questions)


@dataclass
class PairResult:
    score: float | None
    label: PairLabel
    sentences: list[SentenceResult]
    signature: dict[str, Any]
    counts: dict[str, int] = field(default_factory=dict)
    source: str = ""
    output: str = ""
    #: share of sentences where no question survived (judged by their words alone)
    unchecked_share: float = 0.0
    #: things a reader must know before trusting the verdict (e.g. the text is not English)
    warnings: list[str] = field(default_factory=list)

    def to_dict(self, include_texts: bool = False) -> dict[str, Any]:
        d = asdict(self)
        if not include_texts:
            d.pop("source")
            d.pop("output")
        d["caution"] = CAUTION
        return d

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> "PairResult":
        sents = [SentenceResult(**{**s, "questions": [QuestionResult(**q) for q in s["questions"]],
                                   "reason": Reason(**s["reason"]) if s.get("reason") else None,
                                   "claim": ClaimResult(**s["claim"]) if s.get("claim") else None})
                 for s in d["sentences"]]
        return cls(d["score"], d["label"], sents, d["signature"], d.get("counts", {}),
                   d.get("source", ""), d.get("output", ""), d.get("unchecked_share", 0.0),
                   list(d.get("warnings", [])))

    def source_excerpt(self, q: QuestionResult, width: int = 90) -> str:
        """The stretch of source around the source answer, for evidence views."""
        if q.source_start is None or not self.source:
            return ""
        a = max(0, q.source_start - width)
        b = min(len(self.source), (q.source_end or q.source_start) + width)
        return ("..." if a > 0 else "") + self.source[a:b] + ("..." if b < len(self.source) else "")
