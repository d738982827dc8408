"""`trueturn analyze`: phase-locked 1x amplitude and phase from a capture."""

from __future__ import annotations

import argparse

from trueturn.cli.common import add_not_ready


def add_parser(sub: argparse._SubParsersAction) -> None:
    add_not_ready(sub, "analyze", "phase-locked 1x amplitude and phase from a capture", 5)
