"""What the QA and QG wrappers share: which folder to load, its digest, the integrity check."""
from __future__ import annotations

from pathlib import Path

from qacheck.models import lock
from qacheck.models.runtime import quiet_transformers


class LockedModel:
    """A model folder that is either the shipped one (pinned in models.lock) or given explicitly.

    The shipped folder is verified against models.lock before anything is
    loaded from it; an explicit folder (a fresh training run) is taken as it is.
    """

    name = ""

    def __init__(self, folder: Path | None, verify: bool) -> None:
        self.folder = Path(folder) if folder else None
        self.verify = verify
        self._verified = False
        self._model = None
        self._tok = None

    def verify_files(self) -> None:
        """Check the shipped files against models.lock now (once), before anything is written:
        a tampered file must stop a run even when every answer would come from the cache."""
        if self.folder is None and self.verify and not self._verified:
            lock.entry(self.name).verify()
            self._verified = True

    @property
    def digest(self) -> str:
        """The model's digest from models.lock (or over the folder's files when not shipped)."""
        if self.folder is None:
            return lock.entry(self.name).digest
        files = lock.lock_model_folder(self.folder)
        return lock.ModelEntry(self.name, self.folder, files, {}).digest

    def _resolve(self) -> str:
        """The folder to load from, verified when it is the shipped one."""
        quiet_transformers()
        if self.folder is not None:
            return str(self.folder)
        self.verify_files()
        return str(lock.entry(self.name).folder)
