"""Paired significance tests over per-case scores.

* paired bootstrap confidence interval of the mean difference (Koehn 2004,
  "Statistical Significance Tests for Machine Translation Evaluation"),
  percentile method;
* paired approximate randomisation (Riezler and Maxwell 2005): the sign of
  each case's difference is flipped at random, p = (hits + 1) / (R + 1);
* the Wilcoxon signed-rank test, from scipy.
"""
from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np


@dataclass(frozen=True)
class PairedStats:
    n: int
    mean_a: float
    mean_b: float
    diff: float  # mean(b - a)
    ci_low: float
    ci_high: float
    p_randomisation: float
    p_wilcoxon: float | None
    better: int  # cases where B > A
    worse: int
    tied: int
    resamples: int
    seed: int

    def as_dict(self) -> dict:
        return asdict(self)


#: resamples are drawn in blocks of at most this many values (about 32 MB each): memory stays
#: flat for any number of cases, and the draws (so the figures) equal one draw of the whole matrix
BLOCK_VALUES = 2**22


def _blocks(resamples: int, n: int):
    """(start, rows) of consecutive row blocks covering ``resamples`` rows of ``n`` values."""
    rows = max(1, BLOCK_VALUES // max(1, n))
    for start in range(0, resamples, rows):
        yield start, min(rows, resamples - start)


def paired_bootstrap_ci(a: np.ndarray, b: np.ndarray, resamples: int = 10_000,
                        confidence: float = 0.95, seed: int = 0) -> tuple[float, float]:
    """Percentile interval of mean(b - a) over case resamples with replacement."""
    d = np.asarray(b, float) - np.asarray(a, float)
    rng = np.random.default_rng(seed)
    means = np.empty(resamples)
    for start, rows in _blocks(resamples, len(d)):
        means[start:start + rows] = d[rng.integers(0, len(d), size=(rows, len(d)))].mean(axis=1)
    alpha = (1 - confidence) / 2
    return float(np.quantile(means, alpha)), float(np.quantile(means, 1 - alpha))


def approximate_randomisation(a: np.ndarray, b: np.ndarray, resamples: int = 10_000,
                              seed: int = 0) -> float:
    """Two-sided p-value of mean(b - a) != 0 by random sign flips of paired differences."""
    d = np.asarray(b, float) - np.asarray(a, float)
    observed = abs(d.mean())
    if observed == 0.0:
        return 1.0
    rng = np.random.default_rng(seed)
    hits = 0
    for _, rows in _blocks(resamples, len(d)):
        signs = rng.choice((-1.0, 1.0), size=(rows, len(d)))
        hits += int((np.abs((signs * d).mean(axis=1)) >= observed - 1e-12).sum())
    return (hits + 1) / (resamples + 1)


def paired_stats(a: list[float], b: list[float], resamples: int = 10_000, seed: int = 0,
                 tie: float = 1e-9) -> PairedStats:
    """All paired figures for per-case scores of version A and version B."""
    from scipy.stats import wilcoxon

    x, y = np.asarray(a, float), np.asarray(b, float)
    if len(x) != len(y) or len(x) == 0:
        raise ValueError("paired statistics need two equally long, non-empty score lists")
    d = y - x
    lo, hi = paired_bootstrap_ci(x, y, resamples, seed=seed)
    p_w = None
    if np.any(np.abs(d) > tie):
        p_w = float(wilcoxon(y, x, zero_method="wilcox").pvalue)
    return PairedStats(
        n=len(d), mean_a=float(x.mean()), mean_b=float(y.mean()), diff=float(d.mean()),
        ci_low=lo, ci_high=hi, p_randomisation=approximate_randomisation(x, y, resamples, seed),
        p_wilcoxon=p_w, better=int((d > tie).sum()), worse=int((d < -tie).sum()),
        tied=int((np.abs(d) <= tie).sum()), resamples=resamples, seed=seed)


def verdict_sentence(s: PairedStats, alpha: float = 0.05) -> str:
    """A plain sentence: which version is more faithful, by how much, how sure."""
    p = s.p_randomisation
    p_text = "p < 0.001" if p < 0.001 else f"p = {p:.3f}"
    figures = (f"{s.diff:+.3f} [{s.ci_low:+.3f}, {s.ci_high:+.3f}], {p_text}, "
               f"{s.worse} cases worse, {s.better} better, {s.tied} tied")
    excludes_zero = s.ci_low > 0 or s.ci_high < 0
    if p < alpha and excludes_zero:
        word = "more" if s.diff > 0 else "less"
        return f"B is {word} faithful than A: {figures}."
    return f"No significant difference between A and B: {figures}."
