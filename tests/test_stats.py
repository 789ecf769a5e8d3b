"""Paired statistics checked against reference implementations in scipy.

* bootstrap interval vs ``scipy.stats.bootstrap`` (percentile method, on the
  paired differences) -- agreement within resampling error;
* approximate randomisation vs ``scipy.stats.permutation_test`` with
  ``permutation_type='samples'`` (the paired sign-flip test);
* Wilcoxon p-value vs ``scipy.stats.wilcoxon``;
* ROC AUC vs the Mann-Whitney U statistic (AUC = U / (n1 n2), a standard identity)
  and balanced accuracy vs scikit-learn.
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy import stats as sps

from qacheck.human_agreement import balanced_accuracy, best_threshold, roc_auc
from qacheck.stats import approximate_randomisation, paired_bootstrap_ci, paired_stats, verdict_sentence


@pytest.fixture
def paired():
    rng = np.random.default_rng(7)
    a = rng.uniform(0.4, 0.9, size=60)
    b = np.clip(a - 0.05 + rng.normal(0, 0.08, size=60), 0, 1)
    return a, b


def test_bootstrap_matches_scipy(paired):
    a, b = paired
    lo, hi = paired_bootstrap_ci(a, b, resamples=20_000, seed=1)
    ref = sps.bootstrap(((b - a),), np.mean, n_resamples=20_000, method="percentile",
                        random_state=np.random.default_rng(2)).confidence_interval
    assert lo == pytest.approx(ref.low, abs=0.004)
    assert hi == pytest.approx(ref.high, abs=0.004)


def test_randomisation_matches_scipy_permutation_test(paired):
    a, _ = paired
    # a small effect so the p-value is away from its floor
    b2 = a + np.random.default_rng(5).normal(0.025, 0.1, size=len(a))
    ours = approximate_randomisation(a, b2, resamples=20_000, seed=3)
    ref = sps.permutation_test((b2, a), lambda x, y: np.mean(x - y), permutation_type="samples",
                               n_resamples=20_000, alternative="two-sided",
                               random_state=np.random.default_rng(4)).pvalue
    assert 0.01 < ref < 0.99  # the comparison is meaningful only away from 0 and 1
    assert ours == pytest.approx(ref, abs=0.015)


def test_wilcoxon_is_scipys(paired):
    a, b = paired
    assert paired_stats(a, b, resamples=2000).p_wilcoxon == pytest.approx(sps.wilcoxon(b, a).pvalue)


def test_identical_versions_give_zero_difference_and_p_one():
    a = [0.3, 0.5, 0.9, 0.7]
    s = paired_stats(a, list(a), resamples=2000)
    assert s.diff == 0.0 and s.ci_low == 0.0 and s.ci_high == 0.0
    assert s.p_randomisation == 1.0 and s.p_wilcoxon is None
    assert s.tied == 4 and "No significant difference" in verdict_sentence(s)


def test_verdict_names_direction(paired):
    a, b = paired
    s = paired_stats(a, b, resamples=5000)
    assert s.ci_high < 0
    assert verdict_sentence(s).startswith("B is less faithful than A")


def test_roc_auc_equals_mann_whitney_u():
    rng = np.random.default_rng(0)
    scores = list(rng.uniform(size=80))
    y = [bool(v) for v in rng.integers(0, 2, size=80)]
    pos = [s for s, t in zip(scores, y) if t]
    neg = [s for s, t in zip(scores, y) if not t]
    u = sps.mannwhitneyu(pos, neg).statistic
    assert roc_auc(y, scores) == pytest.approx(u / (len(pos) * len(neg)))


def test_balanced_accuracy_matches_sklearn():
    from sklearn.metrics import balanced_accuracy_score

    y = [True, True, False, False, False, True, False]
    p = [True, False, False, True, False, True, False]
    assert balanced_accuracy(y, p) == pytest.approx(balanced_accuracy_score(y, p))


def test_best_threshold_separates_separable_data():
    cut, ba = best_threshold([False, False, True, True], [0.1, 0.2, 0.7, 0.9])
    assert 0.2 < cut < 0.7 and ba == 1.0


def test_resamples_drawn_in_blocks_give_the_figures_of_one_draw(paired, monkeypatch):
    """Blocks keep memory flat on large sets; the seed must still fix every figure."""
    from qacheck import stats

    a, b = paired
    whole = (stats.paired_bootstrap_ci(a, b, 999, seed=4),
             stats.approximate_randomisation(a, b, 999, seed=4))
    monkeypatch.setattr(stats, "BLOCK_VALUES", 7 * len(a) + 3)  # blocks of 7 rows, 999 = 142*7+5
    assert (stats.paired_bootstrap_ci(a, b, 999, seed=4),
            stats.approximate_randomisation(a, b, 999, seed=4)) == whole
