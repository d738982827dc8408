"""A printable 1:1 angle ring (SVG in millimetres) to lay on a rotor face or wrap on a rim.

The ring's outer edge has the rotor's diameter; 0 deg sits at the reference mark, degree
ticks run round the edge and the weight positions are numbered in the tool's direction:
against rotation (host/trueturn/angles.py). ``rotation`` is the way the rotor turns as seen
looking at the face the ring is laid on, so the numbers run the right way on paper. A 100 mm
ruler box lets the person check that the printer kept the scale.

The SVG's ``width``/``height`` are in mm and its ``viewBox`` uses the same numbers, so one
user unit is one millimetre on paper when printed at 100 %.

Labels adapt to the ring: every text is at least 2.5 mm high (7.1 pt); position numbers go
inside the band when they fit there, else outside the rim, else only every 2nd, 3rd, ...
position is numbered (the layout's ``notes`` say so in one line); degree labels and the
per-position angles are left out where they would touch anything else. Positions are either
equally spaced or an irregular list of angles (a plane's ``layout: angles`` in a job file).
"""

from __future__ import annotations

import html
import math
from collections.abc import Sequence
from dataclasses import dataclass

from trueturn.angles import Rotation, screen_xy, wrap_deg
from trueturn.positions import degrees_text, equally_spaced_deg, number_of

#: Largest drawing that fits A4 portrait (210 x 297 mm) with 12 mm margins.
A4_PRINTABLE_MM = (186.0, 273.0)
#: US Letter (215.9 x 279.4 mm) with 12 mm margins.
LETTER_PRINTABLE_MM = (191.9, 255.4)
RULER_MM = 100.0
MARGIN_MM = 8.0
#: Smallest text on a ring or strip: 2.5 mm = 7.1 pt (1 pt = 25.4/72 mm).
MIN_TEXT_MM = 2.5
INFO_TEXT_MM = 3.0
#: Average advance of DejaVu Sans glyphs, in em (digits 0.64, lower case about 0.55-0.6):
#: used to wrap lines and to keep labels apart. Common practice, no source.
EM_ADVANCE = 0.62
#: Longest title kept: three lines, then shortened with an ellipsis.
TITLE_LINES_MAX = 3
#: Printed on every ring and strip: the person's hands are on the rotor while using it.
CAUTION = ("Caution: fit, read and remove the ring only with the rotor stopped (tach shows",
           "standstill), the machine switched off and unplugged. Take it off before any run.")

Box = tuple[float, float, float, float]  # x0, y0, x1, y1 in mm


def text_width_mm(text: str, size_mm: float, bold: bool = False) -> float:
    """Estimated printed width of ``text`` at ``size_mm`` (see :data:`EM_ADVANCE`)."""
    return len(text) * size_mm * (EM_ADVANCE + (0.06 if bold else 0.0))


def wrap_text(text: str, size_mm: float, width_mm: float, max_lines: int = 0) -> list[str]:
    """``text`` broken at spaces into lines no wider than ``width_mm``; a word longer than a
    line is cut into pieces; with ``max_lines`` the last line kept ends in an ellipsis."""
    per_line = max(8, int(width_mm / (size_mm * EM_ADVANCE)))
    lines: list[str] = []
    current = ""
    for word in text.split():
        while len(word) > per_line:
            if current:
                lines.append(current)
                current = ""
            lines.append(word[:per_line])
            word = word[per_line:]
        candidate = f"{current} {word}" if current else word
        if len(candidate) <= per_line:
            current = candidate
        else:
            lines.append(current)
            current = word
    if current:
        lines.append(current)
    if max_lines and len(lines) > max_lines:
        lines = lines[:max_lines]
        lines[-1] = lines[-1][:per_line - 1].rstrip() + "\u2026"
    return lines


def _overlaps(a: Box, b: Box, gap: float = 0.0) -> bool:
    return a[0] - gap < b[2] and b[0] - gap < a[2] and a[1] - gap < b[3] and b[1] - gap < a[3]


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
    irregular: bool = False
    #: where the position numbers are printed: "inside" the band or "outside" the rim
    numbers_at: str = "inside"
    #: every how many positions a number is printed (1: all of them)
    number_every: int = 1
    #: printed size of the position numbers, mm
    number_size_mm: float = 4.0
    #: one line each: what the drawing had to leave out or could not do well
    notes: tuple[str, ...] = ()

    @property
    def fits_a4_and_letter(self) -> bool:
        return (self.width_mm <= min(A4_PRINTABLE_MM[0], LETTER_PRINTABLE_MM[0])
                and self.height_mm <= min(A4_PRINTABLE_MM[1], LETTER_PRINTABLE_MM[1]))

    @property
    def spacing_mm(self) -> float:
        """Arc length along the rim between the two closest neighbouring positions
        (pi * D / N when they are equally spaced)."""
        return math.pi * self.diameter_mm * min_gap_deg(self.position_angles_deg) / 360.0


def min_gap_deg(angles_deg: Sequence[float]) -> float:
    """Smallest angle between neighbouring positions round the circle (360 for one)."""
    ordered = sorted(wrap_deg(a) for a in angles_deg)
    if len(ordered) < 2:
        return 360.0
    gaps = [b - a for a, b in zip(ordered, ordered[1:], strict=False)]
    gaps.append(ordered[0] + 360.0 - ordered[-1])
    return min(gaps)


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


def position_angles(positions: int | None, first_deg: float = 0.0,
                    angles_deg: Sequence[float] | None = None) -> tuple[tuple[float, ...], bool]:
    """The positions' angles (position 1 first) and whether they are an irregular list.

    Raises ValueError naming the problem (a count out of 1..360, an angle that is not a
    number, two positions on the same angle, a count that disagrees with the list).
    """
    if angles_deg is not None and len(angles_deg) > 0:
        if positions is not None and positions != len(angles_deg):
            raise ValueError(f"{positions} positions but {len(angles_deg)} angles given")
        if len(angles_deg) > 360:
            raise ValueError("at most 360 positions")
        if not all(math.isfinite(a) and -360.0 <= a <= 360.0 for a in angles_deg):
            raise ValueError("angles must be numbers between -360 and 360 degrees")
        angles = tuple(wrap_deg(a) for a in angles_deg)
        if len(angles) > 1 and min_gap_deg(angles) < 0.1:
            raise ValueError("two positions are on the same angle")
        return angles, True
    if positions is None or not 1 <= positions <= 360:
        raise ValueError("positions must be between 1 and 360")
    return equally_spaced_deg(positions, first_deg), False


@dataclass(frozen=True)
class _Label:
    x: float
    y: float  # baseline
    text: str
    css: str
    size: float
    anchor: str = "middle"
    extra: str = ""

    @property
    def box(self) -> Box:
        width = text_width_mm(self.text, self.size, "pos" in self.css)
        x0 = self.x - width / 2 if self.anchor == "middle" else self.x
        return (x0, self.y - 0.8 * self.size, x0 + width, self.y + 0.22 * self.size)


def _header_lines(diameter_mm: float, angles: tuple[float, ...], irregular: bool,
                  rotation: Rotation, title: str, width_mm: float) -> list[tuple[str, str]]:
    """(css class, text) of the lines above the ring, wrapped to the drawing's width."""
    n = len(angles)
    if irregular:
        spacing = f"{n} positions at irregular angles"
    else:
        spacing = (f"{n} positions every {360.0 / n:g}\u00b0, position 1 at "
                   f"{degrees_text(angles[0])}")
    usable = width_mm - 2 * MARGIN_MM
    lines = [("info", t) for t in wrap_text(f"trueturn angle ring: diameter {diameter_mm:g} mm, "
                                           f"{spacing}", INFO_TEXT_MM, usable)]
    if title.strip():
        lines += [("info title", t) for t in wrap_text(" ".join(title.split()), INFO_TEXT_MM,
                                                        usable, TITLE_LINES_MAX)]
    for sentence in (f"The rotor turns {rotation} as seen on this side. Numbers and degrees "
                     "increase against rotation.",
                     "Cut along the outer circle and put 0\u00b0 on the reference mark."):
        lines += [("small", t) for t in wrap_text(sentence, MIN_TEXT_MM, usable)]
    return lines


def _line_height(css: str) -> float:
    return (INFO_TEXT_MM if css.startswith("info") else MIN_TEXT_MM) * 1.3


def _number_placement(radius: float, band: float, angles: tuple[float, ...]
                      ) -> tuple[str, int, float]:
    """Where the position numbers go (inside/outside), every how many, and their size."""
    size = max(MIN_TEXT_MM, min(4.0, band * 0.22))
    widest = text_width_mm(str(len(angles)), size, bold=True) + 1.0  # 1 mm clear between
    gap_rad = math.radians(min_gap_deg(angles))
    inside_r = radius - band * 0.8 - size * 0.9
    if inside_r > 1.6 * size and inside_r * gap_rad >= widest and len(angles) <= 36:
        return "inside", 1, size
    size = MIN_TEXT_MM
    widest = text_width_mm(str(len(angles)), size, bold=True) + 1.0
    outside_r = radius + 1.5 + size
    every = 1
    while every < len(angles) and outside_r * gap_rad * every < widest:
        every += 1
    return "outside", every, size


def plan_ring(diameter_mm: float, positions: int | None, first_deg: float = 0.0,
              rotation: Rotation = "cw", title: str = "",
              angles_deg: Sequence[float] | None = None, furniture: bool = True) -> RingLayout:
    """Size the drawing for a ring of ``diameter_mm`` with numbered marks: ``positions``
    equally spaced from ``first_deg``, or the irregular list ``angles_deg`` (position 1
    first); ``furniture``: leave room under it for the check box and the caution."""
    if not (math.isfinite(diameter_mm) and 10.0 <= diameter_mm <= 2000.0):
        raise ValueError("diameter must be between 10 and 2000 mm")
    if rotation not in ("cw", "ccw"):
        raise ValueError("rotation must be cw or ccw")
    if not math.isfinite(first_deg):
        raise ValueError("first position angle must be a number")
    angles, irregular = position_angles(positions, first_deg, angles_deg)
    radius = diameter_mm / 2.0
    band = min(22.0, max(6.0, 0.3 * radius))
    numbers_at, every, number_size = _number_placement(radius, band, angles)
    outside = (number_size * 1.2 + 2.5) if numbers_at == "outside" else 0.0
    width = max(diameter_mm + 8.0 + 2 * outside, 150.0) + 2 * MARGIN_MM
    header = sum(_line_height(css) for css, _ in
                 _header_lines(diameter_mm, angles, irregular, rotation, title, width))
    # room above the rim for the reference triangle and its words (and outside numbers)
    above = 9.0 + outside
    list_lines = 0
    if irregular:
        list_lines = len(_angle_list_lines(angles, width))
    height = (MARGIN_MM + header + above + diameter_mm + outside + 4.0
              + list_lines * _line_height("small") + (34.0 if furniture else 0.0) + MARGIN_MM)
    centre = (width / 2.0, MARGIN_MM + header + above + radius)
    notes = []
    gap_mm = math.pi * diameter_mm * min_gap_deg(angles) / 360.0
    if every > 1:
        notes.append(f"positions only {gap_mm:.1f} mm apart on the rim: every "
                     f"{_ordinal(every)} position is numbered; count the marks for the others")
    elif gap_mm < 3.0 and len(angles) > 1:
        notes.append(f"positions only {gap_mm:.1f} mm apart on the rim: mark them with a fine "
                     "pen")
    return RingLayout(diameter_mm, len(angles), angles[0], rotation, round(width, 3),
                      round(height, 3), centre, band, tick_step_deg(diameter_mm), angles,
                      irregular, numbers_at, every, number_size, tuple(notes))


def _ordinal(n: int) -> str:
    return {2: "2nd", 3: "3rd"}.get(n, f"{n}th")


def _angle_list_lines(angles: tuple[float, ...], width_mm: float) -> list[str]:
    """The irregular positions' angles as text lines under the ring."""
    text = "Positions: " + ", ".join(f"{number_of(k)} at {degrees_text(a)}"
                                     for k, a in enumerate(angles)) + "."
    return wrap_text(text, MIN_TEXT_MM, width_mm - 2 * MARGIN_MM)


def ring_svg(diameter_mm: float, positions: int | None, first_deg: float = 0.0,
             rotation: Rotation = "cw", title: str = "",
             angles_deg: Sequence[float] | None = None,
             furniture: bool = True) -> tuple[str, RingLayout]:
    """The ring drawing as SVG text, and its layout.

    ``furniture``: draw the 100 mm check box, the caution and (when the drawing is larger
    than a sheet) the hint to print it in tiles; :func:`ring_tiles_html` draws its own on
    every sheet instead.
    """
    lay = plan_ring(diameter_mm, positions, first_deg, rotation, title, angles_deg, furniture)
    r = diameter_mm / 2.0
    cx, cy = lay.centre_mm
    band = lay.band_mm
    out = [
        '<?xml version="1.0" encoding="UTF-8"?>',
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{lay.width_mm:g}mm" '
        f'height="{lay.height_mm:g}mm" viewBox="0 0 {lay.width_mm:g} {lay.height_mm:g}" '
        f'data-diameter-mm="{diameter_mm:g}" data-positions="{lay.positions}" '
        f'data-rotation="{rotation}" data-centre-mm="{cx:g},{cy:g}" '
        f'data-numbers-at="{lay.numbers_at}" data-number-every="{lay.number_every}">',
        f'<title>trueturn angle ring, diameter {diameter_mm:g} mm, {lay.positions} '
        'positions</title>',
        '<style>text { font-family: "DejaVu Sans", Arial, sans-serif; fill: #000; } '
        f'.small {{ font-size: {MIN_TEXT_MM}px; }} .info {{ font-size: {INFO_TEXT_MM}px; }} '
        f'.deg {{ font-size: {MIN_TEXT_MM}px; }} '
        f'.pos {{ font-size: {lay.number_size_mm:.2f}px; font-weight: bold; }}</style>',
    ]
    y = MARGIN_MM
    for css, line in _header_lines(diameter_mm, lay.position_angles_deg, lay.irregular,
                                   rotation, title, lay.width_mm):
        y += _line_height(css) * (0.8 if y == MARGIN_MM else 1.0)
        out.append(f'<text x="{MARGIN_MM}" y="{y:.2f}" class="{css}">{html.escape(line)}</text>')
    out += [
        f'<circle class="rim" cx="{cx:g}" cy="{cy:g}" r="{r:g}" fill="none" stroke="#000" '
        'stroke-width="0.3"/>',
        f'<path d="M {cx - 2:g} {cy:g} H {cx + 2:g} M {cx:g} {cy - 2:g} V {cy + 2:g}" '
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
    # Reference mark: a filled triangle outside the rim pointing at 0 deg, and a heavy line.
    x0, y0 = ring_point(lay, r, 0.0)
    out.append(f'<path class="reference" d="M {x0:.3f} {y0:.3f} l -2.5 -5 h 5 z" fill="#000"/>')
    out.append(f'<line class="reference-line" x1="{x0:.3f}" y1="{y0:.3f}" x2="{x0:.3f}" '
               f'y2="{y0 + band * 0.8:.3f}" stroke="#000" stroke-width="0.6"/>')
    taken: list[Box] = [(x0 - 2.7, y0 - 5.2, x0 + 2.7, y0), (cx - 2.2, cy - 2.2, cx + 2.2, cy + 2.2)]
    labels: list[_Label] = []
    # position marks, then their numbers (all placed: the layout chose where they fit)
    for k, angle in enumerate(lay.position_angles_deg):
        x1, y1 = ring_point(lay, r, angle)
        x2, y2 = ring_point(lay, r - band * 0.8, angle)
        out.append(f'<line class="position-mark" data-position="{number_of(k)}" '
                   f'data-angle-deg="{angle:g}" x1="{x1:.4f}" y1="{y1:.4f}" x2="{x2:.4f}" '
                   f'y2="{y2:.4f}" stroke="#000" stroke-width="0.45"/>')
    size = lay.number_size_mm
    number_r: dict[int, float] = {}
    for k, angle in enumerate(lay.position_angles_deg):
        if k % lay.number_every:
            continue
        text = str(number_of(k))
        reach = _reach(lay, angle, text_width_mm(text, size, True), size)
        if lay.numbers_at == "inside":
            rho = r - band * 0.8 - 0.6 - reach
        else:
            rho = r + 1.0 + reach
            tx, ty = ring_point(lay, rho, angle)
            if abs(tx - x0) < 4.5 and ty < y0:  # clear of the reference triangle
                rho += 6.0
        number_r[k] = rho
        tx, ty = ring_point(lay, rho, angle)
        label = _Label(tx, ty + size * 0.35, text, "pos", size,
                       extra=f' data-position="{number_of(k)}"')
        labels.append(label)
        taken.append(label.box)
    # the words by the reference mark: right of the triangle, else above it
    for lx, ly in ((x0 + 3.5, y0 - 2.0), (x0 - 12.0, y0 - 6.5), (x0 + 3.5, y0 - 6.5)):
        ref = _Label(lx, ly, "0\u00b0 reference mark", "small", MIN_TEXT_MM, "start")
        if not any(_overlaps(ref.box, b, 0.3) for b in taken):
            break
    labels.append(ref)
    taken.append(ref.box)
    # each position's angle, inside, where it fits (equal spacing: the header gives them)
    marks_at = lay.position_angles_deg

    def clear_of_marks(x: float, y: float, box: Box) -> bool:
        rho = math.hypot(x - cx, y - cy)
        half = (box[2] - box[0]) / 2 + 0.6
        return all(abs(math.radians((a - _angle_of(lay, x, y) + 180.0) % 360.0 - 180.0)) * rho
                   > half or rho < r - band * 0.8 - 0.5 for a in marks_at)

    if lay.numbers_at == "inside" and lay.number_every == 1:
        for k, angle in enumerate(lay.position_angles_deg):
            text = degrees_text(angle)
            rho = (number_r[k] - _reach(lay, angle, text_width_mm(str(number_of(k)), size, True),
                                        size)
                   - 0.5 - _reach(lay, angle, text_width_mm(text, MIN_TEXT_MM), MIN_TEXT_MM))
            tx, ty = ring_point(lay, rho, angle)
            label = _Label(tx, ty + MIN_TEXT_MM * 0.3, text, "deg", MIN_TEXT_MM,
                           extra=f' data-angle-of="{number_of(k)}"')
            if rho > 3.0 and not any(_overlaps(label.box, b, 0.3) for b in taken):
                labels.append(label)
                taken.append(label.box)
    # degree labels round the band, every 10/30/45/90 deg as the rim allows
    tick = min(4.0, band * 0.45)
    for every in (10, 30, 45, 90):
        if math.radians(every) * (r - tick - 2) >= 3 * text_width_mm("000", MIN_TEXT_MM):
            break
    for deg in range(0, 360, every):
        reach = _reach(lay, deg, text_width_mm(str(deg), MIN_TEXT_MM), MIN_TEXT_MM)
        rho = r - tick - 0.5 - reach
        tx, ty = ring_point(lay, rho, deg)
        label = _Label(tx, ty + MIN_TEXT_MM * 0.3, str(deg), "deg", MIN_TEXT_MM)
        box = label.box
        if (deg == 0 or rho - reach < r - band + 0.3 or any(_overlaps(box, b, 0.4) for b in taken)
                or not clear_of_marks(tx, ty, box)):
            continue
        labels.append(label)
        taken.append(box)
    # the band's inner edge (dashed), moved inwards past any label it would cross
    inner_r = r - band
    spans = [(_nearest(lb.box, cx, cy),
              max(math.hypot(bx - cx, by - cy) for bx in (lb.box[0], lb.box[2])
                  for by in (lb.box[1], lb.box[3]))) for lb in labels]
    moved = True
    while moved:  # each move only shrinks the circle, so this ends
        moved = False
        for near, far in spans:
            if near - 0.6 < inner_r < far + 0.6 and far < r:
                inner_r, moved = near - 0.6, True
    if inner_r > 2.5:
        out.append(f'<circle class="inner" cx="{cx:g}" cy="{cy:g}" r="{inner_r:.2f}" '
                   'fill="none" stroke="#000" stroke-width="0.2" stroke-dasharray="1.5 1"/>')
    # rotation arrow inside the band's inner circle, its word under the centre if it fits
    arrow_r = max(3.0, min(inner_r - 4.0, 12.0))
    if inner_r > 8.0:
        sweep = 1 if rotation == "cw" else 0
        ax0, ay0 = cx - arrow_r * math.sin(math.radians(40)), cy - arrow_r * math.cos(math.radians(40))
        ax1, ay1 = cx + arrow_r * math.sin(math.radians(40)), cy - arrow_r * math.cos(math.radians(40))
        start, end = ((ax0, ay0), (ax1, ay1)) if rotation == "cw" else ((ax1, ay1), (ax0, ay0))
        arrow_box = (ax0 - 1.5, cy - arrow_r - 1.5, ax1 + 1.5, ay0 + 1.5)
        if not any(_overlaps(arrow_box, b) for b in taken):
            taken.append(arrow_box)
            out.append(f'<path class="rotation" d="M {start[0]:.2f} {start[1]:.2f} A '
                       f'{arrow_r:.2f} {arrow_r:.2f} 0 0 {sweep} {end[0]:.2f} {end[1]:.2f}" '
                       'fill="none" stroke="#000" stroke-width="0.35"/>')
            # Arrow head along the tangent at the end: clockwise on paper at +40 deg from
            # the top, counter-clockwise at -40 deg.
            theta = math.radians(40.0 if rotation == "cw" else -40.0)
            ux, uy = math.cos(theta), math.sin(theta)
            if rotation == "ccw":
                ux, uy = -ux, -uy
            tip = (end[0] + 1.8 * ux, end[1] + 1.8 * uy)
            out.append(f'<path d="M {tip[0]:.2f} {tip[1]:.2f} L {end[0] - uy:.2f} '
                       f'{end[1] + ux:.2f} L {end[0] + uy:.2f} {end[1] - ux:.2f} z" '
                       'fill="#000"/>')
            word = _Label(cx, cy + 5.0, f"rotation ({rotation})", "small", MIN_TEXT_MM)
            if not any(_overlaps(word.box, b, 0.3) for b in taken):
                labels.append(word)
                taken.append(word.box)
    for label in labels:
        anchor = ' text-anchor="middle"' if label.anchor == "middle" else ""
        out.append(f'<text x="{label.x:.2f}" y="{label.y:.2f}"{anchor} class="{label.css}"'
                   f'{label.extra}>{html.escape(label.text)}</text>')
    below = cy + r + (lay.number_size_mm * 1.2 + 2.5 if lay.numbers_at == "outside" else 0.0)
    if lay.irregular:
        for i, line in enumerate(_angle_list_lines(lay.position_angles_deg, lay.width_mm)):
            out.append(f'<text x="{MARGIN_MM}" y="{below + 4.0 + i * _line_height("small"):.2f}" '
                       f'class="small angle-list">{html.escape(line)}</text>')
    if furniture:
        # Ruler box for checking the print scale, and the caution.
        rx = (lay.width_mm - RULER_MM) / 2.0
        ry = lay.height_mm - MARGIN_MM - 24.0
        _ruler_and_caution(out, rx, ry)
        if not lay.fits_a4_and_letter:
            out.append(f'<text x="{rx:g}" y="{ry + 23.5:g}" class="small">Larger than an A4 or '
                       'Letter sheet: print with --tiles and tape the sheets together.</text>')
    out.append("</svg>")
    return "\n".join(out) + "\n", lay


def _reach(lay: RingLayout, angle_deg: float, width_mm: float, height_mm: float) -> float:
    """Half the extent, along the radius at ``angle_deg``, of a ``width_mm`` x ``height_mm``
    label centred on that radius (so it can be kept clear of the rim and of marks)."""
    ux, uy = screen_xy(angle_deg, lay.rotation)
    return abs(ux) * width_mm / 2 + abs(uy) * height_mm / 2


def _nearest(box: Box, cx: float, cy: float) -> float:
    """Distance from (cx, cy) to the nearest point of ``box``."""
    dx = max(box[0] - cx, 0.0, cx - box[2])
    dy = max(box[1] - cy, 0.0, cy - box[3])
    return math.hypot(dx, dy)


def _angle_of(lay: RingLayout, x: float, y: float) -> float:
    """The ring angle (against rotation, 0 at the top) of the paper point (x, y)."""
    cx, cy = lay.centre_mm
    dx, dy = x - cx, y - cy
    # screen_xy: cw rotor: angle a at (-sin a, -cos a); ccw: (sin a, -cos a)
    sign = -1.0 if lay.rotation == "cw" else 1.0
    return math.degrees(math.atan2(sign * dx, -dy)) % 360.0


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


def strip_svg(diameter_mm: float, positions: int | None, first_deg: float = 0.0,
              title: str = "", angles_deg: Sequence[float] | None = None
              ) -> tuple[str, StripLayout]:
    """A straight strip of length pi * D with degree ticks and numbered positions.

    Wrapped round the rim with its arrow pointing the way the rim moves, the numbers grow
    against rotation like the ring's: a point further along the strip passes a fixed pickup
    later, so the rim surface moves from higher numbers towards lower ones.
    """
    lay_ring = plan_ring(diameter_mm, positions, first_deg, "cw",
                         angles_deg=angles_deg)  # validates the inputs
    positions = lay_ring.positions
    length = math.pi * diameter_mm
    rows = max(1, math.ceil(length / STRIP_ROW_MM - 1e-9))
    width = STRIP_ROW_MM + STRIP_TAB_MM + 2 * MARGIN_MM + 4.0
    usable = width - 2 * MARGIN_MM
    spacing = (f"{positions} positions at irregular angles" if lay_ring.irregular else
               f"{positions} positions every {length / positions:.2f} mm, position 1 at "
               f"{degrees_text(lay_ring.first_deg)}")
    header = [("info", t) for t in wrap_text(f"trueturn rim strip: diameter {diameter_mm:g} mm, "
                                             f"length {length:.1f} mm, {spacing}",
                                             INFO_TEXT_MM, usable)]
    if title.strip():
        header += [("info title", t) for t in wrap_text(" ".join(title.split()), INFO_TEXT_MM,
                                                         usable, TITLE_LINES_MAX)]
    header += [("small", t) for t in wrap_text(
        "Cut out the rows and glue each onto the grey tab of the row before. Wrap round the "
        "rim with 0\u00b0 on the reference mark and the arrows pointing the way the rim moves; "
        "the numbers then grow against rotation.", MIN_TEXT_MM, usable)]
    row_pitch = STRIP_HEIGHT_MM + 9.0
    top = MARGIN_MM + sum(_line_height(css) for css, _ in header) + 2.0
    list_lines = _angle_list_lines(lay_ring.position_angles_deg, width) \
        if lay_ring.irregular else []
    height = (top + rows * row_pitch + len(list_lines) * _line_height("small") + 32.0
              + MARGIN_MM)
    lay = StripLayout(diameter_mm, positions, lay_ring.first_deg, length, rows, round(width, 3),
                      round(height, 3), lay_ring.position_angles_deg)
    x0 = MARGIN_MM
    step = lay_ring.tick_step_deg
    gap_mm = length * min_gap_deg(lay.position_angles_deg) / 360.0
    widest = text_width_mm(str(positions), 3.4, bold=True)
    # numbers right of their mark inside the strip when they fit before the next mark, else
    # centred under the strip, every 2nd, 3rd, ... so that they do not touch
    numbers_below = gap_mm < 0.8 + widest + 0.6
    number_every = 1
    while numbers_below and number_every < positions and gap_mm * number_every < widest + 1.0:
        number_every += 1
    deg_every = next((e for e in (10, 30, 45, 90)
                      if length * e / 360.0 >= text_width_mm("350", MIN_TEXT_MM) + 1.5), 90)
    out = [
        '<?xml version="1.0" encoding="UTF-8"?>',
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{lay.width_mm:g}mm" '
        f'height="{lay.height_mm:g}mm" viewBox="0 0 {lay.width_mm:g} {lay.height_mm:g}" '
        f'data-diameter-mm="{diameter_mm:g}" data-positions="{positions}" '
        f'data-length-mm="{length:.4f}">',
        f'<title>trueturn rim strip, diameter {diameter_mm:g} mm, {positions} positions</title>',
        '<style>text { font-family: "DejaVu Sans", Arial, sans-serif; fill: #000; } '
        f'.small {{ font-size: {MIN_TEXT_MM}px; }} .info {{ font-size: {INFO_TEXT_MM}px; }} '
        f'.deg {{ font-size: {MIN_TEXT_MM}px; }} .pos {{ font-size: 3.4px; font-weight: bold; }}'
        '</style>',
    ]
    y_text = MARGIN_MM
    for i, (css, line) in enumerate(header):
        y_text += _line_height(css) * (0.8 if i == 0 else 1.0)
        out.append(f'<text x="{x0}" y="{y_text:.2f}" class="{css}">{html.escape(line)}</text>')
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
        arrow_y = y + STRIP_HEIGHT_MM + (7.2 if numbers_below else 2.6)
        out.append(f'<text x="{x0 + seg / 2:.2f}" y="{arrow_y:g}" '
                   'text-anchor="middle" class="small">\u2190 rim moves this way \u2190</text>')
        for deg in range(0, 360, step):
            s = deg / 360.0 * length
            if not start - 1e-9 <= s < start + seg - 1e-9:
                continue
            x = x0 + s - start
            tick = 4.0 if deg % 10 == 0 else 2.8 if deg % 5 == 0 else 1.6
            out.append(f'<line class="degree-tick" data-deg="{deg}" x1="{x:.4f}" y1="{y:g}" '
                       f'x2="{x:.4f}" y2="{y + tick:g}" stroke="#000" stroke-width="0.15"/>')
            if deg % deg_every == 0 and x + 2.0 < x0 + seg:
                anchor = ' text-anchor="middle"' if deg else ""  # 0: clear of the left edge
                out.append(f'<text x="{x + (0.5 if deg == 0 else 0.0):.3f}" y="{y + 6.2:g}"'
                           f'{anchor} class="deg">{deg}</text>')
        for k, angle in enumerate(lay.position_angles_deg):
            s = angle / 360.0 * length
            if not start - 1e-9 <= s < start + seg - 1e-9:
                continue
            x = x0 + s - start
            out.append(f'<line class="position-mark" data-position="{number_of(k)}" '
                       f'data-angle-deg="{angle:g}" x1="{x:.4f}" y1="{y + 7:g}" x2="{x:.4f}" '
                       f'y2="{y + STRIP_HEIGHT_MM:g}" stroke="#000" stroke-width="0.45"/>')
            if k % number_every == 0 and numbers_below:
                out.append(f'<text x="{x:.3f}" y="{y + STRIP_HEIGHT_MM + 3.2:g}" '
                           f'text-anchor="middle" class="pos">{number_of(k)}</text>')
            elif k % number_every == 0:
                out.append(f'<text x="{x + 0.8:.3f}" y="{y + STRIP_HEIGHT_MM - 1.2:g}" '
                           f'class="pos">{number_of(k)}</text>')
        out.append("</g>")
    for i, line in enumerate(list_lines):
        out.append(f'<text x="{x0}" y="{top + rows * row_pitch + i * _line_height("small"):.2f}" '
                   f'class="small angle-list">{html.escape(line)}</text>')
    rx = MARGIN_MM
    ry = lay.height_mm - MARGIN_MM - 24.0
    _ruler_and_caution(out, rx, ry)
    out.append("</svg>")
    return "\n".join(out) + "\n", lay


# --------------------------------------------------------------------------------------------
# Tiles: a ring larger than a sheet, cut into sheet-sized windows of the same 1:1 drawing.

#: The window of the drawing on each sheet. Under it (above, on the sheet) a band of
#: SHEET_BAND_MM holds the sheet's name, its own 50 mm check box and the caution, so nothing
#: printed for the sheet covers the drawing. 180 x (23 + 230) mm fits A4 (186 x 273) and
#: Letter (191.9 x 255.4) with 12 mm margins.
TILE_MM = (180.0, 230.0)
SHEET_BAND_MM = 23.0
TILE_OVERLAP_MM = 10.0
TILE_CHECK_MM = 50.0


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


def _sheet_band(tile: Tile, rows: int, columns: int) -> list[str]:
    """The band above a sheet's window: its name, a 50 mm check box in cm, the caution."""
    out = [f'<text x="0" y="3" class="info sheet-label">Sheet row {tile.row}, column '
           f'{tile.column} of {rows} x {columns}: lay the next sheet over the shaded band, '
           'marks on marks.</text>',
           f'<rect class="tile-ruler" x="2" y="5" width="{TILE_CHECK_MM:g}" height="5" '
           'fill="none" stroke="#000" stroke-width="0.2"/>']
    for mm in range(0, int(TILE_CHECK_MM) + 1, 5):
        out.append(f'<line x1="{mm + 2}" y1="10" x2="{mm + 2}" y2="{7.5 if mm % 10 else 6}" '
                   'stroke="#000" stroke-width="0.12"/>')
        if mm % 10 == 0:
            out.append(f'<text x="{mm + 2}" y="13.2" text-anchor="middle" class="small '
                       f'tile-digit">{mm // 10}</text>')
    out.append(f'<text x="{TILE_CHECK_MM + 6:g}" y="9" class="small">This box must measure '
               f'{TILE_CHECK_MM:g} mm (5 cm): print at 100 %.</text>')
    for i, line in enumerate(CAUTION):
        out.append(f'<text x="0" y="{17.0 + 3.0 * i:g}" class="small caution">{line}</text>')
    return out


def ring_tiles_html(diameter_mm: float, positions: int | None, first_deg: float = 0.0,
                    rotation: Rotation = "cw", title: str = "",
                    angles_deg: Sequence[float] | None = None) -> tuple[str, list[Tile]]:
    """An HTML page with one sheet per tile of the ring drawing, each printed at 1:1.

    Neighbouring tiles share a 10 mm band (shaded on the right and bottom edges) so they can
    be laid over each other and taped; each sheet carries, above its window, its own name,
    a 50 mm scale check and the caution (never over the drawing, never cut across sheets).
    """
    text, layout = ring_svg(diameter_mm, positions, first_deg, rotation, title, angles_deg,
                            furniture=False)
    start = text.index("<svg")
    inner = text[text.index(">", start) + 1:text.rindex("</svg>")]
    style = inner[inner.index("<style>"):inner.index("</style>") + len("</style>")]
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
        ]
        sheet_h = SHEET_BAND_MM + h
        sheets.append(
            f'<div class="sheet"><svg xmlns="http://www.w3.org/2000/svg" class="sheet-page" '
            f'width="{w:g}mm" height="{sheet_h:g}mm" viewBox="0 0 {w:g} {sheet_h:g}" '
            f'data-row="{tile.row}" data-column="{tile.column}">{style}'
            + "".join(_sheet_band(tile, rows, columns))
            + f'<svg class="window" x="0" y="{SHEET_BAND_MM:g}" width="{w:g}" height="{h:g}" '
            f'viewBox="{x:g} {y:g} {w:g} {h:g}">{inner}{"".join(overlay)}</svg></svg></div>')
    page = "\n".join([
        '<!DOCTYPE html>',
        '<html xmlns="http://www.w3.org/1999/xhtml" lang="en"><head><meta charset="utf-8"/>',
        f'<title>trueturn angle ring, diameter {diameter_mm:g} mm, {len(tiles)} sheets</title>',
        '<style>@page { margin: 12mm; } body { margin: 0; } '
        '.sheet { break-after: page; page-break-after: always; break-inside: avoid; } '
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
            out.append(f'<text x="{rx + mm:g}" y="{ry - 0.8:g}" text-anchor="middle" '
                       f'class="small ruler-digit">{mm // 10}</text>')
    out.append(f'<text x="{rx:g}" y="{ry + 11.5:g}" class="small">This box must measure '
               f'exactly {RULER_MM:g} mm (10 cm).</text>')
    out.append(f'<text x="{rx:g}" y="{ry + 14.5:g}" class="small">Print at 100 % (actual '
               'size), never "fit to page".</text>')
    for i, line in enumerate(CAUTION):
        out.append(f'<text x="{rx:g}" y="{ry + 17.5 + 3 * i:g}" class="small caution">'
                   f'{line}</text>')
