"""CPU precision choice and batching shared by the model wrappers.

torch is imported where a model runs, not here: a run served from the cache
never loads it.
"""
from __future__ import annotations

import contextlib
import os
from functools import lru_cache

from qacheck.errors import InputError


@lru_cache(maxsize=1)
def cpu_has_bf16() -> bool:
    """True where the CPU has native bf16 matmul (AVX512-BF16 or AMX).

    On such CPUs bf16 autocast is several times faster than fp32; elsewhere
    bf16 is emulated and slower, so fp32 is used.
    """
    try:
        with open("/proc/cpuinfo", encoding="ascii", errors="ignore") as fh:
            flags = fh.read()
    except OSError:
        return False
    return "avx512_bf16" in flags or "amx_bf16" in flags


#: ``QACHECK_PRECISION``: ``bf16`` or ``fp32`` forces the mode, ``auto`` (or unset) asks the CPU
PRECISION_ENV = "QACHECK_PRECISION"


def use_bf16() -> bool:
    """The precision every model runs in: ``$QACHECK_PRECISION`` if set, else the CPU's best.

    The mode changes answers in the last decimals, so it is part of the
    signature; machines of one cluster with different CPUs agree only when
    the mode is forced the same on all of them.
    """
    mode = os.environ.get(PRECISION_ENV, "auto").strip().lower() or "auto"
    if mode not in ("auto", "bf16", "fp32"):
        raise InputError(f"${PRECISION_ENV} must be auto, bf16 or fp32, not {mode!r}")
    return cpu_has_bf16() if mode == "auto" else mode == "bf16"


def autocast(enabled: bool | None = None):
    """bf16 autocast when ``enabled`` (default: ``use_bf16()``), a no-op context otherwise."""
    import torch

    use = use_bf16() if enabled is None else enabled
    return torch.autocast("cpu", dtype=torch.bfloat16) if use else contextlib.nullcontext()


def quiet_transformers() -> None:
    """No weight-loading progress bars or load reports on the user's terminal or in JSON output."""
    from transformers.utils import logging as hf_logging

    hf_logging.set_verbosity_error()
    hf_logging.disable_progress_bar()


#: windows are padded to a multiple of this many tokens, batched only with windows of the same
#: padded width, and every forward pass holds exactly ``ROWS`` windows (empty rows fill the
#: last), so each matrix product has the same shape whatever else is scored: a window's
#: numbers never depend on the batch it lands in (bf16 kernels pick their blocking by shape)
PAD_MULTIPLE = 32
ROWS = 16


def fixed_shape_batches(enc, pad_id: int):
    """Yield (indices, model inputs) over tokenised windows, every batch ``ROWS`` x a padded width.

    ``enc`` holds ``input_ids`` and ``token_type_ids`` per window; ``indices``
    are the windows in the batch, in order of its first rows.
    """
    import torch

    padded = [-(-len(ids) // PAD_MULTIPLE) * PAD_MULTIPLE for ids in enc["input_ids"]]
    by_width: dict[int, list[int]] = {}
    for w in sorted(range(len(padded)), key=lambda w: (padded[w], w)):
        by_width.setdefault(padded[w], []).append(w)
    for width, items in by_width.items():
        for b in range(0, len(items), ROWS):
            idx = items[b:b + ROWS]
            ids = torch.full((ROWS, width), pad_id, dtype=torch.long)
            tt = torch.zeros((ROWS, width), dtype=torch.long)
            mask = torch.zeros((ROWS, width), dtype=torch.long)
            mask[len(idx):, 0] = 1  # an empty row attends to its first token only
            for r, w in enumerate(idx):
                n = len(enc["input_ids"][w])
                ids[r, :n] = torch.tensor(enc["input_ids"][w])
                tt[r, :n] = torch.tensor(enc["token_type_ids"][w])
                mask[r, :n] = 1
            yield idx, {"input_ids": ids, "token_type_ids": tt, "attention_mask": mask}
