"""Seq2seq drafter throughput: questions per second, batched beam search (beams 4).

Run: .venv/bin/python benchmarks/bench_qg.py   (aim: >= 20 questions/s on 2 cores)
"""
from __future__ import annotations

import time

from qacheck.drafting import rule_question
from qacheck.models.qg import QGModel
from qacheck.segment import segment


def main() -> None:
    text = ("Harbour master Ilse Marrow opened the north basin in April 2025. The Grell Quay "
            "terminal can board 900 passengers an hour. Repairs to the crane rail at berth 7 will "
            "cost 80,000 crowns. The mobile library visits Ashgrove every second Thursday.")
    items = [(s.text, sp.start, sp.end) for s in segment(text) for sp in s.spans] * 8
    if not QGModel.available():
        print("no seq2seq drafter shipped")
    else:
        qg = QGModel()
        qg.generate(items[:4])
        t0 = time.perf_counter()
        qg.generate(items)
        dt = time.perf_counter() - t0
        print(f"seq2seq: {len(items) / dt:.1f} questions/s ({len(items)} questions)")
    sents = [(s, sp) for s in segment(text) for sp in s.spans] * 8
    t0 = time.perf_counter()
    for s, sp in sents:
        rule_question(s.text, sp)
    print(f"rules: {len(sents) / (time.perf_counter() - t0):.0f} questions/s")


if __name__ == "__main__":
    main()
