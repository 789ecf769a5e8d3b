"""A content-addressed result cache (SQLite): the same texts under the same signature score once.

The key is sha256 over the signature id, the source and the output, so a
change of model, threshold or version can never return a stale result.
"""
from __future__ import annotations

import hashlib
import json
import os
import sqlite3
from pathlib import Path
from typing import Any


def default_path() -> Path:
    """``$QACHECK_CACHE`` or ``~/.cache/qacheck/results.sqlite``."""
    env = os.environ.get("QACHECK_CACHE")
    if env:
        return Path(env)
    base = Path(os.environ.get("XDG_CACHE_HOME", Path.home() / ".cache"))
    return base / "qacheck" / "results.sqlite"


def cache_key(signature_id: str, source: str, output: str) -> str:
    h = hashlib.sha256()
    for part in (signature_id, source, output):
        h.update(part.encode("utf-8"))
        h.update(b"\x00")
    return h.hexdigest()


class ResultCache:
    """Get and put pair results by key; safe to share between runs and processes."""

    def __init__(self, path: Path | None = None) -> None:
        self.path = path or default_path()
        self.path.parent.mkdir(parents=True, exist_ok=True)
        self._db = sqlite3.connect(self.path, timeout=30)
        self._db.execute("PRAGMA journal_mode=WAL")
        self._db.execute("CREATE TABLE IF NOT EXISTS results (key TEXT PRIMARY KEY, value TEXT)")

    def get(self, key: str) -> dict[str, Any] | None:
        row = self._db.execute("SELECT value FROM results WHERE key = ?", (key,)).fetchone()
        return json.loads(row[0]) if row else None

    def put(self, key: str, value: dict[str, Any]) -> None:
        self._db.execute("INSERT OR REPLACE INTO results VALUES (?, ?)", (key, json.dumps(value)))
        self._db.commit()

    def close(self) -> None:
        self._db.close()
