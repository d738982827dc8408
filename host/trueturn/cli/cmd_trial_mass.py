"""`trueturn trial-mass`: size a trial mass from rotor mass, radius and speed."""

from __future__ import annotations

import argparse

from trueturn.balance.trial_mass import DEFAULT_FORCE_RATIO, size_trial_mass
from trueturn.cli.common import number, print_json


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "trial-mass", help="size a trial mass",
        description="Trial mass whose centrifugal force is about 10 % of the rotor's weight "
                    "(common practice), capped at 1 % of the rotor mass or --max-mass-g.")
    parser.add_argument("--rotor-mass-kg", type=number("rotor_mass_kg"), required=True, help="rotor mass, kg")
    parser.add_argument("--radius-mm", type=number("radius_mm"), required=True,
                        help="radius at which the trial mass sits, mm")
    parser.add_argument("--speed-rpm", type=number("speed_rpm"), required=True, help="balancing speed, rpm")
    parser.add_argument("--force-ratio", type=number("force_ratio"), default=DEFAULT_FORCE_RATIO,
                        help="centrifugal force as a fraction of the rotor weight (default 0.1)")
    parser.add_argument("--max-mass-g", type=number("mass_g"), help="largest trial mass you can fit, g")
    parser.add_argument("--json", action="store_true", help="machine-readable output")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    t = size_trial_mass(args.rotor_mass_kg, args.radius_mm, args.speed_rpm,
                        args.force_ratio, args.max_mass_g)
    if args.json:
        print_json({"mass_g": round(t.mass_g, 6), "force_n": round(t.force_n, 6),
                    "force_ratio": round(t.force_ratio, 6),
                    "force_over_own_weight": round(t.force_over_own_weight, 3),
                    "capped": t.capped, "warnings": t.warnings})
        return 0
    print(f"trial mass: {t.mass_g:.3g} g at {args.radius_mm:g} mm")
    print(f"centrifugal force at {args.speed_rpm:g} rpm: {t.force_n:.3g} N = "
          f"{100 * t.force_ratio:.3g} % of the rotor's weight = "
          f"{t.force_over_own_weight:.0f} × the trial mass's own weight")
    for w in t.warnings:
        print(f"warning: {w}")
    print(f"Caution: fasten the trial mass to hold well over {t.force_n:.3g} N (bolt, set screw or "
          "clamp; no tape or magnets on fast rotors). Attach it only with the machine switched "
          "off, locked out and at standstill (tach confirmed), keep clear of the plane of "
          "rotation during the run, and follow the manufacturer's instructions.")
    return 0
