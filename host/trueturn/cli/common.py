"""Helpers shared by the subcommands: output formatting and the not-yet-available stub."""

from __future__ import annotations

import json
import sys
from typing import Any

from trueturn.errors import UserError


def print_json(data: Any) -> None:
    """Print ``data`` as indented JSON on stdout."""
    json.dump(data, sys.stdout, indent=2, sort_keys=False)
    sys.stdout.write("\n")


def load_capture(path: str) -> tuple[dict[str, Any], bytes]:
    """Read a capture or frame file for a command; a missing or damaged file is one line."""
    from trueturn.link.capture import CaptureError, read_capture

    try:
        return read_capture(path)
    except OSError as exc:
        raise UserError(f"cannot read {path}: {exc.strerror}") from None
    except CaptureError as exc:
        raise UserError(str(exc)) from None
