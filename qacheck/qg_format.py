"""The seq2seq drafter's input format, shared by training and inference."""
from __future__ import annotations

HL_OPEN = "[unused0]"
HL_CLOSE = "[unused1]"


def qg_input(sentence: str, start: int, end: int) -> str:
    """The sentence with the answer span between marker tokens."""
    return f"{sentence[:start]}{HL_OPEN} {sentence[start:end]} {HL_CLOSE}{sentence[end:]}"
