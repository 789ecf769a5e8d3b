"""Judging: from the evidence of each sentence to sentence verdicts, and from those to the pair.

This is the one place where labels are decided, and it is pure: ``judge``
takes a result whose questions are filled in and returns a new result with
every sentence's score, label and ``Reason``.  No model runs here, so results
read back from a cache can be judged again under a refitted sentence model.

Two kinds of evidence, weighed differently:

* **Specific evidence decides.**  A question whose source answer is a typed
  conflict with the output's answer (a different value, an opposite word, a
  one-sided negation, a different name; ``qacheck.answer_match``) flags its
  sentence as ``contradicted``.  No fitted score can overrule it; its
  measured precision on the development judgements is kept in the model file
  and reported beside it.
* **Vague evidence is weighed.**  Unanswered questions, low answer overlap
  and words the source never uses are combined by a logistic sentence model
  (``SentenceModel``), fitted with cross-validation grouped by file.

A sentence's score is P(faithful) from that model, whatever a rule says (the
score ranks, the rule labels); a sentence is flagged below ``cut`` or by a
rule.  The pair's score is its weakest
sentence's score, and the pair is ``inconsistent`` exactly when some sentence
is flagged: one unsupported sentence makes an output unfaithful.
"""
from __future__ import annotations

import hashlib
import json
import math
from collections import Counter
from dataclasses import dataclass, replace
from importlib import resources
from typing import Any

from qacheck.config import Thresholds
from qacheck.results import FLAGGED, PairResult, QuestionResult, Reason, SentenceResult

#: the sentence model's inputs, in a fixed order
FEATURES: tuple[str, ...] = (
    "qa_mean",                # mean question score: answerability x agreement
    "qa_min",                 # the weakest question's score
    "novel_word_share",       # share of the sentence's content words the source never uses
    "novel_fact_unanswered",  # a name/number/date question the source cannot answer, whose
                              # answer words the source never uses at all
    "novel_fact",             # a name/number/date span holding a word the source never uses,
                              # answered or not
    "claim_entailed",         # the entailment reader: P(entailed) on the best-supporting window
    "claim_contradicted",     # and P(contradicted) on that window
)
#: span kinds that name a specific fact (an entity or a value), as opposed to a noun chunk
FACT_KINDS = frozenset({"DATE", "TIME", "MONEY", "PERCENT", "QUANTITY", "CARDINAL", "ORDINAL",
                        "PERSON", "ORG", "GPE", "LOC", "NORP", "FAC", "EVENT", "PRODUCT",
                        "WORK_OF_ART", "LAW", "NUM"})


def question_outcome(agreement: float, conflict: str | None, no_answer_prob: float,
                     thr: Thresholds) -> tuple[str, float]:
    """Outcome and score of one question.

    The score is the chance that the source answers at all, times a blend of
    1 and the answers' agreement: (1 - p_na) * (1 - w + w * agreement), with
    ``w = agreement_weight``.  A typed conflict is contradicted whatever the
    word overlap.
    """
    w = thr.agreement_weight
    score = (1.0 - no_answer_prob) * (1.0 - w + w * agreement)
    if no_answer_prob > thr.no_answer:
        return "unverifiable", score
    if conflict is None and agreement >= thr.support_f1:
        return "supported", score
    return "contradicted", score


def sentence_features(sentence: SentenceResult) -> dict[str, float]:
    """The sentence model's inputs for one sentence, by name, from its evidence alone.

    A sentence without a reading (no entailment reader installed) gets the
    reader's uninformed values, a third for each class.  A sentence where no
    question survived has no support from questions (question scores 0) and is
    judged by its words and its reading.  There is no "unchecked" input: such
    sentences are 1% of the news sentences, nearly all faithful, so a fitted
    weight for them read "no question, so faithful" and passed the greetings
    and questions of dialogue responses ("How about you?") on development data
    where it was left out of the fit.
    """
    n_content = sentence.content_words
    share = len(sentence.novel_words) / n_content if n_content else 0.0
    c = sentence.claim
    claim = {"claim_entailed": c.entailed if c else 1 / 3,
             "claim_contradicted": c.contradicted if c else 1 / 3}
    qs = sentence.questions
    if not qs:
        return {"qa_mean": 0.0, "qa_min": 0.0, "novel_word_share": share,
                "novel_fact_unanswered": 0.0, "novel_fact": 0.0, **claim}
    scores = [q.score for q in qs]
    fact = any(q.outcome == "unverifiable" and q.span_kind in FACT_KINDS and q.novel_span
               for q in qs)
    novel_fact = any(q.span_kind in FACT_KINDS and q.novel_span for q in qs)
    return {"qa_mean": sum(scores) / len(scores), "qa_min": min(scores),
            "novel_word_share": share, "novel_fact_unanswered": float(fact),
            "novel_fact": float(novel_fact), **claim}


@dataclass(frozen=True)
class SentenceModel:
    """Standardised logistic regression, P(faithful) of a sentence from its evidence.

    Follows scikit-learn's estimator conventions: ``fit`` returns a fitted
    model, fitted attributes end in ``_``, ``predict_proba`` gives P(faithful).
    ``conflict_precision_`` is the measured share of typed-conflict flags that
    people also marked wrong; ``cut_`` the P(faithful) under which a sentence
    is flagged.
    """

    mean_: tuple[float, ...]
    scale_: tuple[float, ...]
    coef_: tuple[float, ...]
    intercept_: float
    cut_: float
    conflict_precision_: float

    def predict_proba(self, feats: dict[str, float]) -> float:
        z = self.intercept_ + sum(c * (feats[n] - m) / s for n, m, s, c in
                                  zip(FEATURES, self.mean_, self.scale_, self.coef_))
        return 1.0 / (1.0 + math.exp(-max(-50.0, min(50.0, z))))

    @classmethod
    def fit(cls, rows: list[dict[str, float]], y: list[bool], conflict: list[bool],
            c: float = 0.1) -> "SentenceModel":
        """Fit on sentence rows (``y``: people judged the sentence faithful).

        Classes are weighted equally, as balanced accuracy counts them; L2
        regularisation (scikit-learn's ``C=c``) keeps the weights general.
        The cut maximises balanced accuracy on the fitted rows (callers may
        choose it on pairs instead); the conflict precision is measured on the
        rows where a typed conflict fired.
        """
        import numpy as np
        from sklearn.linear_model import LogisticRegression
        from sklearn.preprocessing import StandardScaler

        x = np.array([[r[f] for f in FEATURES] for r in rows], dtype=float)
        scaler = StandardScaler().fit(x)
        scale = np.where(scaler.scale_ > 0, scaler.scale_, 1.0)
        clf = LogisticRegression(C=c, class_weight="balanced", max_iter=1000)
        clf.fit((x - scaler.mean_) / scale, np.asarray(y, bool))
        fired = [not ok for ok, hit in zip(y, conflict) if hit]
        precision = sum(fired) / len(fired) if fired else 0.5
        model = cls(tuple(map(float, scaler.mean_)), tuple(map(float, scale)),
                    tuple(map(float, clf.coef_[0])), float(clf.intercept_[0]), 0.5, precision)
        from qacheck.human_agreement import best_threshold

        return replace(model, cut_=best_threshold(y, [model.predict_proba(r) for r in rows])[0])

    def as_dict(self) -> dict[str, Any]:
        return {"features": list(FEATURES), "mean": list(self.mean_), "scale": list(self.scale_),
                "coef": list(self.coef_), "intercept": self.intercept_, "cut": self.cut_,
                "conflict_precision": self.conflict_precision_}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> "SentenceModel":
        if list(d.get("features", [])) != list(FEATURES):
            raise ValueError(f"sentence model features {d.get('features')} differ from {FEATURES}")
        return cls(tuple(d["mean"]), tuple(d["scale"]), tuple(d["coef"]), float(d["intercept"]),
                   float(d["cut"]), float(d["conflict_precision"]))

    @property
    def digest(self) -> str:
        """sha256 of the coefficients as written, for the reproducibility signature."""
        return hashlib.sha256(json.dumps(self.as_dict(), sort_keys=True).encode()).hexdigest()

    @classmethod
    def untrained(cls) -> "SentenceModel":
        """P(faithful) 0.5 for every sentence: what ``agreement --fit`` judges with while it
        collects the evidence for a first fit of a changed feature set."""
        n = len(FEATURES)
        return cls((0.0,) * n, (1.0,) * n, (0.0,) * n, 0.0, 0.5, 0.5)

    @classmethod
    def shipped(cls) -> "SentenceModel":
        """The model shipped in ``qacheck/judge_model.json`` (written by ``agreement --fit``)."""
        text = resources.files("qacheck").joinpath("judge_model.json").read_text(encoding="utf-8")
        return cls.from_dict(json.loads(text)["model"])


def _first_conflict(qs: list[QuestionResult]) -> int | None:
    return next((i for i, q in enumerate(qs) if q.outcome == "contradicted" and q.conflict), None)


_CONFLICT_WORDS = {"value": "a different value", "opposite": "an opposite word",
                   "negation": "a negation on one side only", "name": "a different name"}


def _evidence_text(s: SentenceResult, feats: dict[str, float]) -> str:
    """What pulled a sentence's P(faithful) down, in words."""
    if not s.questions:
        parts = ["no question survived the round trip"]
    else:
        unanswered = sum(q.outcome == "unverifiable" for q in s.questions)
        differ = sum(q.outcome == "contradicted" for q in s.questions)
        parts = [f"{unanswered} of {len(s.questions)} questions unanswered in the source"]
        if differ:
            parts.append(f"{differ} answered differently")
    if s.novel_words:
        parts.append("words the source never uses: " + ", ".join(s.novel_words[:6]))
    return "; ".join(parts)


def judge_sentence(s: SentenceResult, model: SentenceModel, thr: Thresholds) -> SentenceResult:
    """A new sentence result with its score, label and reason.

    A typed conflict on a question labels it outright; otherwise the sentence
    model's P(faithful) is compared with max(cut, ``thr.sentence_floor``).
    The entailment reader is weighed evidence only: as a rule ("contradicted
    at P >= 0.9") it was right on 3 of 12 development sentences, so it labels
    nothing on its own.
    """
    feats = sentence_features(s)
    p = round(model.predict_proba(feats), 4)  # the number shown is the number that decides
    cut = max(model.cut_, thr.sentence_floor)
    hit = _first_conflict(s.questions)
    if hit is not None:
        q = s.questions[hit]
        rule_note = (f"(a rule; flags of this kind were right {model.conflict_precision_:.0%} "
                     "of the time on development data)")
        if q.match_kind == "predicate":  # same answer, opposite statements about it
            said, source_said = q.conflict_detail.split(" vs ", 1)
            why = (f'{_CONFLICT_WORDS[q.conflict]}: asked "{q.question}", both texts answer '
                   f'"{q.output_answer}", but the output says "{said}" where the source says '
                   f'"{source_said}" {rule_note}')
            fix = f'source says "{source_said}"'
        else:
            why = (f'{_CONFLICT_WORDS[q.conflict]}: asked "{q.question}", the output answers '
                   f'"{q.output_answer}", the source "{q.source_answer}" {rule_note}')
            fix = f'source says "{q.source_answer}"'
        reason = Reason(q.conflict, why, p, cut, hit, fix)
        return replace(s, score=p, label="contradicted",
                       evidence={k: round(v, 4) for k, v in feats.items()}, reason=reason)
    done = replace(s, score=p,
                   evidence={k: round(v, 4) for k, v in feats.items()})
    if p >= cut:
        return replace(done, label="supported", reason=Reason(
            "evidence", f"P(faithful) {p:.2f} at or above the cut {cut:.2f}", p, cut))
    fails = Counter(q.outcome for q in s.questions if q.outcome != "supported")
    label = ("contradicted" if fails["contradicted"] and fails["contradicted"] >= fails["unverifiable"]
             else "unverifiable")
    return replace(done, label=label, reason=Reason(
        "evidence", f"P(faithful) {p:.2f} under the cut {cut:.2f}: "
        + _evidence_text(done, feats), p, cut))


def judge(result: PairResult, model: SentenceModel, thr: Thresholds | None = None) -> PairResult:
    """A new result with every sentence judged and the pair verdict that follows from them.

    The pair's score is its weakest sentence's score; it is ``inconsistent``
    when any sentence is flagged, ``unscored`` only when it has no sentence.
    ``thr`` defaults to the shipped thresholds.
    """
    thr = thr or Thresholds.shipped()
    sentences = [judge_sentence(s, model, thr) for s in result.sentences]
    if not sentences:
        return replace(result, score=None, label="unscored", sentences=[], counts={},
                       unchecked_share=0.0)
    counts = dict(Counter(s.label for s in sentences))
    score = min(s.score for s in sentences)
    label = "inconsistent" if any(s.label in FLAGGED for s in sentences) else "consistent"
    unchecked = sum(not s.checked for s in sentences) / len(sentences)
    return replace(result, score=score, label=label, sentences=sentences, counts=counts,
                   unchecked_share=round(unchecked, 4))
