"""`trueturn record`: record the board's stream to a capture file."""

from __future__ import annotations

import argparse

from trueturn.cli.common import add_not_ready


def add_parser(sub: argparse._SubParsersAction) -> None:
    add_not_ready(sub, "record", "record the board's stream to a capture file", 4)
