"""`trueturn ring`: print a 1:1 angle ring for a rotor."""

from __future__ import annotations

import argparse

from trueturn.cli.common import add_not_ready


def add_parser(sub: argparse._SubParsersAction) -> None:
    add_not_ready(sub, "ring", "print a 1:1 angle ring for a rotor", 7)
