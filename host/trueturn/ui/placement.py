"""Where the weight goes, as a picture: each correction plane seen from its own face.

At a hands-on step the guide draws, for every plane with work in it, the rotor as the
person sees it standing at that plane's face (``Plane.face``: the front, where the machine
profile's rotation is seen, or the back, where it looks reversed,
:func:`trueturn.angles.seen_rotation`): the reference mark at the top, the rotation arrow,
the plane's positions numbered from 1 (:mod:`trueturn.positions`) and the parts of the step
lit: a weight to add, a hole to drill (material out) or a mass to take off, each with its
mass. Angles are placed with the project's one angle-to-picture mapping,
:func:`trueturn.angles.screen_xy`, exactly like the live polar plot, the report and the
printed ring, so the picture, the ring laid on that face and the rotor agree.

The drawing is character cells: a braille circle (:class:`~trueturn.ui.widgets.BrailleCanvas`)
with labels over it, and a few lines of legend beside it; two planes side by side fit 80
columns in 7 rows.
"""

from __future__ import annotations

import re
import shlex
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

from rich.text import Text
from textual.reactive import reactive
from textual.widget import Widget

from trueturn.angles import Face, Rotation, screen_xy
from trueturn.jobs.profiles import MachineProfile
from trueturn.model import Plane
from trueturn.model.units import METRIC, UnitChoice, length_text, mass_text
from trueturn.positions import degrees_text, number_of
from trueturn.procedure.guide import MassChange
from trueturn.ui.widgets import BrailleCanvas

PartAction = Literal["add", "remove", "take-off", "check"]  # check: on it already (a resumed job)

#: the picture's size in terminal cells: the circle, the legend beside it, one plane's block
CIRCLE_COLS, PICTURE_ROWS = 16, 7
LEGEND_COLS = 21
BLOCK_COLS = CIRCLE_COLS + 1 + LEGEND_COLS
GAP_COLS = 1
#: positions labelled all round when a plane has at most this many (else 1 and the lit ones)
LABEL_ALL_UP_TO = 8
#: positions ticked on the rim when a plane has at most this many (more would fill it)
TICK_ALL_UP_TO = 24

#: how a part is lit (colour AND a word in the legend: never colour alone)
PART_STYLE: dict[PartAction, str] = {
    "add": "bold black on green",
    "remove": "bold white on red",
    "take-off": "bold black on yellow",
    "check": "bold black on cyan",
}
#: an unlit position's number (the rim and its ticks are grey50)
POSITION_STYLE = "grey74"
SPOKE_STYLE: dict[PartAction, str] = {"add": "green", "remove": "red", "take-off": "yellow",
                                      "check": "cyan"}
PART_WORDS: dict[PartAction, str] = {"add": "add", "remove": "drill out", "take-off": "take off",
                                     "check": "check on"}
#: the lit tag of a part on a plane without positions (any angle)
FREE_TAG: dict[PartAction, str] = {"add": "+", "remove": "o", "take-off": "x", "check": "c"}
MARK = "\u25bc"  # the reference mark, pointing at 0 deg on the rim
ARROW: dict[Rotation, str] = {"cw": "\u21bb", "ccw": "\u21ba"}


@dataclass(frozen=True)
class PartMark:
    """One part to place or take off, as drawn: its position ``number`` (None: the plane
    takes any angle), ``angle_deg`` (the one convention), what to do and its mass."""

    angle_deg: float
    action: PartAction
    mass_g: float
    number: int | None = None

    @property
    def tag(self) -> str:
        """The label on the picture: the position number, or a sign on a free plane."""
        return str(self.number) if self.number is not None else FREE_TAG[self.action]


@dataclass(frozen=True)
class PlanePicture:
    """A plane as seen from its face: its positions, the rotation seen there, the parts."""

    plane: str
    radius_mm: float
    face: Face
    rotation: Rotation  # as seen looking at this face
    positions_deg: tuple[float, ...]  # entry k: position k + 1; empty: any angle
    parts: tuple[PartMark, ...] = ()


def part_of(change: MassChange) -> PartMark | None:
    """The mark of one hands-on change (None for a change that places no mass)."""
    m = change.mass
    if m is None or change.action == "mount-pickups":
        return None
    action: PartAction = ("take-off" if change.action == "detach" else
                          "check" if change.action == "check" else
                          "remove" if m.removal else "add")
    number = number_of(m.position) if m.position is not None else None
    return PartMark(m.angle_deg, action, abs(m.mass_g), number)


def pictures_for(changes: Sequence[MassChange], planes: Sequence[Plane],
                 rotation: Rotation) -> tuple[PlanePicture, ...]:
    """The pictures of a hands-on step: every plane a change touches, in the planes' order;
    a step that places nothing (set-up, inspection) shows ``planes`` with nothing lit.

    ``rotation``: the machine's, as seen from its front (the machine profile's).
    """
    touched = {c.mass.plane for c in changes if c.mass is not None}
    shown = [p for p in planes if p.name in touched] or list(planes)
    out = []
    for plane in shown:
        parts = tuple(mark for c in changes if c.mass is not None and c.mass.plane == plane.name
                      and (mark := part_of(c)) is not None)
        out.append(PlanePicture(plane.name, plane.radius_mm, plane.face,
                                plane.rotation_seen(rotation), plane.position_angles_deg,
                                parts))
    return tuple(out)


def _circle(pic: PlanePicture) -> list[Text]:
    """The circle as ``PICTURE_ROWS`` lines of ``CIRCLE_COLS`` cells."""
    canvas = BrailleCanvas(CIRCLE_COLS, PICTURE_ROWS)
    # dots are square (a cell is 2 x 4 dots and about twice as tall as wide)
    cx, cy = canvas.width / 2, canvas.height / 2
    radius = cy - 4.0  # one row left above the rim for the mark
    label_r = radius + 2.5

    def at(r: float, angle_deg: float) -> tuple[float, float]:
        x, y = screen_xy(angle_deg, pic.rotation)  # the one angle-to-picture mapping
        return cx + r * x, cy + r * y

    canvas.circle(cx, cy, radius, "grey50")
    for angle in pic.positions_deg if len(pic.positions_deg) <= TICK_ALL_UP_TO else ():
        canvas.line(*at(radius - 2.0, angle), *at(radius, angle), "grey50")
    for part in pic.parts:
        canvas.line(cx, cy, *at(radius, part.angle_deg), SPOKE_STYLE[part.action])
    taken: set[tuple[int, int]] = set()
    mark_cell = (0, int(cx // 2))

    def label(text: str, angle_deg: float, style: str) -> None:
        x, y = at(label_r, angle_deg)
        row = max(0, min(PICTURE_ROWS - 1, int(y // 4)))
        col = int(x // 2) - (len(text) - 1) // 2
        col = max(0, min(CIRCLE_COLS - len(text), col))
        if (row, col) == mark_cell or (len(text) > 1 and (row, col + 1) == mark_cell):
            col = mark_cell[1] + 1  # beside the mark, on the side the angles grow to
            if screen_xy(10.0, pic.rotation)[0] < 0:
                col = mark_cell[1] - len(text)
        canvas.label(col, row, text, style)
        taken.update((row, col + i) for i in range(len(text)))

    canvas.label(mark_cell[1], mark_cell[0], MARK, "bold")
    count = len(pic.positions_deg)
    lit = {p.number for p in pic.parts if p.number is not None}
    for k, angle in enumerate(pic.positions_deg):
        number = number_of(k)
        if number not in lit and (number == 1 or count <= LABEL_ALL_UP_TO):
            label(str(number), angle, POSITION_STYLE)
    for part in pic.parts:  # the lit ones last: they stay readable
        label(part.tag, part.angle_deg, PART_STYLE[part.action])
    return list(canvas.render().split("\n"))


#: legend rows: the plane, the face and rotation, the mark and radius, the parts, the key
PART_ROWS = PICTURE_ROWS - 4
HINT = "h: rings, marking"


def fits_legend(pictures: Sequence[PlanePicture]) -> bool:
    """Every part of every picture is listed beside its circle (else the step's text lists
    them all in full)."""
    return all(len(p.parts) <= PART_ROWS for p in pictures)


def _part_line(part: PartMark, units: UnitChoice) -> Text:
    line = Text()
    line.append(part.tag, PART_STYLE[part.action])
    line.append(f" {PART_WORDS[part.action]} {mass_text(part.mass_g, units.mass)}")
    if part.number is None:  # any angle: the angle is the place
        at = degrees_text(part.angle_deg)
        line.append(f" at {at}" if line.cell_len + 4 + len(at) <= LEGEND_COLS else f" {at}")
    return line


def _legend(pic: PlanePicture, units: UnitChoice) -> list[Text]:
    """The lines beside the circle: the plane, the face and rotation, the parts, the key
    to the rings."""
    lines = [Text(pic.plane, "bold"),
             Text(f"from the {pic.face} {ARROW[pic.rotation]} {pic.rotation}"),
             Text(f"{MARK} 0\u00b0 mark, r {length_text(pic.radius_mm, units.length)}",
                  "grey70")]
    parts = list(pic.parts)
    if len(parts) > PART_ROWS:
        shown = [_part_line(p, units) for p in parts[:PART_ROWS - 1]]
        shown.append(Text(f"+{len(parts) - PART_ROWS + 1} more: see below", "grey70"))
    else:
        shown = [_part_line(p, units) for p in parts] or [
            Text("nothing to place here", "grey70")]
    lines += shown + [Text("")] * (PART_ROWS - len(shown))
    lines.append(Text(HINT, "grey70"))
    for line in lines:
        line.truncate(LEGEND_COLS, overflow="ellipsis")
    return lines


def picture_lines(pic: PlanePicture, units: UnitChoice = METRIC) -> list[Text]:
    """One plane's block: ``PICTURE_ROWS`` lines of ``BLOCK_COLS`` cells."""
    circle, legend = _circle(pic), _legend(pic, units)
    out = []
    for row in range(PICTURE_ROWS):
        line = circle[row].copy()
        line.pad_right(CIRCLE_COLS - line.cell_len)
        line.append(" ")
        if row < len(legend):
            line.append_text(legend[row])
        line.pad_right(BLOCK_COLS - line.cell_len)
        out.append(line)
    return out


def pictures_text(pictures: Sequence[PlanePicture], units: UnitChoice = METRIC) -> Text:
    """The pictures side by side (``PICTURE_ROWS`` lines)."""
    blocks = [picture_lines(p, units) for p in pictures]
    out = Text()
    for row in range(PICTURE_ROWS if blocks else 0):
        for k, block in enumerate(blocks):
            if k:
                out.append(" " * GAP_COLS)
            out.append_text(block[row])
        if row < PICTURE_ROWS - 1:
            out.append("\n")
    return out


class PlacementView(Widget):
    """The placement pictures of the hands-on step shown (nothing at other steps)."""

    DEFAULT_CSS = f"PlacementView {{ height: {PICTURE_ROWS}; padding: 0 1; display: none; }}"

    pictures: reactive[tuple[PlanePicture, ...]] = reactive(())
    units: reactive[UnitChoice] = reactive(METRIC)

    def show(self, pictures: tuple[PlanePicture, ...], units: UnitChoice) -> None:
        """Draw ``pictures`` (none: the view is hidden)."""
        self.pictures = pictures
        self.units = units
        self.display = bool(pictures)

    def render(self) -> Text:
        return pictures_text(self.pictures, self.units)


# ---- the printable ring for each plane, and how to mark the rotor ---------------------------

def ring_arguments(profile: MachineProfile, plane: Plane) -> list[str]:
    """The ``trueturn ring`` arguments for ``plane`` of this machine, laid on its face: the
    ring's outer edge on the weight circle (diameter 2 r), the plane's positions, and the
    rotation as seen on that face, so the printed numbers run the way the rotor's do."""
    angles = plane.position_angles_deg
    if plane.layout.kind == "equal" and angles:
        where = ["--positions", str(len(angles)), "--first-deg", f"{angles[0]:g}"]
    elif angles:  # irregular: each position at its angle, position 1 first
        where = ["--angles", ",".join(f"{a:g}" for a in angles)]
    else:  # any angle: the degree scale is what counts
        where = ["--positions", "1"]
    safe = re.sub(r"[^a-z0-9]+", "-", f"{profile.name}-{plane.name}".lower()).strip("-")
    return ["ring", "--diameter-mm", f"{2 * plane.radius_mm:g}", *where,
            "--rotation", plane.rotation_seen(profile.rotation),
            "--title", f"{profile.name}, {plane.name}, {plane.face} face",
            "-o", f"ring-{safe}.svg"]


def marking_markup(profile: MachineProfile, planes: Sequence[Plane]) -> str:
    """The page of how to mark this rotor: a ring per plane and on which face it goes,
    carrying the 0 deg mark to the second plane (console markup)."""
    lines = [f"[b]Marking {_escape(profile.name)}: a ring per plane, and the 0\u00b0 "
             "mark[/b]",
             "Print at 100 % (check the 100 mm box), cut out, lay on the plane's face printed "
             "side up, 0\u00b0 on the mark. Rotor stopped and unplugged; rings off before a "
             "run.", ""]
    for plane in planes:
        seen = plane.rotation_seen(profile.rotation)
        lines.append(f"[b]{_escape(plane.name)}[/b], seen from the {plane.face} (turns "
                     f"{ARROW[seen]} {seen}):")
        lines.append("  trueturn " + _escape(shlex.join(ring_arguments(profile, plane))))
    lines += ["", "[b]0\u00b0 on every plane[/b] is the reference mark the tach sees, carried "
              "along the rotor parallel to the shaft: a straightedge through the mark, or the "
              "same arc from a keyway both ends share; mark that line on each face."]
    if any(p.face == "back" for p in planes):
        lines += ["[b]A back face[/b]: seen from there the rotor turns the other way, so its "
                  "ring is printed for that side (its --rotation above). A ring printed for "
                  "the front and laid on the back would put every correction on its mirror "
                  "image."]
    return "\n".join(lines)


def _escape(text: str) -> str:
    """Text from the profile shown as itself, never read as markup."""
    return text.replace("[", "\\[")
