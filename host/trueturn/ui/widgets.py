"""Small widgets of our own: a braille polar plot of 1x vectors, and markup text that
repaints only when it changes.

Braille cells give 2x4 dots per character, enough for a readable polar plot in a corner of
an 80x24 terminal. The plot places angles with the one mapping of the project,
``angles.screen_xy``, exactly like the report and the printed ring: 0 deg at the top, angles
growing against rotation as seen from the pickup side (counter-clockwise on screen for a
rotor turning clockwise). A ring at full scale and one at half scale; each vector is a line
from the centre with its pickup's letter at the tip; earlier runs of the job are single dots
with a digit.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from rich.text import Text
from textual.content import Content
from textual.reactive import reactive
from textual.widget import Widget
from textual.widgets import Static

from trueturn.angles import Rotation, screen_xy
from trueturn.model.units import NBSP

BRAILLE_BASE = 0x2800
# Dot bit for (column 0..1, row 0..3) inside one braille cell (Unicode braille patterns).
_DOT_BITS = ((0x01, 0x08), (0x02, 0x10), (0x04, 0x20), (0x40, 0x80))


class BrailleCanvas:
    """A grid of braille cells with dot plotting, lines, and text overlays."""

    def __init__(self, cols: int, rows: int) -> None:
        self.cols, self.rows = max(1, cols), max(1, rows)
        self.width, self.height = self.cols * 2, self.rows * 4
        self._bits = [[0] * self.cols for _ in range(self.rows)]
        self._style = [[""] * self.cols for _ in range(self.rows)]
        self._text: dict[tuple[int, int], tuple[str, str]] = {}

    def dot(self, x: float, y: float, style: str = "") -> None:
        xi, yi = int(round(x)), int(round(y))
        if 0 <= xi < self.width and 0 <= yi < self.height:
            r, c = yi // 4, xi // 2
            self._bits[r][c] |= _DOT_BITS[yi % 4][xi % 2]
            if style:
                self._style[r][c] = style

    def line(self, x0: float, y0: float, x1: float, y1: float, style: str = "") -> None:
        n = int(max(abs(x1 - x0), abs(y1 - y0))) + 1
        for k in range(n + 1):
            t = k / n
            self.dot(x0 + (x1 - x0) * t, y0 + (y1 - y0) * t, style)

    def circle(self, cx: float, cy: float, r: float, style: str = "") -> None:
        n = max(24, int(2 * math.pi * r))
        for k in range(n):
            a = 2 * math.pi * k / n
            self.dot(cx + r * math.cos(a), cy + r * math.sin(a), style)

    def label(self, col: int, row: int, text: str, style: str = "") -> None:
        for i, ch in enumerate(text):
            if 0 <= col + i < self.cols and 0 <= row < self.rows:
                self._text[(row, col + i)] = (ch, style)

    def render(self) -> Text:
        out = Text()
        for r in range(self.rows):
            for c in range(self.cols):
                if (r, c) in self._text:
                    ch, style = self._text[(r, c)]
                    out.append(ch, style)
                else:
                    bits = self._bits[r][c]
                    out.append(chr(BRAILLE_BASE + bits) if bits else " ", self._style[r][c])
            if r < self.rows - 1:
                out.append("\n")
        return out


class UnitsKept(Content):
    """Content whose lines break only at ordinary spaces, never at a no-break space: a
    number stays on the line of its unit (``0.60`` + NBSP + ``g``), whatever the width.

    Textual wraps at any whitespace, the no-break space included, so this content breaks
    its lines itself (greedy, at ASCII spaces) before Textual draws them, and shows every
    no-break space as a space. ``str()`` gives the text with plain spaces, as shown."""

    @classmethod
    def of(cls, content: Content) -> UnitsKept:
        return cls(content.plain, list(content.spans))

    def __str__(self) -> str:
        return self.plain.replace(NBSP, " ")

    def wrapped(self, width: int) -> Content:
        """The lines broken at ordinary spaces to at most ``width`` cells (a word longer
        than that is left to Textual), no-break spaces shown as spaces."""
        lines: list[Content] = []
        for line in self.split(allow_blank=True):
            text, cuts, start = line.plain, [], 0
            while width > 0 and len(text) - start > width:
                cut = text.rfind(" ", start, start + width + 1)
                if cut <= start:
                    break
                cuts.append(cut + 1)
                start = cut + 1
            pieces = line.divide(cuts)
            lines += [p.rstrip(" ") for p in pieces[:-1]] + pieces[-1:]
        joined = Content("\n").join(lines)
        return Content(joined.plain.replace(NBSP, " "), list(joined.spans))

    def get_height(self, rules: Any, width: int) -> int:
        return self.wrapped(width).get_height(rules, width)

    def render_strips(self, width: int, height: int | None, style: Any,
                      options: Any) -> list[Any]:
        return self.wrapped(width).render_strips(width, height, style, options)


def markup(text: str) -> UnitsKept:
    """Console markup as content that keeps numbers with their units (:class:`UnitsKept`)."""
    return UnitsKept.of(Content.from_markup(text))


class MarkupText(Static):
    """Console markup held in a reactive attribute: set ``text``; the widget repaints only
    when the text differs from what it shows. Numbers stay with their units."""

    text: reactive[str] = reactive("", layout=True)  # its height may change with it

    def render(self) -> Content:
        return markup(self.text)


@dataclass(frozen=True)
class PolarPoint:
    """A 1x vector to draw: amplitude, phase (deg), a one-letter tag, vector or history dot."""

    amplitude: float
    phase_deg: float
    tag: str
    style: str = ""
    current: bool = True


class PolarPlot(Widget):
    """Polar plot of 1x vectors: live vectors as lines, the job's earlier runs as dots."""

    DEFAULT_CSS = "PolarPlot { width: 1fr; height: 1fr; min-width: 20; min-height: 8; }"

    points: reactive[tuple[PolarPoint, ...]] = reactive(())
    unit: reactive[str] = reactive("")
    rotation: reactive[Rotation] = reactive("cw")

    def show(self, points: list[PolarPoint], unit: str, rotation: Rotation) -> None:
        """Draw ``points``; ``rotation`` as seen from the pickup side (the machine profile).
        The plot repaints only when one of them changed."""
        self.points = tuple(points)
        self.unit = unit
        self.rotation = rotation

    def render(self) -> Text:
        return polar_text(list(self.points), self.unit, self.rotation, self.size.width,
                          self.size.height)


def polar_text(points: list[PolarPoint], unit: str, rotation: Rotation, cols: int,
               rows: int) -> Text:
    """The polar plot drawn into ``cols`` x ``rows`` terminal cells (the last row: the scale)."""
    canvas = BrailleCanvas(cols, rows - 1)
    # A cell is about twice as tall as wide and holds 2x4 dots, so dots are square.
    radius = max(4.0, min(canvas.width, canvas.height) / 2 - 2)
    cx, cy = canvas.width / 2, canvas.height / 2

    def xy(amp_frac: float, phase_deg: float) -> tuple[float, float]:
        x, y = screen_xy(phase_deg, rotation)  # the one angle-to-screen mapping
        return cx + radius * amp_frac * x, cy + radius * amp_frac * y

    for frac in (1.0, 0.5):
        n = max(32, int(8 * radius))
        for k in range(n):
            x, y = xy(frac, 360.0 * k / n)
            canvas.dot(x, y, "grey50")
    for a in (0.0, 90.0, 180.0, 270.0):
        x, y = xy(1.0, a)
        canvas.line(cx, cy, x, y, "grey30")
    full = max([p.amplitude for p in points] + [1e-12]) * 1.1
    for p in points:
        x, y = xy(p.amplitude / full, p.phase_deg)
        if p.current:
            canvas.line(cx, cy, x, y, p.style)
        else:
            canvas.dot(x, y, p.style)
    # Earlier runs' digits first, live vector letters last so they stay readable.
    for p in sorted(points, key=lambda q: q.current):
        x, y = xy(p.amplitude / full, p.phase_deg)
        canvas.label(int(x // 2), int(y // 4), p.tag, f"bold {p.style}".strip())
    for a in (0, 90, 180, 270):
        # The angle's label just outside the full-scale ring, on whichever side it falls.
        x, y = xy(1.0, a)
        word = str(a)
        col = int(x // 2)
        if x > cx + 1:
            col += 1
        elif x < cx - 1:
            col -= len(word)
        else:
            col -= len(word) // 2
        row = int(y // 4)
        canvas.label(max(0, min(canvas.cols - len(word), col)),
                     max(0, min(canvas.rows - 1, row)), word)
    turns = "\u21bb cw" if rotation == "cw" else "\u21ba ccw"
    text = canvas.render()
    text.append(f"\nfull scale {full:.3g} {unit} · turns {turns}", "grey62")
    return text
