"""Comparing two generator versions scored on the same scenario set."""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from qacheck.errors import InputError
from qacheck.reports.views import sentence_views
from qacheck.runner import RESULTS_FILE, iter_results, read_summary
from qacheck.stats import PairedStats, paired_stats, verdict_sentence


#: the figures compare keeps of one case of one run; full records are read again only for the
#: cases the reports show (the largest drops and gains), so two runs of any size compare in
#: memory of a few hundred bytes a case
@dataclass(frozen=True, slots=True)
class _Side:
    score: float | None
    status: str
    contradicted: int
    unverifiable: int


def _sides(folder: Path) -> dict[str, _Side]:
    """Every case of a results folder as a ``_Side``, read a line at a time (first line wins)."""
    out: dict[str, _Side] = {}
    for r in iter_results(folder / RESULTS_FILE):
        if r["id"] in out:
            continue
        labels = [s["label"] for s in (r.get("result") or {}).get("sentences", [])]
        out[r["id"]] = _Side(r["score"], r["status"], labels.count("contradicted"),
                             labels.count("unverifiable"))
    return out


def _records(folder: Path, ids: set[str]) -> dict[str, dict[str, Any]]:
    """The full records of ``ids`` from a results folder (one more pass over the file)."""
    out: dict[str, dict[str, Any]] = {}
    for r in iter_results(folder / RESULTS_FILE):
        if r["id"] in ids and r["id"] not in out:
            out[r["id"]] = r
    return out


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
    pairs: list[dict[str, Any]]  # per case: id, score_a, score_b, diff
    top: int
    #: full records ("A", "B" -> id -> record) of the cases the reports show
    records: dict[str, dict[str, dict[str, Any]]] = field(default_factory=dict)

    def _shown(self, rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
        return [{**p, "a": self.records["A"][p["id"]], "b": self.records["B"][p["id"]]}
                for p in rows]

    @property
    def regressions(self) -> list[dict[str, Any]]:
        """The largest drops from A to B, each with both records."""
        return self._shown(_drops(self.pairs, self.top))

    @property
    def improvements(self) -> list[dict[str, Any]]:
        """The largest gains from A to B, each with both records."""
        return self._shown(_gains(self.pairs, self.top))

    def as_dict(self) -> dict[str, Any]:
        def brief(p):
            return {"id": p["id"], "score_a": p["score_a"], "score_b": p["score_b"], "diff": p["diff"],
                    "flagged_a": flagged(p["a"]), "flagged_b": flagged(p["b"])}
        return {"a": self.a_name, "b": self.b_name, "set": self.set_name,
                "signature": self.signature, **self.stats.as_dict(), "verdict": self.verdict,
                "only_a": self.only_a, "only_b": self.only_b, "unscored": self.unscored,
                "not_compared": self.not_compared,
                "sentences": self.sentence_counts,
                "cases": self.pairs,
                "regressions": [brief(p) for p in self.regressions],
                "improvements": [brief(p) for p in self.improvements]}


def _drops(pairs: list[dict[str, Any]], top: int) -> list[dict[str, Any]]:
    return [p for p in sorted(pairs, key=lambda p: p["diff"]) if p["diff"] < 0][:top]


def _gains(pairs: list[dict[str, Any]], top: int) -> list[dict[str, Any]]:
    return [p for p in sorted(pairs, key=lambda p: -p["diff"]) if p["diff"] > 0][:top]


def flagged(record: dict[str, Any]) -> list[dict[str, Any]]:
    """Flagged sentences of a case record, with the rule, the reason and the failing questions."""
    return [{"text": v.text, "label": v.label, "score": v.score, "rule": v.rule, "why": v.why,
             "evidence": [{k: q[k] for k in ("question", "output_answer", "source_answer",
                                             "outcome")} for q in v.questions]}
            for v in sentence_views(record.get("result"))]


def compare_runs(a_dir: Path, b_dir: Path, resamples: int = 10_000, seed: int = 0,
                 top: int = 5, allow_mismatch: bool = False) -> Comparison:
    """Pair two results folders by case id and compute the paired statistics.

    Both results files are read a line at a time, keeping a few figures per
    case; the records of the largest drops and gains are read in a last pass.
    """
    sa, sb = read_summary(a_dir), read_summary(b_dir)
    if sa["set"] != sb["set"]:
        raise InputError(f"A scored set '{sa['set']}' but B scored set '{sb['set']}': "
                         "versions can only be compared on the same set", path=b_dir)
    if sa["signature"]["id"] != sb["signature"]["id"] and not allow_mismatch:
        raise InputError(f"signatures differ (A {sa['signature']['text']}, id {sa['signature']['id']}; "
                         f"B {sb['signature']['text']}): rescore both "
                         "with the same models and thresholds, or pass --allow-signature-mismatch",
                         path=b_dir)
    a_by, b_by = _sides(a_dir), _sides(b_dir)
    only_a = sorted(set(a_by) - set(b_by))
    only_b = sorted(set(b_by) - set(a_by))
    pairs, unscored, not_compared = [], [], []
    counts = {"A": {"contradicted": 0, "unverifiable": 0},
              "B": {"contradicted": 0, "unverifiable": 0}}
    for cid, x in a_by.items():
        y = b_by.get(cid)
        if y is None:
            continue
        if x.score is None or y.score is None:
            unscored.append(cid)
            not_compared.append({"id": cid, "a": x.status, "b": y.status})
            continue
        pairs.append({"id": cid, "score_a": x.score, "score_b": y.score,
                      "diff": round(y.score - x.score, 6)})
        for side, v in (("A", x), ("B", y)):
            counts[side]["contradicted"] += v.contradicted
            counts[side]["unverifiable"] += v.unverifiable
    if not pairs:
        raise InputError("no case was scored in both A and B", path=b_dir)
    st = paired_stats([p["score_a"] for p in pairs], [p["score_b"] for p in pairs], resamples, seed)
    # the cases the reports show, and the first pair (every report prints the cut it carries)
    shown = {p["id"] for p in _drops(pairs, top) + _gains(pairs, top)} | {pairs[0]["id"]}
    return Comparison(sa["outputs"], sb["outputs"], sa["set"], sa["signature"], st,
                      verdict_sentence(st), only_a, only_b, unscored, not_compared, counts,
                      pairs, top, {"A": _records(a_dir, shown), "B": _records(b_dir, shown)})
