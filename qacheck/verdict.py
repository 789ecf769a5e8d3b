"""From answer comparisons to outcomes, sentence labels and the pair verdict.

Every decision reads its threshold from one ``Thresholds`` object so a
verdict is reproducible from the signature alone.
"""
from __future__ import annotations

from collections import Counter

from qacheck.compare import Agreement
from qacheck.config import Thresholds
from qacheck.pairmodel import PairModel, evidence, features
from qacheck.results import PairResult, QuestionResult, SentenceResult
from qacheck.words import novel_words


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


def value_conflict(q: QuestionResult) -> bool:
    """The source answers with a different number, date or quantity than the output.

    Such a mismatch is compared by value, not by words, so it is the most
    specific evidence qacheck has: it flags its sentence whatever the rest of
    the evidence says.
    """
    return q.outcome == "contradicted" and q.value_kind != "text" and not q.same_value


def sentence_verdict(sentence: SentenceResult, source: str, thr: Thresholds,
                     model: PairModel) -> None:
    """Fill the sentence's score, probability and label (in place).

    A sentence with no surviving question is ``unchecked``, never counted as
    faithful.  Its score is the mean of its question scores; its
    ``probability`` is the pair model applied to this sentence alone (its
    questions and its own words against the source).  It is flagged when a
    question found a different value in the source, or when its probability
    falls under the pair cut.  A flagged sentence takes the label of its most
    common failing question, contradictions winning ties (they are the graver
    error); with no failing question the evidence was words the source lacks,
    so it is ``unverifiable``.
    """
    qs = sentence.questions
    if not qs:
        sentence.score, sentence.probability, sentence.label = None, None, "unchecked"
        return
    sentence.score = sum(q.score for q in qs) / len(qs)
    sentence.novel_words, n_content = novel_words(sentence.text, source)
    sentence.probability = model.probability(
        features(sentence.score, len(sentence.novel_words), n_content))
    if any(value_conflict(q) for q in qs):
        sentence.label = "contradicted"
        return
    if sentence.probability >= thr.pair_consistent:
        sentence.label = "supported"
        return
    fails = Counter(q.outcome for q in qs if q.outcome != "supported")
    sentence.label = ("contradicted" if fails["contradicted"] and
                      fails["contradicted"] >= fails["unverifiable"] else "unverifiable")


def pair_verdict(sentences: list[SentenceResult], source: str, output: str, thr: Thresholds,
                 model: PairModel) -> tuple[float | None, str, dict[str, int], dict[str, float]]:
    """Pair score, label, counts of sentence labels, and the evidence the score came from.

    The score is the pair model's probability that the pair is consistent
    (``qacheck.pairmodel``).  The pair is ``inconsistent`` when that is under
    the cut or when any sentence holds a value conflict; a pair where no
    question survived is ``unscored`` rather than guessed from words alone.
    """
    counts = Counter(s.label for s in sentences)
    feats = evidence(sentences, source, output)
    if feats is None:
        return None, "unscored", dict(counts), {}
    score = model.probability(feats)
    conflict = any(value_conflict(q) for s in sentences for q in s.questions)
    label = "consistent" if score >= thr.pair_consistent and not conflict else "inconsistent"
    return score, label, dict(counts), feats


def judge(result: PairResult, thr: Thresholds, model: PairModel) -> PairResult:
    """Fill every sentence verdict and the pair verdict of a result from its questions.

    Verdicts need no model run, so a result read back from a cache or a
    results file can be judged again under a refitted pair model or other
    thresholds (``qacheck agreement --fit`` reports its in-sample figures so).
    """
    for s in result.sentences:
        sentence_verdict(s, result.source, thr, model)
        if s.score is not None:
            s.score, s.probability = round(s.score, 4), round(s.probability, 4)
    score, label, counts, feats = pair_verdict(result.sentences, result.source, result.output,
                                               thr, model)
    result.score = None if score is None else round(score, 4)
    result.label, result.counts = label, counts
    result.evidence = {k: round(v, 4) for k, v in feats.items()}
    return result
