"""Shared test fixtures: repository paths."""

from __future__ import annotations

from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
VECTORS = REPO / "protocol" / "vectors"


@pytest.fixture(scope="session")
def repo_root() -> Path:
    return REPO


@pytest.hookimpl(tryfirst=True)
def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    """The groups pytest-xdist keeps on one worker (``make test`` runs ``-n auto --dist
    loadgroup``): a file's tests together, so a module-scoped fixture is computed once; and
    every file that builds firmware targets (tests/firmware_helpers.py ``make``) in one
    group, since two makes writing firmware/build at once would race. First among the
    hooks: xdist's own reads the groups in this hook."""
    for item in items:
        module = getattr(item, "module", None)
        builds = module is not None and any(
            getattr(value, "__module__", None) == "firmware_helpers"
            or getattr(value, "__name__", None) == "firmware_helpers"
            for value in vars(module).values())
        item.add_marker(pytest.mark.xdist_group("firmware" if builds else item.path.name))
