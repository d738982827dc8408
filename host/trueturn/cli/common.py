"""Helpers shared by the subcommands: output formatting and the not-yet-available stub."""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from trueturn.errors import UserError


def print_json(data: Any) -> None:
    """Print ``data`` as indented JSON on stdout."""
    json.dump(data, sys.stdout, indent=2, sort_keys=False)
    sys.stdout.write("\n")


def add_not_ready(sub: argparse._SubParsersAction, name: str, help_text: str, issue: int) -> None:
    """Register a subcommand whose feature has not landed: it says so and exits 2."""
    parser = sub.add_parser(name, help=f"{help_text} (not available yet)", description=help_text)

    def run(_args: argparse.Namespace) -> int:
        raise UserError(f"not available yet in this version (tracked as issue #{issue})")

    parser.set_defaults(run=run)


def load_capture(path: str) -> tuple[dict[str, Any], bytes]:
    """Read a capture or frame file for a command; a missing or damaged file is one line."""
    from trueturn.link.capture import CaptureError, read_capture

    try:
        return read_capture(path)
    except OSError as exc:
        raise UserError(f"cannot read {path}: {exc.strerror}") from None
    except CaptureError as exc:
        raise UserError(str(exc)) from None
