"""Helpers shared by the subcommands: output formatting and opening capture files."""

from __future__ import annotations

import argparse
import contextlib
import json
import math
import sys
from collections.abc import Callable, Iterator
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


# --------------------------------------------------------------------------------------------
# Numeric options: every number a person types is range-checked where argparse reads it, so
# nothing absurd (nan, inf, 1e-300, 1e300, a 3.7e12 mm hole) reaches the math: no
# ZeroDivisionError, OverflowError or MemoryError, no 300-digit answer. The spans are what a
# small-machine balancing kit can meet, generous either side (common practice, no source).

#: name -> (lowest, highest, unit, lowest excluded)
SPANS: dict[str, tuple[float, float, str, bool]] = {
    "mass_g": (0.0, 10_000.0, "g", True),
    "mass_g_or_zero": (0.0, 10_000.0, "g", False),
    "angle_deg": (-360.0, 360.0, "degrees", False),
    "radius_mm": (1.0, 5_000.0, "mm", False),
    "speed_rpm": (1.0, 200_000.0, "rpm", False),
    "rotor_mass_kg": (0.001, 100_000.0, "kg", False),
    "drill_mm": (0.1, 100.0, "mm", False),
    "density_g_cm3": (0.1, 25.0, "g/cm³", False),
    "point_deg": (60.0, 180.0, "degrees", False),
    "force_ratio": (0.0, 1.0, "", True),
    "axial_mm": (-100_000.0, 100_000.0, "mm", False),
    "distance_mm": (0.0, 100_000.0, "mm", True),
    "positions": (1, 360, "", False),
    "stack": (1, 100, "", False),
}


def number(span: str, whole: bool = False) -> Callable[[str], float]:
    """An argparse ``type=`` reading a finite number within ``SPANS[span]``; anything else
    is argparse's one-line usage error naming the option and the span."""
    low, high, unit, open_low = SPANS[span]
    unit_text = f" {unit}" if unit else ""
    if whole:
        expect = f"a whole number from {low:g} to {high:g}"
    elif open_low:
        expect = f"a number above {low:g} and at most {high:g}{unit_text}"
    else:
        expect = f"a number from {low:g} to {high:g}{unit_text}"

    def read(text: str) -> float:
        try:
            value = int(text) if whole else float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"expected {expect}, got {text!r}") from None
        if not math.isfinite(value) or value > high or value < low or (open_low and value == low):
            raise argparse.ArgumentTypeError(f"must be {expect}, got {text}")
        return value

    read.__name__ = span  # argparse names the type in some messages
    return read
