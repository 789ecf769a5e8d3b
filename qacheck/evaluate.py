"""Evaluation of the shipped models: QA by the official SQuAD rules, QG by round trip.

QA figures follow the official SQuAD v1.1 script (exact match and token F1,
maximum over references, x100); with unanswerable questions present they
follow the SQuAD 2.0 convention (an empty prediction is right for an
unanswerable question), split into HasAns/NoAns, plus the ROC AUC of the
no-answer probability (scikit-learn).
"""
from __future__ import annotations

import random
import time
from pathlib import Path
from typing import Any

from qacheck.answer_match import best_over_references, exact_match, token_f1
from qacheck.config import Thresholds
from qacheck.models.qa import QAModel
from qacheck.models.qg import QGModel
from qacheck.train.data import QAExample, heldout, read_qa_file, split_sentences


def _sample(items: list, limit: int | None, seed: int = 0) -> list:
    if limit is None or limit >= len(items):
        return items
    return random.Random(seed).sample(items, limit)


def eval_qa(data: Path, limit: int | None = None, qa: QAModel | None = None,
            heldout_seed: int | None = None, progress=None) -> dict[str, Any]:
    """EM/F1 (x100) of the QA model on a SQuAD-style file.

    ``heldout_seed`` evaluates the held-out titles of a training file with
    their constructed unanswerable examples (the split ``qacheck train qa``
    used with that seed) instead of the file as it is.
    """
    from sklearn.metrics import roc_auc_score

    qa = qa or QAModel()
    examples: list[QAExample] = (heldout(data, heldout_seed) if heldout_seed is not None
                                 else read_qa_file(data))
    examples = _sample(examples, limit)
    thr = Thresholds.shipped().no_answer
    has_impossible = any(e.is_impossible for e in examples)
    t0 = time.time()
    answers = []
    for b in range(0, len(examples), 256):
        answers += qa.answer([(e.question, e.context) for e in examples[b:b + 256]])
        if progress:
            progress(min(b + 256, len(examples)), len(examples))
    elapsed = time.time() - t0
    em, f1, rows = [], [], []
    for e, a in zip(examples, answers):
        pred = a.text
        if has_impossible and a.no_answer_prob > thr:
            pred = ""
        if e.is_impossible:
            ok = float(pred == "")
            em.append(ok)
            f1.append(ok)
        else:
            em.append(best_over_references(exact_match, pred, list(e.answers)))
            f1.append(best_over_references(token_f1, pred, list(e.answers)))
        rows.append((e.is_impossible, a.no_answer_prob))
    out: dict[str, Any] = {"n": len(examples), "exact_match": 100 * sum(em) / max(1, len(em)),
                           "f1": 100 * sum(f1) / max(1, len(f1)),
                           "seconds": round(elapsed, 1),
                           "pairs_per_second": round(len(examples) / max(elapsed, 1e-9), 1)}
    if has_impossible:
        has = [i for i, e in enumerate(examples) if not e.is_impossible]
        no = [i for i, e in enumerate(examples) if e.is_impossible]
        out["HasAns_n"], out["NoAns_n"] = len(has), len(no)
        out["HasAns_exact_match"] = 100 * sum(em[i] for i in has) / max(1, len(has))
        out["HasAns_f1"] = 100 * sum(f1[i] for i in has) / max(1, len(has))
        out["NoAns_accuracy"] = 100 * sum(em[i] for i in no) / max(1, len(no))
        if has and no:
            out["no_answer_roc_auc"] = float(roc_auc_score([r[0] for r in rows], [r[1] for r in rows]))
        out["no_answer_threshold"] = thr
    return out


def qg_items(data: Path, limit: int | None, seed: int = 0) -> list[tuple[str, int, int, str]]:
    """(sentence, span start, span end, reference question) from a SQuAD-style file."""
    items = []
    for e in read_qa_file(data):
        if e.is_impossible or e.answer_starts[0] < 0:
            continue
        a0, a1 = e.answer_starts[0], e.answer_starts[0] + len(e.answers[0])
        for s, t in split_sentences(e.context):
            if s <= a0 and a1 <= t:
                items.append((e.context[s:t], a0 - s, a1 - s, e.question))
                break
    return _sample(items, limit, seed)


def eval_qg(data: Path, limit: int | None = None, qa: QAModel | None = None,
            qg: QGModel | None = None) -> dict[str, Any]:
    """Round-trip answerability of the drafted questions, and BLEU-4 / ROUGE-L of seq2seq ones.

    BLEU-4 is sacrebleu's corpus BLEU with ``lowercase=True`` (the drafter's
    vocabulary is uncased, so case would only measure detokenisation);
    ROUGE-L is rouge-score's mean F-measure with stemming.
    """
    import sacrebleu
    from rouge_score import rouge_scorer

    from qacheck.drafting import keeps_to_sentence, rule_question, span_at

    qa = qa or QAModel()
    qg = qg if qg is not None else (QGModel() if QGModel.available() else None)
    items = qg_items(data, limit)
    thr = Thresholds.shipped()
    t0 = time.time()
    model_qs = qg.generate([(s, a, b) for s, a, b, _ in items]) if qg else [""] * len(items)
    qg_seconds = time.time() - t0
    from qacheck.segment import nlp

    docs = nlp().pipe([s for s, *_ in items], batch_size=64)
    rule_qs = [rule_question(s, span_at(doc, a, b))
               for doc, (s, a, b, _) in zip(docs, items)]

    def round_trip(questions: list[str]) -> list[bool]:
        asked = [i for i, q in enumerate(questions) if q]
        answers = qa.answer([(questions[i], items[i][0]) for i in asked])
        ok = [False] * len(items)
        for i, ans in zip(asked, answers):
            s, a, b, _ = items[i]
            ok[i] = (ans.has_answer and ans.no_answer_prob <= thr.no_answer
                     and token_f1(ans.text, s[a:b]) >= 0.5)
        return ok

    rt_model, rt_rules = round_trip(model_qs), round_trip(rule_qs)
    # the pipeline's choice: the rule draft, else a seq2seq draft that round-trips, does not
    # give the span away and keeps to its sentence
    fallback = [m and it[0][it[1]:it[2]].lower() not in q.lower() and keeps_to_sentence(q, it[0])
                for m, q, it in zip(rt_model, model_qs, items)]
    final = [r or f for r, f in zip(rt_rules, fallback)]
    refs = [it[3] for it in items]
    n = max(1, len(items))
    out: dict[str, Any] = {
        "n": len(items),
        "round_trip": sum(final) / n,
        "round_trip_rules": sum(rt_rules) / n,
        "share_seq2seq": sum(f and not r for r, f in zip(rt_rules, fallback)) / n,
    }
    if qg:
        scorer = rouge_scorer.RougeScorer(["rougeL"], use_stemmer=True)
        out["round_trip_model"] = sum(rt_model) / n
        out["bleu4"] = sacrebleu.corpus_bleu(model_qs, [refs], lowercase=True).score
        out["rougeL"] = 100 * sum(scorer.score(r, h)["rougeL"].fmeasure
                                  for r, h in zip(refs, model_qs)) / n
        out["questions_per_second"] = round(len(items) / max(qg_seconds, 1e-9), 1)
        out["examples"] = [{"sentence": it[0], "answer": it[0][it[1]:it[2]], "reference": it[3],
                            "seq2seq": m, "rules": r} for it, m, r in
                           list(zip(items, model_qs, rule_qs))[:5]]
    else:
        out["round_trip_model"] = None
        out["bleu4"] = None
        out["rougeL"] = None
    return out



def eval_nli(data: Path, limit: int | None = None, nli=None, heldout_only: bool = False
             ) -> dict[str, Any]:
    """Accuracy, balanced accuracy and per-class recall of the entailment reader on one file.

    Reads the JSON Lines layout of ``../shared/data/nli/``.  A three-way file
    is scored on the three labels; a two-way file on entailed vs the rest
    (the reader's "contradicted" and "not supported" both count as
    ``not_entailment``).  ``heldout_only`` keeps the pairs whose premise the
    trainer held out (``qacheck.train.nli.heldout_premise``).
    """
    from qacheck.models.nli import NLIModel
    from qacheck.train.nli import LABELS, NOT_ENTAILED, heldout_premise, read_nli_file

    nli = nli or NLIModel()
    pairs = read_nli_file(data)
    if heldout_only:
        pairs = [p for p in pairs if heldout_premise(p.premise)]
    pairs = _sample(pairs, limit)
    readings = nli.read([(p.premise, p.hypothesis) for p in pairs])
    two_way = any(p.label == NOT_ENTAILED for p in pairs)
    names = ("entailed", "not_entailed") if two_way else LABELS
    truth, pred = [], []
    for p, r in zip(pairs, readings):
        probs = (r.entailed, r.contradicted, r.not_supported)
        guess = max(range(3), key=lambda i: probs[i])
        if two_way:
            truth.append(0 if p.label == 0 else 1)
            pred.append(0 if guess == 0 else 1)
        else:
            truth.append(p.label)
            pred.append(guess)
    recall = {names[c]: sum(t == c and q == c for t, q in zip(truth, pred)) / n
              for c in range(len(names)) if (n := sum(t == c for t in truth))}
    accuracy = sum(t == q for t, q in zip(truth, pred)) / len(truth) if truth else None
    return {"file": data.name, "n": len(truth), "labels": "two-way" if two_way else "three-way",
            "accuracy": accuracy,
            "balanced_accuracy": sum(recall.values()) / len(recall) if recall else None,
            "recall": recall}
