"""QA throughput: (question, 384-token context) pairs per second, batched, bf16 vs fp32.

Run: .venv/bin/python benchmarks/bench_qa.py [--pairs 128]
Prints figures only; targets live in README (aim: >= 40 pairs/s in bf16 on 2 cores).
"""
from __future__ import annotations

import argparse
import time

import torch

from qacheck.models.qa import QAModel
from qacheck.models.runtime import cpu_has_bf16


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--pairs", type=int, default=128)
    args = ap.parse_args()
    sentence = ("The Caldreth harbour board met on a Tuesday to review berth fees, dredging "
                "schedules and the pilot rota for the coming season. ")
    qa = QAModel()
    qa._load()
    ctx_ids = qa._tok(sentence * 40)["input_ids"][1:360]
    context = qa._tok.decode(ctx_ids)
    pairs = [(f"What did the board review in meeting {i}?", context) for i in range(args.pairs)]
    print(f"threads {torch.get_num_threads()}, native bf16: {cpu_has_bf16()}, "
          f"window {qa.max_len} tokens, {args.pairs} pairs")
    for bf16 in (True, False):
        qa.bf16 = bf16
        qa.answer(pairs[:8])  # warm-up
        t0 = time.perf_counter()
        qa.answer(pairs)
        dt = time.perf_counter() - t0
        print(f"{'bf16' if bf16 else 'fp32'}: {args.pairs / dt:.1f} pairs/s")


if __name__ == "__main__":
    main()
