"""Comparing two generator versions scored on the same scenario set."""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from qacheck.errors import InputError
from qacheck.reports.views import sentence_views
from qacheck.runner import load_results
from qacheck.stats import PairedStats, paired_stats, verdict_sentence


@dataclass
class Comparison:
    a_name: str
    b_name: str
    set_name: str
    signature: dict[str, Any]
    stats: PairedStats
    verdict: str
    only_a: list[str]
    only_b: list[str]
    unscored: list[str]
    #: cases in both runs without a score on one side, with each side's status
    not_compared: list[dict[str, str]]
    sentence_counts: dict[str, dict[str, int]]
    pairs: list[dict[str, Any]]  # per case: id, score_a, score_b, diff, records
    top: int

    @property
    def regressions(self) -> list[dict[str, Any]]:
        return [p for p in sorted(self.pairs, key=lambda p: p["diff"]) if p["diff"] < 0][: self.top]

    @property
    def improvements(self) -> list[dict[str, Any]]:
        return [p for p in sorted(self.pairs, key=lambda p: -p["diff"]) if p["diff"] > 0][: self.top]

    def as_dict(self) -> dict[str, Any]:
        def brief(p):
            return {"id": p["id"], "score_a": p["score_a"], "score_b": p["score_b"], "diff": p["diff"],
                    "flagged_a": flagged(p["a"]), "flagged_b": flagged(p["b"])}
        return {"a": self.a_name, "b": self.b_name, "set": self.set_name,
                "signature": self.signature, **self.stats.as_dict(), "verdict": self.verdict,
                "only_a": self.only_a, "only_b": self.only_b, "unscored": self.unscored,
                "not_compared": self.not_compared,
                "sentences": self.sentence_counts,
                "cases": [{k: p[k] for k in ("id", "score_a", "score_b", "diff")} for p in self.pairs],
                "regressions": [brief(p) for p in self.regressions],
                "improvements": [brief(p) for p in self.improvements]}


def flagged(record: dict[str, Any]) -> list[dict[str, Any]]:
    """Flagged sentences of a case record, with the rule, the reason and the failing questions."""
    return [{"text": v.text, "label": v.label, "score": v.score, "rule": v.rule, "why": v.why,
             "evidence": [{k: q[k] for k in ("question", "output_answer", "source_answer",
                                             "outcome")} for q in v.questions]}
            for v in sentence_views(record.get("result"))]


def compare_runs(a_dir: Path, b_dir: Path, resamples: int = 10_000, seed: int = 0,
                 top: int = 5, allow_mismatch: bool = False) -> Comparison:
    """Pair two results folders by case id and compute the paired statistics."""
    sa, ra = load_results(a_dir)
    sb, rb = load_results(b_dir)
    if sa["set"] != sb["set"]:
        raise InputError(f"A scored set '{sa['set']}' but B scored set '{sb['set']}': "
                         "versions can only be compared on the same set", path=b_dir)
    if sa["signature"]["id"] != sb["signature"]["id"] and not allow_mismatch:
        raise InputError(f"signatures differ (A {sa['signature']['text']}, id {sa['signature']['id']}; "
                         f"B {sb['signature']['text']}): rescore both "
                         "with the same models and thresholds, or pass --allow-signature-mismatch",
                         path=b_dir)
    a_by, b_by = {r["id"]: r for r in ra}, {r["id"]: r for r in rb}
    only_a = sorted(set(a_by) - set(b_by))
    only_b = sorted(set(b_by) - set(a_by))
    pairs, unscored, not_compared = [], [], []
    for cid in [r["id"] for r in ra if r["id"] in b_by]:
        x, y = a_by[cid], b_by[cid]
        if x["score"] is None or y["score"] is None:
            unscored.append(cid)
            not_compared.append({"id": cid, "a": x["status"], "b": y["status"]})
            continue
        pairs.append({"id": cid, "score_a": x["score"], "score_b": y["score"],
                      "diff": round(y["score"] - x["score"], 6), "a": x, "b": y})
    if not pairs:
        raise InputError("no case was scored in both A and B", path=b_dir)
    st = paired_stats([p["score_a"] for p in pairs], [p["score_b"] for p in pairs], resamples, seed)

    def counts(records):
        c = {"contradicted": 0, "unverifiable": 0}
        for r in records:
            for s in (r.get("result") or {}).get("sentences", []):
                if s["label"] in c:
                    c[s["label"]] += 1
        return c

    ids = {p["id"] for p in pairs}
    return Comparison(sa["outputs"], sb["outputs"], sa["set"], sa["signature"], st,
                      verdict_sentence(st), only_a, only_b, unscored, not_compared,
                      {"A": counts([a_by[i] for i in ids]), "B": counts([b_by[i] for i in ids])},
                      pairs, top)
