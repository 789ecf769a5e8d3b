"""The pair score: a small logistic model over the pipeline's evidence.

The mean of question scores sees only what its questions asked about: a
sentence where no question survived the round trip, or a clause between the
answer spans, adds nothing to it, yet that is where unsupported content
often sits.  The share of the output's content words that the source never
uses covers exactly that, and on the development judgements it adds to
the questions on most files.  qacheck combines the two with a standardised
logistic regression (scikit-learn), fitted on the development judgements and
reported with leave-one-file-out figures (``qacheck agreement --fit``), in
the spirit of the published learned answer-overlap scorers.

The fitted coefficients ship in ``qacheck/pair_model.json``; their digest is
part of every result's signature, so a refit never mixes with old results.
"""
from __future__ import annotations

import hashlib
import json
import math
from dataclasses import dataclass
from importlib import resources
from typing import Any

from qacheck.results import SentenceResult
from qacheck.words import novel_words

#: the evidence a pair score is built from, in a fixed order.  Ten candidate signals were
#: measured (answerability, contradiction and unverifiable shares, answer F1, unchecked
#: sentences, novel names and numbers); fitted together they traded file-specific weights and
#: did worse on the file left out than these two (README, "Agreement with human judgements").
FEATURES: tuple[str, ...] = (
    "qa_mean",           # mean question-derived sentence score: answerability x agreement
    "novel_word_share",  # output content words (stemmed) that the source never uses
)

def features(qa_mean: float, n_novel: int, n_content: int) -> dict[str, float]:
    """The feature values from the question mean and the counts of ``novel_words``."""
    return {"qa_mean": qa_mean, "novel_word_share": n_novel / n_content if n_content else 0.0}


def evidence(sentences: list[SentenceResult], source: str, output: str) -> dict[str, float] | None:
    """The feature values of one pair, or None when no question survived (nothing was checked)."""
    scored = [s.score for s in sentences if s.score is not None]
    if not scored:
        return None
    novel, n_content = novel_words(output, source)
    return features(sum(scored) / len(scored), len(novel), n_content)


@dataclass(frozen=True)
class PairModel:
    """Standardised logistic regression: P(consistent) from a pair's evidence."""

    mean: tuple[float, ...]
    scale: tuple[float, ...]
    coef: tuple[float, ...]
    intercept: float

    def probability(self, feats: dict[str, float]) -> float:
        z = self.intercept + sum(
            c * (feats[name] - m) / s
            for name, m, s, c in zip(FEATURES, self.mean, self.scale, self.coef))
        return 1.0 / (1.0 + math.exp(-z))

    def as_dict(self) -> dict[str, Any]:
        return {"features": list(FEATURES), "mean": list(self.mean), "scale": list(self.scale),
                "coef": list(self.coef), "intercept": self.intercept}

    @property
    def digest(self) -> str:
        """sha256 of the coefficients (as written), for the reproducibility signature."""
        return hashlib.sha256(json.dumps(self.as_dict(), sort_keys=True).encode()).hexdigest()

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> "PairModel":
        if list(d.get("features", [])) != list(FEATURES):
            raise ValueError(f"pair model features {d.get('features')} differ from {FEATURES}")
        return cls(tuple(d["mean"]), tuple(d["scale"]), tuple(d["coef"]), float(d["intercept"]))

    @classmethod
    def shipped(cls) -> "PairModel":
        """The coefficients shipped in ``qacheck/pair_model.json`` (written by ``agreement --fit``)."""
        return cls.from_dict(json.loads(shipped_text())["model"])


def shipped_text() -> str:
    return resources.files("qacheck").joinpath("pair_model.json").read_text(encoding="utf-8")


def fit(rows: list[dict[str, float]], y: list[bool], c: float = 0.1) -> PairModel:
    """Fit on feature rows; classes are weighted equally, as balanced accuracy counts them.

    L2 regularisation (``c`` is scikit-learn's inverse strength; 0.1 did best
    on held-out files) keeps the weights from following one file's quirks.
    """
    import numpy as np
    from sklearn.linear_model import LogisticRegression
    from sklearn.preprocessing import StandardScaler

    x = np.array([[r[f] for f in FEATURES] for r in rows], dtype=float)
    scaler = StandardScaler().fit(x)
    scale = np.where(scaler.scale_ > 0, scaler.scale_, 1.0)
    clf = LogisticRegression(C=c, class_weight="balanced", max_iter=1000)
    clf.fit((x - scaler.mean_) / scale, np.asarray(y, bool))
    return PairModel(tuple(map(float, scaler.mean_)), tuple(map(float, scale)),
                     tuple(map(float, clf.coef_[0])), float(clf.intercept_[0]))
