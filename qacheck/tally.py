"""What a run keeps of its cases while they stream past.

A result is about 17 KB as Python objects, so a driver that held every one
until the end would need 16 GiB for a million cases.  Every record is written
to results.jsonl (and junit.xml) the moment it arrives; the tally keeps only
the counts for the summary, a short row per case for the gate and the score
histogram (a few hundred bytes), and the ``keep`` worst cases whole for the
pages a person reads.
"""
from __future__ import annotations

import heapq
from collections import Counter
from dataclasses import dataclass
from typing import Any, Protocol

#: the order cases are listed in: what did not pass first, then lowest score first
STATUS_RANK = {"error": 0, "fail": 1, "unscored": 2, "pass": 3}
#: cases kept whole for report.html, summary.md and the terminal view; every case is in
#: results.jsonl and junit.xml
WORST_KEPT = 500


def worst_first(record: dict[str, Any]) -> tuple:
    """Sort key of a run record: status rank, then score (none lowest), then id (a total order,
    so the kept cases do not depend on the order results arrived in)."""
    score = record["score"] if record["score"] is not None else -1.0
    return STATUS_RANK.get(record["status"], 9), score, record["id"]


@dataclass(frozen=True, slots=True)
class CaseRow:
    """What the gate and the histogram need of a case."""

    id: str
    status: str
    score: float | None


class RecordSink(Protocol):
    """Anything that takes every record as it arrives (the JUnit stream)."""

    def add(self, record: dict[str, Any]) -> None: ...


class _Kept:
    """A heap entry ordered in reverse, so the heap's root is the least bad kept case."""

    __slots__ = ("key", "record")

    def __init__(self, record: dict[str, Any]) -> None:
        self.key, self.record = worst_first(record), record

    def __lt__(self, other: _Kept) -> bool:
        return self.key > other.key


class RunTally:
    """Counts, one row per case and the worst ``keep`` records of a run, fed one record at a time."""

    def __init__(self, keep: int = WORST_KEPT, sinks: tuple[RecordSink, ...] = ()) -> None:
        self.keep, self.sinks = keep, sinks
        self.rows: dict[str, CaseRow] = {}
        self.status: Counter[str] = Counter()
        self.sentences: Counter[str] = Counter()
        self.warned: list[str] = []
        self._score_sum, self._scored = 0.0, 0
        self._heap: list[_Kept] = []

    def add(self, record: dict[str, Any]) -> None:
        """Count a record, keep it whole only while it is among the worst, pass it to the sinks."""
        self.rows[record["id"]] = CaseRow(record["id"], record["status"], record["score"])
        self.status[record["status"]] += 1
        result = record.get("result") or {}
        self.sentences.update(s["label"] for s in result.get("sentences", []))
        if result.get("warnings"):
            self.warned.append(record["id"])
        if record["score"] is not None:
            self._score_sum += record["score"]
            self._scored += 1
        heapq.heappush(self._heap, _Kept(record))
        if len(self._heap) > self.keep:
            heapq.heappop(self._heap)
        for sink in self.sinks:
            sink.add(record)

    def worst(self) -> list[dict[str, Any]]:
        """The kept records, worst first."""
        return sorted((k.record for k in self._heap), key=worst_first)

    @property
    def left_out(self) -> int:
        """Cases counted but not kept whole."""
        return len(self.rows) - len(self._heap)

    @property
    def mean_score(self) -> float | None:
        return self._score_sum / self._scored if self._scored else None

    def scores(self) -> list[float]:
        return [r.score for r in self.rows.values() if r.score is not None]
