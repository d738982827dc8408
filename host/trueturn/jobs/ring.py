"""A printable 1:1 angle ring (SVG in millimetres) to lay on a rotor face or wrap on a rim.

The ring's outer edge has the rotor's diameter; 0 deg sits at the reference mark, degree
ticks run round the edge and the weight positions are numbered in the tool's direction:
against rotation (host/trueturn/angles.py). ``rotation`` is the way the rotor turns as seen
looking at the face the ring is laid on, so the numbers run the right way on paper. A 100 mm
ruler box lets the person check that the printer kept the scale.

The SVG's ``width``/``height`` are in mm and its ``viewBox`` uses the same numbers, so one
user unit is one millimetre on paper when printed at 100 %.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass

from trueturn.angles import Rotation, screen_xy, wrap_deg
from trueturn.positions import equally_spaced_deg, number_of

#: Largest drawing that fits A4 portrait (210 x 297 mm) with 12 mm margins.
A4_PRINTABLE_MM = (186.0, 273.0)
#: US Letter (215.9 x 279.4 mm) with 12 mm margins.
LETTER_PRINTABLE_MM = (191.9, 255.4)
RULER_MM = 100.0
MARGIN_MM = 8.0
#: Printed on every ring and strip: the person's hands are on the rotor while using it.
CAUTION = ("Caution: fit, read and remove the ring only with the rotor stopped (tach shows",
           "standstill), the machine switched off and unplugged. Take it off before any run.")


@dataclass(frozen=True)
class RingLayout:
    """Where everything goes; returned with the SVG so callers (and tests) can check it."""

    diameter_mm: float
    positions: int
    first_deg: float
    rotation: Rotation
    width_mm: float
    height_mm: float
    centre_mm: tuple[float, float]
    band_mm: float
    tick_step_deg: int
    position_angles_deg: tuple[float, ...]  # entry k: position k + 1 (positions.py)

    @property
    def fits_a4_and_letter(self) -> bool:
        return (self.width_mm <= min(A4_PRINTABLE_MM[0], LETTER_PRINTABLE_MM[0])
                and self.height_mm <= min(A4_PRINTABLE_MM[1], LETTER_PRINTABLE_MM[1]))

    @property
    def spacing_mm(self) -> float:
        """Arc length between neighbouring positions along the rim: pi * D / N."""
        return math.pi * self.diameter_mm / self.positions


def ring_point(layout: RingLayout, radius_mm: float, angle_deg: float) -> tuple[float, float]:
    """Paper coordinates (mm) of ``angle_deg`` (against rotation, 0 at the top mark)."""
    cx, cy = layout.centre_mm
    x, y = screen_xy(angle_deg, layout.rotation)  # the one angle-to-picture mapping
    return cx + radius_mm * x, cy + radius_mm * y


def tick_step_deg(diameter_mm: float, min_gap_mm: float = 0.7) -> int:
    """Finest degree step (1, 2, 5 or 10) whose ticks are at least ``min_gap_mm`` apart."""
    for step in (1, 2, 5, 10):
        if math.pi * diameter_mm * step / 360.0 >= min_gap_mm:
            return step
    return 10


def plan_ring(diameter_mm: float, positions: int, first_deg: float = 0.0,
              rotation: Rotation = "cw") -> RingLayout:
    """Size the drawing for a ring of ``diameter_mm`` with ``positions`` numbered marks."""
    if not (math.isfinite(diameter_mm) and 10.0 <= diameter_mm <= 2000.0):
        raise ValueError("diameter must be between 10 and 2000 mm")
    if not 1 <= positions <= 360:
        raise ValueError("positions must be between 1 and 360")
    if rotation not in ("cw", "ccw"):
        raise ValueError("rotation must be cw or ccw")
    radius = diameter_mm / 2.0
    band = min(22.0, max(6.0, 0.3 * radius))
    width = max(diameter_mm + 8.0, 150.0) + 2 * MARGIN_MM  # room for outside labels and text
    ring_block = diameter_mm + 2 * 6.0  # room for the reference triangle above
    height = MARGIN_MM + 7.0 + ring_block + 34.0 + MARGIN_MM
    centre = (width / 2.0, MARGIN_MM + 7.0 + 6.0 + radius)
    angles = equally_spaced_deg(positions, first_deg)
    return RingLayout(diameter_mm, positions, wrap_deg(first_deg), rotation, round(width, 3),
                      round(height, 3), centre, band, tick_step_deg(diameter_mm), angles)


def ring_svg(diameter_mm: float, positions: int, first_deg: float = 0.0,
             rotation: Rotation = "cw", title: str = "") -> tuple[str, RingLayout]:
    """The ring drawing as SVG text, and its layout."""
    lay = plan_ring(diameter_mm, positions, first_deg, rotation)
    r = diameter_mm / 2.0
    cx, cy = lay.centre_mm
    band = lay.band_mm
    label_size = max(2.2, min(4.0, band * 0.22))
    out = [
        '<?xml version="1.0" encoding="UTF-8"?>',
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{lay.width_mm:g}mm" '
        f'height="{lay.height_mm:g}mm" viewBox="0 0 {lay.width_mm:g} {lay.height_mm:g}" '
        f'data-diameter-mm="{diameter_mm:g}" data-positions="{positions}" '
        f'data-rotation="{rotation}" data-centre-mm="{cx:g},{cy:g}">',
        f'<title>trueturn angle ring, diameter {diameter_mm:g} mm, {positions} positions</title>',
        '<style>text { font-family: "DejaVu Sans", Arial, sans-serif; fill: #000; } '
        '.small { font-size: 2.4px; } .info { font-size: 3px; } .deg { font-size: '
        f'{label_size * 0.8:.2f}px; }} .pos {{ font-size: {label_size:.2f}px; font-weight: bold; }}'
        '</style>',
        f'<text x="{MARGIN_MM}" y="{MARGIN_MM}" class="info">trueturn angle ring: diameter '
        f'{diameter_mm:g} mm, {positions} positions every {360.0 / positions:g}\u00b0, position 1 '
        f'at {lay.first_deg:g}\u00b0' + (f", {html.escape(title)}" if title else "") + '</text>',
        f'<text x="{MARGIN_MM}" y="{MARGIN_MM + 3.5}" class="small">The rotor turns {rotation} '
        'as seen on this side. Numbers and degrees increase against rotation.</text>',
        f'<text x="{MARGIN_MM}" y="{MARGIN_MM + 6.5}" class="small">Cut along the outer circle '
        'and put 0\u00b0 on the reference mark.</text>',
        f'<circle class="rim" cx="{cx:g}" cy="{cy:g}" r="{r:g}" fill="none" stroke="#000" '
        'stroke-width="0.3"/>',
        f'<circle class="inner" cx="{cx:g}" cy="{cy:g}" r="{r - band:g}" fill="none" '
        'stroke="#000" stroke-width="0.2" stroke-dasharray="1.5 1"/>',
        f'<path d="M {cx - 3:g} {cy:g} H {cx + 3:g} M {cx:g} {cy - 3:g} V {cy + 3:g}" '
        'stroke="#000" stroke-width="0.2"/>',
    ]
    step = lay.tick_step_deg
    for deg in range(0, 360, step):
        length = 4.0 if deg % 10 == 0 else 2.8 if deg % 5 == 0 else 1.6
        length = min(length, band * 0.45)
        x1, y1 = ring_point(lay, r, deg)
        x2, y2 = ring_point(lay, r - length, deg)
        out.append(f'<line class="degree-tick" data-deg="{deg}" x1="{x1:.3f}" y1="{y1:.3f}" '
                   f'x2="{x2:.3f}" y2="{y2:.3f}" stroke="#000" stroke-width="0.15"/>')
    label_every = 10 if diameter_mm >= 150 else 30 if diameter_mm >= 60 else 90
    min_gap_deg = math.degrees(4.0 / r)  # keep degree labels 4 mm away from position marks
    for deg in range(0, 360, label_every):
        if any(abs((deg - a + 180.0) % 360.0 - 180.0) < min_gap_deg
               for a in (*lay.position_angles_deg, 0.0)):
            continue
        tx, ty = ring_point(lay, r - min(4.0, band * 0.45) - label_size * 0.9, deg)
        out.append(f'<text x="{tx:.2f}" y="{ty + label_size * 0.3:.2f}" text-anchor="middle" '
                   f'class="deg">{deg}</text>')
    for k, angle in enumerate(lay.position_angles_deg):
        x1, y1 = ring_point(lay, r, angle)
        x2, y2 = ring_point(lay, r - band * 0.8, angle)
        out.append(f'<line class="position-mark" data-position="{number_of(k)}" '
                   f'data-angle-deg="{angle:g}" x1="{x1:.4f}" y1="{y1:.4f}" x2="{x2:.4f}" '
                   f'y2="{y2:.4f}" stroke="#000" stroke-width="0.45"/>')
        tx, ty = ring_point(lay, r - band * 0.8 - label_size * 0.9, angle)
        out.append(f'<text x="{tx:.2f}" y="{ty + label_size * 0.35:.2f}" text-anchor="middle" '
                   f'class="pos">{number_of(k)}</text>')
        inward = label_size * (2.1 + 1.2 * abs(math.sin(math.radians(angle))))
        tx, ty = ring_point(lay, r - band * 0.8 - inward, angle)
        out.append(f'<text x="{tx:.2f}" y="{ty + label_size * 0.3:.2f}" text-anchor="middle" '
                   f'class="deg">{angle:g}\u00b0</text>')
    # Reference mark: a filled triangle outside the rim pointing at 0 deg, and a heavy line.
    x0, y0 = ring_point(lay, r, 0.0)
    out.append(f'<path class="reference" d="M {x0:.3f} {y0:.3f} l -2.5 -5 h 5 z" fill="#000"/>')
    out.append(f'<line x1="{x0:.3f}" y1="{y0:.3f}" x2="{x0:.3f}" y2="{y0 + band:.3f}" '
               'stroke="#000" stroke-width="0.6"/>')
    out.append(f'<text x="{x0 + 3.5:.2f}" y="{y0 - 2:.2f}" class="info">0\u00b0 reference '
               'mark</text>')
    # Rotation arrow inside the band's inner circle.
    arrow_r = max(3.0, min(r - band - 4.0, 12.0))
    if r - band > 8.0:
        sweep = 1 if rotation == "cw" else 0
        ax0, ay0 = cx - arrow_r * math.sin(math.radians(40)), cy - arrow_r * math.cos(math.radians(40))
        ax1, ay1 = cx + arrow_r * math.sin(math.radians(40)), cy - arrow_r * math.cos(math.radians(40))
        start, end = ((ax0, ay0), (ax1, ay1)) if rotation == "cw" else ((ax1, ay1), (ax0, ay0))
        out.append(f'<path class="rotation" d="M {start[0]:.2f} {start[1]:.2f} A {arrow_r:.2f} '
                   f'{arrow_r:.2f} 0 0 {sweep} {end[0]:.2f} {end[1]:.2f}" fill="none" '
                   'stroke="#000" stroke-width="0.35"/>')
        # Arrow head along the tangent at the end: clockwise on paper at +40 deg from the
        # top, counter-clockwise at -40 deg.
        theta = math.radians(40.0 if rotation == "cw" else -40.0)
        ux, uy = math.cos(theta), math.sin(theta)
        if rotation == "ccw":
            ux, uy = -ux, -uy
        tip = (end[0] + 1.8 * ux, end[1] + 1.8 * uy)
        out.append(f'<path d="M {tip[0]:.2f} {tip[1]:.2f} L {end[0] - uy:.2f} {end[1] + ux:.2f} '
                   f'L {end[0] + uy:.2f} {end[1] - ux:.2f} z" fill="#000"/>')
        out.append(f'<text x="{cx:g}" y="{cy + 4.5:.2f}" text-anchor="middle" class="small">'
                   f'rotation ({rotation})</text>')
    # Ruler box for checking the print scale.
    rx = (lay.width_mm - RULER_MM) / 2.0
    ry = lay.height_mm - MARGIN_MM - 22.0
    _ruler_and_caution(out, rx, ry)
    if not lay.fits_a4_and_letter:
        out.append(f'<text x="{rx:g}" y="{ry + 21.5:g}" class="small">Larger than an A4 or '
                   'Letter sheet: print with --tiles and tape the sheets together.</text>')
    out.append("</svg>")
    return "\n".join(out) + "\n", lay


# --------------------------------------------------------------------------------------------
# Rim strip: the same scale unrolled, to wrap round a cylindrical rim (pulley, cutterhead).

STRIP_ROW_MM = 160.0
STRIP_HEIGHT_MM = 14.0
STRIP_TAB_MM = 8.0


@dataclass(frozen=True)
class StripLayout:
    """An unrolled ring: total length pi * D cut into rows of at most ``STRIP_ROW_MM``."""

    diameter_mm: float
    positions: int
    first_deg: float
    length_mm: float
    rows: int
    width_mm: float
    height_mm: float
    position_angles_deg: tuple[float, ...]

    @property
    def spacing_mm(self) -> float:
        return self.length_mm / self.positions


def strip_svg(diameter_mm: float, positions: int, first_deg: float = 0.0,
              title: str = "") -> tuple[str, StripLayout]:
    """A straight strip of length pi * D with degree ticks and numbered positions.

    Wrapped round the rim with its arrow pointing the way the rim moves, the numbers grow
    against rotation like the ring's: a point further along the strip passes a fixed pickup
    later, so the rim surface moves from higher numbers towards lower ones.
    """
    lay_ring = plan_ring(diameter_mm, positions, first_deg, "cw")  # validates the inputs
    length = math.pi * diameter_mm
    rows = max(1, math.ceil(length / STRIP_ROW_MM - 1e-9))
    width = STRIP_ROW_MM + STRIP_TAB_MM + 2 * MARGIN_MM + 4.0
    row_pitch = STRIP_HEIGHT_MM + 9.0
    top = MARGIN_MM + 10.0
    height = top + rows * row_pitch + 32.0 + MARGIN_MM
    lay = StripLayout(diameter_mm, positions, lay_ring.first_deg, length, rows, round(width, 3),
                      round(height, 3), lay_ring.position_angles_deg)
    x0 = MARGIN_MM
    step = lay_ring.tick_step_deg
    out = [
        '<?xml version="1.0" encoding="UTF-8"?>',
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{lay.width_mm:g}mm" '
        f'height="{lay.height_mm:g}mm" viewBox="0 0 {lay.width_mm:g} {lay.height_mm:g}" '
        f'data-diameter-mm="{diameter_mm:g}" data-positions="{positions}" '
        f'data-length-mm="{length:.4f}">',
        f'<title>trueturn rim strip, diameter {diameter_mm:g} mm, {positions} positions</title>',
        '<style>text { font-family: "DejaVu Sans", Arial, sans-serif; fill: #000; } '
        '.small { font-size: 2.4px; } .info { font-size: 3px; } .deg { font-size: 2.2px; } '
        '.pos { font-size: 3.4px; font-weight: bold; }</style>',
        f'<text x="{x0}" y="{MARGIN_MM}" class="info">trueturn rim strip: diameter '
        f'{diameter_mm:g} mm, length {length:.1f} mm, {positions} positions every '
        f'{length / positions:.2f} mm, position 1 at {lay.first_deg:g}\u00b0'
        + (f", {html.escape(title)}" if title else "") + '</text>',
        f'<text x="{x0}" y="{MARGIN_MM + 3.5}" class="small">Cut out the rows and glue each '
        'onto the grey tab of the row before. Wrap round the rim with 0\u00b0 on the</text>',
        f'<text x="{x0}" y="{MARGIN_MM + 6.5}" class="small">reference mark and the arrows '
        'pointing the way the rim moves; the numbers then grow against rotation.</text>',
    ]
    for row in range(rows):
        start = row * STRIP_ROW_MM
        seg = min(STRIP_ROW_MM, length - start)
        y = top + row * row_pitch
        out.append(f'<g class="strip-row" data-row="{row}" data-start-mm="{start:.4f}">')
        out.append(f'<rect class="strip" x="{x0:g}" y="{y:g}" width="{seg:.4f}" '
                   f'height="{STRIP_HEIGHT_MM:g}" fill="none" stroke="#000" stroke-width="0.25"/>')
        tab_text = "glue" if row < rows - 1 else "0\u00b0"
        out.append(f'<rect x="{x0 + seg:.4f}" y="{y:g}" width="{STRIP_TAB_MM:g}" '
                   f'height="{STRIP_HEIGHT_MM:g}" fill="#eee" stroke="#000" stroke-width="0.15" '
                   'stroke-dasharray="1 1"/>')
        out.append(f'<text x="{x0 + seg + STRIP_TAB_MM / 2:.2f}" y="{y + 8:g}" '
                   f'text-anchor="middle" class="small">{tab_text}</text>')
        out.append(f'<text x="{x0 + seg / 2:.2f}" y="{y + STRIP_HEIGHT_MM + 2.6:g}" '
                   'text-anchor="middle" class="small">\u2190 rim moves this way \u2190</text>')
        for deg in range(0, 360, step):
            s = deg / 360.0 * length
            if not start - 1e-9 <= s < start + seg - 1e-9:
                continue
            x = x0 + s - start
            tick = 4.0 if deg % 10 == 0 else 2.8 if deg % 5 == 0 else 1.6
            out.append(f'<line class="degree-tick" data-deg="{deg}" x1="{x:.4f}" y1="{y:g}" '
                       f'x2="{x:.4f}" y2="{y + tick:g}" stroke="#000" stroke-width="0.15"/>')
            if deg % 10 == 0:
                out.append(f'<text x="{x:.3f}" y="{y + 6.2:g}" text-anchor="middle" '
                           f'class="deg">{deg}</text>')
        for k, angle in enumerate(lay.position_angles_deg):
            s = angle / 360.0 * length
            if not start - 1e-9 <= s < start + seg - 1e-9:
                continue
            x = x0 + s - start
            out.append(f'<line class="position-mark" data-position="{number_of(k)}" '
                       f'data-angle-deg="{angle:g}" x1="{x:.4f}" y1="{y + 7:g}" x2="{x:.4f}" '
                       f'y2="{y + STRIP_HEIGHT_MM:g}" stroke="#000" stroke-width="0.45"/>')
            out.append(f'<text x="{x + 0.8:.3f}" y="{y + STRIP_HEIGHT_MM - 1.2:g}" '
                       f'class="pos">{number_of(k)}</text>')
        out.append("</g>")
    rx = MARGIN_MM
    ry = lay.height_mm - MARGIN_MM - 22.0
    _ruler_and_caution(out, rx, ry)
    out.append("</svg>")
    return "\n".join(out) + "\n", lay


# --------------------------------------------------------------------------------------------
# Tiles: a ring larger than a sheet, cut into sheet-sized windows of the same 1:1 drawing.

TILE_MM = (180.0, 245.0)  # fits A4 (186 x 273) and Letter (191.9 x 255.4) with 12 mm margins
TILE_OVERLAP_MM = 10.0


@dataclass(frozen=True)
class Tile:
    """One sheet: the window ``x_mm``..``x_mm + TILE_MM[0]`` (and y) of the whole drawing."""

    row: int
    column: int
    x_mm: float
    y_mm: float


def plan_tiles(width_mm: float, height_mm: float) -> list[Tile]:
    """Windows of ``TILE_MM`` stepping by the tile size less the overlap, covering it all."""
    step_x, step_y = TILE_MM[0] - TILE_OVERLAP_MM, TILE_MM[1] - TILE_OVERLAP_MM
    columns = max(1, math.ceil((width_mm - TILE_OVERLAP_MM) / step_x - 1e-9))
    rows = max(1, math.ceil((height_mm - TILE_OVERLAP_MM) / step_y - 1e-9))
    return [Tile(r + 1, c + 1, c * step_x, r * step_y) for r in range(rows) for c in range(columns)]


def ring_tiles_html(diameter_mm: float, positions: int, first_deg: float = 0.0,
                    rotation: Rotation = "cw", title: str = "") -> tuple[str, list[Tile]]:
    """An HTML page with one sheet per tile of the ring drawing, each printed at 1:1.

    Neighbouring tiles share a 10 mm band (shaded on the right and bottom edges) so they can
    be laid over each other and taped; each sheet has its own 50 mm scale check.
    """
    text, layout = ring_svg(diameter_mm, positions, first_deg, rotation, title)
    start = text.index("<svg")
    inner = text[text.index(">", start) + 1:text.rindex("</svg>")]
    tiles = plan_tiles(layout.width_mm, layout.height_mm)
    columns = max(t.column for t in tiles)
    rows = max(t.row for t in tiles)
    w, h = TILE_MM
    sheets = []
    for tile in tiles:
        x, y = tile.x_mm, tile.y_mm
        overlay = [
            f'<rect x="{x + w - TILE_OVERLAP_MM:g}" y="{y:g}" width="{TILE_OVERLAP_MM:g}" '
            f'height="{h:g}" fill="#000" fill-opacity="0.06"/>' if tile.column < columns else "",
            f'<rect x="{x:g}" y="{y + h - TILE_OVERLAP_MM:g}" width="{w:g}" '
            f'height="{TILE_OVERLAP_MM:g}" fill="#000" fill-opacity="0.06"/>' if tile.row < rows
            else "",
            f'<rect class="tile-edge" x="{x:g}" y="{y:g}" width="{w:g}" height="{h:g}" '
            'fill="none" stroke="#000" stroke-width="0.2" stroke-dasharray="2 2"/>',
            f'<rect x="{x + 2:g}" y="{y + 1:g}" width="130" height="10.5" fill="#fff"/>',
            f'<text x="{x + 3:g}" y="{y + 4:g}" class="info">sheet row {tile.row}, column '
            f'{tile.column} of {rows} x {columns}: lay the next sheet over the shaded band</text>',
            f'<rect class="tile-ruler" x="{x + 3:g}" y="{y + 6:g}" width="50" height="4" '
            'fill="none" stroke="#000" stroke-width="0.2"/>',
            *[f'<line x1="{x + 3 + k:g}" y1="{y + 10:g}" x2="{x + 3 + k:g}" '
              f'y2="{y + (7.5 if k % 10 else 6):g}" stroke="#000" stroke-width="0.12"/>'
              for k in range(0, 51, 5)],
            f'<text x="{x + 55:g}" y="{y + 9.5:g}" class="small">this box is 50 mm</text>',
        ]
        sheets.append(
            f'<div class="sheet"><svg xmlns="http://www.w3.org/2000/svg" width="{w:g}mm" '
            f'height="{h:g}mm" viewBox="{x:g} {y:g} {w:g} {h:g}" data-row="{tile.row}" '
            f'data-column="{tile.column}">{inner}{"".join(overlay)}</svg></div>')
    page = "\n".join([
        '<!DOCTYPE html>',
        '<html xmlns="http://www.w3.org/1999/xhtml" lang="en"><head><meta charset="utf-8"/>',
        f'<title>trueturn angle ring, diameter {diameter_mm:g} mm, {len(tiles)} sheets</title>',
        '<style>@page { margin: 12mm; } body { margin: 0; } '
        '.sheet { break-after: page; page-break-after: always; } '
        '.sheet:last-child { break-after: auto; page-break-after: auto; } '
        'svg { display: block; }</style></head><body>',
        *sheets, '</body></html>'])
    return page + "\n", tiles


def _ruler_and_caution(out: list[str], rx: float, ry: float) -> None:
    """A RULER_MM box with mm ticks to check the print scale, then the standstill caution."""
    out.append(f'<rect class="ruler" x="{rx:g}" y="{ry:g}" width="{RULER_MM:g}" height="8" '
               'fill="none" stroke="#000" stroke-width="0.25"/>')
    for mm in range(int(RULER_MM) + 1):
        length = 4.0 if mm % 10 == 0 else 2.5 if mm % 5 == 0 else 1.5
        out.append(f'<line class="ruler-tick" x1="{rx + mm:g}" y1="{ry + 8:g}" x2="{rx + mm:g}" '
                   f'y2="{ry + 8 - length:g}" stroke="#000" stroke-width="0.12"/>')
        if mm % 10 == 0:
            out.append(f'<text x="{rx + mm:g}" y="{ry + 3:g}" text-anchor="middle" '
                       f'class="small">{mm // 10}</text>')
    out.append(f'<text x="{rx:g}" y="{ry + 12:g}" class="small">This box must measure exactly '
               f'{RULER_MM:g} mm (10 cm). Print at 100 % / actual size, not "fit to page".</text>')
    for i, line in enumerate(CAUTION):
        out.append(f'<text x="{rx:g}" y="{ry + 15.5 + 3 * i:g}" class="small caution">'
                   f'{line}</text>')
