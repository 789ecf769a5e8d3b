"""models.lock: the sha256 of every shipped model file, checked before loading.

The lock lives at the repository root and inside the package (a copy made at
build time by the symlink ``qacheck/models.lock``); loading refuses any file
whose digest differs and names it.
"""
from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Any

from qacheck.errors import ModelIntegrityError

PACKAGE_DIR = Path(__file__).resolve().parent.parent
WEIGHTS_DIR = PACKAGE_DIR / "weights"


def lock_path() -> Path:
    """The lock file: inside the package (wheel) or at the repository root (checkout)."""
    for candidate in (PACKAGE_DIR / "models.lock", PACKAGE_DIR.parent / "models.lock"):
        if candidate.exists():
            return candidate
    raise ModelIntegrityError("models.lock not found beside the qacheck package")


def sha256_file(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


@dataclass(frozen=True)
class ModelEntry:
    """One model's lock entry: its folder and the expected digest of each file."""

    name: str
    folder: Path
    files: dict[str, str]
    meta: dict[str, Any]

    @property
    def digest(self) -> str:
        """One digest for the whole model: sha256 over its sorted (file, sha256) list."""
        text = "\n".join(f"{k} {v}" for k, v in sorted(self.files.items()))
        return hashlib.sha256(text.encode()).hexdigest()

    def verify(self, folder: Path | None = None) -> None:
        """Raise ModelIntegrityError naming the first missing or mismatched file."""
        root = folder or self.folder
        for fname, expected in sorted(self.files.items()):
            path = root / fname
            if not path.exists():
                raise ModelIntegrityError(f"{self.name} model file missing: {path}")
            actual = sha256_file(path)
            if actual != expected:
                raise ModelIntegrityError(
                    f"{self.name} model file {path} has sha256 {actual[:16]}..., "
                    f"models.lock expects {expected[:16]}...; refusing to load it")


def read_lock(path: Path | None = None) -> dict[str, Any]:
    path = path or lock_path()
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except json.JSONDecodeError as exc:
        raise ModelIntegrityError(f"{path}:{exc.lineno}: models.lock is not valid JSON") from exc


@lru_cache(maxsize=None)
def entry(name: str) -> ModelEntry:
    """The lock entry of a shipped model (``qa`` or ``qg``)."""
    lock = read_lock()
    models = lock.get("models", {})
    if name not in models:
        raise ModelIntegrityError(f"models.lock has no entry for model '{name}'")
    m = models[name]
    # paths in the lock are relative to the package folder, e.g. "weights/qa"
    return ModelEntry(name, PACKAGE_DIR / m["path"], dict(m["files"]),
                      {k: v for k, v in m.items() if k != "files"})


def lock_model_folder(folder: Path) -> dict[str, str]:
    """sha256 of every file in a model folder (what ``qacheck models lock`` writes)."""
    return {p.relative_to(folder).as_posix(): sha256_file(p)
            for p in sorted(folder.rglob("*")) if p.is_file()}
