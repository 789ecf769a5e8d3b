"""Error types that carry where bad input was found (file, line, field)."""
from __future__ import annotations

from pathlib import Path


class QacheckError(Exception):
    """Base class for errors qacheck reports to users instead of a traceback."""


class InputError(QacheckError):
    """Bad input: the message names the file, line and field when known."""

    def __init__(self, message: str, path: str | Path | None = None, line: int | None = None,
                 field: str | None = None) -> None:
        self.path, self.line, self.field, self.reason = path, line, field, message
        where = []
        if path is not None:
            where.append(str(path) + (f":{line}" if line is not None else ""))
        if field is not None:
            where.append(f"field '{field}'")
        super().__init__(f"{', '.join(where)}: {message}" if where else message)


class ModelIntegrityError(QacheckError):
    """A model file is missing or its sha256 does not match models.lock."""
