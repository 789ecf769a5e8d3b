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
from collections.abc import Callable, Iterator
from concurrent.futures import ProcessPoolExecutor
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from qacheck.cache import ResultCache, cache_key
from qacheck.config import Thresholds
from qacheck.errors import InputError
from qacheck.results import FLAGGED
from qacheck.scenarios import Case, ScenarioSet

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


# --- scoring with cache and workers ---------------------------------------------------

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


class Scorer:
    """Scores pairs through the cache; new pairs go to the checker in batches.

    ``workers`` > 1 starts that many processes, each with its own models and
    an equal share of the CPU threads.
    """

    def __init__(self, thresholds: Thresholds, cache: ResultCache | None, workers: int = 1,
                 batch_size: int = 1, checker=None) -> None:
        from qacheck.pipeline import Checker

        self.thresholds = thresholds
        self.checker = checker or Checker(thresholds, store=cache)
        self.cache, self.workers, self.batch_size = cache, max(1, workers), batch_size
        self.model = self.checker.model
        self.signature = self.checker.signature

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
        batches = [todo[b:b + self.batch_size] for b in range(0, len(todo), self.batch_size)]
        if self.workers == 1:
            done = ((idx, [r.to_dict(include_texts=True)
                           for r in self.checker.check_many([pairs[i] for i in idx])])
                    for idx in batches)
            yield from self._store(done, pairs)
            return
        threads = max(1, (os.cpu_count() or 1) // self.workers)
        # spawn, not fork: forking a process whose OpenMP threads are running can hang
        with ProcessPoolExecutor(self.workers, mp_context=multiprocessing.get_context("spawn"),
                                 initializer=_worker_init,
                                 initargs=(self.thresholds.as_dict(), threads,
                                           str(self.cache.path) if self.cache else None)) as pool:
            futures = [(idx, pool.submit(_worker_score, [pairs[i] for i in idx])) for idx in batches]
            yield from self._store(((idx, f.result()) for idx, f in futures), pairs)

    def _store(self, done, pairs):
        for idx, results in done:
            for i, res in zip(idx, results):
                if self.cache:
                    self.cache.put(self.key(*pairs[i]), res)
                yield i, res


# --- the run --------------------------------------------------------------------------

@dataclass
class RunOutcome:
    summary: dict[str, Any]
    records: list[dict[str, Any]] = field(default_factory=list)


def _read_results(path: Path) -> list[dict[str, Any]]:
    """Valid result lines of a results file; a torn last line (killed run) is dropped."""
    if not path.exists():
        return []
    rows = []
    for line in path.read_text(encoding="utf-8", errors="replace").splitlines():
        try:
            rec = json.loads(line)
        except json.JSONDecodeError:
            continue
        if isinstance(rec, dict) and "id" in rec:
            rows.append(rec)
    return rows


def load_results(folder: str | Path) -> tuple[dict[str, Any], list[dict[str, Any]]]:
    """(summary, records) of a finished results folder, with clear errors when it is not one."""
    folder = Path(folder)
    summary_path = folder / SUMMARY_FILE
    if not summary_path.exists():
        raise InputError("not a results folder (no summary.json): run `qacheck run` first",
                         path=folder)
    try:
        summary = json.loads(summary_path.read_text(encoding="utf-8"))
    except json.JSONDecodeError as exc:
        raise InputError(f"not valid JSON ({exc.msg})", path=summary_path, line=exc.lineno) from exc
    return summary, _read_results(folder / RESULTS_FILE)


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
    expectations.
    """
    results_dir.mkdir(parents=True, exist_ok=True)
    with folder_lock(results_dir):
        return _run_locked(sset, results_dir, scorer, progress)


def _run_locked(sset: ScenarioSet, results_dir: Path, scorer: Scorer,
                progress: Callable[[int, int], None] | None) -> RunOutcome:
    path = results_dir / RESULTS_FILE
    keys = {c.id: scorer.key(c.source, c.output or "") for c in sset.cases}
    by_id = {c.id: c for c in sset.cases}
    previous = {}
    for r in _read_results(path):
        if r.get("key") == keys.get(r["id"]) and r.get("result") is not None:
            status, reasons = case_status(by_id[r["id"]], r["result"])
            previous[r["id"]] = {**r, "status": status, "reasons": reasons,
                                 "expect": by_id[r["id"]].expect}
    _write_atomic(path, "".join(json.dumps(previous[c.id], ensure_ascii=False) + "\n"
                                for c in sset.cases if c.id in previous))
    t0 = time.time()
    records = {cid: previous[cid] for cid in previous}
    done = len(records)
    total = len(sset.cases)
    if progress:
        progress(done, total)
    with open(path, "a", encoding="utf-8") as fh:
        def write(rec: dict[str, Any]) -> None:
            nonlocal done
            fh.write(json.dumps(rec, ensure_ascii=False) + "\n")
            fh.flush()
            os.fsync(fh.fileno())
            records[rec["id"]] = rec
            done += 1
            if progress:
                progress(done, total)

        todo = [c for c in sset.cases if c.id not in records]
        for c in todo:
            if c.error:
                status, reasons = case_status(c, None)
                write({"id": c.id, "key": keys[c.id], "status": status, "reasons": reasons,
                       "score": None, "label": None, "tags": c.tags, "result": None})
        scoreable = [c for c in todo if not c.error]
        for i, res in scorer.score([(c.source, c.output) for c in scoreable]):
            c = scoreable[i]
            status, reasons = case_status(c, res)
            write({"id": c.id, "key": keys[c.id], "status": status, "reasons": reasons,
                   "score": res["score"], "label": res["label"], "tags": c.tags,
                   "expect": c.expect, "result": res})
    ordered = [records[c.id] for c in sset.cases if c.id in records]
    summary = summarise(sset, ordered, scorer.signature, time.time() - t0)
    _write_atomic(results_dir / SUMMARY_FILE, json.dumps(summary, indent=2, ensure_ascii=False))
    return RunOutcome(summary, ordered)


def summarise(sset: ScenarioSet, records: list[dict[str, Any]], signature: dict[str, Any],
              seconds: float) -> dict[str, Any]:
    """Set-level figures: counts by status, mean score, flagged sentences, input problems."""
    scores = [r["score"] for r in records if r["score"] is not None]
    status_counts: dict[str, int] = {}
    sentence_counts: dict[str, int] = {}
    for r in records:
        status_counts[r["status"]] = status_counts.get(r["status"], 0) + 1
        for s in (r["result"] or {}).get("sentences", []):
            sentence_counts[s["label"]] = sentence_counts.get(s["label"], 0) + 1
    return {
        "set": sset.name, "description": sset.description, "outputs": sset.outputs_name,
        "set_folder": str(sset.folder), "signature": signature,
        "cases": len(records), "status": status_counts, "sentences": sentence_counts,
        "mean_score": sum(scores) / len(scores) if scores else None,
        "problems": [str(p) for p in sset.problems], "seconds": round(seconds, 2),
        "warned_cases": [r["id"] for r in records if (r["result"] or {}).get("warnings")],
    }


# --- the baseline gate ----------------------------------------------------------------

@dataclass
class GateResult:
    ok: bool
    signature_mismatch: bool
    mean_drop: float | None
    newly_failing: list[dict[str, Any]]
    messages: list[str]


def gate(current: dict[str, Any], records: list[dict[str, Any]], baseline_dir: Path,
         tolerance: float, allow_mismatch: bool) -> GateResult:
    """Compare a run with a baseline run: mean-score drop and cases that passed before."""
    base_summary, base_records = load_results(baseline_dir)
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
    before = {r["id"]: r for r in base_records}
    now = {r["id"]: r for r in records}
    both = [cid for cid in now if cid in before and now[cid]["score"] is not None
            and before[cid]["score"] is not None]
    drop = None
    if both:
        # the same cases on both sides: a mean over different subsets would compare nothing
        drop = (sum(before[c]["score"] for c in both) - sum(now[c]["score"] for c in both)) / len(both)
    newly = [r for r in records if r["status"] in ("fail", "error", "unscored")
             and before.get(r["id"], {}).get("status") == "pass"]
    nothing = not any(r["score"] is not None for r in records)
    ok = not newly and not nothing and (drop is None or drop <= tolerance)
    if nothing:
        msgs.append("no case was scored in this run: nothing to compare, the gate fails")
    if drop is not None and drop > tolerance:
        msgs.append(f"mean score over the {len(both)} cases scored in both runs dropped by "
                    f"{drop:.3f} (tolerance {tolerance:.3f})")
    for r in newly:
        # the evidence (flagged sentences, rules, fixes) is listed with the case in every report
        msgs.append(f"regression: case {r['id']} passed in the baseline, now {r['status']}")
    return GateResult(ok, mismatch, drop, newly, msgs)
