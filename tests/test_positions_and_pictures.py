"""One position numbering (from 1) and one angle-to-picture mapping, everywhere (issue #16).

* ``trueturn split``, the printed ring, the report and the job file name a position by the same
  number: position 1 is the first position, at ``--first-deg``; numbers grow against rotation.
* The app's live polar plot, the report's polar plot and the printed ring put the same angle at
  the same place: the plane as seen from the side the person looks at, 0 deg (the mark) at the
  top, angles growing against rotation (README, "Angles"): for a rotor turning clockwise as
  seen, 90 deg is on the LEFT of the picture, for a counter-clockwise one on the right.

Sources beside the checks: the split is checked against an independent calculation (the
correction resolved onto the two position directions by solving the 2 x 2 linear system with
numpy), the textbook resolution of a vector into two given directions (from memory: Beer &
Johnston, "Vector Mechanics for Engineers: Statics", ch. 2, law of sines).
"""

from __future__ import annotations

import copy
import dataclasses
import json
import math
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from cli_helpers import run_cli
from trueturn.angles import screen_xy
from trueturn.balance.splitting import split
from trueturn.jobs.records import JobRecord
from trueturn.jobs.report import plane_svg, polar_svg
from trueturn.jobs.ring import ring_svg
from trueturn.jobs.store import read_document
from trueturn.positions import (
    Position,
    equally_spaced_deg,
    index_of,
    number_of,
    numbered,
    position_text,
)
from trueturn.ui.widgets import PolarPoint, polar_text

SVG = "{http://www.w3.org/2000/svg}"
DEMO_JOB = Path(__file__).parent / "data" / "demo_bench_grinder_job.yaml"


def ring_marks(text: str) -> dict[int, float]:
    """{position number: angle} as the printed ring labels its position marks."""
    root = ET.fromstring(text.encode())
    return {int(line.get("data-position")): float(line.get("data-angle-deg"))
            for line in root.iter(f"{SVG}line") if line.get("class") == "position-mark"}


def split_json(*argv: str) -> list[dict]:
    code, out, err = run_cli(["split", *argv, "--json"])
    assert code == 0, err
    return json.loads(out)["parts"]


# --- one numbering ------------------------------------------------------------------------

def test_numbers_start_at_1_and_meet_the_index_in_one_place() -> None:
    assert [number_of(k) for k in range(4)] == [1, 2, 3, 4]
    assert [index_of(n, 4) for n in (1, 2, 3, 4)] == [0, 1, 2, 3]
    for bad in (0, 5):
        with pytest.raises(ValueError, match="numbered 1..4"):
            index_of(bad, 4)
    with pytest.raises(ValueError):
        Position(0, 10.0)
    assert [p.number for p in numbered([10.0, 100.0])] == [1, 2]
    assert position_text(3, 200.0) == "position 3 (200\u00b0)"
    assert position_text(2, 19.5) == "position 2 (19.5\u00b0)"


def test_position_n_is_at_first_plus_n_minus_1_steps() -> None:
    # equal spacing: position n of N at first + (n - 1) * 360 / N (elementary geometry)
    assert equally_spaced_deg(4, 20.0) == (20.0, 110.0, 200.0, 290.0)
    assert equally_spaced_deg(5, 0.0) == (0.0, 72.0, 144.0, 216.0, 288.0)
    assert equally_spaced_deg(3, -30.0) == (330.0, 90.0, 210.0)
    with pytest.raises(ValueError):
        equally_spaced_deg(0)


def test_split_and_ring_agree_229_deg_on_4_positions_from_20() -> None:
    # Issue #16 acceptance: 229 deg lies between 200 deg (position 3) and 290 deg (position 4).
    parts = split_json("--mass-g", "3", "--angle-deg", "229", "--positions", "4",
                       "--first-deg", "20")
    assert [p["position"] for p in parts] == [3, 4]
    marks = ring_marks(ring_svg(150.0, 4, first_deg=20.0)[0])
    for p in parts:
        assert marks[p["position"]] == pytest.approx(p["angle_deg"])
    code, out, _ = run_cli(["split", "--mass-g", "3", "--angle-deg", "229", "--positions", "4",
                            "--first-deg", "20"])
    assert "position 3 (200\u00b0)" in out and "position 4 (290\u00b0)" in out
    assert "position 0" not in out


def test_first_deg_means_position_1_for_split_and_ring() -> None:
    for first in (0.0, 15.0, 200.0):
        parts = split_json("--mass-g", "2", "--angle-deg", str(first), "--positions", "6",
                           "--first-deg", str(first))
        assert [(p["position"], p["angle_deg"]) for p in parts] == [(1, first)]
        assert ring_marks(ring_svg(120.0, 6, first_deg=first)[0])[1] == pytest.approx(first)
    code, _, err = run_cli(["split", "--mass-g", "2", "--angle-deg", "10", "--first-deg", "5"])
    assert code == 2 and len(err.strip().splitlines()) == 1 and "--positions" in err


def test_five_blade_fan_at_deg_names_the_blades_from_1() -> None:
    # Five blades at 0, 72, 144, 216, 288 deg: 100 deg lies between blade 2 (72) and blade 3
    # (144). Masses from the 2 x 2 linear system m_a u_a + m_b u_b = m u (independent
    # calculation of the two-vector decomposition, numpy.linalg.solve).
    blades = ["0", "72", "144", "216", "288"]
    parts = split_json("--mass-g", "3", "--angle-deg", "100", "--at-deg", *blades)
    assert [(p["position"], p["angle_deg"]) for p in parts] == [(2, 72.0), (3, 144.0)]
    a, b = np.radians([72.0, 144.0])
    expected = np.linalg.solve([[math.cos(a), math.cos(b)], [math.sin(a), math.sin(b)]],
                               [3 * math.cos(math.radians(100)), 3 * math.sin(math.radians(100))])
    assert [p["mass_g"] for p in parts] == pytest.approx(list(expected), abs=1e-6)
    # the same five positions, equally spaced, on the ring: blade 2 at 72 deg
    assert ring_marks(ring_svg(300.0, 5)[0]) == {1: 0.0, 2: 72.0, 3: 144.0, 4: 216.0, 5: 288.0}
    assert [p["position"] for p in split_json("--mass-g", "3", "--angle-deg", "100",
                                              "--positions", "5")] == [2, 3]


@given(mass=st.floats(0.1, 100), angle=st.floats(0, 360, exclude_max=True),
       count=st.integers(3, 24), first=st.floats(-360, 360))
def test_split_matches_the_linear_system(mass: float, angle: float, count: int,
                                         first: float) -> None:
    # law of sines (splitting.py) against numpy.linalg.solve of the 2 x 2 system
    angles = equally_spaced_deg(count, first)
    parts = split(mass, angle, angles)
    for p in parts:
        assert p.number == p.index + 1 and angles[p.index] == pytest.approx(p.angle_deg)
    if len(parts) == 2:
        a, b = (math.radians(p.angle_deg) for p in parts)
        t = math.radians(angle)
        expected = np.linalg.solve([[math.cos(a), math.cos(b)], [math.sin(a), math.sin(b)]],
                                   [mass * math.cos(t), mass * math.sin(t)])
        assert [p.mass_g for p in parts] == pytest.approx(list(expected), abs=1e-7 * mass)
        assert parts[1].index == (parts[0].index + 1) % count  # neighbours


def test_report_numbers_positions_like_the_ring() -> None:
    job: JobRecord = read_document(DEMO_JOB, "job")
    plane = job.machine.planes[0]
    svg = ET.fromstring(plane_svg(job, plane.name))
    labels = [t.text for t in svg.iter(f"{SVG}text") if t.get("class") == "tick"
              and t.text and t.text.isdigit()]
    assert labels == [str(n) for n in range(1, len(plane.layout.position_angles_deg()) + 1)]


# --- one picture ---------------------------------------------------------------------------

def unit(dx: float, dy: float) -> tuple[float, float]:
    n = math.hypot(dx, dy)
    return dx / n, dy / n


def ring_direction(angle_deg: float, rotation: str) -> tuple[float, float]:
    """Unit vector (x right, y down) from the ring's centre to position 1 put at the angle."""
    root = ET.fromstring(ring_svg(120.0, 1, first_deg=angle_deg, rotation=rotation)[0].encode())
    cx, cy = (float(v) for v in root.get("data-centre-mm").split(","))
    mark = next(li for li in root.iter(f"{SVG}line") if li.get("class") == "position-mark")
    return unit(float(mark.get("x1")) - cx, float(mark.get("y1")) - cy)


def report_direction(angle_deg: float, rotation: str) -> tuple[float, float]:
    """Unit vector of run 1's 1x vector in the report's polar plot, its phase set to the angle."""
    job: JobRecord = copy.deepcopy(read_document(DEMO_JOB, "job"))
    job.machine.rotation = rotation  # type: ignore[assignment]
    pickup = job.machine.pickups[0].name
    reading = job.runs[0].reading(pickup)
    assert reading is not None
    k = job.runs[0].readings.index(reading)
    job.runs[0].readings[k] = dataclasses.replace(reading, phase_deg=angle_deg)
    svg = ET.fromstring(polar_svg(job, pickup))
    group = next(g for g in svg.iter(f"{SVG}g") if g.get("class") == "run-vector"
                 and g.get("data-run") == str(job.runs[0].index))
    line = group.find(f"{SVG}line")
    assert line is not None
    return unit(float(line.get("x2")) - float(line.get("x1")),
                float(line.get("y2")) - float(line.get("y1")))


def tui_direction(angle_deg: float, rotation: str) -> tuple[float, float]:
    """Unit vector from the centre of the app's braille polar plot to the vector's letter."""
    cols, rows = 41, 21  # 82 x 80 dots (a cell is 2 x 4 dots; the last row is the scale)
    lines = polar_text([PolarPoint(1.0, angle_deg, "A")], "mm/s", rotation, cols, rows).plain
    grid = lines.splitlines()[:rows - 1]
    row = next(r for r, text in enumerate(grid) if "A" in text)
    col = grid[row].index("A")
    return unit((col + 0.5) * 2 - cols, (row + 0.5) * 4 - (rows - 1) * 2)


@pytest.mark.parametrize("rotation", ["cw", "ccw"])
def test_90_deg_is_left_for_a_clockwise_rotor_on_screen_on_paper_and_on_the_ring(
        rotation: str) -> None:
    # README "Angles": against rotation, seen from the person's side: cw -> 90 deg on the left
    left_or_right = -1.0 if rotation == "cw" else 1.0
    assert screen_xy(90.0, rotation) == pytest.approx((left_or_right, 0.0), abs=1e-12)
    assert screen_xy(0.0, rotation) == pytest.approx((0.0, -1.0), abs=1e-12)  # mark at top
    assert screen_xy(180.0, rotation) == pytest.approx((0.0, 1.0), abs=1e-12)
    for where in (ring_direction, report_direction, tui_direction):
        x, y = where(90.0, rotation)
        assert x == pytest.approx(left_or_right, abs=0.05), where.__name__
        assert abs(y) < 0.15, where.__name__


@pytest.mark.parametrize("rotation", ["cw", "ccw"])
@pytest.mark.parametrize("angle_deg", [0.0, 30.0, 135.0, 200.0, 315.0])
def test_tui_report_and_ring_put_an_angle_at_the_same_place(rotation: str,
                                                            angle_deg: float) -> None:
    expected = screen_xy(angle_deg, rotation)
    assert ring_direction(angle_deg, rotation) == pytest.approx(expected, abs=1e-3)
    assert report_direction(angle_deg, rotation) == pytest.approx(expected, abs=0.01)
    # the terminal plot is quantised to braille cells (2 x 4 dots at radius ~34 dots)
    tui = tui_direction(angle_deg, rotation)
    assert math.dist(tui, expected) < 0.15


def test_screen_xy_refuses_an_unknown_rotation() -> None:
    with pytest.raises(ValueError, match="rotation"):
        screen_xy(10.0, "clockwise")  # type: ignore[arg-type]
