"""The seq2seq question drafter: (sentence, answer span) -> question, batched beam search."""
from __future__ import annotations

from pathlib import Path

from qacheck.models import lock
from qacheck.models.base import LockedModel
from qacheck.models.runtime import autocast, use_bf16
from qacheck.qg_format import qg_input

#: the drafter reads at most this many word pieces of its (sentence, span) input
INPUT_TOKENS = 96


class QGModel(LockedModel):
    """The shipped seq2seq drafter (or a folder written by ``qacheck train qg``)."""

    name = "qg"

    def __init__(self, folder: Path | None = None, *, verify: bool = True, num_beams: int = 4,
                 max_new_tokens: int = 32, batch_size: int = 32, bf16: bool | None = None) -> None:
        super().__init__(folder, verify)
        self.num_beams, self.max_new_tokens, self.batch_size = num_beams, max_new_tokens, batch_size
        self.bf16 = use_bf16() if bf16 is None else bf16

    @staticmethod
    def available() -> bool:
        """True when the package ships seq2seq weights (listed in models.lock)."""
        try:
            lock.entry("qg")
        except lock.ModelIntegrityError:
            return False
        return True

    @property
    def settings(self) -> dict[str, int]:
        """Every runtime setting that can change a question (part of the signature)."""
        return {"beams": self.num_beams, "max_new_tokens": self.max_new_tokens,
                "input_tokens": INPUT_TOKENS}

    def _load(self) -> None:
        if self._model is not None:
            return
        import torch
        from transformers import AutoTokenizer, EncoderDecoderModel

        folder = self._resolve()
        self._tok = AutoTokenizer.from_pretrained(folder)
        self._model = EncoderDecoderModel.from_pretrained(folder, dtype=torch.float32).eval()

    def generate(self, items: list[tuple[str, int, int]]) -> list[str]:
        """One question per (sentence, span start, span end), in input order."""
        import torch

        if not items:
            return []
        self._load()
        answers = [s[a:b] for s, a, b in items]
        inputs = [qg_input(s, a, b) for s, a, b in items]
        order = sorted(range(len(items)), key=lambda i: len(inputs[i]))
        out: list[str] = [""] * len(items)
        with torch.inference_mode(), autocast(self.bf16):
            for b in range(0, len(order), self.batch_size):
                idx = order[b:b + self.batch_size]
                enc = self._tok([answers[i] for i in idx], [inputs[i] for i in idx],
                                truncation="longest_first", max_length=INPUT_TOKENS, padding=True,
                                return_tensors="pt")
                gen = self._model.generate(**enc, num_beams=self.num_beams,
                                           max_new_tokens=self.max_new_tokens,
                                           no_repeat_ngram_size=3, early_stopping=True)
                for i, text in zip(idx, self._tok.batch_decode(gen, skip_special_tokens=True)):
                    text = " ".join(text.split()).replace(" ?", "?").strip()
                    if text and not text.endswith("?"):
                        text = text.rstrip(" .") + "?"
                    out[i] = text[:1].upper() + text[1:]
        return out
