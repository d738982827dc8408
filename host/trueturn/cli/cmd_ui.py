"""`trueturn ui`: open the app on a board or a virtual rig."""

from __future__ import annotations

import argparse

from trueturn.cli.common import add_not_ready


def add_parser(sub: argparse._SubParsersAction) -> None:
    add_not_ready(sub, "ui", "open the app on a board or a virtual rig", 8)
