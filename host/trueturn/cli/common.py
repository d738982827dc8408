"""Helpers shared by the subcommands: output formatting and opening capture files."""

from __future__ import annotations

import contextlib
import json
import sys
from collections.abc import Iterator
from typing import TYPE_CHECKING, Any

from trueturn.errors import UserError, one_line

if TYPE_CHECKING:
    from trueturn.link.capture import CaptureReader


def print_json(data: Any) -> None:
    """Print ``data`` as indented JSON on stdout."""
    json.dump(data, sys.stdout, indent=2, sort_keys=False)
    sys.stdout.write("\n")


@contextlib.contextmanager
def open_capture(path: str) -> Iterator[CaptureReader]:
    """A capture or frame file opened for streaming; a missing, odd or damaged file is one
    line (trueturn.files: regular files only)."""
    from trueturn.link.capture import CaptureError, CaptureReader

    try:
        reader = CaptureReader(path)
    except OSError as exc:
        raise UserError(f"cannot read {one_line(path)}: {exc.strerror or exc}") from None
    except CaptureError as exc:
        raise UserError(str(exc)) from None
    with reader:
        yield reader


def load_capture(path: str) -> tuple[dict[str, Any], bytes]:
    """Read a capture or frame file for a command; a missing or damaged file is one line."""
    from trueturn.link.capture import CaptureError, read_capture

    try:
        return read_capture(path)
    except OSError as exc:
        raise UserError(f"cannot read {path}: {exc.strerror}") from None
    except CaptureError as exc:
        raise UserError(str(exc)) from None
