"""Recall of the source retriever: does a question's top-k windows hold its answer?

Source = a whole SQuAD v1.1 dev article (Rajpurkar et al. 2016; its paragraphs joined), so
sources run to thousands of words.  Two kinds of question:

* ``squad``: the dataset's own question, written by a person (paraphrased: a hard case
  for a lexical ranker);
* ``in_situ``: the answer's sentence with the answer replaced by "what", the shape of
  qacheck's rule drafts, which repeat their sentence's words.

Prints recall@k for each window size and the mean share of the article the top k windows
cover (what the QA model reads instead of the whole source).  With ``--qa N``, N questions
are also answered by the QA model on the whole article and on the retrieved passage
(``qacheck.retrieval.passage``): token F1, the share answered "the source does not say"
(no-answer probability above the shipped threshold; every question here has an answer)
and the seconds each way.
Run: .venv/bin/python benchmarks/bench_retrieval.py [--data ../shared/data/qa/squad-v1.1-dev.json]
     [--qa 300]
"""
from __future__ import annotations

import argparse
import json
import random
from pathlib import Path

from qacheck.retrieval import best_windows
from qacheck.segment import sentence_bounds

KS = (1, 2, 3, 4, 6, 8)
SIZES = (60, 120, 200)


def articles(path: Path):
    """(source, [(question, in-situ question, answer start, answer end)]) per article."""
    for art in json.loads(path.read_text(encoding="utf-8"))["data"]:
        parts, qs, offset = [], [], 0
        for para in art["paragraphs"]:
            ctx = para["context"]
            bounds = sentence_bounds(ctx)
            for qa in para["qas"]:
                a = qa["answers"][0]
                s, e = a["answer_start"], a["answer_start"] + len(a["text"])
                sent = next(((x, y) for x, y in bounds if x <= s < y), (0, len(ctx)))
                in_situ = (ctx[sent[0]:s] + "what" + ctx[e:sent[1]]).strip()
                qs.append((qa["question"], in_situ, offset + s, offset + e))
            parts.append(ctx)
            offset += len(ctx) + 2
        yield "\n\n".join(parts), qs


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--data", type=Path, default=Path("../shared/data/qa/squad-v1.1-dev.json"))
    ap.add_argument("--per-article", type=int, default=40)
    ap.add_argument("--qa", type=int, default=0, help="also answer N questions both ways")
    args = ap.parse_args()
    if args.qa:
        answer_both_ways(args.data, args.qa)
    rng = random.Random(0)
    hits = {(kind, size, k): 0 for kind in ("squad", "in_situ") for size in SIZES for k in KS}
    covered = {(size, k): 0.0 for size in SIZES for k in KS}
    n = 0
    words = []
    for source, qs in articles(args.data):
        words.append(len(source.split()))
        for q, in_situ, s, e in rng.sample(qs, min(args.per_article, len(qs))):
            n += 1
            for size in SIZES:
                for kind, query in (("squad", q), ("in_situ", in_situ)):
                    ranked = best_windows(source, query, k=max(KS), size=size)
                    for k in KS:
                        hits[kind, size, k] += any(w.start <= s and e <= w.end for w in ranked[:k])
                        if kind == "squad":
                            read = set()
                            for w in ranked[:k]:
                                read.update(range(w.start, w.end))
                            covered[size, k] += len(read) / len(source)
    print(f"{n} questions from {len(words)} articles, mean article {sum(words) / len(words):.0f} "
          f"words (min {min(words)}, max {max(words)})")
    print("window  k   recall(squad)  recall(in-situ)  share of article read")
    for size in SIZES:
        for k in KS:
            print(f"{size:6d} {k:2d}   {hits['squad', size, k] / n:13.3f}  "
                  f"{hits['in_situ', size, k] / n:15.3f}  {covered[size, k] / n:21.3f}")


def answer_both_ways(data: Path, n: int) -> None:
    """QA on the whole article against QA on the retrieved passage, for n questions."""
    import time

    from qacheck.answer_match import token_f1
    from qacheck.config import Thresholds
    from qacheck.models.qa import QAModel
    from qacheck.retrieval import passage

    rng = random.Random(1)
    items = [(source, q, source[s:e]) for source, qs in articles(data) for q, _, s, e in qs]
    items = rng.sample(items, min(n, len(items)))
    qa, thr = QAModel(), Thresholds.shipped().no_answer
    qa.answer([("warm up?", "warm up")])
    for name, context in (("whole article", lambda src, q: src),
                          ("retrieved passage", lambda src, q: passage(src, q).text)):
        t0 = time.perf_counter()
        answers = qa.answer([(q, context(src, q)) for src, q, _ in items])
        dt = time.perf_counter() - t0
        f1 = sum(token_f1(a.text, gold) for a, (_, _, gold) in zip(answers, items)) / len(items)
        none = sum(a.no_answer_prob > thr for a in answers) / len(items)
        print(f"{name:<18} F1 {100 * f1:5.1f}  'source does not say' {none:.3f}  "
              f"{dt:6.1f} s for {len(items)} questions")


if __name__ == "__main__":
    main()
