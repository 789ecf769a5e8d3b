"""The judging step on hand-built results (no model runs), and the fitted sentence model.

The sentence model is checked against scikit-learn's own pipeline (the
reference implementation of a standardised logistic regression); the rules
are qacheck's own and are pinned here on hand-built evidence.
"""
from __future__ import annotations

import json
from dataclasses import replace

import numpy as np
import pytest

from qacheck.judge import FEATURES, SentenceModel, judge, sentence_features
from qacheck.results import PairResult, QuestionResult, SentenceResult
from qacheck.words import novel_words

SOURCE = "The Harl ferry leaves Caldreth at 9 am. It carries 40 cars."
#: P(faithful) rises with the question scores and falls with novel words
MODEL = SentenceModel(mean_=(0.5, 0.5, 0.2, 0.0, 0.0, 1 / 3, 1 / 3),
                      scale_=(0.2, 0.2, 0.1, 1.0, 1.0, 0.2, 0.2),
                      coef_=(1.0, 1.0, -3.0, -1.0, -1.0, 1.0, -1.0), intercept_=0.0, cut_=0.5,
                      conflict_precision_=0.8)


def _q(outcome: str, conflict: str | None = None, score: float = 0.9,
       span: str = "40", kind: str = "CARDINAL") -> QuestionResult:
    answered = outcome != "unverifiable"
    return QuestionResult("How many cars does it carry?", "rules", span, kind, span,
                          ("55" if conflict else span) if answered else None, None, None,
                          0.05 if answered else 0.9, 0.0 if conflict else 1.0, "amount",
                          conflict is None and answered, conflict, "", outcome, score,
                          bool(novel_words(span, SOURCE)[0]))


def _sentence(output: str, questions: list[QuestionResult]) -> SentenceResult:
    """A sentence with its word evidence filled in as the evidence stage does."""
    novel, n = novel_words(output, SOURCE)
    return SentenceResult(output, 0, len(output), None, "supported", questions,
                          novel_words=novel, content_words=n)


def _pair(output: str, questions: list[QuestionResult]) -> PairResult:
    s = _sentence(output, questions)
    return judge(PairResult(None, "unscored", [s], {}, {}, SOURCE, output), MODEL)


def test_supported_sentence_with_known_words_is_consistent():
    r = _pair("The Harl ferry carries 40 cars.", [_q("supported")])
    s = r.sentences[0]
    assert s.label == "supported" and r.label == "consistent"
    assert s.reason.rule == "evidence" and s.score >= MODEL.cut_ and s.novel_words == []


def test_typed_conflict_flags_whatever_the_model_says():
    good = [_q("supported"), _q("supported"), _q("supported")]
    r = _pair("The Harl ferry carries 40 cars.", good + [_q("contradicted", "value", score=0.45)])
    s = r.sentences[0]
    feats = sentence_features(s)
    assert MODEL.predict_proba(feats) >= MODEL.cut_  # the model alone would pass it
    assert s.label == "contradicted" and r.label == "inconsistent"
    assert s.reason.rule == "value" and s.reason.question == 3
    assert s.score == round(MODEL.predict_proba(feats), 4)  # the score still ranks
    assert s.reason.suggestion == 'source says "55"'


def test_words_the_source_lacks_flag_a_sentence_as_unverifiable():
    r = _pair("The Harl ferry carries 40 cars and a brass band to Vorne every Sunday.",
              [_q("supported")])
    s = r.sentences[0]
    assert s.label == "unverifiable" and s.score < MODEL.cut_ and r.label == "inconsistent"
    assert {"brass", "band", "Vorne", "Sunday"} <= set(s.novel_words)
    assert "words the source never uses" in s.reason.text


def test_unanswered_question_about_a_new_name_is_its_own_evidence():
    out = "The Harl ferry, run by Vorne Lines, carries 40 cars."
    q = _q("unverifiable", span="Vorne Lines", kind="ORG", score=0.05)
    feats = sentence_features(_sentence(out, [q]))
    assert feats["novel_fact_unanswered"] == 1.0
    known = _q("unverifiable", span="Caldreth", kind="GPE", score=0.05)
    feats = sentence_features(_sentence(out, [known]))
    assert feats["novel_fact_unanswered"] == 0.0  # the source names Caldreth
    # a new name counts as a novel fact whether or not the source answers its question
    answered = _q("supported", span="Vorne Lines", kind="ORG")
    feats = sentence_features(_sentence(out, [answered]))
    assert feats["novel_fact"] == 1.0 and feats["novel_fact_unanswered"] == 0.0
    assert sentence_features(_sentence(out, [known]))["novel_fact"] == 0.0


def test_sentence_without_questions_is_still_judged_by_its_words():
    r = _pair("Brass bands played all night in Vorne.", [])
    s = r.sentences[0]
    assert not s.checked and s.evidence["qa_mean"] == 0.0 and s.label == "unverifiable"
    assert r.unchecked_share == 1.0 and r.label == "inconsistent"
    assert "no question survived" in s.reason.text


def test_the_entailment_reading_is_weighed_evidence():
    from qacheck.results import ClaimResult

    out = "The Harl ferry carries 40 cars."
    base = _sentence(out, [_q("supported", score=0.6)])
    backed = judge(PairResult(None, "unscored", [replace(base, claim=ClaimResult(
        0, 20, 0.95, 0.02, 0.03))], {}, {}, SOURCE, out), MODEL).sentences[0]
    denied = judge(PairResult(None, "unscored", [replace(base, claim=ClaimResult(
        0, 20, 0.02, 0.95, 0.03))], {}, {}, SOURCE, out), MODEL).sentences[0]
    assert backed.evidence["claim_entailed"] == 0.95 and backed.score > denied.score
    assert denied.reason.rule == "evidence"  # the reader labels nothing on its own


def test_judge_returns_a_new_result():
    out = "The Harl ferry carries 40 cars."
    s = _sentence(out, [_q("supported")])
    before = PairResult(None, "unscored", [s], {}, {}, SOURCE, out)
    after = judge(before, MODEL)
    assert before.score is None and before.sentences[0].reason is None
    assert after.score is not None and after is not before


def test_probability_matches_scikit_learn():
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    rng = np.random.default_rng(0)
    x = rng.random((200, len(FEATURES)))
    y = (x[:, 0] - x[:, 2] + 0.3 * rng.standard_normal(200)) > 0
    rows = [dict(zip(FEATURES, r)) for r in x]
    ours = SentenceModel.fit(rows, list(y), [False] * 200)
    ref = make_pipeline(StandardScaler(),
                        LogisticRegression(C=0.1, class_weight="balanced", max_iter=1000)).fit(x, y)
    got = np.array([ours.predict_proba(r) for r in rows])
    assert np.allclose(got, ref.predict_proba(x)[:, 1], atol=1e-6)
    again = SentenceModel.from_dict(json.loads(json.dumps(ours.as_dict())))
    assert again.digest == ours.digest and again.predict_proba(rows[0]) == ours.predict_proba(rows[0])


def test_conflict_precision_is_the_share_of_flags_people_marked_wrong():
    rows = [dict.fromkeys(FEATURES, float(i % 2)) for i in range(10)]
    y = [True, False, False, False, True, True, True, True, True, True]
    hit = [True, True, True, True, True, False, False, False, False, False]
    assert SentenceModel.fit(rows, y, hit).conflict_precision_ == pytest.approx(3 / 5)


def test_feature_list_mismatch_is_refused():
    with pytest.raises(ValueError, match="features"):
        SentenceModel.from_dict({"features": ["answer_f1"], "mean": [0], "scale": [1],
                                 "coef": [1], "intercept": 0, "cut": 0.5,
                                 "conflict_precision": 0.5})


def test_leave_one_file_out_generalises_on_separable_files():
    """Three invented files where faithful outputs have answered questions and known words:
    a model, cut and conflict precision fitted on two files must rank the third correctly."""
    from qacheck.human_agreement import Judged, fit_judge_model

    def make(name: str, n: int):
        records, results = [], []
        for i in range(n):
            good = i % 2 == 0
            out = ("The Harl ferry carries 40 cars." if good else
                   f"A brass band from Vorne played {i} songs on the ferry.")
            q = _q("supported", score=0.85 + 0.01 * (i % 5)) if good else \
                _q("unverifiable", span="Vorne", kind="GPE", score=0.05 + 0.01 * (i % 5))
            s = _sentence(out, [q])
            results.append(PairResult(None, "unscored", [s], {}, {}, SOURCE, out).to_dict())
            records.append(Judged(f"{name}{i}", name, SOURCE, out, good, ()))
        return {"y": [r.consistent for r in records], "records": records, "results": results,
                "baselines": {}}

    raw = {name: make(name, 20) for name in ("a", "b", "c")}
    out = fit_judge_model(raw, also={"a": make("a", 6)})
    assert out["n_sentences"] == 60
    for held in out["leave_one_file_out"].values():
        assert held["roc_auc"] > 0.95 and held["balanced_accuracy"] > 0.9
    # another sample of a file is judged by the model that never saw that file
    small = out["leave_one_file_out_also"]["a"]
    assert small["n"] == 6 and small["roc_auc"] > 0.95
    assert small["cut_from_other_files"] == out["leave_one_file_out"]["a"]["cut_from_other_files"]


def test_retrieval_puts_the_window_that_holds_the_claim_first():
    """BM25 (the rank_bm25 package) over stems: the window holding the claim's words ranks
    first, and windows keep to whole sentences of the source."""
    from qacheck.retrieval import WINDOW_WORDS, best_windows, windows

    source = " ".join(f"Notice {i}: the library in Felwick holds story hour number {i}."
                      for i in range(60)) + " The Tessaly ferry museum opens in May."
    best = best_windows(source, "When does the ferry museum in Tessaly open?")[0]
    assert "ferry museum opens in May" in best.text
    assert all(len(w.text.split()) <= WINDOW_WORDS for w in windows(source))
    assert all(source[w.start:w.end] == w.text for w in windows(source))


def test_the_number_in_the_reason_is_the_score_shown():
    """Issue: "contradicted 0.74" was printed beside a reason quoting another number."""
    r = _pair("The Harl ferry carries 40 cars and a brass band to Vorne every Sunday.",
              [_q("supported", score=0.55)])
    s = r.sentences[0]
    assert s.reason.value == s.score and f"P(faithful) {s.score:.2f}" in s.reason.text


def test_a_compound_counts_by_its_parts_however_its_hyphen_is_spaced():
    source = "The 30-year-old pilot signed a two-year contract for the second round."
    novel, n = novel_words("The 30 - year - old pilot signed a two - year deal.", source)
    assert novel == ["deal"] and n == 7
    assert novel_words("a second-round berth", source)[0] == ["berth"]


def test_the_word_share_baseline_does_not_move_with_qacheck_matching():
    from qacheck.human_agreement import word_coverage

    source = "The 30-year-old pilot signed a two-year contract."
    # whole words only, stop words dropped (spaCy's list): 30, year, old, pilot, signed,
    # contract -> "pilot", "signed", "contract" found; by hand 3 of 6
    assert word_coverage(source, "The 30 - year - old pilot signed a contract.") == 0.5
