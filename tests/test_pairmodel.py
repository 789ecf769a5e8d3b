"""The pair model: its evidence, and its probabilities against scikit-learn's own.

Reference library: scikit-learn (StandardScaler + LogisticRegression
``predict_proba``); the shipped model must compute exactly what scikit-learn
would for the same coefficients.  Leave-one-file-out fitting is checked on
synthetic files whose separability is known by construction.
"""
from __future__ import annotations

import json
import random

import numpy as np
import pytest

from qacheck.agreement import fit_pair_model
from qacheck.pairmodel import FEATURES, PairModel, evidence, fit
from qacheck.results import SentenceResult


def test_evidence_is_the_question_mean_and_the_novel_word_share():
    source = "The Harl ferry leaves Caldreth at 9 am. It carries forty cars."
    output = "The Harl ferries leave Caldreth at 9 am. They carry 55 cars to Vorne."
    s1 = SentenceResult("", 0, 39, 0.9, "supported")
    s2 = SentenceResult("", 40, 69, 0.2, "contradicted")
    s3 = SentenceResult("", 70, 70, None, "unchecked")
    e = evidence([s1, s2, s3], source, output)
    assert set(e) == set(FEATURES)
    assert e["qa_mean"] == pytest.approx(0.55)
    # content words (spaCy stop words, "am" among them, removed; Porter stems): harl ferri leav
    # caldreth 9 carri 55 car vorn -> "55" and "vorne" are new; "ferries"/"leave"/"carry"
    # match the source by stem
    assert e["novel_word_share"] == pytest.approx(2 / 9)


def test_no_question_means_no_evidence():
    assert evidence([SentenceResult("", 0, 5, None, "unchecked")], "a", "b") is None


def test_probability_matches_scikit_learn():
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    rng = np.random.default_rng(0)
    x = rng.random((200, len(FEATURES)))
    y = (x[:, 0] - x[:, 1] + 0.3 * rng.standard_normal(200)) > 0
    rows = [dict(zip(FEATURES, r)) for r in x]
    ours = fit(rows, list(y))
    ref = make_pipeline(StandardScaler(),
                        LogisticRegression(C=0.1, class_weight="balanced", max_iter=1000)).fit(x, y)
    expected = ref.predict_proba(x)[:, 1]
    got = np.array([ours.probability(r) for r in rows])
    assert np.allclose(got, expected, atol=1e-6)
    # round trip through the shipped JSON layout
    again = PairModel.from_dict(json.loads(json.dumps(ours.as_dict())))
    assert again.digest == ours.digest and again.probability(rows[0]) == ours.probability(rows[0])


def test_shipped_model_loads_and_names_its_features():
    model = PairModel.shipped()
    assert len(model.coef) == len(FEATURES)
    neutral = {f: m for f, m in zip(FEATURES, model.mean)}
    assert 0.0 < model.probability(neutral) < 1.0


def test_feature_list_mismatch_is_refused():
    with pytest.raises(ValueError, match="features"):
        PairModel.from_dict({"features": ["answer_f1"], "mean": [0], "scale": [1], "coef": [1],
                             "intercept": 0})


def test_leave_one_file_out_generalises_on_separable_files():
    rng = random.Random(1)

    def make(n):
        feats, ys = [], []
        for i in range(n):
            good = i % 2 == 0
            row = {f: rng.random() * 0.2 for f in FEATURES}
            row["qa_mean"] = (0.8 if good else 0.3) + rng.random() * 0.1
            row["novel_word_share"] = (0.05 if good else 0.4) + rng.random() * 0.1
            feats.append(row)
            ys.append(good)
        feats[0] = None  # an unscored pair: neutral score, left out of fitting
        return {"y": ys, "features": feats}

    raw = {name: make(40) for name in ("a", "b", "c")}
    out = fit_pair_model(raw)
    assert out["n_fitted"] == 117
    for held in out["leave_one_file_out"].values():
        assert held["roc_auc"] > 0.95 and held["balanced_accuracy"] > 0.9
