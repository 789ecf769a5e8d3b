"""Strict JSON Lines reading: every bad line is an error naming its file, line and field."""
from __future__ import annotations

import gzip
import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from qacheck.errors import InputError


def iter_records(path: Path, required: tuple[str, ...] = ()) -> Iterator[tuple[int, dict[str, Any]]]:
    """(line number, record) for each non-blank line of a .jsonl or .jsonl.gz file."""
    opener = gzip.open if path.suffix == ".gz" else open
    try:
        with opener(path, "rt", encoding="utf-8") as fh:
            for lineno, line in enumerate(fh, 1):
                if not line.strip():
                    continue
                try:
                    rec = json.loads(line)
                except json.JSONDecodeError as exc:
                    raise InputError(f"not valid JSON ({exc.msg})", path=path, line=lineno) from exc
                if not isinstance(rec, dict):
                    raise InputError("a line must hold a JSON object", path=path, line=lineno)
                for key in required:
                    if key not in rec:
                        raise InputError("missing", path=path, line=lineno, field=key)
                yield lineno, rec
    except UnicodeDecodeError as exc:
        raise InputError(f"not UTF-8 ({exc.reason})", path=path) from exc
    except OSError as exc:
        raise InputError(f"cannot read ({exc.strerror or exc})", path=path) from exc
