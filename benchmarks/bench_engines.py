"""Engines side by side, and the driver's memory on a large cached set.

Prints, for an invented set scored without the cache:
  - cases/s of the local engine with 1 and 2 workers and of the Ray engine with 1 and 2 actors
    (a Ray cluster started here with Ray's test utility: one node, loopback only);
  - the time from a cold cluster (nothing started) to the first result written;
then the driver's peak memory (max RSS) when a set of ``--large`` cases (default 100,000) is
served from the cache: real results of ``--distinct`` pairs (default 100), each scored once,
reused under distinct case ids; the peak memory of `qacheck compare` on that results folder;
and the driver's peak memory on the demo set with each engine.

Run: .venv/bin/python benchmarks/bench_engines.py [--cases 60] [--large 100000]
Nothing else should be running; figures vary by a few percent between runs.
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from bench_nightly import TOWNS

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "scenarios" / "caldreth-port"
LOOPBACK = "127.0.0.2"
#: runs a command and prints its exit status and its peak resident memory (KiB)
PEAK = ("import resource, subprocess, sys; rc = subprocess.run(sys.argv[1:]).returncode; "
        "print(rc, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)")


def pair(i: int) -> tuple[str, str]:
    """An invented depot report (about 110 words) and a five-sentence summary of it with an
    error in every fifth: results of about the size of the demo set's."""
    town, other = TOWNS[i % len(TOWNS)], TOWNS[(i + 3) % len(TOWNS)]
    year, staff, ferries = 1950 + i % 60, 20 + i, 3 + i % 7
    src = (f"The {town} depot opened in {year} on the east bank of the river. It employs {staff} "
           f"people and runs {ferries} ferries to {other} and back. Its manager is Ada Vell{i}, "
           f"who joined the depot in {year + 20}. The depot handled {1000 + 37 * i} crossings "
           f"last year, up from {900 + 31 * i} the year before. A new slipway costing "
           f"{2 + i % 9} million crowns is due to open in March. The night service was cut "
           f"in {year + 40} after a fall in passengers. Tickets are sold at the quay and on "
           f"board. The depot's oldest ferry, the Wren, was built in {year - 5}.")
    staff_out = staff + (i % 5 == 0)
    out = (f"The {town} depot opened in {year} and employs {staff_out} people. It runs "
           f"{ferries} ferries to {other}. Ada Vell{i} manages the depot. It handled "
           f"{1000 + 37 * i} crossings last year. A new slipway is due to open in March.")
    return src, out


def make_set(folder: Path, n: int, distinct: int) -> Path:
    """A set of ``n`` cases cycling through ``distinct`` pairs, written line by line."""
    (folder / "outputs").mkdir(parents=True)
    (folder / "set.toml").write_text('name = "bench"\n')
    with open(folder / "cases.jsonl", "w") as cases, open(folder / "outputs" / "v1.jsonl", "w") as outs:
        for i in range(n):
            src, out = pair(i % distinct)
            cases.write(json.dumps({"id": f"case-{i}", "source": src}) + "\n")
            outs.write(json.dumps({"id": f"case-{i}", "output": out}) + "\n")
    return folder


def run(set_dir: Path, results: Path, *extra: str, outputs: str = "v1") -> dict:
    """One `qacheck run` in its own process: wall time, time to the first result line, peak RSS."""
    args = [sys.executable, "-c", PEAK, sys.executable, "-m", "qacheck.cli", "run", str(set_dir),
            "--outputs", outputs, "--results", str(results), *extra]
    t0 = time.perf_counter()
    # the run's output goes to a file: a pipe nobody reads while it runs would fill and stall it
    with tempfile.TemporaryFile("w+") as log:
        proc = subprocess.Popen(args, stdout=log, stderr=subprocess.DEVNULL, text=True)
        first = None
        lines = results / "results.jsonl"
        while proc.poll() is None:
            if first is None and lines.exists() and lines.stat().st_size > 0:
                first = time.perf_counter() - t0
            time.sleep(0.02)
        wall = time.perf_counter() - t0
        log.seek(0)
        rc, rss = log.read().split()[-2:]
    n = sum(1 for _ in open(lines)) if lines.exists() else 0
    return {"wall": wall, "first": first or wall, "rss_mb": int(rss) / 1024, "cases": n,
            "rc": int(rc)}


def peak(cmd: list[str]) -> tuple[int, float]:
    """Exit status and peak RSS (MB) of a command run in its own process."""
    out = subprocess.run([sys.executable, "-c", PEAK, *cmd], stdout=subprocess.PIPE,
                         stderr=subprocess.DEVNULL, text=True).stdout.split()
    return int(out[-2]), int(out[-1]) / 1024


def line(name: str, r: dict) -> str:
    rate = r["cases"] / r["wall"]
    steady = (r["cases"] - 1) / max(1e-9, r["wall"] - r["first"])
    return (f"{name:<22} {rate:6.2f} cases/s overall, {steady:6.2f} after the first result; "
            f"first result after {r['first']:5.1f} s; driver peak {r['rss_mb']:6.0f} MB")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=60, help="cases of the engine comparison")
    ap.add_argument("--large", type=int, default=100_000, help="cases of the cached-set run")
    ap.add_argument("--distinct", type=int, default=100, help="distinct pairs behind them")
    ap.add_argument("--skip-engines", action="store_true")
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        small = make_set(tmp / "small", args.cases, args.cases)
        no_cache = ("--no-cache", "--batch-size", "1")
        if not args.skip_engines:
            print(f"{args.cases} invented cases, no cache, {os.cpu_count()} CPUs")
            print(line("local, 1 worker", run(small, tmp / "l1", *no_cache)))
            print(line("local, 2 workers", run(small, tmp / "l2", *no_cache, "--workers", "2")))
            from ray.cluster_utils import Cluster

            for actors in (1, 2):
                t0 = time.perf_counter()
                cluster = Cluster(initialize_head=True, head_node_args={
                    "num_cpus": os.cpu_count(), "node_ip_address": LOOPBACK,
                    "include_dashboard": False})
                up = time.perf_counter() - t0
                ray_args = ("--engine", "ray", "--ray-address", cluster.address,
                            "--actors", str(actors))
                try:
                    r = run(small, tmp / f"ray{actors}", *no_cache, *ray_args)
                    demo_r = run(DEMO, tmp / f"demo-ray{actors}", *no_cache, *ray_args,
                                 outputs="writer-v1")
                finally:
                    cluster.shutdown()
                print(line(f"ray, {actors} actor{'s' * (actors > 1)}", r)
                      + f"; cold cluster to first result {up + r['first']:.1f} s "
                        f"(cluster start {up:.1f} s)")
                print(f"{'':<22} demo set: driver peak {demo_r['rss_mb']:.0f} MB")
        big = make_set(tmp / "big", args.large, args.distinct)
        cache = tmp / "cache.sqlite"
        t0 = time.perf_counter()
        run(make_set(tmp / "seed", args.distinct, args.distinct), tmp / "seed-r", "--cache",
            str(cache))
        print(f"\n{args.distinct} distinct pairs scored once into the cache: "
              f"{time.perf_counter() - t0:.1f} s")
        r = run(big, tmp / "big-r", "--cache", str(cache))
        print(f"{args.large:,} cached cases: {r['wall']:.1f} s ({r['cases'] / r['wall']:.0f} cases/s), "
              f"driver peak {r['rss_mb']:.0f} MB, exit {r['rc']}; results.jsonl "
              f"{(tmp / 'big-r' / 'results.jsonl').stat().st_size / 2**20:.0f} MiB, report.html "
              f"{(tmp / 'big-r' / 'report.html').stat().st_size / 2**20:.1f} MiB")
        t0 = time.perf_counter()
        rc, rss = peak([sys.executable, "-m", "qacheck.cli", "compare", str(tmp / "big-r"),
                        str(tmp / "big-r"), "--format", "json,html", "--out",
                        str(tmp / "cmp.json")])
        print(f"compare of those {args.large:,} cases with themselves (json and html): "
              f"{time.perf_counter() - t0:.1f} s, peak {rss:.0f} MB, exit {rc}")
        r = run(DEMO, tmp / "demo-r", "--no-cache", outputs="writer-v1")
        print(f"demo set, local engine (the models load in the driver): driver peak "
              f"{r['rss_mb']:.0f} MB")


if __name__ == "__main__":
    main()
