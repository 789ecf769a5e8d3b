"""From answer comparisons to outcomes, sentence labels and the pair verdict.

Every decision reads its threshold from one ``Thresholds`` object so a
verdict is reproducible from the signature alone.
"""
from __future__ import annotations

from collections import Counter

from qacheck.compare import Agreement
from qacheck.config import Thresholds
from qacheck.results import SentenceResult


def question_outcome(agreement: Agreement, no_answer_prob: float, thr: Thresholds) -> tuple[str, float]:
    """Outcome and score of one question.

    The score is the chance that the source answers at all, times a blend of
    1 and the answers' agreement: (1 - p_na) * (1 - w + w * agreement).  An
    unanswerable question and a confident contradiction both pull the sentence
    down.  On the development judgements answerability alone carried more of
    the signal than agreement (our answers are noisy), so agreement gets
    weight ``w = agreement_weight`` rather than all of it.
    """
    w = thr.agreement_weight
    score = (1.0 - no_answer_prob) * (1.0 - w + w * agreement.score)
    if no_answer_prob > thr.no_answer:
        return "unverifiable", score
    if agreement.score >= thr.support_f1:
        return "supported", score
    return "contradicted", score


def sentence_verdict(sentence: SentenceResult, thr: Thresholds) -> None:
    """Fill the sentence's score and label from its questions (in place).

    A sentence with no surviving question is ``unchecked``, never counted as
    faithful.  The score is the mean of its question scores; the label is
    ``supported`` unless a question failed (contradicted or unverifiable, with
    a score under ``sentence_flag``).  A flagged sentence takes the label of its most common failing
    outcome, contradictions winning ties (they are the graver error).
    """
    qs = sentence.questions
    if not qs:
        sentence.score, sentence.label = None, "unchecked"
        return
    sentence.score = sum(q.score for q in qs) / len(qs)
    # one question the source contradicts or cannot answer flags the sentence: a fact is
    # wrong or unsupported even when the sentence's other facts check out
    fails = Counter(q.outcome for q in qs if q.outcome != "supported" and q.score < thr.sentence_flag)
    if not fails:
        sentence.label = "supported"
    else:
        sentence.label = ("contradicted" if fails["contradicted"] >= fails["unverifiable"]
                          else "unverifiable")


def pair_verdict(sentences: list[SentenceResult], thr: Thresholds) -> tuple[float | None, str, dict[str, int]]:
    """Pair score (mean over checked sentences), label and counts of sentence labels."""
    counts = Counter(s.label for s in sentences)
    scored = [s.score for s in sentences if s.score is not None]
    if not scored:
        return None, "unscored", dict(counts)
    score = sum(scored) / len(scored)
    return score, ("consistent" if score >= thr.pair_consistent else "inconsistent"), dict(counts)
