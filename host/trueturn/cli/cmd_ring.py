"""`trueturn ring`: write a printable 1:1 angle ring (SVG) for a rotor face or rim."""

from __future__ import annotations

import argparse
import math
import sys

from trueturn.errors import UserError


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "ring", help="write a printable 1:1 angle ring for a rotor (SVG)",
        description="Write an SVG angle ring to print at 100 % and lay on the rotor: 0 deg at "
                    "the reference mark, degree ticks, the weight positions numbered against "
                    "rotation, and a 100 mm box to check the printed scale.")
    parser.add_argument("--diameter-mm", type=float, required=True, metavar="D",
                        help="outer diameter of the ring = rotor face or rim diameter, mm")
    parser.add_argument("--positions", type=int, metavar="N",
                        help="number of equally spaced weight positions")
    parser.add_argument("--angles", metavar="DEG,DEG,...",
                        help="irregular positions instead: their angles from the reference "
                             "mark, position 1 first (as a plane's 'layout: angles' in a job "
                             "file), e.g. 0,40,95,180,270")
    parser.add_argument("--first-deg", type=float, default=0.0, metavar="DEG",
                        help="angle of position 1 from the reference mark (default 0)")
    parser.add_argument("--rotation", choices=("cw", "ccw"), default="cw",
                        help="which way the rotor turns, seen looking at the face the ring "
                             "goes on (default cw)")
    parser.add_argument("--rim", action="store_true",
                        help="a straight strip (length pi x D) to wrap round a rim, instead "
                             "of a ring for the face")
    parser.add_argument("--tiles", action="store_true",
                        help="a ring larger than a sheet: write an HTML page with one 1:1 "
                             "sheet per tile to print and tape together")
    parser.add_argument("--title", default="", help="a line of text printed on the ring")
    parser.add_argument("-o", "--output", default="ring.svg", metavar="FILE",
                        help="file to write (default ring.svg, ring.html with --tiles; '-' for "
                             "standard output)")
    parser.set_defaults(run=run)


def _angles(text: str) -> list[float]:
    """``'0,40,95'`` as degrees; a UserError naming the bad item."""
    out = []
    for item in text.replace(" ", "").split(","):
        try:
            value = float(item)
        except ValueError:
            raise UserError(f"--angles: {item!r} is not an angle in degrees (give e.g. "
                            "0,40,95,180)") from None
        if not math.isfinite(value) or not -360.0 <= value <= 360.0:
            raise UserError(f"--angles: {item} must be -360..360 degrees from the reference "
                            "mark")
        out.append(value)
    return out


def run(args: argparse.Namespace) -> int:
    from trueturn.jobs.ring import (
        min_gap_deg,
        plan_ring,
        ring_svg,
        ring_tiles_html,
        strip_svg,
    )

    if not math.isfinite(args.diameter_mm) or not 10.0 <= args.diameter_mm <= 2000.0:
        raise UserError(f"--diameter-mm {args.diameter_mm:g}: must be between 10 and 2000 mm")
    angles = None
    if args.angles is not None:
        if args.positions is not None or args.first_deg != 0.0:
            raise UserError("give either --angles or --positions (with --first-deg), not both")
        angles = _angles(args.angles)
        if not 1 <= len(angles) <= 360:
            raise UserError(f"--angles: {len(angles)} angles; give 1 to 360")
        if len(angles) > 1 and min_gap_deg(angles) < 0.1:
            raise UserError("--angles: two positions are on the same angle")
    elif args.positions is None:
        raise UserError("give --positions N (equally spaced) or --angles DEG,DEG,... "
                        "(irregular)")
    elif not 1 <= args.positions <= 360:
        raise UserError(f"--positions {args.positions}: must be between 1 and 360")
    if not math.isfinite(args.first_deg) or not -360.0 <= args.first_deg <= 360.0:
        raise UserError(f"--first-deg must be -360..360 degrees from the reference mark, got "
                        f"{args.first_deg:g}")
    if args.tiles and args.rim:
        raise UserError("choose --tiles (a big ring) or --rim (a strip), not both")
    output = args.output if not (args.tiles and args.output == "ring.svg") else "ring.html"
    if output != "-":
        from trueturn.files import check_output

        check_output(output, stdout_dash=True)  # said before any drawing
    if args.tiles:
        page, tiles = ring_tiles_html(args.diameter_mm, args.positions, args.first_deg,
                                      args.rotation, args.title, angles)
        _write(output, page)
        if output != "-":
            print(f"wrote {output}: {len(tiles)} sheet(s) to print at 100 % and tape together",
                  file=sys.stderr)
        for note in plan_ring(args.diameter_mm, args.positions, args.first_deg, args.rotation,
                              args.title, angles).notes:
            print(f"note: {note}", file=sys.stderr)
        return 0
    if args.rim:
        text, strip = strip_svg(args.diameter_mm, args.positions, args.first_deg, args.title,
                                angles)
        _write(args.output, text)
        if args.output != "-":
            print(f"wrote {args.output}: strip {strip.length_mm:.1f} mm long in {strip.rows} "
                  f"row(s), positions {strip.spacing_mm:.2f} mm apart; print at 100 %",
                  file=sys.stderr)
        return 0
    text, layout = ring_svg(args.diameter_mm, args.positions, args.first_deg, args.rotation,
                            args.title, angles)
    _write(args.output, text)
    if args.output != "-":
        apart = "apart" if angles is None else "apart at the closest"
        print(f"wrote {args.output}: {layout.width_mm:.0f} x {layout.height_mm:.0f} mm, "
              f"positions {layout.spacing_mm:.2f} mm {apart} on the rim; print at 100 %",
              file=sys.stderr)
    for note in layout.notes:
        print(f"note: {note}", file=sys.stderr)
    if not layout.fits_a4_and_letter:
        print("note: larger than an A4/Letter sheet; use --tiles for sheets to tape together, "
              "or --rim for a strip", file=sys.stderr)
    return 0


def _write(output: str, text: str) -> None:
    from trueturn.files import atomic_write_text

    if output == "-":
        sys.stdout.write(text)
    else:
        atomic_write_text(output, text)
