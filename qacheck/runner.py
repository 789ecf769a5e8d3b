"""Batch runs over a scenario set: cache, resume, per-case status, baseline gate.

Results are written as they are computed, one JSON line per case, flushed
and fsync'd, so a run killed at any point keeps every finished case; a rerun
into the same folder skips cases whose key (texts + signature) is unchanged.
"""
from __future__ import annotations

import json
import multiprocessing
import os
import time
from collections.abc import Callable, Iterable, Iterator
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Protocol

from qacheck.cache import ResultCache, cache_key
from qacheck.config import Thresholds
from qacheck.errors import InputError
from qacheck.results import FLAGGED
from qacheck.scenarios import Case, ScenarioSet
from qacheck.tally import CaseRow, RunTally

RESULTS_FILE = "results.jsonl"
SUMMARY_FILE = "summary.json"


def case_status(case: Case, result: dict[str, Any] | None) -> tuple[str, list[str]]:
    """pass / fail / error / unscored, with the reasons a case failed.

    Without expectations a case must come out ``consistent``; with them it
    must meet each one (label, min_score, max_score).
    """
    if case.error or result is None:
        return "error", [case.error or "not scored"]
    reasons = []
    exp = case.expect
    label, score = result["label"], result["score"]
    if label == "unscored" and "label" not in exp:
        return "unscored", ["no sentence had a checkable question"]
    if "label" in exp and label != exp["label"]:
        reasons.append(f"label {label}, expected {exp['label']}")
    if "label" not in exp and label != "consistent":
        flagged = [s for s in result["sentences"] if s["label"] in FLAGGED]
        why = "; ".join(f'{s["label"]} "{s["text"]}" ({s["reason"]["text"]})' for s in flagged[:2])
        reasons.append(f"label {label}: {why}" + (f" and {len(flagged) - 2} more sentences"
                                                   if len(flagged) > 2 else ""))
    if "min_score" in exp and (score is None or score < exp["min_score"]):
        reasons.append(f"score {score} below min_score {exp['min_score']}")
    if "max_score" in exp and (score is None or score > exp["max_score"]):
        reasons.append(f"score {score} above max_score {exp['max_score']}")
    return ("fail" if reasons else "pass"), reasons


# --- scoring with cache and an engine -------------------------------------------------

#: batches in flight per worker or actor: one being scored, one waiting, so none sits idle
IN_FLIGHT = 2

Batch = tuple[int, list[tuple[str, str]]]


class Engine(Protocol):
    """Where new pairs are scored: batches in, (batch id, results) out, in any order."""

    def results(self, batches: Iterator[Batch]) -> Iterator[tuple[int, list[dict[str, Any]]]]: ...

    def close(self) -> None: ...


class InProcess:
    """Scores batches in this process with the scorer's own checker."""

    def __init__(self, checker) -> None:
        self.checker = checker

    def close(self) -> None:
        """Nothing to release: the checker lives as long as the scorer."""

    def results(self, batches: Iterator[Batch]) -> Iterator[tuple[int, list[dict[str, Any]]]]:
        for bid, pairs in batches:
            yield bid, [r.to_dict(include_texts=True) for r in self.checker.check_many(pairs)]


_WORKER = None


def _worker_init(thresholds: dict[str, Any], threads: int, cache_path: str | None) -> None:
    import torch

    from qacheck.pipeline import Checker

    global _WORKER
    torch.set_num_threads(threads)
    store = ResultCache(Path(cache_path)) if cache_path else None
    _WORKER = Checker(Thresholds.from_dict(thresholds), store=store)


def _worker_score(pairs: list[tuple[str, str]]) -> list[dict[str, Any]]:
    return [r.to_dict(include_texts=True) for r in _WORKER.check_many(pairs)]


class ProcessPool:
    """``workers`` local processes, each with its own models and an equal share of the CPU
    threads; at most ``IN_FLIGHT`` batches per process are queued at any time."""

    def __init__(self, thresholds: Thresholds, workers: int, cache: ResultCache | None) -> None:
        self.thresholds, self.workers, self.cache = thresholds, workers, cache

    def close(self) -> None:
        """Nothing to release: the pool ends with each ``results`` call."""

    def results(self, batches: Iterator[Batch]) -> Iterator[tuple[int, list[dict[str, Any]]]]:
        threads = max(1, (os.cpu_count() or 1) // self.workers)
        # spawn, not fork: forking a process whose OpenMP threads are running can hang
        with ProcessPoolExecutor(self.workers, mp_context=multiprocessing.get_context("spawn"),
                                 initializer=_worker_init,
                                 initargs=(self.thresholds.as_dict(), threads,
                                           str(self.cache.path) if self.cache else None)) as pool:
            running: dict[Any, int] = {}
            for bid, pairs in batches:
                running[pool.submit(_worker_score, pairs)] = bid
                if len(running) >= self.workers * IN_FLIGHT:
                    yield from self._finished(running)
            while running:
                yield from self._finished(running)

    @staticmethod
    def _finished(running: dict[Any, int]) -> Iterator[tuple[int, list[dict[str, Any]]]]:
        done, _ = wait(running, return_when=FIRST_COMPLETED)
        for fut in done:
            yield running.pop(fut), fut.result()


class Scorer:
    """Scores pairs through the cache; new pairs go to an engine in batches.

    The engine is this process (``workers`` 1), a pool of local processes
    (``workers`` > 1) or any object with the same ``results`` method (the Ray
    engine in ``qacheck.ray_engine``).  Only this object writes the cache.
    """

    def __init__(self, thresholds: Thresholds, cache: ResultCache | None, workers: int = 1,
                 batch_size: int = 1, checker=None, engine: Engine | None = None) -> None:
        from qacheck.pipeline import Checker

        self.thresholds = thresholds
        self.checker = checker or Checker(thresholds, store=cache)
        self.cache, self.batch_size = cache, max(1, batch_size)
        self.model = self.checker.model
        self.signature = self.checker.signature
        self.engine = engine or (InProcess(self.checker) if workers <= 1
                                 else ProcessPool(thresholds, workers, cache))

    def key(self, source: str, output: str) -> str:
        """The cache key: the texts and everything that shapes the answers, not the judging."""
        return cache_key(self.checker.evidence_signature["id"], source, output)

    def _rejudged(self, cached: dict[str, Any]) -> dict[str, Any]:
        """A cached result judged under the current sentence model and signature."""
        from qacheck.judge import judge
        from qacheck.results import PairResult

        result = PairResult.from_dict(cached)
        result.signature = self.signature
        return judge(result, self.model, self.thresholds).to_dict(include_texts=True)

    def score(self, pairs: list[tuple[str, str]]) -> Iterator[tuple[int, dict[str, Any]]]:
        """Yield (index, result dict) as results become available (cached ones first)."""
        todo = []
        for i, (src, out) in enumerate(pairs):
            hit = self.cache.get(self.key(src, out)) if self.cache else None
            if hit is not None:
                yield i, self._rejudged(hit)
            else:
                todo.append(i)
        chunks = [todo[b:b + self.batch_size] for b in range(0, len(todo), self.batch_size)]
        batches = ((bid, [pairs[i] for i in idx]) for bid, idx in enumerate(chunks))
        for bid, results in self.engine.results(batches):
            if len(results) != len(chunks[bid]):
                raise RuntimeError(f"batch {bid}: {len(results)} results for "
                                   f"{len(chunks[bid])} pairs")
            for i, res in zip(chunks[bid], results):
                if self.cache:
                    self.cache.put(self.key(*pairs[i]), res)
                yield i, res


# --- the run --------------------------------------------------------------------------

@dataclass
class RunOutcome:
    """The summary of a finished run and what it kept of its cases (``qacheck.tally``)."""

    summary: dict[str, Any]
    tally: RunTally


def iter_results(path: Path) -> Iterator[dict[str, Any]]:
    """Valid result lines of a results file, read one at a time; a torn last line (killed run)
    is skipped."""
    if not path.exists():
        return
    with open(path, encoding="utf-8", errors="replace") as fh:
        for line in fh:
            try:
                rec = json.loads(line)
            except json.JSONDecodeError:
                continue
            if isinstance(rec, dict) and "id" in rec:
                yield rec


def read_summary(folder: Path) -> dict[str, Any]:
    """summary.json of a finished results folder, with clear errors when it is not one."""
    summary_path = folder / SUMMARY_FILE
    if not summary_path.exists():
        raise InputError("not a results folder (no summary.json): run `qacheck run` first",
                         path=folder)
    try:
        return json.loads(summary_path.read_text(encoding="utf-8"))
    except json.JSONDecodeError as exc:
        raise InputError(f"not valid JSON ({exc.msg})", path=summary_path, line=exc.lineno) from exc


@contextmanager
def folder_lock(results_dir: Path) -> Iterator[None]:
    """One run per results folder: an advisory lock on ``.lock``, naming its holder when taken."""
    import fcntl

    lock_path = results_dir / ".lock"
    fh = open(lock_path, "a+", encoding="utf-8")
    try:
        try:
            fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            fh.seek(0)
            holder = fh.read().strip() or "another process"
            raise InputError(f"another qacheck run is writing this results folder ({holder}); "
                             "wait for it or choose another --results folder",
                             path=results_dir) from None
        fh.seek(0)
        fh.truncate()
        fh.write(f"pid {os.getpid()} since {time.strftime('%Y-%m-%d %H:%M:%S')}\n")
        fh.flush()
        yield
    finally:
        fh.close()


def _write_atomic(path: Path, text: str) -> None:
    """Write to a temporary name and rename into place, so no reader sees half a file."""
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, path)


def run_set(sset: ScenarioSet, results_dir: Path, scorer: Scorer,
            progress: Callable[[int, int], None] | None = None) -> RunOutcome:
    """Score every case of ``sset`` into ``results_dir`` (resuming) and write the summary.

    The folder is locked for the run.  A case kept from an earlier run keeps
    its stored verdict, but its status is derived again from the current
    expectations.  junit.xml is written as the cases arrive; the other
    reports come from the returned tally (``qacheck.reports.run``).
    """
    from qacheck.reports.junit import JUnitStream

    results_dir.mkdir(parents=True, exist_ok=True)
    with folder_lock(results_dir):
        junit = JUnitStream(results_dir, sset.name)
        try:
            outcome = _run_locked(sset, results_dir, scorer, progress, RunTally(sinks=(junit,)))
        except BaseException:
            junit.discard()
            raise
        junit.close(outcome.summary)
        return outcome


def _record(case: Case, key: str, result: dict[str, Any] | None) -> dict[str, Any]:
    """The results.jsonl line of a case: its status under the current expectations and its result."""
    status, reasons = case_status(case, result)
    return {"id": case.id, "key": key, "status": status, "reasons": reasons,
            "score": result["score"] if result else None,
            "label": result["label"] if result else None, "tags": case.tags,
            "expect": case.expect, "result": result}


def _run_locked(sset: ScenarioSet, results_dir: Path, scorer: Scorer,
                progress: Callable[[int, int], None] | None, tally: RunTally) -> RunOutcome:
    path = results_dir / RESULTS_FILE
    keys = {c.id: scorer.key(c.source, c.output or "") for c in sset.cases}
    by_id = {c.id: c for c in sset.cases}
    # resume: keep, one line at a time, the earlier results whose key still matches
    kept = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    with open(kept, "w", encoding="utf-8") as out:
        for r in iter_results(path):
            case = by_id.get(r["id"])
            if (case is None or r["id"] in tally.rows or r.get("key") != keys[r["id"]]
                    or r.get("result") is None):
                continue
            rec = _record(case, keys[case.id], r["result"])
            out.write(json.dumps(rec, ensure_ascii=False) + "\n")
            tally.add(rec)
        out.flush()
        os.fsync(out.fileno())
    os.replace(kept, path)
    t0 = time.time()
    total = len(sset.cases)
    if progress:
        progress(len(tally.rows), total)
    with open(path, "a", encoding="utf-8") as fh:
        def write(rec: dict[str, Any]) -> None:
            fh.write(json.dumps(rec, ensure_ascii=False) + "\n")
            fh.flush()
            os.fsync(fh.fileno())
            tally.add(rec)
            if progress:
                progress(len(tally.rows), total)

        todo = [c for c in sset.cases if c.id not in tally.rows]
        for c in todo:
            if c.error:
                write(_record(c, keys[c.id], None))
        scoreable = [c for c in todo if not c.error]
        for i, res in scorer.score([(c.source, c.output) for c in scoreable]):
            write(_record(scoreable[i], keys[scoreable[i].id], res))
    summary = summarise(sset, tally, scorer.signature, time.time() - t0)
    _write_atomic(results_dir / SUMMARY_FILE, json.dumps(summary, indent=2, ensure_ascii=False))
    return RunOutcome(summary, tally)


def summarise(sset: ScenarioSet, tally: RunTally, signature: dict[str, Any],
              seconds: float) -> dict[str, Any]:
    """Set-level figures: counts by status, mean score, flagged sentences, input problems."""
    return {
        "set": sset.name, "description": sset.description, "outputs": sset.outputs_name,
        "set_folder": str(sset.folder), "signature": signature,
        "cases": len(tally.rows), "status": dict(tally.status),
        "sentences": dict(tally.sentences), "mean_score": tally.mean_score,
        "problems": [str(p) for p in sset.problems], "seconds": round(seconds, 2),
        "warned_cases": tally.warned,
    }


# --- the baseline gate ----------------------------------------------------------------

@dataclass
class GateResult:
    ok: bool
    signature_mismatch: bool
    mean_drop: float | None
    newly_failing: list[CaseRow]
    messages: list[str]


def gate(current: dict[str, Any], rows: Iterable[CaseRow], baseline_dir: Path,
         tolerance: float, allow_mismatch: bool) -> GateResult:
    """Compare a run with a baseline run: mean-score drop and cases that passed before.

    Both sides are read as rows (id, status, score), the baseline one line at a time.
    """
    base_summary = read_summary(baseline_dir)
    msgs = []
    mismatch = base_summary["signature"]["id"] != current["signature"]["id"]
    if mismatch:
        msgs.append(f"SIGNATURES DIFFER: baseline {base_summary['signature']['text']} "
                    f"vs this run "
                    f"{current['signature']['text']}; "
                    "scores are not comparable")
        if not allow_mismatch:
            raise InputError("refusing to compare runs with different signatures "
                             "(pass --allow-signature-mismatch to compare anyway): " + msgs[0],
                             path=baseline_dir)
    before = {r["id"]: CaseRow(r["id"], r["status"], r["score"])
              for r in iter_results(baseline_dir / RESULTS_FILE)}
    now = list(rows)
    both = [(before[r.id], r) for r in now if r.id in before and r.score is not None
            and before[r.id].score is not None]
    drop = None
    if both:
        # the same cases on both sides: a mean over different subsets would compare nothing
        drop = sum(b.score - n.score for b, n in both) / len(both)
    newly = [r for r in now if r.status in ("fail", "error", "unscored")
             and r.id in before and before[r.id].status == "pass"]
    nothing = not any(r.score is not None for r in now)
    ok = not newly and not nothing and (drop is None or drop <= tolerance)
    if nothing:
        msgs.append("no case was scored in this run: nothing to compare, the gate fails")
    if drop is not None and drop > tolerance:
        msgs.append(f"mean score over the {len(both)} cases scored in both runs dropped by "
                    f"{drop:.3f} (tolerance {tolerance:.3f})")
    for r in newly:
        # the evidence (flagged sentences, rules, fixes) is listed with the case in every report
        msgs.append(f"regression: case {r.id} passed in the baseline, now {r.status}")
    return GateResult(ok, mismatch, drop, newly, msgs)
