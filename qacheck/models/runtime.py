"""CPU precision choice shared by the model wrappers."""
from __future__ import annotations

import contextlib
from functools import lru_cache

import torch


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


def autocast(enabled: bool | None = None):
    """bf16 autocast where it pays, a no-op context otherwise."""
    use = cpu_has_bf16() if enabled is None else enabled
    return torch.autocast("cpu", dtype=torch.bfloat16) if use else contextlib.nullcontext()


def quiet_transformers() -> None:
    """No weight-loading progress bars or load reports on the user's terminal or in JSON output."""
    from transformers.utils import logging as hf_logging

    hf_logging.set_verbosity_error()
    hf_logging.disable_progress_bar()
