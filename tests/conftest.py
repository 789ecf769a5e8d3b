"""Shared fixtures: where the reference data lives, and one checker per test session."""
from __future__ import annotations

import os
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
SHARED = Path(os.environ.get("QACHECK_SHARED_DATA", ROOT.parent / "shared" / "data"))


def shared_file(*parts: str) -> Path:
    """A file under ../shared/data, or skip the test with the reason it is missing."""
    path = SHARED.joinpath(*parts)
    if not path.exists():
        pytest.skip(f"reference data not found: {path} (the ../shared/data folder sits beside "
                    "the repository on the project's machines only)")
    return path


@pytest.fixture(scope="session")
def checker():
    from qacheck.pipeline import Checker

    return Checker()


@pytest.fixture(scope="session")
def qa_model(checker):
    return checker.qa


@pytest.fixture(autouse=True)
def _isolated_cache(tmp_path, monkeypatch):
    """Every test gets its own result cache, so no test reads another's results."""
    monkeypatch.setenv("QACHECK_CACHE", str(tmp_path / "cache.sqlite"))
