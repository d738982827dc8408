"""The printable angle ring: 1 SVG unit = 1 mm, marks pi*D/N apart on the rim, numbering direction.

Geometry reference: circumference C = pi * D, so N equal positions are pi * D / N apart along
the rim, and the straight distance between neighbours is the chord D * sin(pi / N)
(elementary geometry; Euclid, Elements III; Archimedes, Measurement of a Circle).
"""

from __future__ import annotations

import contextlib
import io
import math
import re
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from trueturn.cli.main import main
from trueturn.jobs.ring import RULER_MM, ring_svg

SVG = "{http://www.w3.org/2000/svg}"


def parse(text: str) -> ET.Element:
    return ET.fromstring(text.encode("utf-8"))


def marks(root: ET.Element) -> list[tuple[int, float, float, float, float]]:
    """(position, x1, y1, x2, y2) of the numbered position marks, in mm."""
    out = []
    for line in root.iter(f"{SVG}line"):
        if line.get("class") == "position-mark":
            out.append((int(line.get("data-position")), float(line.get("x1")),
                        float(line.get("y1")), float(line.get("x2")), float(line.get("y2"))))
    return sorted(out)


def centre(root: ET.Element) -> tuple[float, float]:
    rim = next(c for c in root.iter(f"{SVG}circle") if c.get("class") == "rim")
    return float(rim.get("cx")), float(rim.get("cy"))


@pytest.mark.parametrize(("diameter_mm", "positions"), [(150.0, 12), (60.0, 8), (37.5, 7),
                                                        (203.2, 16), (100.0, 3)])
def test_marks_are_pi_d_over_n_apart_on_paper(diameter_mm: float, positions: int) -> None:
    text, layout = ring_svg(diameter_mm, positions)
    root = parse(text)
    # 1 user unit = 1 mm: width/height in mm equal the viewBox size.
    width, height = root.get("width"), root.get("height")
    assert width.endswith("mm") and height.endswith("mm")
    assert root.get("viewBox").split() == ["0", "0", width[:-2], height[:-2]]
    cx, cy = centre(root)
    found = marks(root)
    assert [m[0] for m in found] == list(range(1, positions + 1))
    radius = diameter_mm / 2
    angles = []
    for _, x1, y1, _, _ in found:
        assert math.hypot(x1 - cx, y1 - cy) == pytest.approx(radius, abs=1e-3)  # on the rim
        angles.append(math.atan2(-(y1 - cy), x1 - cx))
    spacing = math.pi * diameter_mm / positions
    for k in range(positions):
        a, b = angles[k], angles[(k + 1) % positions]
        arc = radius * (((b - a) + math.pi) % (2 * math.pi) - math.pi)
        assert abs(arc) == pytest.approx(spacing, abs=0.01)
        chord = math.dist(found[k][1:3], found[(k + 1) % positions][1:3])
        assert chord == pytest.approx(diameter_mm * math.sin(math.pi / positions), abs=0.01)
    assert layout.spacing_mm == pytest.approx(spacing)


@pytest.mark.parametrize(("rotation", "turn"), [("cw", +1), ("ccw", -1)])
def test_numbers_run_against_rotation_from_the_reference_mark(rotation: str, turn: int) -> None:
    root = parse(ring_svg(120.0, 6, first_deg=0.0, rotation=rotation)[0])
    cx, cy = centre(root)
    found = marks(root)
    _, x1, y1, _, _ = found[0]
    assert x1 == pytest.approx(cx, abs=1e-3) and y1 < cy  # position 1 on the 0 deg mark, top
    a1 = math.atan2(-(found[0][2] - cy), found[0][1] - cx)
    a2 = math.atan2(-(found[1][2] - cy), found[1][1] - cx)
    step = math.degrees(((a2 - a1) + math.pi) % (2 * math.pi) - math.pi)
    # A cw rotor (as seen) has its angles growing counter-clockwise on paper (+60 deg in the
    # y-up math convention) and the other way for a ccw rotor.
    assert step == pytest.approx(turn * 60.0, abs=1e-3)  # coordinates kept to 0.1 um


def test_first_position_offset_and_degree_ticks() -> None:
    text, layout = ring_svg(150.0, 4, first_deg=15.0, rotation="cw")
    root = parse(text)
    cx, cy = centre(root)
    _, x1, y1, _, _ = marks(root)[0]
    assert math.degrees(math.atan2(-(y1 - cy), x1 - cx)) == pytest.approx(90.0 + 15.0, abs=1e-3)
    ticks = [t for t in root.iter(f"{SVG}line") if t.get("class") == "degree-tick"]
    assert layout.tick_step_deg == 1  # 150 mm rim: 1.3 mm per degree
    assert len(ticks) == 360
    for tick in ticks[::45]:
        deg = float(tick.get("data-deg"))
        x, y = float(tick.get("x1")), float(tick.get("y1"))
        assert math.degrees(math.atan2(-(y - cy), x - cx)) % 360 == pytest.approx((90 + deg) % 360,
                                                                                abs=1e-2)


def test_ruler_box_is_100_mm_with_1_mm_ticks() -> None:
    root = parse(ring_svg(80.0, 6)[0])
    rect = next(r for r in root.iter(f"{SVG}rect") if r.get("class") == "ruler")
    assert float(rect.get("width")) == RULER_MM == 100.0
    xs = sorted(float(t.get("x1")) for t in root.iter(f"{SVG}line")
                if t.get("class") == "ruler-tick")
    assert len(xs) == 101
    assert all(b - a == pytest.approx(1.0) for a, b in zip(xs, xs[1:], strict=False))
    assert xs[0] == pytest.approx(float(rect.get("x")))
    width_mm = float(root.get("width")[:-2])
    assert xs[-1] < width_mm  # the whole ruler is on the sheet


def test_small_ring_fits_a_sheet_and_big_ring_says_to_tile() -> None:
    assert ring_svg(150.0, 12)[1].fits_a4_and_letter
    text, layout = ring_svg(300.0, 12)
    assert not layout.fits_a4_and_letter and "--tiles" in text


def test_cli_ring_writes_svg_and_refuses_bad_input(tmp_path: Path) -> None:
    out = tmp_path / "ring.svg"
    with contextlib.redirect_stderr(io.StringIO()):
        assert main(["ring", "--diameter-mm", "150", "--positions", "12", "--rotation", "ccw",
                     "-o", str(out)]) == 0
    root = ET.parse(out).getroot()
    assert root.get("data-rotation") == "ccw" and len(marks(root)) == 12
    for bad in (["--diameter-mm", "-5", "--positions", "12"],
                ["--diameter-mm", "150", "--positions", "0"],
                ["--diameter-mm", "nan", "--positions", "4"]):
        err = io.StringIO()
        with contextlib.redirect_stderr(err):
            assert main(["ring", *bad, "-o", str(tmp_path / "x.svg")]) == 2
        assert err.getvalue().count("\n") == 1
    assert not (tmp_path / "x.svg").exists()


@pytest.mark.parametrize(("diameter_mm", "positions"), [(120.0, 8), (40.0, 5), (250.0, 24)])
def test_rim_strip_is_pi_d_long_with_marks_pi_d_over_n_apart(diameter_mm: float,
                                                             positions: int) -> None:
    from trueturn.jobs.ring import strip_svg

    text, layout = strip_svg(diameter_mm, positions)
    root = parse(text)
    assert root.get("viewBox").split()[2:] == [root.get("width")[:-2], root.get("height")[:-2]]
    along: dict[int, float] = {}
    total = 0.0
    for row in (g for g in root.iter(f"{SVG}g") if g.get("class") == "strip-row"):
        rect = next(r for r in row.iter(f"{SVG}rect") if r.get("class") == "strip")
        x0, start = float(rect.get("x")), float(row.get("data-start-mm"))
        assert start == pytest.approx(total, abs=1e-3)  # rows continue where the last ended
        total += float(rect.get("width"))
        for line in row.iter(f"{SVG}line"):
            if line.get("class") == "position-mark":
                along[int(line.get("data-position"))] = start + float(line.get("x1")) - x0
    assert total == pytest.approx(math.pi * diameter_mm, abs=1e-3)  # circumference pi * D
    assert sorted(along) == list(range(1, positions + 1))
    gaps = [along[k + 1] - along[k] for k in range(1, positions)]
    gaps.append(total - along[positions] + along[1])  # across the join
    for gap in gaps:
        assert gap == pytest.approx(math.pi * diameter_mm / positions, abs=1e-3)
    assert layout.spacing_mm == pytest.approx(math.pi * diameter_mm / positions)


def test_cli_rim_strip(tmp_path: Path) -> None:
    out = tmp_path / "strip.svg"
    with contextlib.redirect_stderr(io.StringIO()):
        assert main(["ring", "--diameter-mm", "120", "--positions", "8", "--rim",
                     "-o", str(out)]) == 0
    assert ET.parse(out).getroot().get("data-length-mm") == f"{math.pi * 120:.4f}"


def test_ring_and_strip_carry_the_standstill_caution() -> None:
    from trueturn.jobs.ring import CAUTION, strip_svg

    for text in (ring_svg(90.0, 6)[0], strip_svg(90.0, 6)[0]):
        lines = ["".join(t.itertext()) for t in parse(text).iter(f"{SVG}text")
                 if "caution" in (t.get("class") or "")]
        assert lines == list(CAUTION)
        assert "standstill" in " ".join(lines) and "unplugged" in " ".join(lines)


@pytest.mark.parametrize("diameter_mm", [150.0, 300.0, 420.0])
def test_tiles_cover_the_big_ring_at_1_to_1_on_sheet_sized_windows(diameter_mm: float) -> None:
    from trueturn.jobs.ring import (
        A4_PRINTABLE_MM,
        LETTER_PRINTABLE_MM,
        TILE_OVERLAP_MM,
        ring_tiles_html,
    )

    page, tiles = ring_tiles_html(diameter_mm, 12)
    whole = parse(ring_svg(diameter_mm, 12, furniture=False)[0])
    width, height = float(whole.get("width")[:-2]), float(whole.get("height")[:-2])
    pages = [s for s in ET.fromstring(page).iter(f"{SVG}svg") if s.get("class") == "sheet-page"]
    assert len(pages) == len(tiles)
    sheets = []
    for sheet_page in pages:
        # the sheet: 1 user unit = 1 mm, and it fits A4 and Letter inside 12 mm margins
        _, _, pw, ph = map(float, sheet_page.get("viewBox").split())
        assert (float(sheet_page.get("width")[:-2]), float(sheet_page.get("height")[:-2])) == (
            pw, ph)
        assert pw <= min(A4_PRINTABLE_MM[0], LETTER_PRINTABLE_MM[0])
        assert ph <= min(A4_PRINTABLE_MM[1], LETTER_PRINTABLE_MM[1])
        window = next(s for s in sheet_page.iter(f"{SVG}svg") if s.get("class") == "window")
        x, y, w, h = map(float, window.get("viewBox").split())
        assert (float(window.get("width")), float(window.get("height"))) == (w, h)  # 1:1
        # the sheet's own label, check box and caution sit above the window, never on it
        band = [t for t in sheet_page if t.tag == f"{SVG}text"]
        assert band and all(float(t.get("y")) < float(window.get("y")) for t in band)
        texts = "".join("".join(t.itertext()) for t in band)
        assert "Caution" in texts and "50 mm" in texts
        assert marks(window) == marks(whole)  # the same drawing seen through each window
        sheets.append(window)
    # The windows cover the whole drawing, neighbours sharing the overlap band.
    xs = sorted({t.x_mm for t in tiles})
    ys = sorted({t.y_mm for t in tiles})
    w, h = map(float, sheets[0].get("viewBox").split()[2:])
    assert xs[0] == 0 and ys[0] == 0 and xs[-1] + w >= width and ys[-1] + h >= height
    assert all(b - a == pytest.approx(w - TILE_OVERLAP_MM) for a, b in zip(xs, xs[1:], strict=False))
    assert all(b - a == pytest.approx(h - TILE_OVERLAP_MM) for a, b in zip(ys, ys[1:], strict=False))
    assert len(tiles) == len(xs) * len(ys)


def test_cli_tiles(tmp_path: Path) -> None:
    out = tmp_path / "big.html"
    with contextlib.redirect_stderr(io.StringIO()):
        assert main(["ring", "--diameter-mm", "300", "--positions", "6", "--tiles",
                     "-o", str(out)]) == 0
    root = ET.parse(out).getroot()
    assert len([s for s in root.iter(f"{SVG}svg") if s.get("class") == "sheet-page"]) == 4
    text = "".join(root.itertext())
    assert "--tiles" not in text  # the hint to tile is for the one-sheet drawing only
    assert "This box must measure exactly 100 mm" not in text  # each sheet has its own 50 mm
    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        assert main(["ring", "--diameter-mm", "300", "--positions", "6", "--tiles", "--rim",
                     "-o", str(tmp_path / "x")]) == 2
    assert err.getvalue().count("\n") == 1


def text_sizes_mm(root: ET.Element) -> dict[str, float]:
    """Font size (mm = user units) of each CSS class in the ring's style element."""
    style = "".join(next(root.iter(f"{SVG}style")).itertext())
    return {m.group(1): float(m.group(2))
            for m in re.finditer(r"\.(\w+) \{ font-size: ([\d.]+)px;", style)}


def text_boxes(root: ET.Element) -> list[tuple[str, tuple[float, float, float, float]]]:
    """(text, estimated box) of every text: DejaVu Sans advance at most 0.62 em (0.68 bold),
    cap height 0.73 em (common practice, no source; the Chromium test measures the real ones)."""
    sizes = text_sizes_mm(root)
    out = []
    for t in root.iter(f"{SVG}text"):
        text = "".join(t.itertext())
        css = (t.get("class") or "").split()
        size = sizes[css[0]]
        width = len(text) * size * (0.68 if "pos" in css else 0.62)
        x, y = float(t.get("x")), float(t.get("y"))
        x0 = x - width / 2 if t.get("text-anchor") == "middle" else x
        out.append((text, (x0, y - 0.73 * size, x0 + width, y)))
    return out


# the crowded and small rings of issue #17 item 9, and ordinary ones
CASES = [(20.0, 4), (50.0, 36), (50.0, 3), (20.0, 36), (150.0, 12), (80.0, 7), (203.2, 16)]


@pytest.mark.parametrize(("diameter_mm", "positions"), CASES)
def test_every_text_is_at_least_7_pt_and_none_overprints(diameter_mm: float,
                                                         positions: int) -> None:
    root = parse(ring_svg(diameter_mm, positions, title="Shop fan, motor side")[0])
    # 7 pt = 7 x 25.4 / 72 mm = 2.47 mm (1 pt = 1/72 in, 1 in = 25.4 mm)
    assert min(text_sizes_mm(root).values()) >= 7 * 25.4 / 72
    boxes = text_boxes(root)
    for i, (a, box_a) in enumerate(boxes):
        for b, box_b in boxes[i + 1:]:
            overlap = (box_a[0] < box_b[2] and box_b[0] < box_a[2] and box_a[1] < box_b[3]
                       and box_b[1] < box_a[3])
            assert not overlap, (a, b)
    width = float(root.get("width")[:-2])
    assert all(0 <= box[0] and box[2] <= width for _, box in boxes)  # nothing off the sheet


def test_crowded_ring_numbers_outside_or_fewer_and_says_so() -> None:
    _, roomy = ring_svg(150.0, 12)
    assert (roomy.numbers_at, roomy.number_every, roomy.notes) == ("inside", 1, ())
    _, fifty = ring_svg(50.0, 36)  # 4.4 mm apart: numbers go outside the rim, all of them
    assert (fifty.numbers_at, fifty.number_every) == ("outside", 1)
    text, tiny = ring_svg(20.0, 36)  # 1.7 mm apart: not every one can carry its number
    assert tiny.number_every > 1 and len(tiny.notes) == 1
    assert "every" in tiny.notes[0] and "1.7 mm apart" in tiny.notes[0]
    numbered = [t.get("data-position") for t in parse(text).iter(f"{SVG}text")
                if t.get("class") == "pos"]
    assert numbered == [str(n) for n in range(1, 37, tiny.number_every)]
    assert len(marks(parse(text))) == 36  # every position still has its mark


def test_irregular_angles_as_a_job_file_gives_them() -> None:
    angles = [0.0, 40.0, 95.0, 180.0, 270.0, 300.0]
    text, layout = ring_svg(120.0, None, rotation="ccw", angles_deg=angles)
    root = parse(text)
    cx, cy = centre(root)
    found = marks(root)
    assert [m[0] for m in found] == [1, 2, 3, 4, 5, 6]
    for (_, x1, y1, _, _), angle in zip(found, angles, strict=True):
        # ccw rotor: angles grow clockwise on paper from the top (angles.screen_xy)
        paper = math.degrees(math.atan2(x1 - cx, -(y1 - cy))) % 360
        assert paper == pytest.approx(angle, abs=1e-3)
    assert layout.irregular and layout.spacing_mm == pytest.approx(math.pi * 120 * 30 / 360)
    listed = "".join("".join(t.itertext()) for t in root.iter(f"{SVG}text")
                     if "angle-list" in (t.get("class") or ""))
    assert "2 at 40\u00b0" in listed and "6 at 300\u00b0" in listed
    with pytest.raises(ValueError, match="same angle"):
        ring_svg(120.0, None, angles_deg=[0.0, 90.0, 450.0 - 360.0])


def test_long_titles_are_wrapped_not_cut() -> None:
    from trueturn.jobs.ring import TITLE_LINES_MAX

    title = " ".join(["Left wheel of the bench grinder in bay three, flange side"] * 2)
    root = parse(ring_svg(60.0, 6, title=title)[0])
    lines = ["".join(t.itertext()) for t in root.iter(f"{SVG}text")
             if "title" in (t.get("class") or "")]
    assert 1 < len(lines) <= TITLE_LINES_MAX and " ".join(lines) == title
    very = parse(ring_svg(60.0, 6, title=title * 4)[0])
    lines = ["".join(t.itertext()) for t in very.iter(f"{SVG}text")
             if "title" in (t.get("class") or "")]
    assert len(lines) == TITLE_LINES_MAX and lines[-1].endswith("\u2026")
    width = float(root.get("width")[:-2])
    assert all(box[2] <= width for _, box in text_boxes(root))


def test_cli_irregular_angles_and_crowded_note(tmp_path: Path) -> None:
    out = tmp_path / "ring.svg"
    with contextlib.redirect_stderr(io.StringIO()):
        assert main(["ring", "--diameter-mm", "120", "--angles", "0,40,95,180", "-o",
                     str(out)]) == 0
    assert [m[0] for m in marks(ET.parse(out).getroot())] == [1, 2, 3, 4]
    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        assert main(["ring", "--diameter-mm", "20", "--positions", "36", "-o", str(out)]) == 0
    notes = [line for line in err.getvalue().splitlines() if line.startswith("note:")]
    assert len(notes) == 1 and "every" in notes[0]
    for bad in (["--angles", "0,x,90"], ["--angles", "0,90", "--positions", "2"],
                ["--angles", "0,90,90"], []):
        err = io.StringIO()
        with contextlib.redirect_stderr(err):
            assert main(["ring", "--diameter-mm", "100", *bad, "-o", str(tmp_path / "x.svg")]) == 2
        assert err.getvalue().count("\n") == 1, bad
    assert not (tmp_path / "x.svg").exists()
