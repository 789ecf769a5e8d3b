"""End-to-end pair scoring at a fixed shape: a 600-word source and a 3-sentence output.

Prints pairs/s, peak resident memory and the share of time in each stage; with
``--scaling``, the same outputs against a 120- and a 6,000-word source.
Run: .venv/bin/python benchmarks/bench_pipeline.py [--pairs 16] [--scaling]
     .venv/bin/python benchmarks/bench_pipeline.py --pairs 1 --sentences 60   (a long output)
(aims: >= 4 pairs/s on 2 cores; a 6,000-word source <= 2.5x a 120-word one; a 60-sentence
output under 2 minutes and 1.5 GB)
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


def outputs_for(pairs: int, sentences: int) -> list[str]:
    """``pairs`` outputs of ``sentences`` sentences each, about the invented port."""
    lines = ["The Port of Caldreth Authority handled {n} vessel calls in month {k}.",
             "Harbour master Ilse Marrow inspected berth {k} on a Friday.",
             "The board approved {n} new cranes."]
    return [" ".join(lines[j % 3].format(n=300 + p + j, k=p + j + 1) for j in range(sentences))
            for p in range(pairs)]


def measure(checker: Checker, src: str, outputs: list[str]) -> tuple[float, float]:
    """(seconds, peak RSS in MB so far) for one batch of pairs."""
    checker.stage_seconds.clear()
    t0 = time.perf_counter()
    checker.check_many([(src, o) for o in outputs])
    return time.perf_counter() - t0, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--pairs", type=int, default=16)
    ap.add_argument("--source-words", type=int, default=600)
    ap.add_argument("--sentences", type=int, default=3, help="sentences per output")
    ap.add_argument("--scaling", action="store_true",
                    help="also: the same outputs against a 120- and a 6,000-word source")
    args = ap.parse_args()
    checker = Checker()
    src = source_text(args.source_words)
    outputs = outputs_for(args.pairs, args.sentences)
    # load the models and meet the shapes once (as the previous releases measured: one pair)
    checker.check(src, outputs[0])
    dt, peak = measure(checker, src, outputs)
    print(f"source {len(src.split())} words, output {args.sentences} sentences, "
          f"{args.pairs} pairs in one batch")
    print(f"{args.pairs / dt:.2f} pairs/s ({dt:.1f} s), peak RSS {peak:.0f} MB")
    total = sum(checker.stage_seconds.values())
    for stage, sec in checker.stage_seconds.most_common():
        print(f"  {stage:<14} {100 * sec / total:5.1f}%  ({sec:.2f} s)")
    if args.scaling:
        small, _ = measure(checker, source_text(120), outputs)
        large, peak = measure(checker, source_text(6000), outputs)
        print(f"120-word source {small:.1f} s, 6,000-word source {large:.1f} s: "
              f"{large / small:.2f}x (aim <= 2.5x), peak RSS {peak:.0f} MB")


if __name__ == "__main__":
    main()
