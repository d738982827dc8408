"""`trueturn trial-mass`: size a trial mass from rotor mass, radius and speed."""

from __future__ import annotations

import argparse

from trueturn.balance.trial_mass import DEFAULT_FORCE_RATIO, size_trial_mass
from trueturn.cli.common import add_quantity, number, print_json, read_units
from trueturn.model.units import (
    force_from_n,
    force_text,
    length_from_mm,
    length_text,
    mass_from_g,
    mass_text,
)


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "trial-mass", help="size a trial mass",
        description="Trial mass whose centrifugal force is about 10 % of the rotor's weight "
                    "(common practice), capped at 1 % of the rotor mass or --max-mass-g. "
                    "Give the rotor in kg or lb, the radius in mm or in: the answer comes in "
                    "the same units (oz with lb, forces in N and lbf).")
    add_quantity(parser, "rotor-mass", "rotor_mass", "rotor mass", required=True)
    add_quantity(parser, "radius", "radius", "radius at which the trial mass sits",
                 required=True)
    parser.add_argument("--speed-rpm", type=number("speed_rpm"), required=True, help="balancing speed, rpm")
    parser.add_argument("--force-ratio", type=number("force_ratio"), default=DEFAULT_FORCE_RATIO,
                        help="centrifugal force as a fraction of the rotor weight (default 0.1)")
    add_quantity(parser, "max-mass", "mass", "largest trial mass you can fit")
    parser.add_argument("--json", action="store_true", help="machine-readable output")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    shown = read_units(args)
    t = size_trial_mass(args.rotor_mass_kg, args.radius_mm, args.speed_rpm,
                        args.force_ratio, args.max_mass_g, shown.mass)
    if args.json:
        print_json({f"mass_{shown.mass}": round(mass_from_g(t.mass_g, shown.mass), 9),
                    f"radius_{shown.length}": round(length_from_mm(args.radius_mm,
                                                                    shown.length), 6),
                    "force_n": round(t.force_n, 6),
                    "force_lbf": round(force_from_n(t.force_n, "lbf"), 9),
                    "force_ratio": round(t.force_ratio, 6),
                    "force_over_own_weight": round(t.force_over_own_weight, 3),
                    "capped": t.capped, "warnings": t.warnings})
        return 0
    force = f"{force_text(t.force_n, 'N')} = {force_text(t.force_n, 'lbf')}"
    print(f"trial mass: {mass_text(t.mass_g, shown.mass)} at "
          f"{length_text(args.radius_mm, shown.length)}")
    print(f"centrifugal force at {args.speed_rpm:g} rpm: {force} = "
          f"{100 * t.force_ratio:.3g} % of the rotor's weight = "
          f"{t.force_over_own_weight:.0f} × the trial mass's own weight")
    for w in t.warnings:
        print(f"warning: {w}")
    print(f"Caution: fasten the trial mass to hold well over {force} (bolt, set screw or "
          "clamp; no tape or magnets on fast rotors). Attach it only with the machine switched "
          "off, locked out and at standstill (tach confirmed), keep clear of the plane of "
          "rotation during the run, and follow the manufacturer's instructions.")
    return 0
