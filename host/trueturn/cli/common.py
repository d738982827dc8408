"""Helpers shared by the subcommands: output formatting and opening capture files."""

from __future__ import annotations

import argparse
import contextlib
import json
import math
import sys
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from trueturn.errors import UserError, one_line
from trueturn.model.units import (
    IMPERIAL,
    METRIC,
    UnitChoice,
    length_from_mm,
    length_to_mm,
    mass_from_g,
    mass_to_g,
    rotor_mass_from_kg,
    rotor_mass_to_kg,
    unbalance_from_gmm,
    unbalance_to_gmm,
)

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
    # the imperial twins (model.units): about the same spans, in round numbers
    "mass_oz": (0.0, 350.0, "oz", True),
    "mass_oz_or_zero": (0.0, 350.0, "oz", False),
    "radius_in": (0.04, 200.0, "in", False),
    "rotor_mass_lb": (0.002, 220_000.0, "lb", False),
    "drill_in": (0.004, 4.0, "in", False),
    "axial_in": (-4_000.0, 4_000.0, "in", False),
    "distance_in": (0.0, 4_000.0, "in", True),
    # an unbalance (mass x radius): 0 ... 1e9 g·mm, the cap `grade` uses; about 1.4e6 oz·in
    "unbalance_gmm": (0.0, 1e9, "g·mm", False),
    "unbalance_ozin": (0.0, 1e6, "oz·in", False),
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


# --------------------------------------------------------------------------------------------
# Quantities a person may type in metric or imperial units: one option of each pair, never
# both (argparse's mutually exclusive group says so in one line). The command reads the metric
# name only (``args.rotor_mass_kg``): :func:`read_units` converts an imperial value into it and
# says which units the person used, so the answer comes back in the same units.

@dataclass(frozen=True)
class _Pair:
    metric: str  # unit suffix of the metric option (its span is SPANS[f"{kind}_{metric}"])
    imperial: str
    to_metric: Callable[[float], float]
    #: the units as the help says them, when the suffixes are not words (gmm: g·mm)
    said: tuple[str, str] | None = None


_PAIRS: dict[str, _Pair] = {
    "mass": _Pair("g", "oz", lambda v: mass_to_g(v, "oz")),
    "rotor_mass": _Pair("kg", "lb", lambda v: rotor_mass_to_kg(v, "lb")),
    "radius": _Pair("mm", "in", lambda v: length_to_mm(v, "in")),
    "drill": _Pair("mm", "in", lambda v: length_to_mm(v, "in")),
    "axial": _Pair("mm", "in", lambda v: length_to_mm(v, "in")),
    "distance": _Pair("mm", "in", lambda v: length_to_mm(v, "in")),
    "unbalance": _Pair("gmm", "ozin", lambda v: unbalance_to_gmm(v, "oz", "in"),
                       said=("g·mm", "oz·in")),
}


def add_quantity(parser: Any, flag: str, kind: str, help_text: str, *,
                 spans: tuple[str, str] | None = None, required: bool = False,
                 within: Any = None, **options: Any) -> None:
    """Add ``--FLAG-<metric unit>`` and ``--FLAG-<imperial unit>`` (e.g. ``--rotor-mass-kg``
    / ``--rotor-mass-lb``) as a mutually exclusive pair; ``kind`` is a key of ``_PAIRS``,
    ``spans`` the two spans' names when they are not ``<kind>_<unit>``; ``within``: the
    parser's argument group to list them in."""
    pair = _PAIRS[kind]
    metric_span, imperial_span = spans or (f"{kind}_{pair.metric}", f"{kind}_{pair.imperial}")
    metric_said, imperial_said = pair.said or (pair.metric, pair.imperial)
    group = (within or parser).add_mutually_exclusive_group(required=required)
    group.add_argument(f"--{flag}-{pair.metric}", type=number(metric_span),
                       help=f"{help_text}, {metric_said}", **options)
    group.add_argument(f"--{flag}-{pair.imperial}", type=number(imperial_span),
                       help=f"the same in {imperial_said}", **options)
    known = parser.get_default("_quantities") or ()
    parser.set_defaults(_quantities=(*known, (flag.replace("-", "_"), kind)))


def option_typed(args: argparse.Namespace, name: str) -> str:
    """The option the person typed for the value ``args.<name>`` (its metric name, as the
    command reads it), for a message that names what was typed: ``'within_gmm'`` ->
    ``'--within-ozin'`` when the imperial twin was typed, else ``'--within-gmm'``."""
    for quantity, kind in getattr(args, "_quantities", ()):
        pair = _PAIRS[kind]
        if name == f"{quantity}_{pair.metric}" and \
                getattr(args, f"{quantity}_{pair.imperial}", None) is not None:
            return f"--{quantity.replace('_', '-')}-{pair.imperial}"
    return f"--{name.replace('_', '-')}"


def read_units(args: argparse.Namespace) -> UnitChoice:
    """Put every imperial value into its metric name (in place) and return the units to
    answer in: imperial (oz, in, lb, lbf, oz·in) when the person typed any quantity in
    imperial units, else metric. (Mixed input answers in imperial: an ``oz·mm`` helps
    nobody.)"""
    imperial = False
    for name, kind in getattr(args, "_quantities", ()):
        pair = _PAIRS[kind]
        value = getattr(args, f"{name}_{pair.imperial}", None)
        if value is None:
            continue
        converted = [pair.to_metric(v) for v in value] if isinstance(value, list) else \
            pair.to_metric(value)
        setattr(args, f"{name}_{pair.metric}", converted)
        imperial = True
    return IMPERIAL if imperial else METRIC


#: JSON key endings (the unit in the name) and how a value in that unit is shown in others
_JSON_UNITS: tuple[tuple[str, str], ...] = (("_gmm", "unbalance"), ("_kg", "rotor_mass"),
                                            ("_mm", "length"), ("_g", "mass"),
                                            ("_g_pm", "mass"))  # a ± in grams


def json_in_units(data: Any, shown: UnitChoice) -> Any:
    """A command's JSON answer (metric, units in the key names: ``mass_g``, ``radius_mm``,
    ``rotor_mass_kg``, ``U_per_gmm``) in the units the person typed: each such key renamed
    (``mass_oz``, ``radius_in``, ``rotor_mass_lb``, ``U_per_ozin``) and its number, or list
    of numbers, converted; everything else (degrees, rpm, µm, the grade's mm/s) as it is."""
    if isinstance(data, list):
        return [json_in_units(item, shown) for item in data]
    if not isinstance(data, dict):
        return data
    out: dict[str, Any] = {}
    for key, value in data.items():
        for ending, what in _JSON_UNITS:
            if key.endswith(ending) and not key.endswith("_per_g") and \
                    not isinstance(value, (dict, bool, str)):
                tail = "_pm" if ending.endswith("_pm") else ""
                key, value = _key_in_units(key[: -len(ending)], what, value, shown)
                key += tail
                break
        else:
            value = json_in_units(value, shown)
        out[key] = value
    return out


def _key_in_units(stem: str, what: str, value: Any, shown: UnitChoice) -> tuple[str, Any]:
    convert: Callable[[float], float]
    if what == "unbalance":
        suffix = f"{shown.mass}{shown.length}"
        convert = lambda v: unbalance_from_gmm(v, shown.mass, shown.length)  # noqa: E731
    elif what == "rotor_mass":
        suffix = shown.rotor_mass
        convert = lambda v: rotor_mass_from_kg(v, shown.rotor_mass)  # noqa: E731
    elif what == "length":
        suffix = shown.length
        convert = lambda v: length_from_mm(v, shown.length)  # noqa: E731
    else:
        suffix = shown.mass
        convert = lambda v: mass_from_g(v, shown.mass)  # noqa: E731

    def one(v: Any) -> Any:
        if isinstance(v, list):
            return [one(x) for x in v]
        return None if v is None else round(convert(float(v)), 9)

    return f"{stem}_{suffix}", one(value)
