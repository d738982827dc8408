"""`trueturn split`: put a correction where masses can go (positions, combining, removal)."""

from __future__ import annotations

import argparse
from typing import Any

from trueturn.balance.iso21940 import per_plane_permissible, permissible_unbalance_gmm
from trueturn.balance.parts import PartsFit, best_combination
from trueturn.balance.splitting import (
    DEFAULT_POINT_ANGLE_DEG,
    combine,
    negligible_parts,
    removal,
    split,
)
from trueturn.cli.cmd_grade import parse_grade
from trueturn.cli.common import (
    add_quantity,
    json_in_units,
    number,
    option_typed,
    print_json,
    read_units,
)
from trueturn.errors import UserError
from trueturn.model.units import (
    IMPERIAL,
    MASS_DECIMALS,
    MassUnit,
    UnitChoice,
    length_text,
    mass_text,
    mass_to_g,
    unbalance_text,
)
from trueturn.positions import degrees_text, equally_spaced_deg, position_text


def _mass_at(text: str, unit: MassUnit = "g") -> tuple[float, float]:
    """``'MASS@ANGLE'`` -> (grams, degrees); MASS in ``unit``."""
    try:
        mass, angle = text.split("@")
        value = number(f"mass_{unit}_or_zero")(mass)
        return mass_to_g(value, unit), number("angle_deg")(angle)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected MASS_{unit.upper()}@ANGLE_DEG, got "
                                         f"{text!r}") from None
    except argparse.ArgumentTypeError as exc:
        raise argparse.ArgumentTypeError(f"{text!r}: {exc}") from None


def _oz_at(text: str) -> tuple[float, float]:
    return _mass_at(text, "oz")


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "split", help="split a correction onto the rotor's positions",
        description="Split a correction mass onto the two neighbouring positions of N equally "
                    "spaced positions (blades, holes) or of a list of angles; combine several "
                    "masses into one; or remove material opposite instead of adding. Angles "
                    "count from the reference mark against rotation; positions are numbered "
                    "from 1 in the same direction, as on the printed ring.")
    add_quantity(parser, "mass", "mass", "correction mass",
                 spans=("mass_g_or_zero", "mass_oz_or_zero"))
    parser.add_argument("--angle-deg", type=number("angle_deg"), help="correction angle, degrees")
    combining = parser.add_mutually_exclusive_group()
    combining.add_argument("--combine", type=_mass_at, nargs="+", metavar="MASS_G@ANGLE_DEG",
                           help="use the vector sum of these masses as the correction")
    combining.add_argument("--combine-oz", type=_oz_at, nargs="+", metavar="MASS_OZ@ANGLE_DEG",
                           help="the same with the masses in oz")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--positions", type=number("positions", whole=True), help="number of equally spaced positions")
    where.add_argument("--at-deg", type=number("angle_deg"), nargs="+", metavar="ANGLE",
                       help="explicit position angles, degrees, position 1 first")
    parser.add_argument("--first-deg", type=number("angle_deg"),
                        help="angle of position 1 for --positions (default 0), as for "
                             "`trueturn ring`")
    parser.add_argument("--remove", action="store_true",
                        help="drill material out at the opposite angle instead of adding")
    add_quantity(parser, "drill", "drill", "drill diameter for --remove")
    parser.add_argument("--density-g-cm3", type=number("density_g_cm3"), default=7.85,
                        help="material density for --remove, g/cm³ (default 7.85, steel)")
    parser.add_argument("--point-deg", type=number("point_deg"), default=DEFAULT_POINT_ANGLE_DEG,
                        help="drill point angle, degrees (default 118)")
    have = parser.add_argument_group(
        "the weights you have", "place the correction as the best combination of the parts "
        "you own (exact branch-and-bound search; the unbalance left is reported)")
    add_quantity(parser, "have", "mass", "mass of each part you own, one per piece "
                 "(0.5 0.5 1.0 2.0)", within=have, nargs="+", metavar="MASS")
    have.add_argument("--stack", type=number("stack", whole=True), default=None,
                      help="most parts one position takes (default 1)")
    add_quantity(parser, "radius", "radius", "radius of the positions (for the unbalance "
                 "left)", within=have)
    have.add_argument("--grade", type=parse_grade,
                      help="balance quality grade G to judge the unbalance left against "
                           "(with --speed-rpm and --rotor-mass-kg)")
    have.add_argument("--speed-rpm", type=number("speed_rpm"), help="maximum service speed, rpm")
    add_quantity(parser, "rotor-mass", "rotor_mass", "mass of the rotor", within=have)
    have.add_argument("--planes", type=int, choices=(1, 2), default=1,
                      help="correction planes of the rotor: 2 gives this plane half of U_per "
                           "(default 1)")
    add_quantity(parser, "within", "unbalance", "unbalance good enough to stop at: the fewest "
                 "parts that leave at most U (default: the least unbalance, whatever the "
                 "number of parts)", within=have, metavar="U")
    have.add_argument("--machine", metavar="NAME",
                      help="take the positions, radius, owned parts (correction_parts) and "
                           "grade from this machine profile; options given here win")
    have.add_argument("--plane", metavar="NAME",
                      help="with --machine: the correction plane (needed when it has two)")
    have.add_argument("--workspace", metavar="DIR",
                      help="workspace folder (default: $TRUETURN_WORKSPACE or the user data "
                           "folder)")
    parser.add_argument("--json", action="store_true", help="machine-readable output")
    parser.set_defaults(run=run)


def _from_machine(args: argparse.Namespace) -> UnitChoice | None:
    """Fill what the command line left out from the machine profile (``--machine``); the
    profile's units."""
    from trueturn.jobs.store import Workspace

    if args.machine is None:
        if args.plane is not None:
            raise UserError("--plane goes with --machine")
        return None
    profile = Workspace.open(args.workspace).load_machine(args.machine)
    if args.plane is None:
        if len(profile.planes) != 1:
            names = ", ".join(p.name for p in profile.planes)
            raise UserError(f"machine {profile.name!r} has two planes ({names}): give --plane")
        plane = profile.planes[0]
    else:
        try:
            plane = profile.plane(args.plane)
        except KeyError:
            raise UserError(f"machine {profile.name!r} has no plane {args.plane!r}") from None
    if args.positions is None and not args.at_deg:
        angles = plane.position_angles_deg
        if not angles:
            raise UserError(f"plane {plane.name!r} takes a mass at any angle (layout 'free'): "
                            "there is nothing to split onto")
        args.at_deg = list(angles)
    if args.have_g is None and profile.correction_parts is not None:
        args.have_g = profile.correction_parts.masses_g()
        if args.stack is None:
            args.stack = profile.correction_parts.stack
    if args.have_g is not None:
        if args.radius_mm is None:
            args.radius_mm = plane.radius_mm
        if args.grade is None and args.speed_rpm is None and args.rotor_mass_kg is None:
            args.grade, args.speed_rpm = profile.target_grade, profile.speed_max_rpm
            args.rotor_mass_kg = profile.rotor_mass_kg
            args.planes = len(profile.planes)
    return profile.units.choice()


def run(args: argparse.Namespace) -> int:
    shown = read_units(args)
    machine_units = _from_machine(args)
    if machine_units is not None and machine_units.mass == "oz":
        shown = machine_units  # the machine's own units, unless the command line gave some
    if args.combine_oz is not None:
        args.combine, shown = args.combine_oz, IMPERIAL  # in grams already (_oz_at)
    args.shown = shown
    if args.combine:
        if args.mass_g is not None or args.angle_deg is not None:
            raise UserError("give either --combine or --mass-g/--angle-deg, not both")
        if any(m < 0 for m, _ in args.combine):
            raise UserError("--combine: masses must not be negative")
        mass_g, angle_deg = combine(args.combine)
    else:
        if args.mass_g is None or args.angle_deg is None:
            raise UserError("missing --mass-g and --angle-deg (or --combine)")
        mass_g, angle_deg = args.mass_g, args.angle_deg
    scale = sum(m for m, _ in args.combine) if args.combine else 0.0
    if not mass_g > 1e-9 * scale:
        if args.combine:
            raise UserError("--combine: the masses cancel out; nothing to split")
        raise UserError(f"--mass-g must be greater than 0, got {mass_g:g}")
    if args.first_deg is not None and args.positions is None:
        raise UserError("--first-deg goes with --positions (the angle of position 1)")
    angles = [("--angle-deg", args.angle_deg), ("--first-deg", args.first_deg),
              *(("--at-deg", a) for a in args.at_deg or ()),
              *(("--combine", a) for _, a in args.combine or ())]
    for option, value in angles:
        if value is not None and not -360.0 <= value <= 360.0:
            raise UserError(f"{option}: angles are -360..360 degrees from the reference mark, "
                            f"against rotation; got {value:g}")
    if args.have_g is None:
        for name in ("stack", "radius_mm", "grade", "speed_rpm", "rotor_mass_kg",
                     "within_gmm"):
            if getattr(args, name) is not None:
                raise UserError(f"{option_typed(args, name)} goes with --have-g or --have-oz "
                                "(the parts you own)")
    elif args.remove:
        raise UserError(f"{option_typed(args, 'have_g')} places parts you add; it does not go "
                        "with --remove")
    if args.remove:
        if args.drill_mm is None:
            raise UserError("--remove needs --drill-mm")
        angle_deg = (angle_deg + 180.0) % 360.0
    if args.positions is not None:
        if args.positions < 3:
            raise UserError(f"--positions must be at least 3 to reach every angle, got {args.positions}")
        positions = list(equally_spaced_deg(args.positions, args.first_deg or 0.0))
    elif args.at_deg:
        positions = list(args.at_deg)
    else:
        positions = [angle_deg]
    if args.have_g is not None:
        if not (args.positions or args.at_deg):
            raise UserError(f"{option_typed(args, 'have_g')} needs the rotor's positions "
                            "(--positions N or --at-deg)")
        return _run_have(args, mass_g, angle_deg, positions)
    parts = split(mass_g, angle_deg, positions)
    resolution_g = mass_to_g(10.0 ** -MASS_DECIMALS[shown.mass], shown.mass)
    left_out = negligible_parts(parts, resolution_g)
    out: dict[str, Any] = {"mode": "remove" if args.remove else "add",
                           "correction": {"mass_g": round(mass_g, 6), "angle_deg": round(angle_deg, 3)},
                           "parts": []}
    for p in parts:
        item: dict[str, Any] = {"position": p.number if (args.positions or args.at_deg) else None,
                                "angle_deg": round(p.angle_deg, 3), "mass_g": round(p.mass_g, 6),
                                "negligible": p in left_out}
        if args.remove:
            hole = removal(p.mass_g, (p.angle_deg + 180.0) % 360.0, args.drill_mm,
                           args.density_g_cm3, args.point_deg)
            item["depth_full_diameter_mm"] = round(hole.depth_full_diameter_mm, 3)
            item["depth_to_tip_mm"] = round(hole.depth_to_tip_mm, 3)
        out["parts"].append(item)
    if args.json:
        print_json(json_in_units(out, shown))
        return 0
    verb = "remove" if args.remove else "add"
    print(f"correction to {verb}: {mass_text(mass_g, shown.mass)} at {degrees_text(angle_deg)}")
    for item in out["parts"]:
        if item["position"] is not None:
            where = position_text(item["position"], item["angle_deg"])
        else:
            where = f"at {degrees_text(item['angle_deg'])}"
        if item["negligible"]:
            print(f"  ({where}: {mass_text(item['mass_g'], shown.mass)}, below what the scale "
                  "weighs: nothing to place)")
            continue
        text = f"  {where}: {verb} {mass_text(item['mass_g'], shown.mass)}"
        if args.remove:
            text += (f" — {length_text(args.drill_mm, shown.length)} drill, "
                     f"{length_text(item['depth_full_diameter_mm'], shown.length)} at full "
                     f"diameter ({length_text(item['depth_to_tip_mm'], shown.length)} to the "
                     "tip)")
        print(text)
    if args.remove:
        print("Caution: work only with the machine switched off, locked out and at standstill "
              "(tach confirmed); check that drilling does not weaken the part and follow the "
              "manufacturer's instructions.")
    else:
        print(ADD_CAUTION)
    return 0


def _allowed_gmm(args: argparse.Namespace) -> float | None:
    """U_per for this plane (ISO 21940-11) when the grade inputs are given, else None."""
    given = {"--grade": args.grade, "--speed-rpm": args.speed_rpm,
             "--rotor-mass-kg": args.rotor_mass_kg}
    if all(v is None for v in given.values()):
        return None
    for flag, value in given.items():
        if value is None:
            raise UserError(f"missing {flag}: the grade needs --grade, --speed-rpm and "
                            "--rotor-mass-kg")
        if not 0 < value < float("inf"):
            raise UserError(f"{flag} must be greater than 0, got {value:g}")
    u_per = permissible_unbalance_gmm(args.grade, args.speed_rpm, args.rotor_mass_kg)
    return per_plane_permissible(u_per, args.planes)[0]


def _run_have(args: argparse.Namespace, mass_g: float, angle_deg: float,
              positions: list[float]) -> int:
    """The correction made from the parts the person owns (balance.parts)."""
    if args.radius_mm is None:
        raise UserError(f"{option_typed(args, 'have_g')} needs --radius-mm or --radius-in (the "
                        "radius of the positions) to give the unbalance left")
    if not 0 < args.radius_mm < float("inf"):
        raise UserError(f"--radius-mm must be greater than 0, got {args.radius_mm:g}")
    stack = 1 if args.stack is None else args.stack
    if stack < 1:
        raise UserError(f"--stack must be at least 1 part per position, got {stack}")
    allowed = _allowed_gmm(args)
    enough_g = None if args.within_gmm is None else args.within_gmm / args.radius_mm
    fit: PartsFit = best_combination(mass_g, angle_deg, positions, args.have_g, stack,
                                     enough_g=enough_g)
    residual_gmm = fit.residual_gmm(args.radius_mm)
    out: dict[str, Any] = {
        "mode": "parts", "method": "branch and bound, exact unless proven_best is false",
        "correction": {"mass_g": round(mass_g, 6), "angle_deg": round(angle_deg, 3)},
        "stack": stack, "radius_mm": args.radius_mm, "within_gmm": args.within_gmm,
        "parts": [{"position": u.number, "angle_deg": round(u.angle_deg, 3),
                   "masses_g": list(u.masses_g), "mass_g": round(u.mass_g, 6)}
                  for u in fit.uses],
        "unused_g": list(fit.unused_g),
        "residual_g": round(fit.residual_g, 6),
        "residual_angle_deg": round(fit.residual_angle_deg, 3),
        "residual_gmm": round(residual_gmm, 6),
        "proven_best": fit.proven_best,
        "grade": None,
    }
    if allowed is not None:
        out["grade"] = {"grade_mm_s": args.grade, "speed_rpm": args.speed_rpm,
                        "rotor_mass_kg": args.rotor_mass_kg, "planes": args.planes,
                        "allowed_gmm": round(allowed, 6), "within": residual_gmm <= allowed}
    if args.json:
        print_json(json_in_units(out, args.shown))
        return 0
    shown: UnitChoice = args.shown
    print(f"correction to add: {mass_text(mass_g, shown.mass)} at {degrees_text(angle_deg)}")
    if fit.uses:
        words = ", ".join(_use_text(u.masses_g, u.number, u.angle_deg, shown)
                          for u in fit.uses)
    else:
        words = "nothing (any part you have would leave more unbalance than adding none)"
    line = (f"best with your parts: {words}; leaves "
            f"{unbalance_text(residual_gmm, shown.mass, shown.length)}")
    if allowed is not None:
        within = "within" if out["grade"]["within"] else "NOT within"
        line += (f", allowed {unbalance_text(allowed, shown.mass, shown.length)} ({within} "
                 f"G {args.grade:g})")
    print(line)
    if fit.unused_g:
        print("left over: " + ", ".join(mass_text(m, shown.mass) for m in fit.unused_g))
    if not fit.proven_best:
        print("note: the search stopped at its limit; this is the best found, not proven the "
              "best (the unbalance left is exact for the parts shown)")
    print(ADD_CAUTION)
    return 0


ADD_CAUTION = ("Caution: fasten every part securely; work only with the machine switched off, "
               "locked out and at standstill (tach confirmed), and follow the manufacturer's "
               "instructions.")


def _use_text(masses_g: tuple[float, ...], number: int, angle_deg: float,
              shown: UnitChoice) -> str:
    """``'2 × 0.50 g + 1.00 g at position 3 (120°)'``."""
    groups: dict[float, int] = {}
    for m in masses_g:
        groups[m] = groups.get(m, 0) + 1
    what = " + ".join(f"{n} × {mass_text(m, shown.mass)}" if n > 1 else mass_text(m, shown.mass)
                      for m, n in groups.items())
    return f"{what} at {position_text(number, angle_deg)}"
