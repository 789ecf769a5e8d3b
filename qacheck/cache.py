"""A content-addressed result cache (SQLite): the same texts under the same signature score once.

Two levels, one database file:

* **pairs**: the key is sha256 over the evidence signature id, the source
  and the output, so a change of model, threshold or version can never
  return a stale result;
* **model calls**: one QA answer per (question, context) and one reading
  per (evidence, claim), keyed by the model's digest and runtime settings
  (``memoised``).  Answers do not depend on the batch (fixed-shape
  batches), so an item computed once is valid in any later batch: two
  generator versions that share most sentences, a nightly set where a few
  outputs changed, or a new entailment reader over known questions reuse
  every answer already computed.
"""
from __future__ import annotations

import hashlib
import json
import os
import sqlite3
from pathlib import Path
from collections.abc import Callable, Sequence
from typing import Any, TypeVar

T = TypeVar("T")


def default_path() -> Path:
    """``$QACHECK_CACHE`` or ``~/.cache/qacheck/results.sqlite``."""
    env = os.environ.get("QACHECK_CACHE")
    if env:
        return Path(env)
    base = Path(os.environ.get("XDG_CACHE_HOME", Path.home() / ".cache"))
    return base / "qacheck" / "results.sqlite"


def cache_key(signature_id: str, *texts: str) -> str:
    """sha256 over a scope and texts, each ended by a NUL so that no two splits collide."""
    h = hashlib.sha256()
    for part in (signature_id, *texts):
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
        self._db.execute("CREATE TABLE IF NOT EXISTS calls (key TEXT PRIMARY KEY, value TEXT)")

    def get(self, key: str) -> dict[str, Any] | None:
        row = self._db.execute("SELECT value FROM results WHERE key = ?", (key,)).fetchone()
        return json.loads(row[0]) if row else None

    def put(self, key: str, value: dict[str, Any]) -> None:
        self._db.execute("INSERT OR REPLACE INTO results VALUES (?, ?)", (key, json.dumps(value)))
        self._db.commit()

    def get_calls(self, keys: Sequence[str]) -> dict[str, Any]:
        """Stored model-call results for those ``keys`` that have one."""
        found: dict[str, Any] = {}
        for i in range(0, len(keys), 500):  # SQLite caps the number of bound parameters
            chunk = list(keys[i:i + 500])
            rows = self._db.execute(f"SELECT key, value FROM calls WHERE key IN "
                                    f"({','.join('?' * len(chunk))})", chunk).fetchall()
            found.update((k, json.loads(v)) for k, v in rows)
        return found

    def put_calls(self, values: dict[str, Any]) -> None:
        self._db.executemany("INSERT OR REPLACE INTO calls VALUES (?, ?)",
                             [(k, json.dumps(v)) for k, v in values.items()])
        self._db.commit()

    def close(self) -> None:
        self._db.close()


def memoised(call: Callable[[list[tuple[str, str]]], list[T]], items: list[tuple[str, str]],
             store: ResultCache | None, scope: str, to_json: Callable[[T], Any],
             from_json: Callable[[Any], T]) -> list[T]:
    """``call(items)``, computing only the items ``store`` has not seen under ``scope``.

    ``scope`` names the model and every setting that can change its result
    (digest, runtime settings, precision); results come back in item order.
    """
    if store is None or not items:
        return call(items)
    keys = [cache_key(scope, *item) for item in items]
    found = store.get_calls(list(dict.fromkeys(keys)))
    todo = list(dict.fromkeys(k for k in keys if k not in found))
    first = {k: i for i, k in reversed(list(enumerate(keys)))}
    fresh = call([items[first[k]] for k in todo]) if todo else []
    new = {k: to_json(r) for k, r in zip(todo, fresh)}
    store.put_calls(new)
    found.update(new)
    return [from_json(found[k]) for k in keys]
