"""`trueturn solve`: compute correction masses from balancing runs."""

from __future__ import annotations

import argparse

from trueturn.cli.common import add_not_ready


def add_parser(sub: argparse._SubParsersAction) -> None:
    add_not_ready(sub, "solve", "compute correction masses from balancing runs", 6)
