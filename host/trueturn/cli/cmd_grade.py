"""`trueturn grade`: ISO 21940-11 permissible residual unbalance, and a verdict."""

from __future__ import annotations

import argparse
import math
from typing import Any

from trueturn.angles import phasor
from trueturn.balance.iso21940 import (
    GRADES,
    GRADES_SOURCE,
    Grade,
    Verdict,
    allocate_to_bearings,
    bearing_verdict,
    per_plane_permissible,
    permissible_eccentricity_um,
    permissible_unbalance_gmm,
    verdict,
)
from trueturn.cli.common import add_quantity, json_in_units, number, print_json, read_units
from trueturn.errors import UserError
from trueturn.model.units import (
    IMPERIAL,
    UnitChoice,
    length_text,
    rotor_mass_from_kg,
    unbalance_text,
    unbalance_to_gmm,
)

# The largest grade and residual taken: ISO 21940-11's table ends at G 4000; a residual of
# 10^9 g·mm is a tonne at a metre (common practice, no source: beyond any kit's rotor).
MAX_GRADE_MM_S = 10_000.0
MAX_RESIDUAL_GMM = 1e9


def parse_grade(text: str) -> float:
    """'6.3', 'G6.3' or 'G 6.3' -> 6.3 (mm/s)."""
    cleaned = text.strip().upper().removeprefix("G").strip()
    try:
        value = float(cleaned)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a balance grade: {text!r} (e.g. 6.3 or G6.3)") from None
    if not 0 < value <= MAX_GRADE_MM_S:
        raise argparse.ArgumentTypeError(f"grade must be a number above 0 and at most "
                                         f"{MAX_GRADE_MM_S:g} mm/s, got {text!r}")
    return value


def parse_residual(text: str, unit: str = "g·mm") -> tuple[float, float | None]:
    """'37' -> (37, None); '37@180' -> (37, 180): ``unit``, optionally at an angle in degrees."""
    mag_text, sep, angle_text = text.partition("@")
    try:
        mag = float(mag_text)
        angle = float(angle_text) if sep else None
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"not a residual: {text!r} ({unit}, or {unit}@angle_deg such as 37@180)") from None
    if not 0 <= mag <= MAX_RESIDUAL_GMM or (angle is not None and not -360 <= angle <= 360):
        raise argparse.ArgumentTypeError(
            f"residual must be 0 to {MAX_RESIDUAL_GMM:g} {unit} with an angle within "
            f"-360..360°, got {text!r}")
    return mag, angle


def _parse_residual_ozin(text: str) -> tuple[float, float | None]:
    return parse_residual(text, "oz·in")


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "grade", help="ISO 21940-11 permissible residual unbalance",
        description="Permissible residual unbalance for a rigid rotor after ISO 21940-11:2016 "
                    "(e_per = G/omega, U_per = e_per*m at the maximum service speed), judged at "
                    "the bearing planes when their positions are given (residuals referred by "
                    "rigid-rotor statics), otherwise shared between the correction planes.")
    add_quantity(parser, "rotor-mass", "rotor_mass", "mass of the rotor")
    parser.add_argument("--speed-rpm", type=number("speed_rpm"), help="maximum service speed, rpm")
    parser.add_argument("--grade", type=parse_grade, help="balance quality grade G, mm/s (e.g. 6.3)")
    parser.add_argument("--planes", type=int, default=2, choices=(1, 2),
                        help="number of correction planes (default 2)")
    add_quantity(parser, "plane-distance", "distance",
                 "distance between the two correction planes")
    add_quantity(parser, "cg-from-first-plane", "axial",
                 "distance of the centre of mass from the first plane")
    residual = parser.add_mutually_exclusive_group()
    residual.add_argument("--residual-gmm", type=parse_residual, nargs="+", metavar="U[@DEG]",
                          help="residual unbalance per correction plane, g·mm, optionally at "
                               "an angle (37@180), for a pass/fail verdict")
    residual.add_argument("--residual-ozin", type=_parse_residual_ozin, nargs="+",
                          metavar="U[@DEG]",
                          help="the same in oz·in")
    add_quantity(parser, "plane-axial", "axial", "axial position of each correction plane "
                 "(with --bearing-axial-mm/-in)", nargs="+", metavar="Z")
    add_quantity(parser, "bearing-axial", "axial", "axial positions of the two bearings (same "
                 "origin): the verdict is then judged at the bearing planes (ISO 21940-11)",
                 nargs=2, metavar=("ZA", "ZB"))
    add_quantity(parser, "cg-axial", "axial", "axial position of the rotor's centre of mass "
                 "(default: midway between the bearings)")
    parser.add_argument("--list", action="store_true", help="print the grade table and exit")
    parser.add_argument("--json", action="store_true", help="machine-readable output")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    shown = read_units(args)
    if args.residual_ozin is not None:
        args.residual_gmm = [(unbalance_to_gmm(m, "oz", "in"), a) for m, a in args.residual_ozin]
        shown = IMPERIAL
    args.shown = shown
    if args.list:
        if args.json:
            print_json([{"grade_mm_s": g.grade_mm_s, "examples": g.examples,
                         "rotor_types": list(g.rotor_types), "source": GRADES_SOURCE}
                        for g in GRADES])
        else:
            for g in GRADES:
                print(f"G {g.grade_mm_s:<6g} {g.examples}")
            print(f"source: {GRADES_SOURCE}")
        return 0
    for flag, value in (("--rotor-mass-kg (or -lb)", args.rotor_mass_kg),
                        ("--speed-rpm", args.speed_rpm), ("--grade", args.grade)):
        if value is None:
            raise UserError(f"missing {flag}")
        if not 0 < value < float("inf"):
            raise UserError(f"{flag} must be greater than 0, got {value:g}")
    e_um = permissible_eccentricity_um(args.grade, args.speed_rpm)
    u_gmm = permissible_unbalance_gmm(args.grade, args.speed_rpm, args.rotor_mass_kg)
    if args.bearing_axial_mm is not None:
        return _run_bearings(args, e_um, u_gmm)
    for flag in ("plane_axial_mm", "cg_axial_mm"):
        if getattr(args, flag) is not None:
            raise UserError(f"--{flag.replace('_', '-')} (or -in) needs --bearing-axial-mm "
                            "(or -in)")
    shares = per_plane_permissible(u_gmm, args.planes, args.plane_distance_mm,
                                   args.cg_from_first_plane_mm)
    out: dict[str, Any] = {"e_per_um": round(e_um, 6), "U_per_gmm": round(u_gmm, 6),
                           "tolerance_planes": "correction planes",
                           "per_plane_gmm": [round(x, 6) for x in shares]}
    standard = _standard(args.grade)
    out["grade_examples"] = standard.examples if standard else None
    if args.residual_gmm is not None:
        if len(args.residual_gmm) != args.planes:
            raise UserError(f"--residual-gmm needs {args.planes} value(s), one per plane")
        v = verdict([m for m, _ in args.residual_gmm], shares)
        out["pass"] = v.passed
        out["flags"] = [f.value for f in v.flags]
    if args.json:
        print_json(json_in_units(out, shown))
        return 0
    _header(args, e_um, u_gmm, standard)
    print("tolerance planes: the correction planes (give --bearing-axial-mm and "
          "--plane-axial-mm to judge at the bearings, as ISO 21940-11 does)")
    for i, share in enumerate(shares):
        print(f"  plane {i + 1}: {_u(share, shown)}")
    if args.residual_gmm is not None:
        print("verdict: " + ("PASS" if out["pass"] else "not within tolerance"))
    print("The machine's manufacturer or your contract may require a different grade.")
    return 0


def _u(unbalance_gmm: float, shown: UnitChoice) -> str:
    """An unbalance in the units the person typed."""
    return unbalance_text(unbalance_gmm, shown.mass, shown.length, digits=4)


def _standard(grade_mm_s: float) -> Grade | None:
    return next((g for g in GRADES if abs(g.grade_mm_s - grade_mm_s) < 1e-9), None)


def _header(args: argparse.Namespace, e_um: float, u_gmm: float, standard: Grade | None) -> None:
    shown: UnitChoice = args.shown
    print(f"grade G {args.grade:g} at {args.speed_rpm:g} rpm (maximum service speed), rotor "
          f"{rotor_mass_from_kg(args.rotor_mass_kg, shown.rotor_mass):.4g} {shown.rotor_mass} "
          "(ISO 21940-11:2016)")
    if standard is None:
        print("note: not one of the standard grades G 0.4 ... G 4000")
    else:
        print(f"typical rotors: {standard.examples}")
    print(f"permissible specific unbalance e_per: {e_um:.4g} µm")
    print(f"permissible residual unbalance U_per: {_u(u_gmm, shown)}")


FLAG_TEXT = {
    "worst_case_phasing": "residual angles not given: bearing loads are the worst case "
                          "(every plane's share in phase); give U@angle for the actual value",
    "cg_outside_bearings": "centre of mass outside the bearings: shares limited to 0.3/0.7 of "
                           "U_per; check the standard's rules for such rotors",
    "cg_assumed_midway": "centre of mass not given: taken midway between the bearings",
}


def _run_bearings(args: argparse.Namespace, e_um: float, u_gmm: float) -> int:
    """Verdict at the bearing planes: residuals referred by rigid-rotor statics."""
    if args.plane_distance_mm is not None or args.cg_from_first_plane_mm is not None:
        raise UserError("with --bearing-axial-mm give --cg-axial-mm (and --plane-axial-mm), "
                        "not --plane-distance-mm / --cg-from-first-plane-mm")
    z_a, z_b = args.bearing_axial_mm
    if not (math.isfinite(z_a) and math.isfinite(z_b)) or z_a == z_b:
        raise UserError("--bearing-axial-mm: two different, finite positions are needed")
    if args.cg_axial_mm is not None and not math.isfinite(args.cg_axial_mm):
        raise UserError("--cg-axial-mm must be a finite number")
    out: dict[str, Any] = {"e_per_um": round(e_um, 6), "U_per_gmm": round(u_gmm, 6),
                           "tolerance_planes": "bearings",
                           "bearing_axial_mm": [z_a, z_b], "cg_axial_mm": args.cg_axial_mm}
    standard = _standard(args.grade)
    out["grade_examples"] = standard.examples if standard else None
    v: Verdict | None = None
    if args.residual_gmm is not None:
        planes = args.plane_axial_mm
        if planes is None:
            raise UserError("--residual-gmm with --bearing-axial-mm needs --plane-axial-mm, "
                            "one position per residual")
        if len(planes) != len(args.residual_gmm):
            raise UserError(f"--plane-axial-mm needs {len(args.residual_gmm)} value(s), one "
                            "per --residual-gmm")
        if not all(math.isfinite(z) for z in planes):
            raise UserError("--plane-axial-mm values must be finite numbers")
        angles = [a for _, a in args.residual_gmm]
        known = all(a is not None for a in angles)
        if not known and any(a is not None for a in angles):
            raise UserError("--residual-gmm: give an angle for every plane (U@deg) or for none")
        vectors = [phasor(m, a or 0.0) for m, a in args.residual_gmm]
        v = bearing_verdict(vectors, planes, (z_a, z_b), u_gmm, args.cg_axial_mm,
                            angles_known=known, speed_rpm=args.speed_rpm)
        out["plane_axial_mm"] = list(planes)
        out["plane_arrangement"] = v.arrangement.value if v.arrangement else None
        out["per_bearing_gmm"] = [round(x, 6) for x in v.residual_gmm]
        out["per_bearing_angle_deg"] = [None if a is None else round(a, 2)
                                        for a in v.residual_angle_deg]
        shares = v.permissible_gmm
        flags = [f.value for f in v.flags]
    else:
        shares, share_flags = allocate_to_bearings(u_gmm, (z_a, z_b), args.cg_axial_mm)
        flags = [f.value for f in share_flags]
    out["per_bearing_permissible_gmm"] = [round(x, 6) for x in shares]
    out["per_plane_gmm"] = out["per_bearing_permissible_gmm"]  # per tolerance plane
    out["flags"] = flags
    if v is not None:
        out["pass"] = v.passed
    shown: UnitChoice = args.shown
    if args.json:
        print_json(json_in_units(out, shown))
        return 0
    _header(args, e_um, u_gmm, standard)
    print(f"tolerance planes: the bearings at {length_text(z_a, shown.length)} and "
          f"{length_text(z_b, shown.length)} (ISO 21940-11:2016, clause 4; allocation by the "
          "lever rule, clause 7)")
    for i, (name, share) in enumerate(zip(("A", "B"), shares, strict=True)):
        line = f"  bearing {name}: permitted {_u(share, shown)}"
        if v is not None:
            line += f", residual referred here {_u(v.residual_gmm[i], shown)}"
        print(line)
    if v is not None and v.arrangement is not None:
        print(f"correction planes: {v.arrangement.value}")
    for f in flags:
        print(f"note: {FLAG_TEXT.get(f, f)}")
    if v is not None:
        print("verdict: " + ("PASS" if v.passed else "not within tolerance"))
    print("The machine's manufacturer or your contract may require a different grade.")
    return 0
