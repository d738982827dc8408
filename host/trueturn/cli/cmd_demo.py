"""`trueturn demo`: open the app on a simulated rig."""

from __future__ import annotations

import argparse

from trueturn.cli.common import add_not_ready


def add_parser(sub: argparse._SubParsersAction) -> None:
    add_not_ready(sub, "demo", "open the app on a simulated rig", 8)
