"""`trueturn grade`: ISO 21940-11 permissible residual unbalance, and a verdict."""

from __future__ import annotations

import argparse
from typing import Any

from trueturn.balance.iso21940 import (
    GRADES,
    per_plane_permissible,
    permissible_eccentricity_um,
    permissible_unbalance_gmm,
    verdict,
)
from trueturn.cli.common import print_json
from trueturn.errors import UserError


def parse_grade(text: str) -> float:
    """'6.3', 'G6.3' or 'G 6.3' -> 6.3 (mm/s)."""
    cleaned = text.strip().upper().removeprefix("G").strip()
    try:
        value = float(cleaned)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a balance grade: {text!r} (e.g. 6.3 or G6.3)") from None
    if not 0 < value < float("inf"):
        raise argparse.ArgumentTypeError(f"grade must be a finite number greater than 0, got {text!r}")
    return value


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "grade", help="ISO 21940-11 permissible residual unbalance",
        description="Permissible residual unbalance for a rigid rotor after ISO 21940-11:2016 "
                    "(e_per = G/omega, U_per = e_per*m), shared between the correction planes.")
    parser.add_argument("--rotor-mass-kg", type=float, help="mass of the rotor, kg")
    parser.add_argument("--speed-rpm", type=float, help="maximum service speed, rpm")
    parser.add_argument("--grade", type=parse_grade, help="balance quality grade G, mm/s (e.g. 6.3)")
    parser.add_argument("--planes", type=int, default=2, choices=(1, 2),
                        help="number of correction planes (default 2)")
    parser.add_argument("--plane-distance-mm", type=float,
                        help="distance between the two correction planes, mm")
    parser.add_argument("--cg-from-first-plane-mm", type=float,
                        help="distance of the centre of mass from the first plane, mm")
    parser.add_argument("--residual-gmm", type=float, nargs="+", metavar="U",
                        help="measured residual unbalance per plane, g·mm, for a pass/fail verdict")
    parser.add_argument("--list", action="store_true", help="print the grade table and exit")
    parser.add_argument("--json", action="store_true", help="machine-readable output")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    if args.list:
        if args.json:
            print_json([{"grade_mm_s": g.grade_mm_s, "examples": g.examples} for g in GRADES])
        else:
            for g in GRADES:
                print(f"G {g.grade_mm_s:<6g} {g.examples}")
        return 0
    for flag, value in (("--rotor-mass-kg", args.rotor_mass_kg), ("--speed-rpm", args.speed_rpm),
                        ("--grade", args.grade)):
        if value is None:
            raise UserError(f"missing {flag}")
        if not 0 < value < float("inf"):
            raise UserError(f"{flag} must be greater than 0, got {value:g}")
    e_um = permissible_eccentricity_um(args.grade, args.speed_rpm)
    u_gmm = permissible_unbalance_gmm(args.grade, args.speed_rpm, args.rotor_mass_kg)
    shares = per_plane_permissible(u_gmm, args.planes, args.plane_distance_mm,
                                   args.cg_from_first_plane_mm)
    out: dict[str, Any] = {"e_per_um": round(e_um, 6), "U_per_gmm": round(u_gmm, 6),
                           "per_plane_gmm": [round(x, 6) for x in shares]}
    standard = next((g for g in GRADES if abs(g.grade_mm_s - args.grade) < 1e-9), None)
    out["grade_examples"] = standard.examples if standard else None
    if args.residual_gmm is not None:
        if len(args.residual_gmm) != args.planes:
            raise UserError(f"--residual-gmm needs {args.planes} value(s), one per plane")
        if any(not 0 <= r < float("inf") for r in args.residual_gmm):
            raise UserError("--residual-gmm values must not be negative")
        v = verdict(args.residual_gmm, shares)
        out["pass"] = v.passed
    if args.json:
        print_json(out)
        return 0
    print(f"grade G {args.grade:g} at {args.speed_rpm:g} rpm, rotor {args.rotor_mass_kg:g} kg "
          "(ISO 21940-11:2016)")
    if standard is None:
        print("note: not one of the standard grades G 0.4 ... G 4000")
    else:
        print(f"typical rotors: {standard.examples}")
    print(f"permissible specific unbalance e_per: {e_um:.4g} µm")
    print(f"permissible residual unbalance U_per: {u_gmm:.4g} g·mm")
    for i, share in enumerate(shares):
        print(f"  plane {i + 1}: {share:.4g} g·mm")
    if args.residual_gmm is not None:
        print("verdict: " + ("PASS" if out["pass"] else "not within tolerance"))
    print("The machine's manufacturer or your contract may require a different grade.")
    return 0
