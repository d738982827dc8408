"""`trueturn split`: split a correction onto the rotor's positions."""

from __future__ import annotations

import argparse

from trueturn.cli.common import add_not_ready


def add_parser(sub: argparse._SubParsersAction) -> None:
    add_not_ready(sub, "split", "split a correction onto the rotor's positions", 6)
