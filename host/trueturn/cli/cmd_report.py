"""`trueturn report`: write a job report (HTML with SVG plots)."""

from __future__ import annotations

import argparse

from trueturn.cli.common import add_not_ready


def add_parser(sub: argparse._SubParsersAction) -> None:
    add_not_ready(sub, "report", "write a job report (HTML with SVG plots)", 7)
