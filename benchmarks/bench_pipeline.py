"""End-to-end pair scoring at a fixed shape: a 600-word source and a 3-sentence output.

Prints pairs/s, peak resident memory and the share of time in each stage.
Run: .venv/bin/python benchmarks/bench_pipeline.py [--pairs 16]
(aim: >= 2 pairs/s and < 2 GB on 2 cores)
"""
from __future__ import annotations

import argparse
import resource
import time

from qacheck.pipeline import Checker

FACTS = [
    "The Port of Caldreth Authority handled {n} vessel calls in month {i}.",
    "Harbour master Ilse Marrow inspected berth {i} on a Monday.",
    "Container volume reached {n},200 units at the east quay.",
    "The board approved {n} new mooring bollards for the north basin.",
    "Pilot boat {i} returned to service after {n} days of maintenance.",
]


def source_text(words: int = 600) -> str:
    parts, i = [], 0
    while len(" ".join(parts).split()) < words:
        parts.append(FACTS[i % len(FACTS)].format(n=300 + i, i=i + 1))
        i += 1
    return " ".join(parts)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--pairs", type=int, default=16)
    args = ap.parse_args()
    src = source_text()
    outputs = [f"The Port of Caldreth Authority handled {300 + k} vessel calls in month {k + 1}. "
               f"Harbour master Ilse Marrow inspected berth {k + 2} on a Friday. "
               f"The board approved {k + 9} new cranes." for k in range(args.pairs)]
    checker = Checker()
    checker.check(src, outputs[0])  # load the models
    checker.stage_seconds.clear()
    t0 = time.perf_counter()
    checker.check_many([(src, o) for o in outputs])
    dt = time.perf_counter() - t0
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"source {len(src.split())} words, output 3 sentences, {args.pairs} pairs in one batch")
    print(f"{args.pairs / dt:.2f} pairs/s, peak RSS {peak_mb:.0f} MB")
    total = sum(checker.stage_seconds.values())
    for stage, sec in checker.stage_seconds.most_common():
        print(f"  {stage:<14} {100 * sec / total:5.1f}%  ({sec:.2f} s)")


if __name__ == "__main__":
    main()
