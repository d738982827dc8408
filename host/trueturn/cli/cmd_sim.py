"""`trueturn sim`: list and describe the simulated machines."""

from __future__ import annotations

import argparse

from trueturn.cli.common import add_not_ready


def add_parser(sub: argparse._SubParsersAction) -> None:
    add_not_ready(sub, "sim", "list and describe the simulated machines", 4)
