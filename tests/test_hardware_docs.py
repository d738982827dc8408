"""The kit pages in hardware/: links resolve, the schematic is valid SVG, the numbers quoted
in WIRING.md follow from the part values, and the flip-test script in CALIBRATION.md works.
"""

from __future__ import annotations

import math
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from trueturn.link.codec import encode_frame

ROOT = Path(__file__).resolve().parents[1]
HARDWARE = ROOT / "hardware"
PAGES = sorted(HARDWARE.glob("*.md"))
EXPECTED_PAGES = {"README.md", "BOM.md", "WIRING.md", "MOUNTING.md", "FLASHING.md",
                  "CALIBRATION.md", "SAFETY.md"}
SVG_NS = "{http://www.w3.org/2000/svg}"

_LINK = re.compile(r"(?<!!)\[[^\]]*\]\(([^)\s]+)\)")
_FENCE = re.compile(r"^```.*?^```", re.MULTILINE | re.DOTALL)


def _links(text: str) -> list[str]:
    return _LINK.findall(_FENCE.sub("", text))


def _github_anchor(heading: str) -> str:
    """GitHub's heading id: lower case, punctuation dropped, spaces to hyphens (common practice)."""
    text = re.sub(r"[`*_]", "", heading.strip().lower())
    text = re.sub(r"[^\w\- ]", "", text)
    return text.replace(" ", "-")


def _anchors(path: Path) -> set[str]:
    text = _FENCE.sub("", path.read_text(encoding="utf-8"))
    return {_github_anchor(m) for m in re.findall(r"^#+\s+(.*)$", text, re.MULTILINE)}


def test_every_page_is_there() -> None:
    assert {p.name for p in PAGES} >= EXPECTED_PAGES
    assert (HARDWARE / "schematic.svg").exists()


@pytest.mark.parametrize("page", PAGES, ids=lambda p: p.name)
def test_links_resolve(page: Path) -> None:
    for target in _links(page.read_text(encoding="utf-8")):
        if re.match(r"^[a-z]+:", target):  # http:, https:, mailto:
            continue
        file_part, _, anchor = target.partition("#")
        resolved = (page.parent / file_part).resolve() if file_part else page
        assert resolved.exists(), f"{page.name}: link to missing {target}"
        if anchor and resolved.suffix == ".md":
            assert anchor in _anchors(resolved), f"{page.name}: no heading for #{anchor}"


def test_index_links_every_page_and_the_schematic() -> None:
    linked = {Path(t.partition("#")[0]).name
              for t in _links((HARDWARE / "README.md").read_text(encoding="utf-8"))}
    wanted = {p.name for p in PAGES if p.name != "README.md"} | {"schematic.svg"}
    assert wanted <= linked, f"hardware/README.md does not link {sorted(wanted - linked)}"


def test_schematic_is_valid_svg_and_shows_the_pin_map() -> None:
    root = ET.parse(HARDWARE / "schematic.svg").getroot()  # raises on malformed XML
    assert root.tag == f"{SVG_NS}svg"
    assert len(root.get("viewBox", "").split()) == 4
    texts = " ".join("".join(el.itertext()) for el in root.iter(f"{SVG_NS}text"))
    for label in ("A0", "A1", "D8", "5V", "GND", "PICKUP_1", "PICKUP_2", "TACH", "1 kΩ", "470 nF",
                  "10 kΩ", "X OUT"):
        assert label in texts, f"schematic.svg has no label {label!r}"


# --- numbers in WIRING.md -----------------------------------------------------------------

_PREFIX = {"": 1.0, "k": 1e3, "M": 1e6, "m": 1e-3, "µ": 1e-6, "u": 1e-6, "n": 1e-9, "p": 1e-12}


def _quantity(cell: str, unit: str) -> float:
    match = re.search(rf"([\d.]+)\s*([kMmµunp]?){unit}", cell)
    assert match, f"no value in {unit} in {cell!r}"
    return float(match.group(1)) * _PREFIX[match.group(2)]


def _table(text: str, header_start: str) -> list[list[str]]:
    lines = text.splitlines()
    for i, line in enumerate(lines):
        if line.startswith("|") and line.lower().startswith(header_start):
            rows = []
            for row in lines[i + 2 :]:
                if not row.startswith("|"):
                    break
                rows.append([c.strip() for c in row.strip().strip("|").split("|")])
            return rows
    raise AssertionError(f"WIRING.md has no table starting {header_start!r}")


WIRING_TEXT = (HARDWARE / "WIRING.md").read_text(encoding="utf-8")


def test_filter_corners_follow_from_r_and_c() -> None:
    # First-order RC low-pass, fc = 1/(2*pi*R*C) (any circuits textbook; e.g. from memory:
    # Horowitz & Hill, The Art of Electronics, 3rd ed., section 1.7).
    rows = _table(WIRING_TEXT, "| pickup output | r | c |")
    assert len(rows) >= 2
    for cells in rows:
        r_ohm, c_farad = _quantity(cells[1], "Ω"), _quantity(cells[2], "F")
        stated_hz = _quantity(cells[3], "Hz")
        assert stated_hz == pytest.approx(1 / (2 * math.pi * r_ohm * c_farad), rel=2e-3), cells


def _buffered_corner_hz() -> float:
    cells = _table(WIRING_TEXT, "| pickup output | r | c |")[0]
    return 1 / (2 * math.pi * _quantity(cells[1], "Ω") * _quantity(cells[2], "F"))


def test_phase_lag_and_gain_table() -> None:
    # First-order low-pass: lag = atan(f/fc), gain = 1/sqrt(1 + (f/fc)^2) (same source).
    fc_hz = _buffered_corner_hz()
    rows = _table(WIRING_TEXT, "| 1x frequency | speed |")
    assert len(rows) >= 3
    for cells in rows:
        f_hz = _quantity(cells[0], "Hz")
        assert _quantity(cells[1], "rpm") == pytest.approx(60 * f_hz)
        lag_deg = float(cells[2].rstrip("°"))
        assert lag_deg == pytest.approx(math.degrees(math.atan(f_hz / fc_hz)), abs=0.06)
        assert float(cells[3]) == pytest.approx(1 / math.sqrt(1 + (f_hz / fc_hz) ** 2), abs=6e-4)


def test_lag_drift_per_ten_percent_of_rc() -> None:
    # First-order low-pass lag atan(f/fc) (same source): at the corner a 10 % larger R*C
    # moves it by atan(1.1) - 45 deg; at a fifth of the corner by (x/(1+x^2)) ln 1.1 rad.
    text = " ".join(WIRING_TEXT.split())
    m = re.search(r"moves the lag by \*\*([\d.]+)°\*\*.*?at a fifth of the corner it moves by "
                  r"([\d.]+)°", text)
    assert m, "the lag drift sentence is gone from WIRING.md"
    assert float(m.group(1)) == pytest.approx(math.degrees(math.atan(1.1)) - 45.0, abs=0.06)
    x = 0.2
    assert float(m.group(2)) == pytest.approx(math.degrees(x / (1 + x * x) * math.log(1.1)),
                                              abs=0.006)
    assert "24,000 rpm (a 1x of 400 Hz)" in text and "at least 5 times the highest 1x" in text


def test_fast_filter_table() -> None:
    rows = _table(WIRING_TEXT, "| pickup output | r | c |")
    fc_hz = 1 / (2 * math.pi * _quantity(rows[1][1], "Ω") * _quantity(rows[1][2], "F"))
    table = _table(WIRING_TEXT, "| 1x frequency (fc 2340.5 hz) | speed |")
    assert fc_hz >= 5 * max(_quantity(r[0], "Hz") for r in table)  # the five-times rule
    for cells in table:
        f_hz = _quantity(cells[0], "Hz")
        assert _quantity(cells[1], "rpm") == pytest.approx(60 * f_hz)
        assert float(cells[2].rstrip("°")) == pytest.approx(
            math.degrees(math.atan(f_hz / fc_hz)), abs=0.06)
        assert float(cells[3]) == pytest.approx(1 / math.sqrt(1 + (f_hz / fc_hz) ** 2), abs=6e-4)


def test_module_plus_board_rc_figures() -> None:
    # 33 kOhm (32 inside the chip + 1 at the board) into 1.1 uF (module 0.1 + board 1 uF)
    fc_hz = 1 / (2 * math.pi * 33e3 * 1.1e-6)
    text = " ".join(WIRING_TEXT.split())
    m = re.search(r"corner at about ([\d.]+) Hz \(33 kΩ into 1\.1 µF\) and cut a 60 Hz 1x about "
                  r"(\d+) times", text)
    assert m
    assert float(m.group(1)) == pytest.approx(fc_hz, abs=0.06)
    assert float(m.group(2)) == pytest.approx(math.sqrt(1 + (60 / fc_hz) ** 2), abs=0.5)


def test_module_as_sold_figures() -> None:
    # Same first-order formulas; ADXL335-class bandwidth 1/(2*pi*32 kOhm*C) (ADXL335 data sheet).
    text = " ".join(WIRING_TEXT.split())
    m = re.search(r"\(fc = ([\d.]+) Hz\) the same figures at (\d+) Hz are ([\d.]+)° and (\d+\.\d+)",
                  text)
    assert m, "module-as-sold sentence not found in WIRING.md"
    stated_fc_hz, f_hz, lag_deg, gain = (float(g) for g in m.groups())
    fc_hz = 1 / (2 * math.pi * 32e3 * 0.1e-6)
    assert stated_fc_hz == pytest.approx(fc_hz, abs=0.06)
    assert lag_deg == pytest.approx(math.degrees(math.atan(f_hz / fc_hz)), abs=0.06)
    assert gain == pytest.approx(1 / math.sqrt(1 + (f_hz / fc_hz) ** 2), abs=6e-4)


def test_attenuation_table() -> None:
    fc_hz = _buffered_corner_hz()
    for cells in _table(WIRING_TEXT, "| frequency | what it is |"):
        f_hz = _quantity(cells[0], "Hz")
        gain = 1 / math.sqrt(1 + (f_hz / fc_hz) ** 2)
        assert float(cells[2]) == pytest.approx(gain, abs=6e-4)
        assert _quantity(cells[3], "dB") == pytest.approx(-20 * math.log10(gain), abs=0.06)
    # 3940 Hz folds onto 60 Hz at 4000 samples/s (sampling theorem: f_alias = |f - fs|).
    assert "3940 Hz | folds onto a 60 Hz 1x" in WIRING_TEXT


def test_adc_step_table() -> None:
    # ATmega328P datasheet, "ADC Conversion Result": ADC = V_in * 1024 / V_ref (from memory).
    for cells in _table(WIRING_TEXT, "| pickup output | reference |"):
        reference_mv = _quantity(cells[1], "V") * 1e3
        step_mv = _quantity(cells[2], "V") * 1e3
        assert step_mv == pytest.approx(reference_mv / 1024, abs=0.006)
        steps_per_g = float(re.search(r"about (\d+)", cells[3]).group(1))
        assert steps_per_g == pytest.approx(300 / (reference_mv / 1024), abs=0.6)


# --- the flip-test script in CALIBRATION.md -----------------------------------------------

def _flip_script() -> str:
    text = (HARDWARE / "CALIBRATION.md").read_text(encoding="utf-8")
    match = re.search(r"<!-- flip-test-script.*?-->\s*```python\n(.*?)^```", text,
                      re.MULTILINE | re.DOTALL)
    assert match, "CALIBRATION.md lost its marked flip-test script"
    return match.group(1)


def _capture(path: Path, per_channel: list[list[int]], reference_mv: int) -> None:
    """A plain frame file: identity, then interleaved two-channel sample blocks."""
    identity = {"protocol_version": 1, "definition_hash": 0, "firmware_major": 0,
                "firmware_minor": 1, "firmware_patch": 0, "board_id": 1, "tick_hz": 2_000_000,
                "adc_bits": 10, "adc_reference_mv": reference_mv, "aperture_delay_ticks": 3,
                "max_channels": 2, "channel0_pin": 0, "channel1_pin": 1, "tach_pin": 8,
            "adc_reference_kind": 1, "reset_flags": 1}
    frames = [encode_frame("identity", 0, identity)]
    interleaved = [v for pair in zip(*per_channel, strict=True) for v in pair]
    for block, start in enumerate(range(0, len(interleaved), 100)):
        frames.append(encode_frame("samples", block + 1, {
            "first_index": start, "channels": 2, "start_tick": 400, "period_ticks": 250,
            "samples": interleaved[start:start + 100]}))
    path.write_bytes(b"".join(frames))


def _run_flip_script(tmp_path: Path, up: list[list[int]], down: list[list[int]],
                     reference_mv: int) -> str:
    script = tmp_path / "flip_test.py"
    script.write_text(_flip_script(), encoding="utf-8")
    _capture(tmp_path / "up.cap", up, reference_mv)
    _capture(tmp_path / "down.cap", down, reference_mv)
    done = subprocess.run([sys.executable, str(script), "up.cap", "down.cap"], cwd=tmp_path,
                          capture_output=True, text=True, timeout=60)
    assert done.returncode == 0, done.stderr
    return done.stdout


def _figures(output: str) -> dict[int, tuple[float, float]]:
    found = {}
    for line in output.splitlines():
        m = re.search(r"channel (\d).*sensitivity (-?[\d.]+) mV/g, zero offset (-?[\d.]+) mV",
                      line)
        if m:
            found[int(m.group(1))] = (float(m.group(2)), float(m.group(3)))
    return found


def test_flip_script_recovers_sensitivity_and_offset(tmp_path: Path) -> None:
    # Flip test: axis up reads zero + S, axis down reads zero - S (gravity +/-1 g; common
    # practice, e.g. the orientation figure in analog MEMS accelerometer data sheets), and
    # counts = V * 1024 / V_ref (ATmega328P datasheet). Counts here are chosen, not measured.
    # The board reports a 3300 mV reference, so a script that ignored the identity message
    # and assumed 5000 mV would fail. (One run only: each run starts three interpreters.)
    up = [[400] * 300 + [401] * 300, [512] * 600]
    down = [[277] * 600, [511] * 200 + [512] * 400]
    figures = _figures(_run_flip_script(tmp_path, up, down, reference_mv=3300))
    step_mv = 3300 / 1024
    up0, down0 = 400.5 * step_mv, 277 * step_mv
    up1, down1 = 512 * step_mv, (511 * 200 + 512 * 400) / 600 * step_mv
    assert set(figures) == {0, 1}
    assert figures[0] == pytest.approx(((up0 - down0) / 2, (up0 + down0) / 2), abs=0.051)
    assert figures[1] == pytest.approx(((up1 - down1) / 2, (up1 + down1) / 2), abs=0.051)


def test_calibration_worked_example_adds_up() -> None:
    text = (HARDWARE / "CALIBRATION.md").read_text(encoding="utf-8")
    m = re.search(r"up ([\d.]+) mV, down ([\d.]+) mV gives a\s+sensitivity of .*? = ([\d.]+) "
                  r"mV/g and a zero offset of\s+.*? = ([\d.]+) mV", text, re.DOTALL)
    assert m, "worked example not found in CALIBRATION.md"
    up_mv, down_mv, sens, zero = (float(g) for g in m.groups())
    assert sens == pytest.approx((up_mv - down_mv) / 2, abs=0.05)
    assert zero == pytest.approx((up_mv + down_mv) / 2, abs=0.05)


def test_calibration_tilt_and_gravity_remarks() -> None:
    text = " ".join((HARDWARE / "CALIBRATION.md").read_text(encoding="utf-8").split())
    # A tilted axis sees g*cos(tilt) (geometry); 9.80665 m/s^2 is standard gravity (CGPM 1901).
    m = re.search(r"tilting the axis (\d+)° .*? less than ([\d.]+) % \(cos \d+° = ([\d.]+)\)", text)
    assert m, "tilt remark not found in CALIBRATION.md"
    tilt_deg, bound_pct, cosine = (float(g) for g in m.groups())
    assert cosine == pytest.approx(math.cos(math.radians(tilt_deg)), abs=5e-4)
    assert (1 - math.cos(math.radians(tilt_deg))) * 100 < bound_pct
    assert "9.80665 m/s²" in text


def test_safety_page_trial_weight_figures() -> None:
    # Centripetal force F = m*r*omega^2 and tip speed v = omega*r (Newtonian mechanics, any
    # physics textbook); weight = m*g with standard gravity 9.80665 m/s^2.
    text = " ".join((HARDWARE / "SAFETY.md").read_text(encoding="utf-8").split())
    m = re.search(r"A ([\d.]+) g washer at ([\d.]+) mm radius on a rotor turning at (\d+) rpm "
                  r"needs a holding force of about ([\d.]+) N, roughly (\d+) times its own "
                  r"weight, and if it comes loose it leaves at about ([\d.]+) m/s "
                  r"\(over (\d+) km/h\)", text)
    assert m, "trial-weight example not found in SAFETY.md"
    mass_g, radius_mm, speed_rpm, force_n, times, speed_m_s, over_km_h = map(float, m.groups())
    omega_rad_s = 2 * math.pi * speed_rpm / 60
    force = mass_g / 1000 * radius_mm / 1000 * omega_rad_s**2
    assert force_n == pytest.approx(force, rel=0.01)
    assert times == pytest.approx(force / (mass_g / 1000 * 9.80665), rel=0.03)
    tip_m_s = omega_rad_s * radius_mm / 1000
    assert speed_m_s == pytest.approx(tip_m_s, rel=0.01)
    assert tip_m_s * 3.6 > over_km_h
