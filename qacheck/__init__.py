"""qacheck: sentence-level faithfulness checks by question generation and answering."""
from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["__version__", "Checker"]


def __getattr__(name: str):
    # The checker pulls in torch and spaCy; load it only when asked so that
    # `qacheck --help` and small helpers stay fast.
    if name == "Checker":
        from qacheck.pipeline import Checker

        return Checker
    raise AttributeError(name)
