"""Job reports: a self-contained HTML page with inline SVG plots, a Markdown variant, a CSV.

The report shows what the job stores (readings, corrections, verdict); it computes nothing
but unit conversions and plot geometry. The HTML uses no network resources and no scripts;
its print styles fit A4 (210 mm) and US Letter (216 mm) paper with 12 mm margins.

Units: everything a person reads is in the machine profile's units (``units.mass``,
``units.length``, ``units.vibration``): masses in g or oz, lengths in mm or in, unbalance in
g·mm or oz·in, the rotor's mass in kg or lb, eccentricity in µm or mil, vibration in mm/s or
in/s; the CSV keeps the stored values. Phases are always shown with one decimal; times are
shown in UTC and say so.

Plot orientation: the one mapping of angles.screen_xy, the same as the app's live plot and the
printed ring: 0 deg at the top; angles grow against rotation as seen from the pickup side, so a
rotor turning clockwise has its angles drawn counter-clockwise. Positions are numbered from 1
(host/trueturn/positions.py).
"""

from __future__ import annotations

import csv
import dataclasses
import html
import io
import math
import re
from collections.abc import Iterable, Sequence
from datetime import datetime, timezone

from trueturn.angles import Rotation, phasor, screen_xy, wrap_deg
from trueturn.balance.iso21940 import permissible_eccentricity_um, permissible_unbalance_gmm
from trueturn.balance.model_first import DISTRUST_WORDS
from trueturn.constants import UM_PER_MIL
from trueturn.dsp.coast import sweep_findings
from trueturn.dsp.findings import Code, describe
from trueturn.dsp.severity import ZONES_SOURCE
from trueturn.jobs.condition import evidence_finding, severity_finding, verdict_finding
from trueturn.jobs.profiles import (
    G_PER_OZ,
    MachineProfile,
    Units,
    convert_vibration,
    format_length,
    format_mass,
)
from trueturn.jobs.records import (
    EvidenceEntry,
    JobRecord,
    MassChange,
    ModelCoefficientEntry,
    RunEntry,
    TapEntry,
    UnbalanceEntry,
)
from trueturn.jobs.sweep_plot import sweep_svg
from trueturn.jobs.sweeps import sweep_of
from trueturn.model import Reading
from trueturn.model import units as model_units
from trueturn.positions import degrees_text, number_of, position_text

#: Okabe & Ito (2008) colour-blind-safe palette; one colour per run, in order.
RUN_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")

CAUTIONS = (
    "Before every hands-on step the rotor must be at a standstill confirmed by the tach, the "
    "machine switched off and isolated from power (unplugged or locked out), and the step "
    "confirmed in the tool.",
    "Fasten every weight so it cannot come loose: a thrown weight is a projectile. Stand out of "
    "the plane of rotation when starting the machine, and wear eye protection.",
    "Never run above the machine's maximum speed or the rated speed of any wheel, blade or "
    "cutter on it. Keep every guard in place for runs.",
    "Check that parts, clamps and fasteners clear guards and housings before the first turn by "
    "hand.",
    "This report records measurements; it does not certify a machine as safe. The machine's "
    "manufacturer, local codes and licensed practice take precedence over anything here.",
)

_RUN_KIND_NAMES = {"initial": "initial", "trial": "trial weight", "correction": "correction",
                   "trim": "trim", "check": "check"}


def _e(text: object) -> str:
    return html.escape(str(text), quote=True)


_deg = degrees_text


def _utc(iso: str) -> datetime | None:
    """An ISO 8601 time with a zone (``Z`` or ``+hh:mm``) as a UTC datetime; None without."""
    try:
        when = datetime.fromisoformat(iso.strip().replace("Z", "+00:00"))
    except ValueError:
        return None
    return when.astimezone(timezone.utc) if when.tzinfo is not None else None


def short_time(iso: str) -> str:
    """A stored time for a column headed "(UTC)": ``'2026-11-28T14:02:10Z'`` -> ``'2026-11-28
    14:02'``; a time with another offset is converted to UTC first; a time without a zone is
    shown as written with "(zone?)" after it, and text that is no time unchanged."""
    when = _utc(iso)
    if when is not None:
        return when.strftime("%Y-%m-%d %H:%M")
    try:
        datetime.fromisoformat(iso.strip())
    except ValueError:
        return iso
    return iso.strip().replace("T", " ")[:16] + " (zone?)"


def time_text(iso: str) -> str:
    """A stored time shown on its own, with its zone: ``'2026-11-28 14:02 UTC'``."""
    text = short_time(iso)
    return text + " UTC" if _utc(iso) is not None else text


def phase_text(phase_deg: float) -> str:
    """A measured phase, always with one decimal: ``'202.0\u00b0'`` (one format everywhere)."""
    value = wrap_deg(phase_deg)
    return f"{0.0 if round(value, 1) >= 360.0 else value:.1f}\u00b0"


def reading_text(reading: Reading, machine: MachineProfile) -> tuple[str, str]:
    """(amplitude with unit, phase with confidence) in the person's chosen units."""
    amplitude, unit = convert_vibration(reading.amplitude, reading.unit, machine.units.vibration,
                                        machine.units.length)
    # at least 3 significant figures below 10 (0.104 in/s, 0.00496 in/s), one decimal above
    digits = 1 if amplitude >= 10 else 3 if amplitude <= 0 else max(
        3, 2 - math.floor(math.log10(amplitude)))
    return (f"{amplitude:.{digits}f} {unit}",
            "no phase" if reading.phase_deg is None else
            f"{phase_text(reading.phase_deg)} \u00b1 {reading.confidence_deg:.1f}\u00b0")


def unbalance_text(unbalance_gmm: float, units: Units) -> str:
    """An unbalance (mass x radius) in the profile's mass and length units: ``'7.6 g·mm'``,
    ``'0.0106 oz·in'`` (model.units does the conversion)."""
    if units.mass == "g" and units.length == "mm":
        return f"{unbalance_gmm:.1f} g\u00b7mm"
    return model_units.unbalance_text(unbalance_gmm, units.mass, units.length)


def rotor_mass_text(mass_kg: float, units: Units) -> str:
    """The rotor's mass: kg, or lb when the masses are in oz (model.units.UnitChoice)."""
    choice = units.choice()
    if choice.rotor_mass == "kg":
        return f"{mass_kg:g} kg"
    return model_units.rotor_mass_text(mass_kg, choice.rotor_mass)


def eccentricity_text(e_um: float, units: Units) -> str:
    """A permissible specific unbalance (eccentricity): µm (= g·mm/kg), or mil (0.001 in)
    when lengths are in inches."""
    if units.length == "in":
        return f"{model_units.significant_text(e_um / UM_PER_MIL)} mil"
    return f"{e_um:.3g} \u00b5m (g\u00b7mm/kg)"


def _reduction(before: Reading, after: Reading) -> str:
    """Change of amplitude from before to after, in percent (only when the units agree)."""
    b, b_unit = convert_vibration(before.amplitude, before.unit, "mm/s")
    a, a_unit = convert_vibration(after.amplitude, after.unit, "mm/s")
    if a_unit != b_unit or b <= 0:
        return "-"
    return f"{(a - b) / b * 100:+.0f} %"


# --------------------------------------------------------------------------------------------
# SVG


def _xy(cx: float, cy: float, r: float, angle_deg: float,
        rotation: Rotation) -> tuple[float, float]:
    """Point at ``angle_deg`` (against rotation) on a circle of radius ``r`` round (cx, cy),
    seen from the pickup side (angles.screen_xy)."""
    x, y = screen_xy(angle_deg, rotation)
    return cx + r * x, cy + r * y


def _nice_step(span: float) -> float:
    """A 1-2-5 step giving about four rings for ``span``."""
    raw = span / 4.0
    power = 10 ** math.floor(math.log10(raw))
    for factor in (1, 2, 2.5, 5, 10):
        if factor * power >= raw:
            return factor * power
    return 10 * power


def confidence_radius(amplitude: float, confidence_deg: float) -> float:
    """Radius of the circle around a vector's tip that spans its phase confidence: A*sin(c).

    Common practice, no source: a circle of this radius is seen from the origin under
    +/- ``confidence_deg``; for 90 deg or more it reaches the origin (radius A).
    """
    return amplitude * math.sin(math.radians(min(confidence_deg, 90.0)))


#: Printed width of a polar plot and of a plane picture (two plots side by side fit the
#: 186 mm of A4 between 12 mm margins). With the viewBox widths below, 1 user unit is
#: 86/320 = 0.269 mm and 56/170 = 0.329 mm, so a 10-unit tick label prints at 7.6 pt and
#: 7.4 pt (1 pt = 25.4/72 mm): the 7 pt floor of the printed report.
POLAR_WIDTH_MM = 86.0
POLAR_VIEW = 320
PLANE_WIDTH_MM = 56.0
PLANE_VIEW = 170
#: Smallest printed text of the report, pt.
MIN_TEXT_PT = 7.0

#: One marker shape per run (with the colour and a dash pattern), so runs stay apart in
#: greyscale: circle, square, triangle, diamond, triangle down, pentagon, hexagon.
RUN_SHAPES = ("circle", "square", "triangle", "diamond", "triangle-down", "pentagon", "hexagon")
RUN_DASHES = ("", "7 3", "2 2.5", "9 3 2 3", "4 4", "1 3", "12 3")
_SHAPE_SIDES = {"square": (4, 45.0), "triangle": (3, 0.0), "diamond": (4, 0.0),
                "triangle-down": (3, 180.0), "pentagon": (5, 0.0), "hexagon": (6, 30.0)}


def run_style(i: int) -> tuple[str, str, str]:
    """(colour, marker shape, dash pattern) of the ``i``-th run drawn on a plot."""
    return (RUN_COLOURS[i % len(RUN_COLOURS)], RUN_SHAPES[i % len(RUN_SHAPES)],
            RUN_DASHES[i % len(RUN_DASHES)])


def marker_svg(shape: str, x: float, y: float, size: float, colour: str,
               extra: str = "") -> str:
    """A filled marker of ``shape`` centred on (x, y), ``size`` across, with a white rim."""
    common = f'fill="{colour}" stroke="#fff" stroke-width="0.8"{extra}'
    if shape == "circle":
        return f'<circle cx="{x:.2f}" cy="{y:.2f}" r="{size / 2:.2f}" {common}/>'
    sides, turn = _SHAPE_SIDES[shape]
    r = size / 2 * (1.25 if sides == 3 else 1.1)
    pts = " ".join(f"{x + r * math.sin(math.radians(turn + k * 360 / sides)):.2f},"
                   f"{y - r * math.cos(math.radians(turn + k * 360 / sides)):.2f}"
                   for k in range(sides))
    return f'<polygon points="{pts}" {common}/>'


Box = tuple[float, float, float, float]  # x0, y0, x1, y1


def _overlaps(a: Box, b: Box) -> bool:
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


def _text_box(x: float, y_baseline: float, text: str, size: float) -> Box:
    """Estimated box of middle-anchored text (DejaVu Sans digits are 0.64 em wide)."""
    half = 0.33 * size * len(text)
    return (x - half, y_baseline - 0.78 * size, x + half, y_baseline + 0.22 * size)


def place_label(x: float, y: float, text: str, size: float, avoid: list[Box],
                outward: tuple[float, float], limits: Box) -> tuple[float, float]:
    """Baseline point for a label beside the marker at (x, y): the first of 16 spots round
    it (outward first, then turning both ways, then further out) whose box hits nothing in
    ``avoid`` and stays inside ``limits``; the outward spot if none is free. Common
    practice, no source: greedy label placement."""
    ox, oy = outward
    base = math.atan2(oy, ox)
    tries = []
    for distance in (1.05 * size, 1.7 * size):
        for k in (0, 1, -1, 2, -2, 3, -3, 4):
            a = base + k * math.pi / 4
            tries.append((x + distance * math.cos(a), y + distance * math.sin(a) + 0.3 * size))
    for tx, ty in tries:
        box = _text_box(tx, ty, text, size)
        if (box[0] >= limits[0] and box[1] >= limits[1] and box[2] <= limits[2]
                and box[3] <= limits[3] and not any(_overlaps(box, b) for b in avoid)):
            return tx, ty
    return tries[0]


def polar_svg(job: JobRecord, sensor: str, size_px: int = POLAR_VIEW) -> str:
    """Polar plot of every run's 1x vector of ``sensor`` with its confidence circle.

    Each run has its colour, marker shape and dash pattern (:func:`run_style`); run numbers
    are placed clear of every marker and of each other and drawn last, on a white halo.
    """
    machine = job.machine
    rotation = machine.rotation
    points: list[tuple[RunEntry, float, float, float, str]] = []
    unit: str = machine.units.vibration
    for run in job.runs:
        reading = run.reading(sensor)
        if reading is None or reading.phase_deg is None:
            continue  # a reading without a phase has no place on a polar plot
        amplitude, unit = convert_vibration(reading.amplitude, reading.unit,
                                            machine.units.vibration, machine.units.length)
        if reading.confidence_radius is not None and reading.amplitude > 0:
            radius = reading.confidence_radius * amplitude / reading.amplitude
        else:
            radius = confidence_radius(amplitude, reading.confidence_deg)
        points.append((run, amplitude, reading.phase_deg, radius, unit))
    extent = max([a + c for _, a, _, c, _ in points] + [1e-9])
    step = _nice_step(extent)
    rings = max(1, math.ceil(extent / step))
    full = rings * step
    c = size_px / 2
    plot_r = c - 36
    scale = plot_r / full
    legend_rows = math.ceil(len(points) / 4) if points else 0
    height = size_px + 6 + 18 * legend_rows
    width_mm = POLAR_WIDTH_MM * size_px / POLAR_VIEW
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" class="polar" width="{width_mm:g}mm" '
           f'height="{width_mm * height / size_px:.2f}mm" viewBox="0 0 {size_px} {height}" '
           f'role="img" aria-label="1x vectors of {_e(sensor)}">',
           f'<title>1x vectors, {_e(sensor)}</title>']
    for k in range(1, rings + 1):
        out.append(f'<circle cx="{c:.1f}" cy="{c:.1f}" r="{k * step * scale:.2f}" '
                   f'fill="none" stroke="#bbb" stroke-width="0.7"/>')
    for angle in range(0, 360, 30):
        x1, y1 = _xy(c, c, 0, angle, rotation)
        x2, y2 = _xy(c, c, plot_r, angle, rotation)
        out.append(f'<line x1="{x1:.1f}" y1="{y1:.1f}" x2="{x2:.1f}" y2="{y2:.1f}" '
                   f'stroke="#ddd" stroke-width="0.7"/>')
        tx, ty = _xy(c, c, plot_r + 17, angle, rotation)
        out.append(f'<text x="{tx:.1f}" y="{ty + 3.5:.1f}" text-anchor="middle" '
                   f'class="tick">{angle}\u00b0</text>')
    markers: list[Box] = []
    tips = []
    for i, (run, amplitude, phase_deg, conf_r, _) in enumerate(points):
        colour, shape, dash = run_style(i)
        tx, ty = _xy(c, c, amplitude * scale, phase_deg, rotation)
        tips.append((run, tx, ty, colour))
        dashes = f' stroke-dasharray="{dash}"' if dash else ""
        out.append(f'<g class="run-vector" data-run="{run.index}" data-shape="{shape}">')
        out.append(f'<line x1="{c:.1f}" y1="{c:.1f}" x2="{tx:.2f}" y2="{ty:.2f}" '
                   f'stroke="{colour}" stroke-width="2"{dashes}/>')
        out.append(f'<circle class="confidence" cx="{tx:.2f}" cy="{ty:.2f}" '
                   f'r="{max(conf_r * scale, 0.8):.2f}" fill="{colour}" fill-opacity="0.12" '
                   f'stroke="{colour}" stroke-width="0.8"{dashes}/>')
        out.append(marker_svg(shape, tx, ty, 8.0, colour, ' class="marker"'))
        out.append("</g>")
        markers.append((tx - 5, ty - 5, tx + 5, ty + 5))
    # ring values along a quiet diagonal, then the run numbers: both kept off the markers
    placed: list[Box] = list(markers)
    tick_angle = 45.0 if rotation == "ccw" else 315.0
    for k in range(1, rings + 1):
        lx, ly = _xy(c, c, k * step * scale, tick_angle, "ccw")
        label = f"{k * step:g}"
        box = (lx + 2, ly - 10, lx + 2 + 6.4 * len(label), ly)
        if any(_overlaps(box, b) for b in markers):
            continue  # a marker sits there; the other rings still give the scale
        placed.append(box)
        out.append(f'<text x="{lx + 2:.1f}" y="{ly - 2:.1f}" class="tick ring-value">'
                   f'{label}</text>')
    for run, tx, ty, colour in tips:
        ox, oy = tx - c, ty - c
        norm = math.hypot(ox, oy)
        outward = (ox / norm, oy / norm) if norm > 1e-6 else (0.0, -1.0)
        lx, ly = place_label(tx, ty, str(run.index), 12.0, placed, outward,
                             (0.0, 0.0, float(size_px), float(size_px)))
        placed.append(_text_box(lx, ly, str(run.index), 12.0))
        out.append(f'<text x="{lx:.1f}" y="{ly:.1f}" text-anchor="middle" class="label" '
                   f'data-run="{run.index}" fill="{colour}">{run.index}</text>')
    for i, (run, *_rest) in enumerate(points):
        colour, shape, dash = run_style(i)
        x = 10 + (i % 4) * 78
        y = size_px + 4 + 18 * (i // 4)
        out.append(f'<g class="legend" data-run="{run.index}">')
        out.append(f'<line x1="{x:g}" y1="{y + 8:g}" x2="{x + 22:g}" y2="{y + 8:g}" '
                   f'stroke="{colour}" stroke-width="2"'
                   + (f' stroke-dasharray="{dash}"' if dash else "") + '/>')
        out.append(marker_svg(shape, x + 22, y + 8, 8.0, colour))
        out.append(f'<text x="{x + 31:g}" y="{y + 12:g}" class="tick">run {run.index}</text>')
        out.append("</g>")
    out.append("</svg>")
    return "\n".join(out)


def plane_svg(job: JobRecord, plane_name: str, size_px: int = PLANE_VIEW) -> str:
    """The plane seen from its face (``Plane.face``; from the back the rotation looks
    reversed, like on the app's placement picture and the plane's ring): reference mark,
    positions, parts on the rotor.

    Position numbers are thinned (every 2nd, 3rd, ...) when they would touch; parts are
    drawn as a filled circle (correction) or a filled square (trial) so they differ in
    greyscale too.
    """
    machine = job.machine
    plane = machine.plane(plane_name)
    rotation = plane.rotation_seen(machine.rotation)
    c = size_px / 2
    r = c - 22
    width_mm = PLANE_WIDTH_MM * size_px / PLANE_VIEW
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" class="plane" width="{width_mm:g}mm" '
           f'height="{width_mm:g}mm" viewBox="0 0 {size_px} {size_px}" role="img" '
           f'aria-label="parts on {_e(plane_name)}">',
           f'<title>Parts on {_e(plane_name)}</title>',
           f'<circle cx="{c}" cy="{c}" r="{r}" fill="none" stroke="#555" stroke-width="1.2"/>',
           f'<circle cx="{c}" cy="{c}" r="3" fill="#555"/>']
    mx, my = _xy(c, c, r + 4, 0.0, rotation)
    out.append(f'<path d="M {mx:.1f} {my:.1f} l -6 -10 l 12 0 z" fill="#000"/>')
    out.append(f'<text x="{mx + 8:.1f}" y="{my - 2:.1f}" class="tick">0\u00b0 mark</text>')
    angles = plane.layout.position_angles_deg()
    label_r = r - 16
    gap = min((abs((b - a + 180.0) % 360.0 - 180.0) for a, b in
               zip(angles, angles[1:] + angles[:1], strict=True)), default=360.0)
    stride = 1
    while stride < len(angles) and math.radians(gap * stride) * label_r < 16.0:
        stride += 1
    for k, angle in enumerate(angles):
        x1, y1 = _xy(c, c, r - 5, angle, rotation)
        x2, y2 = _xy(c, c, r + 5, angle, rotation)
        out.append(f'<line x1="{x1:.1f}" y1="{y1:.1f}" x2="{x2:.1f}" y2="{y2:.1f}" '
                   f'stroke="#555" stroke-width="1"/>')
        if k % stride == 0:
            tx, ty = _xy(c, c, label_r, angle, rotation)
            out.append(f'<text x="{tx:.1f}" y="{ty + 3.5:.1f}" text-anchor="middle" '
                       f'class="tick">{number_of(k)}</text>')
    for part in job.parts_on_rotor():
        if part.plane != plane_name:
            continue
        px, py = _xy(c, c, r, part.angle_deg, rotation)
        trial = part.purpose == "trial"
        tip = (f'<title>{_e(format_mass(part.mass_g, machine.units.mass))} at '
               f'{_deg(part.angle_deg)}{" (trial)" if trial else ""}</title>')
        if trial:
            out.append(f'<rect class="part trial" x="{px - 5:.1f}" y="{py - 5:.1f}" width="10" '
                       f'height="10" fill="#D55E00" stroke="#fff" stroke-width="0.8">{tip}</rect>')
        else:
            out.append(f'<circle class="part" cx="{px:.1f}" cy="{py:.1f}" r="5.5" '
                       f'fill="#0072B2" stroke="#fff" stroke-width="0.8">{tip}</circle>')
    out.append("</svg>")
    return "\n".join(out)


def parts_text(job: JobRecord, plane_name: str) -> str:
    """The parts left on a plane, as text: ``'1.70 g at 0 deg (position 1), ...'``."""
    items = [f"{format_mass(p.mass_g, job.machine.units.mass)} at {_deg(p.angle_deg)}"
             + (f" ({position_text(p.position)})" if p.position else "")
             + (" TRIAL" if p.purpose == "trial" else "")
             for p in job.parts_on_rotor() if p.plane == plane_name]
    return ", ".join(items) if items else "no parts recorded"


# --------------------------------------------------------------------------------------------
# Tables shared by HTML and Markdown


def _machine_rows(job: JobRecord) -> list[tuple[str, str]]:
    m = job.machine
    u = m.units
    planes = "; ".join(
        f"{p.name}: radius {format_length(p.radius_mm, u.length)}, "
        + (f"at {format_length(p.axial_mm, u.length)}, " if p.axial_mm is not None else "") + (
            f"{p.layout.positions} positions from {_deg(p.layout.offset_deg)}"
            if p.layout.kind == "equal" else
            f"positions at {', '.join(_deg(a) for a in p.layout.angles_deg)}"
            if p.layout.kind == "angles" else "free placement")
        for p in m.planes)
    pickups = "; ".join(f"{p.name}: {p.direction}, {p.sensitivity_mv_per_g:g} mV/g"
                        + (f", {p.mounting}" if p.mounting else "") for p in m.pickups)
    return [
        ("Machine", m.name),
        ("Rotor", f"{m.rotor_kind}, {rotor_mass_text(m.rotor_mass_kg, u)}"),
        ("Speed", f"{m.speed_min_rpm:g}-{m.speed_max_rpm:g} rpm, never above "
                  f"{m.max_speed_rpm:g} rpm"),
        ("Rotation", f"{m.rotation}, seen from the pickup side"),
        ("Correction planes", planes),
        ("Pickups", pickups),
        ("Tach", f"{m.tach.edge} edge, {m.tach.marks_per_rev} mark(s) per rev"
                 + (f", {m.tach.mark}" if m.tach.mark else "")),
        ("Mains, target", f"{m.mains_hz} Hz; grade G {m.target_grade:g} (ISO 21940-11)"),
    ]


def _job_rows(job: JobRecord) -> list[tuple[str, str]]:
    rows = [("Job", job.job_id), ("Status", job.status), ("Method", job.method),
            ("Started", time_text(job.created)),
            ("Last saved", time_text(job.updated or job.created))]
    if job.speed_rpm:
        rows.append(("Balancing speed", f"{job.speed_rpm:g} rpm"))
    if job.operator:
        rows.append(("Operator", job.operator))
    if job.customer:
        rows.append(("For", job.customer))
    return rows


#: Run kinds measured with the corrections on the rotor: only these give an "After" figure
#: (a trial-weight run is a measurement step, never a result).
AFTER_KINDS = ("correction", "trim", "check")


def after_run(job: JobRecord) -> RunEntry | None:
    """The run the "After" column shows: the last run made with corrections on the rotor
    (kind correction, trim or check) after the first run; None when there is none yet (an
    open job between its trial runs has no "After")."""
    if len(job.runs) < 2:
        return None
    return next((r for r in reversed(job.runs[1:]) if r.kind in AFTER_KINDS), None)


def before_after_header(job: JobRecord) -> list[str]:
    """The before/after table's header; the columns name their runs."""
    first = f"Before (run {job.runs[0].index})" if job.runs else "Before"
    last = after_run(job)
    return ["Pickup", first, "Phase", f"After (run {last.index})" if last else "After",
            "Phase", "Change"]


def before_after_note(job: JobRecord) -> str:
    """Why the "After" column is empty, in words (empty when it is not)."""
    if len(job.runs) >= 1 and after_run(job) is None:
        return ("No run with corrections on the rotor yet, so no \"After\" figures: trial-weight "
                "runs are measurement steps, not results.")
    return ""


def before_after_rows(job: JobRecord) -> list[list[str]]:
    """Per pickup: before (first run) and after (the last run with corrections on, see
    :func:`after_run`) amplitude and phase, and the change."""
    rows: list[list[str]] = []
    if not job.runs:
        return rows
    first, last = job.runs[0], after_run(job)
    for pickup in job.machine.pickups:
        before = first.reading(pickup.name)
        after = last.reading(pickup.name) if last is not None else None
        b = reading_text(before, job.machine) if before else ("-", "-")
        a = reading_text(after, job.machine) if after else ("-", "-")
        change = _reduction(before, after) if before and after else "-"
        rows.append([pickup.name, b[0], b[1], a[0], a[1], change])
    return rows


def condition_rows(job: JobRecord) -> list[list[str]]:
    """Per run that kept them: each pickup's overall severity and zone, and the verdict."""
    rows: list[list[str]] = []
    for run in job.runs:
        verdict = describe(verdict_finding(run.unbalance)) if run.unbalance else "-"
        for k, entry in enumerate(run.severity):
            if entry.velocity_rms_mm_s is None:
                level = "-"
                zone = describe(dataclasses.replace(severity_finding(entry), pickup=None))
            else:
                low, high = entry.band_hz or (10.0, 1000.0)  # files from before bands were kept
                value, unit = convert_vibration(entry.velocity_rms_mm_s, "mm/s rms",
                                                job.machine.units.vibration)
                level = (f"{value:.{2 if unit.startswith('mm') else 3}f} {unit} "
                         f"({low:g}-{high:g} Hz)")
                zone = entry.zone or "-"
            rows.append([str(run.index) if k == 0 else "", entry.sensor, level, zone,
                         verdict if k == 0 else ""])
        if not run.severity and run.unbalance:
            rows.append([str(run.index), "-", "-", "-", verdict])
        rows += second_start_rows(run)
    return rows


def second_start_rows(run: RunEntry) -> list[list[str]]:
    """A second start as found (kept with run 1): each pickup's 1x and overall level."""
    second = run.second_start
    if second is None:
        return []
    rows = []
    for k, r in enumerate(second.readings):
        phase = f" at {r.phase_deg:.0f}\u00b0" if r.phase_deg is not None else ""
        level = next((f"{e.velocity_rms_mm_s:.2f} mm/s rms" for e in second.severity
                      if e.sensor == r.sensor and e.velocity_rms_mm_s is not None), "-")
        rows.append([f"{run.index}, 2nd start" if k == 0 else "", r.sensor, level,
                     next((e.zone or "-" for e in second.severity if e.sensor == r.sensor), "-"),
                     f"1x {r.amplitude:.3g} {r.unit}{phase} ({second.speed_rpm:.0f} rpm)"])
    return rows


def condition_notes(job: JobRecord) -> list[str]:
    """The as-found run's failing evidence, and a balanced rotor left in a bad zone, in words."""
    notes: list[str] = []
    first = next((r for r in job.runs if r.unbalance is not None), None)
    if first is not None and first.unbalance is not None:
        failing = [describe(evidence_finding(e)) for e in first.unbalance.evidence if not e.ok]
        if failing:
            notes.append(f"Run {first.index}: " + "; ".join(failing) + ".")
        repeated = [describe(evidence_finding(e)) for e in first.unbalance.evidence
                    if e.ok and e.code == "phase_repeatable"]
        if repeated:
            notes.append(f"Run {first.index}, started twice: " + "; ".join(repeated) + ".")
    last = job.runs[-1] if job.runs else None
    bad = [e for e in last.severity if e.zone in ("C", "D")] if last else []
    if last is not None and bad and job.verdict is not None and job.verdict.passed:
        where = ", ".join(f"{e.sensor} zone {e.zone}" for e in bad)
        notes.append(f"The rotor meets its balance grade, but after run {last.index} the machine "
                     f"still vibrates too much overall ({where}): the rest is not unbalance; "
                     "check mounting, alignment, belts and bearings.")
    elif last is not None and bad:
        where = ", ".join(f"{e.sensor} zone {e.zone}" for e in bad)
        notes.append(f"After run {last.index} the overall vibration is in a bad zone ({where}).")
    return notes


CONDITION_HEADER = ["Run", "Pickup", "Overall (band)", "Zone", "Is it unbalance?"]


def run_rows(job: JobRecord) -> tuple[list[str], list[list[str]]]:
    """One row per run; a pickup's unit goes in its column header when all its runs share it."""
    sensors = [p.name for p in job.machine.pickups]
    header = ["Run", "Time (UTC)", "What", "rpm"]
    shared_units: dict[str, str | None] = {}
    for s in sensors:
        units = {reading_text(r, job.machine)[0].split(" ", 1)[1] for run in job.runs
                 if (r := run.reading(s)) is not None}
        shared_units[s] = units.pop() if len(units) == 1 else None
        header.append(f"{s} ({shared_units[s]})" if shared_units[s] else s)
    header.append("Revs")
    rows = []
    for run in job.runs:
        cells = [str(run.index), short_time(run.time), run.label or _RUN_KIND_NAMES[run.kind],
                 f"{run.speed_rpm:.0f}"]
        revs = []
        for s in sensors:
            reading = run.reading(s)
            if reading is None:
                cells.append("-")
                continue
            amp, phase = reading_text(reading, job.machine)
            if shared_units[s]:
                amp = amp.split(" ", 1)[0]
            cells.append(f"{amp} at {phase}")
            revs.append(str(reading.revolutions))
        cells.append("/".join(dict.fromkeys(revs)) or "-")
        rows.append(cells)
    return header, rows


#: the changes table's columns; "Suggested" only when a part was fitted otherwise
CHANGE_HEADER = ["When", "Action", "Purpose", "Plane", "Mass", "Angle", "Position", "Radius",
                 "Part"]


def suggested_text(change: MassChange, units: Units) -> str:
    """What the procedure suggested for a part fitted otherwise (issue #17), in the profile's
    units: ``'3.05 g at position 2 (90°)'``, ``'hole 0.110 oz at 40°'``; ``'-'`` when the part
    was fitted as suggested (the job keeps a suggestion only where they differ)."""
    s = change.suggested
    if s is None:
        return "-"
    where = position_text(s.position, s.angle_deg) if s.position else _deg(s.angle_deg)
    return f"{'hole ' if s.hole else ''}{units.choice().mass_words(s.mass_g)} at {where}"


def change_rows(job: JobRecord) -> tuple[list[str], list[list[str]]]:
    """The parts put on and taken off (the header, the rows): what was fitted, and beside
    it what was suggested where the two differ (a column only when some part differs)."""
    u = job.machine.units
    changes = [(f"before run {run.index}", ch) for run in job.runs for ch in run.changes]
    if job.pending is not None:
        changes += [("pending", ch) for ch in job.pending.changes]
    differ = any(ch.suggested is not None for _, ch in changes)
    rows = []
    for when, ch in changes:
        row = [when, ch.action, ch.purpose, ch.plane, format_mass(ch.mass_g, u.mass),
               _deg(ch.angle_deg), str(ch.position) if ch.position else "-",
               format_length(ch.radius_mm, u.length) if ch.radius_mm else "-", ch.part or "-"]
        rows.append(row + [suggested_text(ch, u)] if differ else row)
    return CHANGE_HEADER + ["Suggested"] if differ else CHANGE_HEADER, rows


def correction_rows(job: JobRecord) -> list[list[str]]:
    u = job.machine.units
    rows = []
    for run in job.runs:
        for corr in run.corrections:
            split = ", ".join(f"{format_mass(s.mass_g, u.mass)} at "
                              f"{position_text(s.position, s.angle_deg)}"
                              for s in corr.split) or "-"
            rows.append([f"after run {run.index}", corr.plane, corr.action,
                         format_mass(corr.mass_g, u.mass), _deg(corr.angle_deg), split])
    return rows


def kit_notes(job: JobRecord) -> list[str]:
    """Corrections made from the parts the person owns (issue #22): what each leaves
    against its share of the allowance, in words."""
    notes = []
    for run in job.runs:
        for corr in run.corrections:
            if corr.kit_residual_gmm is None:
                continue
            u = job.machine.units
            allowed = (f", allowed {unbalance_text(corr.kit_allowed_gmm, u)}" if
                       corr.kit_allowed_gmm is not None else "")
            within = ("" if corr.kit_allowed_gmm is None else
                      " (within)" if corr.kit_residual_gmm <= corr.kit_allowed_gmm else
                      " (over: more or other parts are needed)")
            proven = "" if corr.kit_proven_best is not False else \
                " The search stopped before it could prove this the best combination."
            notes.append(f"After run {run.index}, {corr.plane}: best with your parts, it leaves "
                         f"{unbalance_text(corr.kit_residual_gmm, u)}{allowed}{within}.{proven}")
    return notes


def verdict_rows(job: JobRecord) -> list[list[str]]:
    if job.verdict is None:
        return []
    rows = []
    for pv in job.verdict.planes:
        units = job.machine.units
        try:
            radius = job.machine.plane(pv.plane).radius_mm
            at_radius = (f" ({format_mass(pv.residual_gmm / radius, units.mass)} at "
                         f"{format_length(radius, units.length)})")
        except KeyError:
            at_radius = ""
        rows.append([pv.plane, f"{unbalance_text(pv.residual_gmm, units)}{at_radius}",
                     unbalance_text(pv.permissible_gmm, units),
                     "within" if pv.passed else "OVER"])
    return rows


def confirmation_rows(job: JobRecord) -> list[list[str]]:
    rows = []
    groups: list[tuple[str, Iterable]] = [(f"before run {r.index}", r.confirmations)
                                          for r in job.runs]
    if job.pending is not None:
        groups.append(("pending", job.pending.confirmations))
    for where, confirmations in groups:
        for c in confirmations:
            tach = (f"yes ({c.tach_rpm:g} rpm)" if c.tach_rpm is not None else "yes") \
                if c.standstill_by_tach else "NO"
            rows.append([where, short_time(c.time), c.step, tach, c.text or "-"])
    return rows


def event_rows(job: JobRecord) -> list[list[str]]:
    return [[f"run {r.index}", short_time(e.time), e.kind, e.detail or "-"] for r in job.runs
            for e in r.events]


def influence_rows(job: JobRecord) -> list[list[str]]:
    """Saved influence coefficients, vibration per unit mass in the profile's units."""
    if job.influence is None:
        return []
    units = job.machine.units
    per = G_PER_OZ if units.mass == "oz" else 1.0  # per oz = per g x g per oz
    rows = []
    for e in job.influence.entries:
        amp, unit = convert_vibration(e.amp * per, job.influence.unit, units.vibration,
                                      units.length)
        rows.append([e.sensor, e.plane, f"{amp:.4g} {unit} per {units.mass}",
                     phase_text(e.phase_deg)])
    return rows


def grade_rows(job: JobRecord) -> list[tuple[str, str]]:
    """The ISO 21940-11 target: grade G, service speed, e_per and U_per of the whole rotor.

    ISO 21940-11:2016: e_per = G / omega at the maximum service speed, U_per = e_per * m
    (computed by trueturn.balance.iso21940). The speed is the verdict's when there is one,
    else the profile's highest working speed.
    """
    m = job.machine
    v = job.verdict
    grade = v.grade if v is not None else m.target_grade
    speed = v.speed_rpm if v is not None else m.speed_max_rpm
    e_per = permissible_eccentricity_um(grade, speed)
    u_per = permissible_unbalance_gmm(grade, speed, m.rotor_mass_kg)
    return [("Balance quality grade", f"G {grade:g} (ISO 21940-11)"),
            ("Service speed", f"{speed:g} rpm" + ("" if v is not None else
                                                   " (highest working speed of the profile)")),
            ("Rotor mass", rotor_mass_text(m.rotor_mass_kg, m.units)),
            ("e_per", eccentricity_text(e_per, m.units)),
            ("U_per (whole rotor)", unbalance_text(u_per, m.units))]


# --------------------------------------------------------------------------------------------
# HTML

_CSS = """
:root { color-scheme: light; }
body { font-family: "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; font-size: 9pt;
       color: #111; max-width: 186mm; margin: 8mm auto; line-height: 1.3; }
h1 { font-size: 15pt; margin: 0 0 2mm 0; }
h2 { font-size: 11pt; margin: 3mm 0 1mm 0; border-bottom: 0.4mm solid #444; }
table { border-collapse: collapse; width: 100%; margin: 1mm 0 1.5mm 0; font-size: 7.8pt; }
th, td { border: 0.25mm solid #bbb; padding: 0.4mm 1.2mm; text-align: left; vertical-align: top; }
td { overflow-wrap: break-word; }
th { background: #eee; }
table.kv th { width: 30mm; }
table.runs td:nth-child(2), table.confirmations td:nth-child(2), table.events td:nth-child(2)
  { white-space: nowrap; }
.figures { display: flex; flex-wrap: wrap; gap: 3mm; align-items: flex-start; }
.figures > div { min-width: 0; }
figure { margin: 0; flex: 0 1 auto; max-width: 100%; }
figure svg { display: block; max-width: 100%; height: auto; }
figure.polar-fig { width: 88mm; }
figure.plane-fig { width: 58mm; }
figure.sweep-fig { width: 100%; break-inside: avoid; }
figcaption { font-size: 7.5pt; color: #333; }
svg text { font-family: "DejaVu Sans", Arial, sans-serif; }
svg .tick { font-size: 10px; fill: #333; }
svg .label { font-size: 12px; font-weight: bold; paint-order: stroke; stroke: #fff;
             stroke-width: 3px; stroke-linejoin: round; }
.pass { color: #006b3c; font-weight: bold; }
.fail { color: #b00020; font-weight: bold; }
.cautions { border: 0.5mm solid #b00020; padding: 1mm 3mm; font-size: 8pt; }
.cautions ul { margin: 0; padding-left: 5mm; }
.cautions li { margin: 0.5mm 0; }
.note { font-size: 7.8pt; color: #333; margin: 1mm 0; }
table.signoff td { height: 9mm; vertical-align: bottom; }
table.signoff th { width: 40mm; vertical-align: bottom; }
@media print {
  /* 1 mm short of the page box on each side: Chromium rounds the page to whole CSS pixels
     and would clip a right-hand border that ends exactly on the edge */
  body { margin: 0 1mm; max-width: none; }
  h2 { break-after: avoid; }
  table, figure, .cautions, .signoff { break-inside: avoid; }
  thead { display: table-header-group; }
}
"""


def _css_string(text: str) -> str:
    """``text`` as a quoted CSS string: every character but letters, digits, space, '.', '-'
    and '_' written as a CSS escape (CSS Syntax Level 3, 4.3.7), so no job id can end the
    string, the rule or the style element."""
    safe = "".join(ch if ch.isascii() and (ch.isalnum() or ch in " .-_") else f"\\{ord(ch):06x} "
                   for ch in text)  # the space after six hex digits ends the escape
    return f'"{safe}"'


def page_css(job_id: str) -> str:
    """Paper margins and the footer on every printed page: the job id and "page n of m"
    (CSS Paged Media Level 3 margin boxes, printed by Chromium 131 and later; a browser
    without them prints the page without the footer)."""
    # a footer line has room for about 90 characters at 7.5 pt beside "page n of m": a very
    # long id keeps its start and its end (where the running number is); page 1 has it all
    shown = job_id if len(job_id) <= 64 else job_id[:40] + "\u2026" + job_id[-20:]
    return ("@page { margin: 12mm 12mm 14mm 12mm; "
            "@bottom-left { content: " + _css_string(f"trueturn balancing report, job {shown}")
            + "; font: 7.5pt \"DejaVu Sans\", Arial, sans-serif; color: #333; } "
            '@bottom-right { content: "page " counter(page) " of " counter(pages); '
            'font: 7.5pt "DejaVu Sans", Arial, sans-serif; color: #333; white-space: nowrap; } }')


#: A word longer than this gets a line-break opportunity every BREAK_EVERY characters.
LONG_WORD = 18
BREAK_EVERY = 10


def _cell(text: object) -> str:
    """Cell text escaped, its very long words given break opportunities (``<wbr/>``), so a
    long part name or id wraps inside its column instead of widening the table past the
    paper; short words are never broken."""
    out = []
    for piece in re.split(r"(\s+)", str(text)):
        if len(piece) > LONG_WORD:
            out.append("<wbr/>".join(_e(piece[i:i + BREAK_EVERY])
                                     for i in range(0, len(piece), BREAK_EVERY)))
        else:
            out.append(_e(piece))
    return "".join(out)


def _html_table(header: Sequence[str], rows: Sequence[Sequence[str]], css_class: str = "") -> str:
    cls = f' class="{css_class}"' if css_class else ""
    head = "".join(f"<th>{_e(h)}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{_cell(c)}</td>" for c in row) + "</tr>"
                   for row in rows)
    return f"<table{cls}><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _html_kv(rows: Sequence[tuple[str, str]]) -> str:
    body = "".join(f"<tr><th>{_e(k)}</th><td>{_cell(v)}</td></tr>" for k, v in rows)
    return f'<table class="kv"><tbody>{body}</tbody></table>'


def verdict_at_bearings(job: JobRecord) -> bool:
    """True when the recorded verdict names the machine's bearings (ISO 21940-11 tolerance
    planes) rather than its correction planes."""
    names = {b.name for b in job.machine.bearings}
    return (job.verdict is not None and bool(names)
            and all(pv.plane in names for pv in job.verdict.planes))


def _verdict_where(job: JobRecord) -> str:
    if verdict_at_bearings(job):
        return ("judged at the bearing planes (ISO 21940-11 tolerance planes), residuals "
                "referred there by rigid-rotor statics, U_per shared by the lever rule")
    return ("shared between the correction planes (bearing positions not in the machine "
            "profile, so not judged at the bearings)")


def stopped_line(job: JobRecord) -> str | None:
    """Why the person stopped the job before a verdict (issue #22), or None."""
    stop = job.stopped
    if stop is None:
        return None
    why = describe(verdict_finding(UnbalanceEntry("balancing_may_not_help", [
        EvidenceEntry(code, "-", ok=False) for code in stop.because])))
    return (f"Stopped after run {stop.after_run} by the person's choice ({short_time(stop.time)}): "
            f"{why}. No balance verdict: the machine was not balanced.")


def _verdict_line(job: JobRecord) -> tuple[str, str]:
    v = job.verdict
    stopped = stopped_line(job)
    if v is None and stopped is not None:
        return "fail", stopped
    if v is None:
        return "none", "No verdict recorded yet."
    word = "meets" if v.passed else "does NOT meet"
    return ("pass" if v.passed else "fail",
            f"After run {v.after_run} at {v.speed_rpm:g} rpm the rotor {word} balance quality "
            f"grade G {v.grade:g} ({v.standard}).")


#: the sweep picture's label size in its own units: drawn 1002 units wide and shrunk to the
#: A4 text width (186 mm = 703 CSS px), 14 units print at 14 x 703 / 1002 = 9.8 px = 7.4 pt
SWEEP_FONT_PX = 14.0
SWEEP_KIND_WORDS = {"coastdown": "coast-down after", "runup": "run-up to"}


def resonance_rows(job: JobRecord) -> list[list[str]]:
    """One row per resonance of every sweep the job keeps: run, sweep, pickup, speed,
    damping, half-power band, the one-mode fit's check."""
    rows = []
    for run in job.runs:
        for sw in run.sweeps:
            for r in sw.resonances:
                damping = ("not resolved" if r.damping_ratio is None
                           else f"{100 * r.damping_ratio:.1f} %")
                band = ("-" if r.lower_rpm is None or r.upper_rpm is None
                        else f"{r.lower_rpm:.0f}-{r.upper_rpm:.0f} rpm")
                check = ("-" if r.single_mode is None else "not one mode" if not r.single_mode
                         else f"{r.fit_speed_rpm:.0f} rpm, {100 * (r.fit_damping_ratio or 0):.1f} %")
                rows.append([f"{run.index} {run.label}".strip(),
                             SWEEP_KIND_WORDS[sw.kind].split()[0], r.pickup,
                             f"{r.speed_rpm:.0f} rpm", damping, band, check])
    return rows


def sweep_section(job: JobRecord) -> list[str]:
    """The coast-downs and run-ups kept with the runs (issue #20): each one's Bode and polar
    plot, the resonances table and, when the balancing speed sits near a resonance, the
    warning in the findings' words; nothing when the job keeps none."""
    kept = [(run, sw) for run in job.runs for sw in run.sweeps]
    if not kept:
        return []
    parts = ['<h2 id="sweeps">Coast-down and run-up sweeps</h2>']
    warnings: list[str] = []
    for run, sw in kept:
        title = f"{SWEEP_KIND_WORDS[sw.kind]} run {run.index}"
        if not sw.points:  # its side file could not be read (the job still loads)
            parts.append(f'<p class="note warning">No plot of the {_e(title)}: its points '
                         f'could not be read ({_e(sw.points_problem or "not kept")}); its '
                         'resonances below are as found when it was kept.</p>')
            continue
        sweep = sweep_of(sw)
        parts.append(f'<figure class="sweep-fig">'
                     f'{sweep_svg(sweep, title, job.machine.rotation, SWEEP_FONT_PX)}'
                     f'<figcaption>Bode plot (1x amplitude and phase lag against speed) and '
                     f'polar plot of the {_e(SWEEP_KIND_WORDS[sw.kind])} run {run.index}: '
                     f'{len(sw.points)} speeds from {sw.low_rpm:.0f} to {sw.high_rpm:.0f} rpm, '
                     f'in {_e(sw.unit)}.</figcaption></figure>')
        warnings += [describe(f) for f in sweep_findings(sweep)[1]
                     if f.code is Code.NEAR_RESONANCE]
    rows = resonance_rows(job)
    if rows:
        parts.append(_html_table(["Run", "Sweep", "Pickup", "Resonance", "Damping",
                                  "Half-power band", "One-mode fit"], rows, "resonances"))
    else:
        parts.append('<p class="note">No resonance found in the sweeps.</p>')
    parts += [f'<p class="note warning">{_e(w)}</p>' for w in dict.fromkeys(warnings)]
    parts.append('<p class="note">Resonances by the half-power bandwidth method on the 1x '
                 'per unit unbalance force (D. J. Ewins, Modal Testing, 2000, sec. 4.2), '
                 'checked by a one-mode curve fit; damping is given only when at least three '
                 'measured speeds lie in the half-power band.</p>')
    return parts


# ---- model first (issue #20 item 4): what the model said and how the runs refined it --------
MODEL_HEADER = ["Pickup", "Plane", "Predicted (95 %)", "Refined (95 %)", "Moved"]


def _coefficient_text(c: ModelCoefficientEntry, job: JobRecord, unit: str) -> str:
    """``0.31 mm/s rms per g at 88.5° ± 24 %``: a model coefficient in the profile's units."""
    units = job.machine.units
    per = G_PER_OZ if units.mass == "oz" else 1.0  # per oz = per g x g per oz
    amp, shown = convert_vibration(c.amp * per, unit, units.vibration, units.length)
    spread = ("" if c.spread_rel_95 is None
              else f" \u00b1 {100 * c.spread_rel_95:.0f} %")
    return f"{amp:.3g} {shown} per {units.mass} at {phase_text(c.phase_deg)}{spread}"


def _moved(before: ModelCoefficientEntry, after: ModelCoefficientEntry) -> tuple[float, float]:
    """How far a refined coefficient lies from the predicted one: the share of the
    prediction's amplitude (the vector difference) and the angle turned, degrees."""
    h0 = phasor(before.amp, before.phase_deg)
    h1 = phasor(after.amp, after.phase_deg)
    share = abs(h1 - h0) / before.amp if before.amp > 0 else math.inf
    return share, abs((after.phase_deg - before.phase_deg + 180.0) % 360.0 - 180.0)


def model_lines(job: JobRecord) -> list[str]:
    """What the model of the rotor said (model-first, issue #20 item 4), in a few sentences:
    trusted with its first correction's 95 % +/- and the 1x it was predicted to leave, or
    the reasons it was not trusted; whether a run refuted it; how much the first check run
    refined its coefficients. Empty for a job of another method."""
    if job.method != "model-first":
        return []
    model = job.model
    if model is None:
        return ["Model first: the model's answer is not kept in this job (written before jobs "
                "kept it, or closed before the as-found run's coast-down was analysed)."]
    tap = [tap_line(model.tap)] if model.tap is not None else []
    if not model.trusted:
        why = "; ".join(DISTRUST_WORDS.get(d.value, d.value) for d in model.distrust)
        return [f"Model first: the model was not trusted ({why or 'no reason given'}), so a "
                "trial run per plane was measured instead; the as-found run was kept.", *tap]
    mass = job.machine.units.choice().mass_words
    spread = "; ".join(f"{plane} \u00b1 {mass(m)}, \u00b1 {a:.0f}\u00b0"
                       for plane, m, a in zip(model.planes, model.mass_95_g,
                                              model.angle_95_deg, strict=False))
    lines = ["Model first: the first correction came from influence coefficients predicted "
             "by a rigid rotor on flexible supports (the machine profile and the as-found "
             "coast-down), with no trial run"
             + (f"; its 95 % spread: {spread}" if spread else "")
             + (f"; predicted to leave at most {100 * model.residual_fraction_95:.0f} % of "
                "the as-found 1x in 95 % of the model's draws"
                if model.residual_fraction_95 is not None else "")
             + ("; as that may exceed the as-found 1x, its check run also served as the trial"
                if (model.residual_fraction_95 or 0.0) > 1.0 else "") + ".", *tap]
    if model.refuted_by_run is not None:
        lines.append(f"Run {model.refuted_by_run} refuted the model: the 1x at "
                     f"{model.refuted_at or 'a pickup'} fell far outside its prediction, so "
                     "its masses came off and a trial run per plane followed.")
    if model.refuted_by_alarm_after_run is not None:
        lines.append(f"The check run after run {model.refuted_by_alarm_after_run} refuted the "
                     f"model: the 1x at {model.refuted_at or 'a pickup'} rose over the runaway "
                     "alarm's limit and the run was stopped (not kept), so the model's masses "
                     "came off and a trial run per plane followed.")
    if model.refined:
        first = model.refined[0]
        table = {(c.sensor, c.plane): c for c in model.predicted}
        moved = [_moved(table[c.sensor, c.plane], c) for c in first.coefficients
                 if (c.sensor, c.plane) in table]
        now = "; ".join(f"{plane} \u00b1 {mass(m)}, \u00b1 {a:.0f}\u00b0"
                        for plane, m, a in zip(model.planes, first.mass_95_g,
                                               first.angle_95_deg, strict=False))
        narrowed = (f"; the whole correction (what is on plus any trim) is now known to "
                    f"{now} (95 %)" if now and spread else "")
        lines.append(
            f"Run {first.after_run} (the check run after the correction, which served as the "
            f"trial) refined the coefficients by recursive least squares over runs "
            f"{', '.join(str(r) for r in first.runs)}: they moved by up to "
            f"{100 * max(m for m, _ in moved):.0f} % and {max(a for _, a in moved):.0f}\u00b0 "
            f"from the prediction{narrowed}." if moved else
            f"Run {first.after_run} refined the coefficients.")
    elif model.refuted_by_run is None and model.refuted_by_alarm_after_run is None:
        lines.append("No check run has refined the model yet.")
    return lines


def tap_line(tap: TapEntry) -> str:
    """``A tap test at standstill (5 taps, ...) informed the model: front 29.5 ± 0.1 Hz``:
    the one line a report gives the tap test, each mode with its standard error."""
    by_sensor: dict[str, list[str]] = {}
    for m in tap.modes:
        by_sensor.setdefault(m.sensor, []).append(
            f"{m.frequency_hz:.1f} \u00b1 {m.frequency_se_hz:.1f} Hz")
    modes = "; ".join(f"{sensor} {', '.join(found)}" for sensor, found in by_sensor.items())
    return (f"A tap test at standstill ({tap.taps} taps, {tap.time}) informed the model of the "
            f"supports: {modes}.")


def model_rows(job: JobRecord) -> list[list[str]]:
    """Each predicted coefficient beside itself as the first check run refined it (the job's
    reading unit converted to the profile's, per the profile's mass unit)."""
    model = job.model
    if job.method != "model-first" or model is None or not model.trusted:
        return []
    unit = job.runs[model.after_run - 1].readings[0].unit if job.runs else ""
    refined = ({(c.sensor, c.plane): c for c in model.refined[0].coefficients}
               if model.refined else {})
    rows = []
    for c in model.predicted:
        later = refined.get((c.sensor, c.plane))
        if later is None:
            rows.append([c.sensor, c.plane, _coefficient_text(c, job, unit), "-", "-"])
            continue
        share, turned = _moved(c, later)
        rows.append([c.sensor, c.plane, _coefficient_text(c, job, unit),
                     _coefficient_text(later, job, unit),
                     f"{100 * share:.0f} %, {turned:.0f}\u00b0"])
    return rows


def model_section(job: JobRecord) -> list[str]:
    """The model's part of the HTML report (model-first jobs only): its answer in words and
    its coefficients before and after the first check run."""
    lines = model_lines(job)
    if not lines:
        return []
    parts = ['<h2 id="model">Model first</h2>',
             *[f'<p class="note">{_e(line)}</p>' for line in lines]]
    rows = model_rows(job)
    if rows:
        parts.append(_html_table(MODEL_HEADER, rows, "model"))
    return parts


def model_markdown(job: JobRecord) -> list[str]:
    """The model's part of the Markdown report (model-first jobs only)."""
    lines = model_lines(job)
    if not lines:
        return []
    out = ["## Model first", "", *[f"{_md_text(line)}\n" for line in lines]]
    rows = model_rows(job)
    if rows:
        out += [_md_table(MODEL_HEADER, rows), ""]
    return out


def signoff_rows(job: JobRecord) -> list[str]:
    """The lines left blank for a person to fill in by hand on the printed report."""
    return ["Machine serial number", "Balanced by (name)", "Signature", "Date"]


def html_report(job: JobRecord, generated: str = "") -> str:
    """The whole report as one self-contained HTML page (polyglot: also well-formed XML)."""
    m = job.machine
    parts: list[str] = [
        '<!DOCTYPE html>',
        '<html xmlns="http://www.w3.org/1999/xhtml" lang="en">',
        '<head><meta charset="utf-8"/>',
        '<meta name="viewport" content="width=device-width, initial-scale=1"/>',
        f'<title>Balancing report {_e(job.job_id)}</title>',
        f'<style>{_CSS}{page_css(job.job_id)}\n</style></head>',
        '<body>',
        f'<h1>Balancing report: {_e(m.name)}</h1>',
        f'<p class="note">Job {_e(job.job_id)}'
        + (f"; report generated {_e(time_text(generated))}" if generated else "")
        + ' by trueturn. Times are UTC.</p>',
        '<h2>Machine and job</h2>',
        '<div class="figures"><div style="flex:1 1 100mm">', _html_kv(_machine_rows(job)),
        '</div><div style="flex:1 1 70mm">', _html_kv(_job_rows(job)), '</div></div>',
    ]
    css, line = _verdict_line(job)
    parts += ['<h2>Result</h2>', f'<p id="verdict" class="{css}">{_e(line)}</p>',
              '<div class="figures"><div style="flex:1 1 70mm">',
              _html_kv(grade_rows(job)).replace('class="kv"', 'class="kv grade"'),
              '</div><div style="flex:1 1 100mm">']
    rows = verdict_rows(job)
    if rows:
        parts.append(_html_table(["Bearing" if verdict_at_bearings(job) else "Plane",
                                  "Residual unbalance", "Permissible (U_per)",
                                  "Verdict"], rows, "verdict"))
    parts.append('</div></div>')
    parts.append('<p class="note">Permissible residual unbalance per ISO 21940-11: '
                 'e_per = G / \u03c9 and U_per = e_per \u00b7 m, at the maximum service speed'
                 + ('; ' + _e(_verdict_where(job)) if rows else '') + '.'
                 + (f" {_e(job.verdict.note)}" if job.verdict and job.verdict.note else "")
                 + '</p>')
    parts += ['<h2>Before and after</h2>',
              _html_table(before_after_header(job), before_after_rows(job), "before-after")]
    note = before_after_note(job)
    if note:
        parts.append(f'<p class="note" id="no-after">{_e(note)}</p>')
    rows = condition_rows(job)
    if rows:
        parts += ['<h2>Machine condition</h2>', _html_table(CONDITION_HEADER, rows, "condition"),
                  *[f'<p class="note">{_e(n)}</p>' for n in condition_notes(job)],
                  f'<p class="note">Zones: {_e(ZONES_SOURCE)}. The unbalance judgement follows '
                  'rules of the trade (common practice, no source).</p>']
    figures = []
    arrow = "\u21bb" if m.rotation == "cw" else "\u21ba"
    if job.runs:
        for pickup in m.pickups:
            figures.append(
                f'<figure class="polar-fig">{polar_svg(job, pickup.name)}<figcaption>1x vector '
                f'of {_e(pickup.name)} per run in {_e(m.units.vibration)} (number, shape and '
                f'line = run; circle = phase confidence); the rotor turns {arrow} ({m.rotation}) '
                'seen from the pickup side.</figcaption></figure>')
    figures += [f'<figure class="plane-fig">{plane_svg(job, p.name)}<figcaption>{_e(p.name)}, '
                f'seen from the {p.face}: {_e(parts_text(job, p.name))}.</figcaption></figure>'
                for p in m.planes]
    header, rows = run_rows(job)
    # the runs table before the plots: it fits under the result on the first page, and the
    # plots (about 95 mm tall) start the next one instead of leaving half a page empty
    parts += ['<h2>Runs</h2>', _html_table(header, rows, "runs")]
    parts += ['<div class="figures">', *figures, '</div>']
    parts += sweep_section(job)
    parts += model_section(job)
    rows = correction_rows(job)
    parts.append('<h2>Corrections and parts</h2>')
    if rows:
        parts.append(_html_table(["When", "Plane", "Action", "Mass", "Angle", "Split onto positions"],
                                 rows, "corrections"))
        parts += [f'<p class="note">{_e(n)}</p>' for n in kit_notes(job)]
    header, rows = change_rows(job)
    if rows:
        parts.append(_html_table(header, rows, "changes"))
    if not job.runs and job.pending is None:
        parts.append('<p>No runs recorded yet.</p>')
    rows = influence_rows(job)
    if rows and job.influence is not None:
        parts += ['<h2>Saved influence coefficients</h2>',
                  _html_table(["Pickup", "Plane", "Amplitude", "Phase"], rows, "influence"),
                  f'<p class="note">Measured at {job.influence.speed_rpm:g} rpm; kept for '
                  'one-run trims of this machine at about this speed.</p>']
    parts.append('<h2>Safety confirmations and events</h2>')
    rows = confirmation_rows(job)
    parts.append(_html_table(["When", "Time (UTC)", "Step", "Standstill by tach", "Confirmed"],
                             rows, "confirmations") if rows
                 else '<p>No hands-on steps recorded.</p>')
    rows = event_rows(job)
    if rows:
        parts.append(_html_table(["Run", "Time (UTC)", "Event", "Detail"], rows, "events"))
    notes = [job.notes] + [f"Run {r.index}: {r.notes}" for r in job.runs if r.notes]
    notes = [n for n in notes if n]
    if notes:
        parts += ['<h2>Notes</h2>', *[f'<p class="note">{_e(n)}</p>' for n in notes]]
    parts += ['<h2>Cautions</h2>', '<div class="cautions"><ul>',
              *[f'<li>{_e(c)}</li>' for c in CAUTIONS], '</ul></div>',
              '<h2>Sign-off</h2>',
              '<table class="signoff"><tbody>'
              + "".join(f"<tr><th>{_e(k)}</th><td></td></tr>" for k in signoff_rows(job))
              + '</tbody></table>',
              '</body>', '</html>']
    return "\n".join(parts) + "\n"


# --------------------------------------------------------------------------------------------
# Markdown and CSV


_MD_SPECIAL = str.maketrans({c: "\\" + c for c in "\\`*_[]|#"})


def _md_text(text: object) -> str:
    """Text from a job file as Markdown that shows it literally: HTML escaped as entities
    (``<script>`` shows as text, a Markdown renderer passes raw HTML through otherwise), the
    Markdown punctuation that makes links, emphasis, code or tables backslash-escaped
    (CommonMark 0.30, "Backslash escapes": any ASCII punctuation may be escaped), one line."""
    one = " ".join(str(text).splitlines())
    return html.escape(one, quote=False).translate(_MD_SPECIAL)


def _md_cell(text: str) -> str:
    return _md_text(text)


def _md_table(header: Sequence[str], rows: Sequence[Sequence[str]]) -> str:
    lines = ["| " + " | ".join(_md_cell(h) for h in header) + " |",
             "|" + "|".join("---" for _ in header) + "|"]
    lines += ["| " + " | ".join(_md_cell(c) for c in row) + " |" for row in rows]
    return "\n".join(lines)


def markdown_report(job: JobRecord, generated: str = "") -> str:
    """The report as Markdown tables (no plots; the HTML report has them)."""
    out = [f"# Balancing report: {_md_text(job.machine.name)}", "",
           f"Job {_md_text(job.job_id)}"
           + (f"; report generated {time_text(generated)}" if generated else "")
           + " by trueturn. Times are UTC. Plots are in the HTML report.", "",
           "## Machine and job", "",
           _md_table(["Item", "Value"], _machine_rows(job) + _job_rows(job)), "",
           "## Result", "", _md_text(_verdict_line(job)[1]), "",
           _md_table(["Item", "Value"], grade_rows(job)), ""]
    rows = verdict_rows(job)
    if rows:
        out += [_md_table(["Bearing" if verdict_at_bearings(job) else "Plane",
                           "Residual unbalance", "Permissible (U_per)", "Verdict"], rows),
                "", f"U_per per ISO 21940-11 at the maximum service speed, "
                f"{_md_text(_verdict_where(job))}.",
                ""]
    out += ["## Before and after", "",
            _md_table(before_after_header(job), before_after_rows(job)), ""]
    if before_after_note(job):
        out += [_md_text(before_after_note(job)), ""]
    rows = condition_rows(job)
    if rows:
        out += ["## Machine condition", "", _md_table(CONDITION_HEADER, rows), "",
                *[f"{_md_text(n)}\n" for n in condition_notes(job)],
                f"Zones: {_md_text(ZONES_SOURCE)}. The unbalance judgement follows rules of the "
                "trade (common practice, no source).", ""]
    header, rows = run_rows(job)
    out += ["## Runs", "", _md_table(header, rows), ""]
    out += model_markdown(job)
    out += ["## Corrections and parts", ""]
    rows = correction_rows(job)
    if rows:
        out += [_md_table(["When", "Plane", "Action", "Mass", "Angle", "Split onto positions"],
                          rows), ""]
        out += [f"{_md_text(n)}\n" for n in kit_notes(job)]
    header, rows = change_rows(job)
    if rows:
        out += [_md_table(header, rows), ""]
    rows = influence_rows(job)
    if rows:
        out += ["## Saved influence coefficients", "",
                _md_table(["Pickup", "Plane", "Amplitude", "Phase"], rows), ""]
    rows = confirmation_rows(job)
    out += ["## Safety confirmations and events", ""]
    out += [_md_table(["When", "Time (UTC)", "Step", "Standstill by tach", "Confirmed"], rows)
            if rows else "No hands-on steps recorded.", ""]
    rows = event_rows(job)
    if rows:
        out += [_md_table(["Run", "Time (UTC)", "Event", "Detail"], rows), ""]
    notes = [job.notes] + [f"Run {r.index}: {r.notes}" for r in job.runs if r.notes]
    if any(notes):
        out += ["## Notes", "", *[f"- {_md_text(n)}" for n in notes if n], ""]
    out += ["## Cautions", "", *[f"- {_md_text(c)}" for c in CAUTIONS], ""]
    out += ["## Sign-off", "", *[f"{k}: ______________________________\n"
                                 for k in signoff_rows(job)]]
    return "\n".join(out)


CSV_COLUMNS = ("job_id", "run", "kind", "label", "time", "sensor", "amplitude", "unit",
               "phase_deg", "confidence_deg", "revolutions", "speed_rpm")


_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def csv_text_cell(text: object) -> str:
    """A text cell a spreadsheet shows as text: one starting like a formula (``=``, ``+``,
    ``-``, ``@``, tab, carriage return) gets a leading apostrophe (OWASP, "CSV Injection":
    the recommended guard). Numbers are written by ``repr`` and never guarded."""
    value = str(text)
    return "'" + value if value.startswith(_FORMULA_START) else value


def report_file_name(job_id: str, fmt: str) -> str:
    """The default file name of a job's report, made from its id but never a path: only
    letters, digits, '.', '_' and '-' kept (others become '-'), no leading dot or dash, at
    most 100 characters; a job file cannot choose where its report goes."""
    stem = re.sub(r"[^A-Za-z0-9._-]+", "-", job_id).lstrip(".-")[:100] or "report"
    return f"{stem}.{fmt}"


def readings_csv(job: JobRecord) -> str:
    """Every reading of every run, one row each, in the units stored (text cells guarded
    against spreadsheet formulas by :func:`csv_text_cell`)."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(CSV_COLUMNS)
    for run in job.runs:
        for r in run.readings:
            t = csv_text_cell
            writer.writerow([t(job.job_id), run.index, t(run.kind), t(run.label), t(run.time),
                             t(r.sensor), repr(r.amplitude), t(r.unit), repr(r.phase_deg), repr(r.confidence_deg),
                             r.revolutions, repr(r.speed_rpm)])
    return buffer.getvalue()
