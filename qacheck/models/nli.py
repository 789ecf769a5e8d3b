"""The claim-vs-evidence reader: (evidence, claim) -> P(entailed), P(contradicted), P(not supported).

One narrow interface, ``NLIModel.read(pairs)``, batched; every forward pass
has the same shape for a given padded width (``runtime.fixed_shape_batches``), so
a claim's probabilities never depend on what else is in the batch.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from qacheck.models.base import LockedModel
from qacheck.models.runtime import PAD_MULTIPLE, ROWS, autocast, use_bf16, fixed_shape_batches

#: the evidence window plus the claim are cut to this many word pieces (evidence first)
MAX_TOKENS = 256


@dataclass(frozen=True)
class Reading:
    """What the reader makes of one claim against one evidence window."""

    entailed: float
    contradicted: float
    not_supported: float


class NLIModel(LockedModel):
    """The shipped entailment reader (or a folder written by ``qacheck train nli``)."""

    name = "nli"

    def __init__(self, folder: Path | None = None, *, verify: bool = True,
                 bf16: bool | None = None) -> None:
        super().__init__(folder, verify)
        self.bf16 = use_bf16() if bf16 is None else bf16

    @staticmethod
    def available() -> bool:
        """True when the package ships a reader (models.lock has an ``nli`` entry)."""
        from qacheck.models import lock

        return "nli" in lock.read_lock().get("models", {})

    @property
    def settings(self) -> dict[str, int]:
        """Every runtime setting that can change a reading (part of the signature)."""
        return {"max_tokens": MAX_TOKENS, "pad_multiple": PAD_MULTIPLE, "rows": ROWS}

    def _load(self) -> None:
        if self._model is not None:
            return
        import torch
        from transformers import AutoModelForSequenceClassification, AutoTokenizer

        folder = self._resolve()
        self._tok = AutoTokenizer.from_pretrained(folder)
        self._model = AutoModelForSequenceClassification.from_pretrained(
            folder, dtype=torch.float32).eval()

    def read(self, pairs: list[tuple[str, str]]) -> list[Reading]:
        """Read every (evidence, claim) pair."""
        import torch

        if not pairs:
            return []
        self._load()
        tok = self._tok
        enc = tok([e for e, _ in pairs], [c for _, c in pairs], truncation="only_first",
                  max_length=MAX_TOKENS)
        probs: list[list[float] | None] = [None] * len(pairs)
        with torch.inference_mode(), autocast(self.bf16):
            for idx, batch in fixed_shape_batches(enc, tok.pad_token_id):
                p = torch.softmax(self._model(**batch).logits.float(), dim=-1).numpy()
                for r, i in enumerate(idx):
                    probs[i] = [float(x) for x in p[r]]
        return [Reading(*p) for p in probs]
