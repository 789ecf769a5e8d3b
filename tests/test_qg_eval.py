"""The QG evaluation harness: BLEU-4 and ROUGE-L agree with independent implementations.

BLEU-4 is checked against NLTK's corpus BLEU (an implementation of Papineni et
al. 2002 independent of the sacrebleu the harness calls) on the same 13a
tokens with the same exponential smoothing (Chen and Cherry 2014, method 3);
ROUGE-L against Google's rouge-score.  The drafter is a stand-in that returns
fixed strings, so the check is on the harness, not on a model.
"""
from __future__ import annotations

import json

import pytest
from nltk.translate.bleu_score import SmoothingFunction, corpus_bleu
from rouge_score import rouge_scorer
from sacrebleu.tokenizers.tokenizer_13a import Tokenizer13a

from qacheck.evaluate import eval_qg, qg_items


class FixedDrafter:
    """Returns a fixed question per item: the reference with its first word dropped."""

    def __init__(self, items):
        self.questions = [" ".join(ref.split()[1:]) + "?" for *_, ref in items]

    def generate(self, items):
        return list(self.questions)


def _squad_file(tmp_path):
    paras = []
    facts = [("The Brack depot opened in 1962.", "1962", "When did the Brack depot open?"),
             ("Ada Vell managed the depot for ten years.", "Ada Vell", "Who managed the depot?"),
             ("The depot has 40 ferries.", "40", "How many ferries does the depot have?")]
    for i, (ctx, ans, q) in enumerate(facts):
        paras.append({"context": ctx, "qas": [{"id": str(i), "question": q, "answers": [
            {"text": ans, "answer_start": ctx.index(ans)}]}]})
    path = tmp_path / "mini-squad.json"
    path.write_text(json.dumps({"version": "1.1", "data": [{"title": "t", "paragraphs": paras}]}))
    return path


def test_bleu_and_rouge_match_reference_libraries(tmp_path, qa_model):
    path = _squad_file(tmp_path)
    items = qg_items(path, None)
    drafter = FixedDrafter(items)
    res = eval_qg(path, qa=qa_model, qg=drafter)
    refs = [it[3] for it in items]
    tok = Tokenizer13a()
    expected_bleu = 100 * corpus_bleu([[tok(r.lower()).split()] for r in refs],
                                      [tok(h.lower()).split() for h in drafter.questions],
                                      smoothing_function=SmoothingFunction().method3)
    assert res["bleu4"] == pytest.approx(expected_bleu, abs=1e-9)
    scorer = rouge_scorer.RougeScorer(["rougeL"], use_stemmer=True)
    expected_rouge = 100 * sum(scorer.score(r, h)["rougeL"].fmeasure
                               for r, h in zip(refs, drafter.questions)) / len(refs)
    assert abs(res["rougeL"] - expected_rouge) < 1e-9
    assert res["n"] == 3
    assert res["round_trip"] >= res["round_trip_rules"]
