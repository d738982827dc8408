"""`trueturn grade`: ISO 21940-11 permissible residual unbalance."""

from __future__ import annotations

import argparse

from trueturn.cli.common import add_not_ready


def add_parser(sub: argparse._SubParsersAction) -> None:
    add_not_ready(sub, "grade", "ISO 21940-11 permissible residual unbalance", 6)
