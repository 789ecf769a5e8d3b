"""Train the seq2seq question drafter: a BERT-to-BERT encoder-decoder from all-MiniLM-L6-v2.

Encoder and decoder both start from the same checkpoint (the warm start of
Rothe, Narayan and Severyn 2020); only the decoder's cross-attention is new.
The stacks are kept separate: transformers 5 no longer ties them on request,
and the 49M parameters still train at about half a second a batch here.  The
input is the answer span, then the sentence that holds it with the span
between marker tokens, so copying the rest of the sentence is easy for the
decoder, and the loss is label-smoothed, which steadies the new
cross-attention early in training.
"""
from __future__ import annotations

import re
import time
from pathlib import Path
from typing import Any

import torch

from qacheck.qg_format import HL_CLOSE, HL_OPEN, qg_input
from qacheck.train.data import answer_sentence, is_heldout_title, read_qa_file
from qacheck.train.loop import LoopConfig, export_model, train_loop
from qacheck.train.qa import base_model_path

MAX_SRC = 96
MAX_TGT = 40


_STOP = frozenset(
    "the a an of in on at to for by with from and or is was were are be been what which who "
    "whom whose when where why how did does do many much that this these those it its as into "
    "than".split())


def novel_share(question: str, sentence: str) -> float:
    """Share of the question's content words that do not occur in the sentence.

    SQuAD questions were written while reading a whole paragraph, so many bring
    words from other sentences.  A drafter that learns to do that asks about
    things the output sentence never said, which the source then "cannot
    answer": a false unverifiable.  Training pairs above a cut are dropped.
    A plain lower-cased word match, as the shipped drafter was trained with
    (``qacheck.words`` is the stemmed notion used at scoring time).
    """
    words = set(re.findall(r"[a-z0-9]+", sentence.lower()))
    content = [w for w in re.findall(r"[a-z0-9]+", question.lower()) if w not in _STOP]
    return sum(w not in words for w in content) / max(1, len(content))


def qg_pairs(path: Path, max_novel: float = 1.0) -> list[tuple[str, str, str]]:
    """(answer, sentence with the answer marked, question) for every answerable record.

    The sentence is the one that holds the answer's first occurrence offset;
    held-out titles (the same split as for QA) are excluded, and so are pairs
    whose question goes beyond its sentence by more than ``max_novel``.
    """
    out = []
    for ex in read_qa_file(path):
        if not ex.answers or ex.answer_starts[0] < 0 or is_heldout_title(ex.title, 0.02):
            continue
        sentence = answer_sentence(ex)
        if sentence is None:
            continue
        s, e = sentence
        a0 = ex.answer_starts[0] - s
        if novel_share(ex.question, ex.context[s:e]) <= max_novel:
            out.append((ex.answers[0], qg_input(ex.context[s:e], a0, a0 + len(ex.answers[0])),
                        ex.question))
    return out


def build_model(base: str, tokenizer):
    """The warm-started encoder-decoder, configured for generation with the BERT vocabulary.

    Eager attention: at these short lengths it trains about a quarter faster on
    this CPU than the fused SDPA kernel, whose backward pass dominates.
    """
    from transformers import BertLMHeadModel, BertModel, EncoderDecoderModel

    common = {"attn_implementation": "eager", "attention_probs_dropout_prob": 0.0}
    encoder = BertModel.from_pretrained(base, add_pooling_layer=False, **common)
    decoder = BertLMHeadModel.from_pretrained(base, is_decoder=True, add_cross_attention=True,
                                              **common)
    model = EncoderDecoderModel(encoder=encoder, decoder=decoder)
    model.config.decoder_start_token_id = tokenizer.cls_token_id
    model.config.eos_token_id = tokenizer.sep_token_id
    model.config.pad_token_id = tokenizer.pad_token_id
    model.config.vocab_size = model.config.encoder.vocab_size
    gen = model.generation_config
    gen.decoder_start_token_id = tokenizer.cls_token_id
    gen.bos_token_id = tokenizer.cls_token_id
    gen.eos_token_id = tokenizer.sep_token_id
    gen.pad_token_id = tokenizer.pad_token_id
    return model


class _LabelSmoothed(torch.nn.Module):
    """Wraps the model so ``.loss`` is label-smoothed cross-entropy (Szegedy et al. 2016)."""

    def __init__(self, model, smoothing: float) -> None:
        super().__init__()
        self.model = model
        self.loss_fn = torch.nn.CrossEntropyLoss(ignore_index=-100, label_smoothing=smoothing)

    def forward(self, labels: torch.Tensor, **batch):
        out = self.model(**batch, decoder_input_ids=_shift(labels, self.model.config))
        out.loss = self.loss_fn(out.logits.float().view(-1, out.logits.size(-1)), labels.view(-1))
        return out


def _shift(labels: torch.Tensor, config) -> torch.Tensor:
    dec = labels.new_full(labels.shape, config.pad_token_id)
    dec[:, 1:] = labels[:, :-1].clamp(min=0)
    dec[:, 1:][labels[:, :-1] == -100] = config.pad_token_id
    dec[:, 0] = config.decoder_start_token_id
    return dec


def train_qg(data: Path, out: Path, cfg: LoopConfig, limit: int | None = None,
             smoothing: float = 0.1, base: str | None = None, init: Path | None = None,
             max_novel: float = 1.0, log=print) -> dict[str, Any]:
    """Build (input, question) pairs, train, and export ``out/model``.

    ``init`` continues from an earlier drafter (a folder written by this
    trainer, such as the shipped one) instead of the bare warm start: the
    cross-attention is then already trained, and a run's budget goes to
    the questions themselves.
    """
    from transformers import AutoTokenizer, EncoderDecoderModel

    base = base or base_model_path()
    tok = AutoTokenizer.from_pretrained(init or base)
    if init is None:
        tok.add_special_tokens({"additional_special_tokens": [HL_OPEN, HL_CLOSE]})
    t0 = time.time()
    pairs = qg_pairs(data, max_novel)
    if limit:
        pairs = pairs[:limit]
    src = tok([p[0] for p in pairs], [p[1] for p in pairs], truncation="longest_first",
              max_length=MAX_SRC)
    tgt = tok([p[2] for p in pairs], truncation=True, max_length=MAX_TGT)
    log(f"{len(pairs)} QG pairs tokenised in {time.time() - t0:.0f}s")
    if init is None:
        model = build_model(base, tok)
    else:
        model = EncoderDecoderModel.from_pretrained(init, dtype=torch.float32,
                                                    attn_implementation="eager")
        model.encoder.pooler = None  # unused by the decoder; loading adds a fresh one
    wrapped = _LabelSmoothed(model, smoothing)
    pad = tok.pad_token_id

    def collate(idx: list[int]) -> dict[str, torch.Tensor]:
        s = [src["input_ids"][i] for i in idx]
        tt = [src["token_type_ids"][i] for i in idx]
        # decoder targets drop the leading [CLS]: decoding starts from it
        t = [tgt["input_ids"][i][1:] for i in idx]
        ws, wt = max(map(len, s)), max(map(len, t))
        ids = torch.full((len(idx), ws), pad)
        types = torch.zeros((len(idx), ws), dtype=torch.long)
        mask = torch.zeros((len(idx), ws), dtype=torch.long)
        labels = torch.full((len(idx), wt), -100)
        for r in range(len(idx)):
            ids[r, :len(s[r])] = torch.tensor(s[r])
            types[r, :len(tt[r])] = torch.tensor(tt[r])
            mask[r, :len(s[r])] = 1
            labels[r, :len(t[r])] = torch.tensor(t[r])
        return {"input_ids": ids, "token_type_ids": types, "attention_mask": mask, "labels": labels}

    lengths = [len(src["input_ids"][i]) + len(tgt["input_ids"][i]) for i in range(len(pairs))]
    summary = train_loop(wrapped, len(pairs), lengths, collate, out, cfg)
    return export_model(model, tok, out, {
        "train_pairs": len(pairs), "label_smoothing": smoothing, "max_src": MAX_SRC,
        "max_tgt": MAX_TGT, "tied_encoder_decoder": False,
        "init": str(init) if init else None, "max_novel_share": max_novel}, cfg, data, summary)
