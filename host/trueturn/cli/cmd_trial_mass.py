"""`trueturn trial-mass`: size a trial mass."""

from __future__ import annotations

import argparse

from trueturn.cli.common import add_not_ready


def add_parser(sub: argparse._SubParsersAction) -> None:
    add_not_ready(sub, "trial-mass", "size a trial mass", 6)
