"""Bode and polar plots of a coast-down or run-up sweep as one SVG (``analyze --sweep --plot``).

One row per pickup: the 1x amplitude against speed, its phase against speed (the Bode
plot), and the polar (Nyquist) plot of the same vectors, slowest speed to fastest, with
every resonance found marked at its speed and with its damping. Points whose 1x is not
above their noise (:attr:`trueturn.dsp.sweep.SweepValue.usable`) are drawn hollow and
grey: their phase means little. Angles on the polar plot go through
:func:`trueturn.angles.screen_xy` (0 deg at the top, the lag increasing the way the rotor
turns as drawn); without a machine profile the picture assumes a counter-clockwise rotor.

Kept apart from :mod:`trueturn.jobs.report`, which draws the sweeps a job keeps with it.
"""

from __future__ import annotations

import math
from html import escape

from trueturn.angles import Rotation, screen_xy
from trueturn.dsp.sweep import Sweep

ROW_HEIGHT = 230
PANEL_WIDTH = 300
POLAR_SIZE = 210
MARGIN = 48
COLOURS = ("#1f5fa8", "#b5471b", "#2e7d32", "#6a3d9a")


def _e(text: str) -> str:
    return escape(text, quote=True)


def _nice(value: float) -> float:
    """A round number at or above ``value`` (1, 2, 5 x 10^k)."""
    if not value > 0:
        return 1.0
    power = 10 ** math.floor(math.log10(value))
    for step in (1, 2, 5, 10):
        if step * power >= value:
            return step * power
    return 10 * power


def sweep_svg(sweep: Sweep, title: str = "1x against speed",
              rotation: Rotation = "ccw", font_px: float = 11.0) -> str:
    """The sweep as a standalone SVG document (Bode amplitude and phase, and polar).

    Parameters
    ----------
    sweep : Sweep
        The sweep (:func:`trueturn.dsp.sweep.analyse_sweep`).
    title : str, default "1x against speed"
        The picture's title.
    rotation : {"ccw", "cw"}, default "ccw"
        The rotor's direction as seen on the polar plot.
    font_px : float, default 11
        The labels' size in the picture's units (the report asks for more, so that the
        picture shrunk to the paper's width still prints its labels at 7 pt or more).

    Returns
    -------
    str
        An SVG document.
    """
    names = [v.name for v in sweep.points[0].pickups] if sweep.points else []
    width = 2 * PANEL_WIDTH + POLAR_SIZE + 4 * MARGIN
    height = 40 + ROW_HEIGHT * max(1, len(names)) + 30
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
           f'viewBox="0 0 {width} {height}" role="img" aria-label="{_e(title)}" '
           f'font-family="sans-serif" font-size="{font_px:g}">',
           f'<title>{_e(title)}</title>',
           f'<text x="{MARGIN}" y="22" font-size="{font_px + 3:g}">{_e(title)} ({_e(sweep.unit)}; '
           'hollow grey: below its noise)</text>']
    if not sweep.points:
        out.append(f'<text x="{MARGIN}" y="60">no revolutions to plot</text></svg>')
        return "\n".join(out)
    lo = min(p.speed_rpm for p in sweep.points)
    hi = max(p.speed_rpm for p in sweep.points)
    if hi <= lo:
        hi = lo + 1.0
    for row, name in enumerate(names):
        top = 40 + row * ROW_HEIGHT
        colour = COLOURS[row % len(COLOURS)]
        values = [(p.speed_rpm, v) for p in sweep.points for v in (p.value(name),)
                  if v is not None]
        resonances = [r for r in sweep.resonances if r.pickup == name]
        amp_top = _nice(max(v.amplitude for _, v in values))
        x0 = MARGIN
        panel_h = ROW_HEIGHT - 60

        def sx(speed: float, left: float) -> float:
            return left + (speed - lo) / (hi - lo) * PANEL_WIDTH

        # --- amplitude against speed
        out.append(_frame(x0, top + 10, panel_h, f"{name}: amplitude ({sweep.unit})",
                          f"0 .. {amp_top:g}", lo, hi, font_px))
        out.append(_series([(sx(s, x0), top + 10 + panel_h * (1 - v.amplitude / amp_top),
                             v.usable) for s, v in values], colour))
        # --- phase against speed (lag, 0-360)
        x1 = x0 + PANEL_WIDTH + MARGIN
        out.append(_frame(x1, top + 10, panel_h, f"{name}: phase lag (deg)", "0 .. 360",
                          lo, hi, font_px))
        out.append(_series([(sx(s, x1), top + 10 + panel_h * (1 - v.phase_deg / 360.0),
                             v.usable) for s, v in values], colour, joined=False))
        for k, r in enumerate(resonances):
            for left in (x0, x1):
                x = sx(r.speed_rpm, left)
                out.append(f'<line x1="{x:.1f}" y1="{top + 10}" x2="{x:.1f}" '
                           f'y2="{top + 10 + panel_h}" stroke="#999" stroke-dasharray="4 3"/>')
            damping = ("damping not resolved" if r.damping_ratio is None
                       else f"damping {100 * r.damping_ratio:.1f} %")
            out.append(f'<text class="resonance" x="{sx(r.speed_rpm, x0) + 3:.1f}" '
                       f'y="{top + 13 + 1.2 * font_px * (k + 1):.1f}">{r.speed_rpm:.0f} rpm, {damping}</text>')
        # --- polar: the vectors from slowest to fastest
        cx = x1 + PANEL_WIDTH + MARGIN + POLAR_SIZE / 2
        cy = top + 10 + panel_h / 2
        radius = min(POLAR_SIZE, panel_h) / 2 - 4
        out.append(f'<circle cx="{cx:.1f}" cy="{cy:.1f}" r="{radius:.1f}" fill="none" '
                   'stroke="#bbb"/>')
        for angle in (0, 90, 180, 270):
            tx, ty = screen_xy(angle, rotation)
            out.append(f'<text x="{cx + (radius + font_px + 1) * tx:.1f}" '
                       f'y="{cy + (radius + font_px + 1) * ty + font_px / 3:.1f}" '
                       'text-anchor="middle" '
                       f'fill="#666">{angle}\u00b0</text>')
        polar = []
        for _, v in values:
            ux, uy = screen_xy(v.phase_deg, rotation)
            scale = radius * v.amplitude / amp_top
            polar.append((cx + scale * ux, cy + scale * uy, v.usable))
        out.append(_series(polar, colour))
        out.append(f'<text x="{cx:.1f}" y="{top + panel_h + 26 + 1.3 * font_px:.1f}" '
                   'text-anchor="middle">'
                   f'{_e(name)}: polar, ring {amp_top:g}</text>')
    out.append("</svg>")
    return "\n".join(out)


def _frame(left: float, top: float, height: float, label: str, scale: str,
           lo: float, hi: float, font_px: float = 11.0) -> str:
    """A panel's box, its label, scale and speed axis ends."""
    return (f'<rect x="{left}" y="{top}" width="{PANEL_WIDTH}" height="{height}" fill="none" '
            f'stroke="#888"/>'
            f'<text x="{left}" y="{top - 3}">{_e(label)}, {scale}</text>'
            f'<text x="{left}" y="{top + height + font_px + 3:g}">{lo:.0f} rpm</text>'
            f'<text x="{left + PANEL_WIDTH}" y="{top + height + font_px + 3:g}" '
            'text-anchor="end">'
            f'{hi:.0f} rpm</text>')


def _series(points: list[tuple[float, float, bool]], colour: str, joined: bool = True) -> str:
    """Dots (filled when usable, hollow grey when not), joined through the usable ones."""
    parts = []
    usable = [(x, y) for x, y, ok in points if ok]
    if joined and len(usable) > 1:
        path = " ".join(f"{x:.1f},{y:.1f}" for x, y in usable)
        parts.append(f'<polyline class="series" points="{path}" fill="none" '
                     f'stroke="{colour}" stroke-width="1"/>')
    for x, y, ok in points:
        parts.append(f'<circle class="{"point" if ok else "noise"}" cx="{x:.1f}" cy="{y:.1f}" '
                     f'r="1.8" fill="{colour if ok else "none"}" '
                     f'stroke="{colour if ok else "#aaa"}" stroke-width="0.6"/>')
    return "".join(parts)
