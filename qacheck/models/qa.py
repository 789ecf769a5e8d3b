"""Extractive question answering with a no-answer option.

One narrow interface: ``QAModel.answer(pairs)`` answers a batch of
(question, context) pairs.  Contexts longer than the window are split into
overlapping windows; the best span over all windows wins (n-best start/end
decoding, bounded answer length), and the no-answer score is the smallest
[CLS] score over the windows, as in common SQuAD 2.0 practice.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from qacheck.models.base import LockedModel
from qacheck.models.runtime import PAD_MULTIPLE, ROWS, autocast, use_bf16, fixed_shape_batches


@dataclass(frozen=True)
class Answer:
    """The best span for one question: text, character offsets and confidence.

    ``no_answer_prob`` is exp(null) / (exp(null) + exp(best span)), the
    model's preference for "the context does not say" over its best span.
    """

    text: str
    start: int
    end: int
    score: float
    no_answer_prob: float

    @property
    def has_answer(self) -> bool:
        return bool(self.text)


#: questions are cut to this many word pieces; a window must hold the question and more than
#: its stride of context (an in-situ question from a run-on sentence can be very long)
QUESTION_TOKENS = 96


def clip_questions(tok, questions: list[str], max_tokens: int = QUESTION_TOKENS) -> list[str]:
    """Each question cut after its first ``max_tokens`` word pieces (most are far shorter)."""
    enc = tok(questions, add_special_tokens=False, return_offsets_mapping=True)
    return [q if len(offs) <= max_tokens else q[:offs[max_tokens - 1][1]]
            for q, offs in zip(questions, enc["offset_mapping"])]


class QAModel(LockedModel):
    """The shipped QA model (or any folder written by ``qacheck train qa``)."""

    name = "qa"

    def __init__(self, folder: Path | None = None, *, verify: bool = True, max_len: int = 384,
                 stride: int = 128, max_answer_tokens: int = 30, n_best: int = 20,
                 bf16: bool | None = None) -> None:
        super().__init__(folder, verify)
        self.max_len, self.stride = max_len, stride
        self.max_answer_tokens, self.n_best = max_answer_tokens, n_best
        self.bf16 = use_bf16() if bf16 is None else bf16

    @property
    def settings(self) -> dict[str, int | bool]:
        """Every runtime setting that can change an answer (part of the signature)."""
        return {"window": self.max_len, "stride": self.stride, "n_best": self.n_best,
                "max_answer_tokens": self.max_answer_tokens, "question_tokens": QUESTION_TOKENS,
                "pad_multiple": PAD_MULTIPLE, "rows": ROWS}

    def _load(self) -> None:
        if self._model is not None:
            return
        import torch
        from transformers import AutoModelForQuestionAnswering, AutoTokenizer

        folder = self._resolve()
        self._tok = AutoTokenizer.from_pretrained(folder)
        self._model = AutoModelForQuestionAnswering.from_pretrained(folder, dtype=torch.float32).eval()

    def answer(self, pairs: list[tuple[str, str]]) -> list[Answer]:
        """Answer every (question, context) pair; empty text means no answer."""
        import torch

        if not pairs:
            return []
        self._load()
        tok = self._tok
        enc = tok(clip_questions(tok, [q for q, _ in pairs]), [c for _, c in pairs],
                  truncation="only_second",
                  max_length=self.max_len, stride=self.stride, return_overflowing_tokens=True,
                  return_offsets_mapping=True)
        n_win = len(enc["input_ids"])
        start_logits: list[np.ndarray | None] = [None] * n_win
        end_logits: list[np.ndarray | None] = [None] * n_win
        with torch.inference_mode(), autocast(self.bf16):
            for idx, batch in fixed_shape_batches(enc, tok.pad_token_id):
                out = self._model(**batch)
                s = out.start_logits.float().numpy()
                e = out.end_logits.float().numpy()
                for r, w in enumerate(idx):
                    n = len(enc["input_ids"][w])
                    start_logits[w], end_logits[w] = s[r, :n], e[r, :n]
        best: list[tuple[float, int, int, float] | None] = [None] * len(pairs)
        null: list[float] = [math.inf] * len(pairs)
        for w in range(n_win):
            p = enc["overflow_to_sample_mapping"][w]
            s, e = start_logits[w], end_logits[w]
            null[p] = min(null[p], float(s[0] + e[0]))
            span = self._best_span(s, e, enc.sequence_ids(w))
            if span is not None and (best[p] is None or span[0] > best[p][0]):
                offs = enc["offset_mapping"][w]
                best[p] = (span[0], offs[span[1]][0], offs[span[2]][1], span[3])
        answers = []
        for p, (_, context) in enumerate(pairs):
            if best[p] is None:
                answers.append(Answer("", 0, 0, 0.0, 1.0))
                continue
            score, c0, c1, prob = best[p]
            p_na = 1.0 / (1.0 + math.exp(min(50.0, max(-50.0, score - null[p]))))
            answers.append(Answer(context[c0:c1], c0, c1, prob, p_na))
        return answers

    def _best_span(self, s: np.ndarray, e: np.ndarray, seq_ids: list[int | None]
                   ) -> tuple[float, int, int, float] | None:
        """n-best start/end search inside the context tokens of one window."""
        ctx = np.array([sid == 1 for sid in seq_ids[:len(s)]])
        if not ctx.any():
            return None
        s_m = np.where(ctx, s, -np.inf)
        e_m = np.where(ctx, e, -np.inf)
        starts = np.argsort(s_m)[::-1][: self.n_best]
        ends = np.argsort(e_m)[::-1][: self.n_best]
        # every (start, end) pair of the n best at once: a valid span lies inside the context,
        # ends after it starts and is at most max_answer_tokens long
        width = ends[None, :] - starts[:, None]
        ok = (ctx[starts][:, None] & ctx[ends][None, :] & (width >= 0)
              & (width < self.max_answer_tokens))
        if not ok.any():
            return None
        total = np.where(ok, s[starts][:, None] + e[ends][None, :], -np.inf)
        r, c = np.unravel_index(int(np.argmax(total)), total.shape)  # first best, row-major
        best = (float(total[r, c]), int(starts[r]), int(ends[c]))
        # probability of the chosen span under the window's start and end softmax
        ls = s - s.max()
        le = e - e.max()
        prob = float(np.exp(ls[best[1]]) / np.exp(ls).sum() * np.exp(le[best[2]]) / np.exp(le).sum())
        return best[0], best[1], best[2], prob
