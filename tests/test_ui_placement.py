"""Where the weight goes, as a picture (issue #17 item 5): each correction plane drawn as seen
from its own face, at the hands-on step, with the step's parts lit; the ring offered for each
plane with the rotation seen on that face.

What counts as right is worked out here from the README's angle convention, not from the
code under test: positions counted from the reference mark AGAINST rotation, position n of
N equally spaced at ``first + (n - 1) * 360 / N`` (README, "Angles"); a picture shows 0 deg
(the mark) at the top, and for a rotor turning clockwise as seen, 90 deg on the LEFT, so a
point at angle a sits at (x, y) = (-sin a, -cos a) with x right and y down, and at
(+sin a, -cos a) when the rotor turns counter-clockwise as seen. Looking at a plane from the
other end of the shaft mirrors left and right, so a turn that is clockwise from the front is
counter-clockwise from the back (elementary geometry; common practice, no source).
"""

from __future__ import annotations

import asyncio
import copy
import dataclasses
import math
import xml.etree.ElementTree as ET
from dataclasses import replace
from pathlib import Path

import pytest
from rich.text import Text
from textual.app import App, ComposeResult

from cli_helpers import run_cli
from test_ui_app import SIZE, connect, make_app, press, wait_for
from test_ui_procedure import Rig
from test_ui_steps import snapshot
from trueturn.angles import screen_xy, seen_rotation
from trueturn.jobs.records import JobRecord
from trueturn.jobs.report import plane_svg
from trueturn.jobs.store import read_document
from trueturn.model import Plane, PlaneLayout
from trueturn.model.units import IMPERIAL
from trueturn.positions import equally_spaced_deg
from trueturn.procedure.engine import BalanceEngine
from trueturn.procedure.guide import HandsOn, HandsOnPhase, Mode
from trueturn.ui.placement import (
    BLOCK_COLS,
    CIRCLE_COLS,
    GAP_COLS,
    PART_STYLE,
    PICTURE_ROWS,
    POSITION_STYLE,
    PartMark,
    PlacementView,
    PlanePicture,
    fits_legend,
    picture_lines,
    ring_arguments,
)
from trueturn.ui.steps import GuideContext, GuideView

SVG = "{http://www.w3.org/2000/svg}"
DEMO_JOB = Path(__file__).parent / "data" / "demo_bench_grinder_job.yaml"


def expected_xy(angle_deg: float, clockwise_as_seen: bool) -> tuple[float, float]:
    """The README's convention written out (x right, y down; 0 deg at the top)."""
    a = math.radians(angle_deg)
    return (-math.sin(a) if clockwise_as_seen else math.sin(a)), -math.cos(a)


def lit(lines: list[Text], style: str, offset: int = 0) -> dict[str, tuple[int, int]]:
    """{label: (row, first column)} of the runs of cells drawn in ``style`` in the block
    that starts at column ``offset`` (the picture's lit parts)."""
    found: dict[str, tuple[int, int]] = {}
    for row, line in enumerate(lines):
        cells = sorted((s.start, s.end) for s in line.spans if str(s.style) == style)
        run: list[int] = []
        for start, end in cells + [(-9, -9)]:
            if run and start != run[-1] + 1:
                col = run[0] - offset
                if 0 <= col < CIRCLE_COLS:
                    found[line.plain[run[0]:run[-1] + 1]] = (row, col)
                run = []
            if start >= 0:
                run.extend(range(start, end))
    return found


def direction(row: int, col: int, width: int = 1) -> tuple[float, float]:
    """Unit vector from the circle's centre to a label's cells (a cell is 2 x 4 dots)."""
    x = (col + width / 2) * 2 - CIRCLE_COLS  # dots from the centre
    y = (row + 0.5) * 4 - PICTURE_ROWS * 2
    n = math.hypot(x, y)
    return x / n, y / n


def equal_position(angle_deg: float, count: int, first_deg: float) -> int:
    """The number of the position at ``angle_deg``: first + (n - 1) * 360 / N (README)."""
    step = 360.0 / count
    k = (angle_deg - first_deg) / step
    assert abs(k - round(k)) < 1e-6, "not on a position"
    return int(round(k)) % count + 1


# --- the face: which end a plane is seen from ----------------------------------------------

@pytest.mark.parametrize("angle_deg", [0.0, 20.0, 90.0, 135.0, 200.0, 290.0])
def test_the_back_face_mirrors_left_and_right(angle_deg: float) -> None:
    assert seen_rotation("cw", "front") == "cw" and seen_rotation("cw", "back") == "ccw"
    assert seen_rotation("ccw", "back") == "cw"
    fx, fy = screen_xy(angle_deg, seen_rotation("cw", "front"))
    bx, by = screen_xy(angle_deg, seen_rotation("cw", "back"))
    assert (bx, by) == pytest.approx((-fx, fy), abs=1e-12)
    assert (bx, by) == pytest.approx(expected_xy(angle_deg, clockwise_as_seen=False), abs=1e-12)
    plane = Plane("far", 50.0, face="back")
    assert plane.rotation_seen("cw") == "ccw" and Plane("near", 50.0).rotation_seen("cw") == "cw"
    with pytest.raises(ValueError, match="face"):
        seen_rotation("cw", "side")  # type: ignore[arg-type]


# --- the picture, one plane --------------------------------------------------------------

@pytest.mark.parametrize("clockwise", [True, False])
def test_irregular_positions_and_a_hole_are_drawn_where_the_convention_puts_them(
        clockwise: bool) -> None:
    angles = [0.0, 100.0, 200.0, 250.0]  # bolt holes, invented
    plane = Plane("flange", 80.0, layout=PlaneLayout("angles", angles_deg=angles))
    rotation = "cw" if clockwise else "ccw"
    pic = PlanePicture(plane.name, 80.0, "front", rotation, plane.position_angles_deg,
                       (PartMark(100.0, "add", 2.5, 2), PartMark(250.0, "remove", 1.5, 4)))
    lines = picture_lines(pic)
    assert len(lines) == PICTURE_ROWS and all(line.cell_len == BLOCK_COLS for line in lines)
    for style, label, angle in ((PART_STYLE["add"], "2", 100.0),
                                (PART_STYLE["remove"], "4", 250.0)):
        (found,) = lit(lines, style).items()
        assert found[0] == label
        got = direction(*found[1])
        assert math.dist(got, expected_xy(angle, clockwise)) < 0.35, (label, got)
    legend = "\n".join(line.plain for line in lines)
    assert "2 add 2.50 g" in legend and "4 drill out 1.50 g" in legend  # weight vs hole
    assert ("\u21bb cw" if clockwise else "\u21ba ccw") in legend


def test_a_plane_without_positions_shows_the_part_at_its_angle() -> None:
    for face, clockwise in (("front", True), ("back", False)):
        pic = PlanePicture("wheel", 50.0, face, seen_rotation("cw", face), (),  # type: ignore[arg-type]
                           (PartMark(90.0, "add", 0.6),))
        lines = picture_lines(pic)
        ((tag, cell),) = lit(lines, PART_STYLE["add"]).items()
        assert tag == "+"
        x, _ = direction(*cell)
        assert (x < -0.8) if clockwise else (x > 0.8)  # 90 deg: left from the front
        assert "+ add 0.60 g at 90\u00b0" in "\n".join(line.plain for line in lines)


# --- the guide, at the hands-on step of a known correction ---------------------------------

class GuideApp(App):
    """Only the guide, as the bench screen holds it."""

    def compose(self) -> ComposeResult:
        yield GuideView(id="guide-view")


def guide_pictures(rig: Rig, size: tuple[int, int],
                   condition: tuple[str, ...] = ()) -> tuple[list[Text], dict[str, int]]:
    """The placement view's lines at the procedure's step, and where things are on screen."""

    async def look() -> tuple[list[Text], dict[str, int]]:
        app = GuideApp()
        async with app.run_test(size=size) as pilot:
            guide = app.query_one(GuideView)
            guide.show(rig.proc, snapshot(rig), GuideContext(rig.profile, BalanceEngine(),
                                                             demo=True, condition=condition))
            await pilot.pause()
            view = app.query_one(PlacementView)
            panels = app.query_one("#step-panels")
            lines = view.render().split("\n") if view.display else []
            text = app.query_one("#hands-on-panel")
            place = {"shown": int(view.display), "top": view.region.y,
                     "bottom": view.region.bottom, "width": view.content_region.width,
                     "panels_top": panels.region.y, "window": panels.scrollable_content_region.height,
                     "text": text.outer_size.height, "scroll": int(panels.max_scroll_y)}
            guide.scroll_step(10)  # PgDn: to the end of the step
            await pilot.pause()
            place["scrolled"] = int(panels.scroll_y)
            return list(lines), place
    return asyncio.run(look())


def at_correction(rig: Rig) -> HandsOn:
    """Drive the procedure to the hands-on step that places the correction."""
    for _ in range(12):
        step = rig.proc.step
        if isinstance(step, HandsOn) and any(c.mass is not None and c.mass.kind == "correction"
                                             for c in step.changes):
            return step
        if step.kind == "hands-on":
            rig.hands_on()
        elif step.kind == "run":
            rig.run()
        elif step.kind == "correction":
            rig.proc.accept_correction()
    raise AssertionError("no correction step")


def test_the_correction_step_lights_its_positions_on_both_faces() -> None:
    # jointer-head (demo scenario, invented): 4 tapped holes per end face, position 1 at 20
    # deg; the outfeed end is worked on from the back, the profile's rotation is cw.
    rig = Rig("jointer-head", Mode.TWO_PLANE)
    step = at_correction(rig)
    assert rig.profile.rotation == "cw"
    faces = {p.name: p.face for p in rig.profile.planes}
    assert faces == {"infeed-end": "front", "outfeed-end": "back"}
    lines, place = guide_pictures(rig, SIZE)
    assert place["shown"] and len(lines) == PICTURE_ROWS
    plain = "\n".join(line.plain for line in lines)
    assert "from the front \u21bb cw" in plain and "from the back \u21ba ccw" in plain
    blocks = {"infeed-end": 0, "outfeed-end": BLOCK_COLS + GAP_COLS}
    checked = 0
    for change in step.changes:
        m = change.mass
        assert m is not None
        number = equal_position(m.angle_deg, 4, 20.0)
        style = PART_STYLE["take-off" if change.action == "detach" else "add"]
        found = lit(lines, style, blocks[m.plane])
        assert str(number) in found, (m, found)
        got = direction(*found[str(number)])
        want = expected_xy(m.angle_deg, clockwise_as_seen=faces[m.plane] == "front")
        assert math.dist(got, want) < 0.35, (m, got, want)
        checked += 1
    assert checked >= 3  # the trial to take off and the correction parts
    # every position, lit or not, where its face puts it: the back face is mirrored
    for plane, block in blocks.items():
        labels: dict[str, tuple[int, int]] = {}
        for style in (*PART_STYLE.values(), POSITION_STYLE):
            labels.update(lit(lines, style, block))
        for number in (1, 2, 3, 4):
            angle = 20.0 + (number - 1) * 90.0
            got = direction(*labels[str(number)])
            want = expected_xy(angle, clockwise_as_seen=faces[plane] == "front")
            assert math.dist(got, want) < 0.35, (plane, number, got, want)


def test_the_pictures_fit_80x24_above_a_step_that_scrolls() -> None:
    rig = Rig("jointer-head", Mode.TWO_PLANE)
    at_correction(rig)
    # the bench screen gives the guide 21 of the 24 rows (status strip 2, footer 1)
    lines, place = guide_pictures(rig, (80, 21))
    assert place["shown"] and place["top"] == 0 and place["bottom"] == PICTURE_ROWS
    assert all(line.cell_len <= place["width"] for line in lines)
    assert 2 * BLOCK_COLS + GAP_COLS <= 80 - 2  # two planes side by side, inside the padding
    assert place["panels_top"] == PICTURE_ROWS  # the step's text starts below
    # every line of the two-plane correction step is in sight, or scrolled into it
    assert place["scroll"] == max(0, place["text"] - place["window"]) == place["scrolled"]
    # with the machine's condition under it (lines invented here) the step is longer than
    # its window: it scrolls to its last line, nothing is cut off
    _, place = guide_pictures(rig, (80, 21), tuple(f"condition line {k}" for k in range(5)))
    assert place["text"] > place["window"]
    assert place["scroll"] == place["text"] - place["window"] == place["scrolled"]


def test_no_pictures_away_from_hands_on_steps() -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    rig.hands_on()
    assert rig.proc.step.kind == "run"
    _, place = guide_pictures(rig, SIZE)
    assert not place["shown"]


# --- the ring for each plane -----------------------------------------------------------------

def test_the_ring_offered_for_each_face_numbers_like_the_picture(tmp_path: Path) -> None:
    rig = Rig("jointer-head", Mode.TWO_PLANE)
    for plane in rig.profile.planes:
        args = ring_arguments(rig.profile, plane)
        out = tmp_path / f"{plane.name}.svg"
        code, _, err = run_cli([*args[:-1], str(out)])
        assert code == 0, err
        root = ET.fromstring(out.read_text(encoding="utf-8"))
        assert root.get("data-rotation") == plane.rotation_seen(rig.profile.rotation)
        cx, cy = (float(v) for v in root.get("data-centre-mm", "").split(","))
        marks = {int(li.get("data-position", "0")): li for li in root.iter(f"{SVG}line")
                 if li.get("class") == "position-mark"}
        assert sorted(marks) == [1, 2, 3, 4]
        for number, line in marks.items():
            angle = float(line.get("data-angle-deg", "nan"))
            assert angle == pytest.approx(20.0 + (number - 1) * 90.0)
            x, y = float(line.get("x1", "nan")) - cx, float(line.get("y1", "nan")) - cy
            n = math.hypot(x, y)
            want = expected_xy(angle, clockwise_as_seen=plane.face == "front")
            assert (x / n, y / n) == pytest.approx(want, abs=1e-3)


def test_h_shows_the_rings_and_how_to_carry_the_mark_in_the_app(tmp_path: Path) -> None:
    app = make_app("jointer-head", tmp_path)

    async def scenario() -> None:
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await press(app, pilot, "2")
            await wait_for(pilot, lambda: app.procedure is not None, 10)
            view = app.screen.query_one(PlacementView)
            await wait_for(pilot, lambda: bool(view.display), 10)
            assert view.region.bottom <= SIZE[1] and view.region.right <= SIZE[0]
            step = app.procedure.step if app.procedure else None
            assert isinstance(step, HandsOn) and step.phase is HandsOnPhase.LOCKOUT
            plain = view.render().plain
            assert "infeed-end" in plain and "outfeed-end" in plain
            await press(app, pilot, "h")
            await wait_for(pilot, lambda: app.screen.id == "marking", 10)
            page = str(app.screen.query_one(".page").render())
            assert "--rotation ccw" in page and "--rotation cw" in page
            assert "0\u00b0 on every plane" in page and "A back face" in page
            assert app.screen.max_scroll_y == 0  # the whole page fits 80x24
            await press(app, pilot, "escape")
            await wait_for(pilot, lambda: app.screen.id == "bench", 10)
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_the_report_draws_a_back_plane_mirrored_like_its_ring() -> None:
    job: JobRecord = copy.deepcopy(read_document(DEMO_JOB, "job"))
    plane = job.machine.planes[0]
    parts = [p for p in job.parts_on_rotor() if p.plane == plane.name]
    assert parts, "the demo job leaves parts on its first plane"

    def part_xs(face: str) -> list[float]:
        job.machine.planes[0] = dataclasses.replace(plane, face=face)  # type: ignore[arg-type]
        svg = ET.fromstring(plane_svg(job, plane.name))
        size = float(svg.get("viewBox", "0 0 0 0").split()[2])
        return [float(c.get("cx", "nan")) - size / 2 for c in svg.iter(f"{SVG}circle")
                if c.get("class") == "part"]

    front, back = part_xs("front"), part_xs("back")
    assert back == pytest.approx([-x for x in front], abs=0.11)  # 0.1 px rounding
    clockwise = job.machine.rotation == "cw"
    for part, x in zip(parts, front, strict=True):
        want_x, _ = expected_xy(part.angle_deg, clockwise_as_seen=clockwise)
        assert (x > 0) == (want_x > 0) or abs(want_x) < 0.05


def test_the_ring_of_a_plane_with_irregular_positions_marks_each_one(tmp_path: Path) -> None:
    rig = Rig("jointer-head", Mode.TWO_PLANE)
    angles = [0.0, 40.0, 95.0, 180.0, 270.0]  # invented bolt circle
    plane = dataclasses.replace(rig.profile.planes[1],
                                layout=PlaneLayout("angles", angles_deg=angles))
    out = tmp_path / "ring.svg"
    code, _, err = run_cli([*ring_arguments(rig.profile, plane)[:-1], str(out)])
    assert code == 0, err
    root = ET.fromstring(out.read_text(encoding="utf-8"))
    marks = {int(li.get("data-position", "0")): float(li.get("data-angle-deg", "nan"))
             for li in root.iter(f"{SVG}line") if li.get("class") == "position-mark"}
    assert marks == {n: a for n, a in enumerate(angles, start=1)}
    assert root.get("data-rotation") == "ccw"  # the back face of a cw machine


def test_more_parts_than_the_legend_holds_are_listed_in_full_below() -> None:
    parts = tuple(PartMark(a, "add", 1.0, n) for n, a in enumerate((0.0, 60.0, 120.0, 180.0),
                                                                    start=1))
    pic = PlanePicture("rim", 90.0, "front", "cw", equally_spaced_deg(6), parts)
    assert not fits_legend([pic]) and fits_legend([replace(pic, parts=parts[:3])])
    legend = "\n".join(line.plain for line in picture_lines(pic))
    assert "1 add 1.00 g" in legend and "+2 more: see below" in legend
    assert len(lit(picture_lines(pic), PART_STYLE["add"])) == 4  # all four lit on the circle


def test_an_imperial_machine_sees_ounces_and_inches_on_the_picture() -> None:
    pic = PlanePicture("rim", 30.0, "front", "cw", equally_spaced_deg(4),
                       (PartMark(90.0, "add", 28.349523125, 2),))
    legend = "\n".join(line.plain for line in picture_lines(pic, IMPERIAL))
    # 1 in = 25.4 mm and 1 oz = 28.349523125 g exactly (NIST SP 811, Appendix B)
    assert f"r {30.0 / 25.4:.3f} in" in legend and "2 add 1.000 oz" in legend
    assert " mm" not in legend and " g" not in legend
