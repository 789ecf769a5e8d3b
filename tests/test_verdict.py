"""Sentence and pair verdicts from question results (no models run).

The decision rules are qacheck's own; the checks here pin them on hand-built
results so that a change of rule shows up as a failing test.
"""
from __future__ import annotations

from qacheck.config import Thresholds
from qacheck.pairmodel import PairModel
from qacheck.results import PairResult, QuestionResult, SentenceResult
from qacheck.verdict import judge

SOURCE = "The Harl ferry leaves Caldreth at 9 am. It carries 40 cars."
#: P(consistent) rises with the question mean and falls with the novel-word share
MODEL = PairModel(mean=(0.5, 0.2), scale=(0.2, 0.1), coef=(1.0, -1.0), intercept=0.0)
THR = Thresholds(pair_consistent=0.5)


def _q(outcome: str, kind: str = "text", same: bool = True, score: float = 0.9) -> QuestionResult:
    return QuestionResult("How many cars does it carry?", "rules", "40", "CARDINAL", "40",
                          None if outcome == "unverifiable" else "40", None, None,
                          0.9 if outcome == "unverifiable" else 0.05, 1.0 if same else 0.0,
                          kind, same, outcome, score)


def _pair(output: str, sentences: list[SentenceResult]) -> PairResult:
    return judge(PairResult(None, "unscored", sentences, {}, {}, SOURCE, output), THR, MODEL)


def test_supported_sentence_with_known_words_is_consistent():
    out = "The Harl ferry carries 40 cars."
    r = _pair(out, [SentenceResult(out, 0, len(out), None, "", [_q("supported")])])
    assert r.label == "consistent" and r.sentences[0].label == "supported"
    assert r.sentences[0].novel_words == [] and r.evidence["novel_word_share"] == 0.0


def test_value_conflict_flags_sentence_and_pair_whatever_the_probability():
    out = "The Harl ferry carries 55 cars."
    q = _q("contradicted", kind="number", same=False, score=0.45)
    r = _pair(out, [SentenceResult(out, 0, len(out), None, "", [_q("supported"), q])])
    assert r.sentences[0].probability >= THR.pair_consistent  # the model alone would pass it
    assert r.sentences[0].label == "contradicted" and r.label == "inconsistent"


def test_words_the_source_lacks_flag_a_sentence_as_unverifiable():
    out = "The Harl ferry carries 40 cars and a brass band to Vorne every Sunday."
    r = _pair(out, [SentenceResult(out, 0, len(out), None, "", [_q("supported")])])
    s = r.sentences[0]
    assert s.probability < THR.pair_consistent and s.label == "unverifiable"
    assert {"brass", "band", "Vorne", "Sunday"} <= set(s.novel_words)
    assert r.label == "inconsistent"


def test_sentence_without_questions_is_unchecked_and_pair_unscored():
    out = "Lovely."
    r = _pair(out, [SentenceResult(out, 0, len(out), None, "")])
    assert r.sentences[0].label == "unchecked" and r.score is None and r.label == "unscored"
