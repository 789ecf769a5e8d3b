"""A 200-case invented scenario set scored cold, then rescored warm from the result cache.

Prints cases/s for both and the speed-up (aim: the warm rerun >= 10x faster); ``--set``
times a scenario set of your own, e.g. the README's demo set.
Run: .venv/bin/python benchmarks/bench_nightly.py [--cases 200]
     .venv/bin/python benchmarks/bench_nightly.py --set scenarios/caldreth-port --outputs writer-v1
"""
from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

TOWNS = ["Brack", "Tarrow", "Orrin", "Felwick", "Caddow", "Vey", "Sallow", "Linton"]


def make_set(folder: Path, n: int) -> None:
    (folder / "outputs").mkdir(parents=True)
    (folder / "set.toml").write_text('name = "bench"\n')
    with open(folder / "cases.jsonl", "w") as cases, open(folder / "outputs" / "v1.jsonl", "w") as outs:
        for i in range(n):
            town = TOWNS[i % len(TOWNS)]
            src = (f"The {town} depot opened in {1950 + i % 60}. It employs {20 + i} people and "
                   f"runs {3 + i % 7} ferries. Its manager is Ada Vell{i}.")
            out = (f"The {town} depot opened in {1950 + i % 60}. "
                   f"It employs {20 + i + (i % 5 == 0)} people.")
            cases.write(json.dumps({"id": f"case-{i}", "source": src}) + "\n")
            outs.write(json.dumps({"id": f"case-{i}", "output": out}) + "\n")


def timed_run(set_dir: Path, outputs: str, results: Path, cache: Path) -> float:
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-m", "qacheck.cli", "run", str(set_dir), "--outputs", outputs,
                    "--results", str(results), "--cache", str(cache)], check=False,
                   capture_output=True)
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=200)
    ap.add_argument("--set", type=Path, help="score this scenario set instead of an invented one")
    ap.add_argument("--outputs", default="v1", help="its outputs version (with --set)")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        if args.set is None:
            make_set(tmp / "set", args.cases)
        set_dir = args.set or tmp / "set"
        n = sum(1 for line in (set_dir / "cases.jsonl").read_text().splitlines() if line.strip())
        cold = timed_run(set_dir, args.outputs, tmp / "r1", tmp / "cache.sqlite")
        warm = timed_run(set_dir, args.outputs, tmp / "r2", tmp / "cache.sqlite")
        print(f"{set_dir}: {n} cases")
        print(f"cold: {n / cold:.2f} cases/s ({cold:.1f} s, incl. start-up)")
        print(f"warm: {n / warm:.2f} cases/s ({warm:.1f} s, incl. start-up)")
        print(f"speed-up {cold / warm:.1f}x")


if __name__ == "__main__":
    main()
