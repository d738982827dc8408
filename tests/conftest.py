"""Shared test fixtures: repository paths."""

from __future__ import annotations

from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
VECTORS = REPO / "protocol" / "vectors"


@pytest.fixture(scope="session")
def repo_root() -> Path:
    return REPO
