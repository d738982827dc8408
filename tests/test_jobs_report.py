"""Job report: HTML with inline SVG (well-formed, no network), Markdown, CSV, units, plot geometry.

Uses the invented demo job tests/data/demo_bench_grinder_job.yaml (made-up numbers).
"""

from __future__ import annotations

import contextlib
import copy
import csv
import dataclasses
import io
import math
import re
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import pytest

from test_ui_procedure import Rig
from test_ui_resume import fit_otherwise
from trueturn.cli.main import main
from trueturn.jobs import JobRecord, Workspace
from trueturn.jobs.records import SuggestedMass
from trueturn.jobs.report import (
    CAUTIONS,
    confidence_radius,
    html_report,
    markdown_report,
    readings_csv,
)
from trueturn.jobs.store import read_document
from trueturn.procedure.guide import Mode

DEMO_JOB = Path(__file__).parent / "data" / "demo_bench_grinder_job.yaml"
XHTML = "{http://www.w3.org/1999/xhtml}"
SVG = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module")
def job() -> JobRecord:
    return read_document(DEMO_JOB, "job")


@pytest.fixture(scope="module")
def page(job: JobRecord) -> ET.Element:
    return ET.fromstring(html_report(job, generated="2026-12-01T10:00:00Z"))


def table(page: ET.Element, css_class: str) -> list[list[str]]:
    found = [t for t in page.iter(f"{XHTML}table") if t.get("class") == css_class]
    assert len(found) == 1, css_class
    return [["".join(cell.itertext()) for cell in row] for row in found[0].iter(f"{XHTML}tr")]


def test_html_is_well_formed_and_self_contained(job: JobRecord) -> None:
    text = html_report(job)
    ET.fromstring(text)  # polyglot HTML: also well-formed XML

    class Tags(HTMLParser):
        def __init__(self) -> None:
            super().__init__()
            self.tags: list[str] = []

        def handle_starttag(self, tag: str, attrs: list) -> None:
            self.tags.append(tag)

    parser = Tags()
    parser.feed(text)
    assert "script" not in parser.tags and "link" not in parser.tags and "img" not in parser.tags
    urls = set(re.findall(r"https?://[^\"' )]+", text))
    assert urls <= {"http://www.w3.org/1999/xhtml", "http://www.w3.org/2000/svg"}
    assert "@page" in text and "@media print" in text


def test_before_after_table_per_pickup(page: ET.Element, job: JobRecord) -> None:
    rows = table(page, "before-after")
    assert rows[0] == ["Pickup", "Before (run 1)", "Phase", "After (run 4)", "Phase", "Change"]
    assert [r[0] for r in rows[1:]] == ["left bearing", "right bearing"]
    first, last = job.runs[0].readings[0], job.runs[-1].readings[0]
    assert rows[1][1] == f"{first.amplitude:.3f} mm/s rms"
    assert rows[1][3] == f"{last.amplitude:.3f} mm/s rms"
    assert rows[1][5] == f"{(last.amplitude - first.amplitude) / first.amplitude * 100:+.0f} %"


def test_runs_corrections_confirmations_and_verdict_are_listed(page: ET.Element,
                                                               job: JobRecord) -> None:
    assert len(table(page, "runs")) == 1 + len(job.runs)
    corrections = table(page, "corrections")
    assert corrections[1][:5] == ["after run 3", "left wheel", "add", "4.70 g", "19.5\u00b0"]
    assert "at position 1 (0\u00b0)" in corrections[1][5]
    changes = table(page, "changes")
    assert len(changes) - 1 == sum(len(r.changes) for r in job.runs)
    confirmations = table(page, "confirmations")
    assert len(confirmations) - 1 == sum(len(r.confirmations) for r in job.runs)
    assert all(row[3].startswith("yes") for row in confirmations[1:])
    verdict = table(page, "verdict")
    assert verdict[1] == ["left wheel", "7.6 g\u00b7mm (0.20 g at 38.0 mm)", "24.5 g\u00b7mm", "within"]
    line = "".join(next(e for e in page.iter() if e.get("id") == "verdict").itertext())
    assert "meets balance quality grade G 6.3 (ISO 21940-11:2016)" in line
    text = "".join(page.itertext())
    for caution in CAUTIONS:
        assert caution in text


def test_polar_plots_draw_each_run_at_its_phase_with_its_confidence(page: ET.Element,
                                                                    job: JobRecord) -> None:
    polars = [s for s in page.iter(f"{SVG}svg") if s.get("class") == "polar"]
    assert len(polars) == len(job.machine.pickups)
    for svg, pickup in zip(polars, job.machine.pickups, strict=True):
        groups = [g for g in svg.iter(f"{SVG}g") if g.get("class") == "run-vector"]
        assert [int(g.get("data-run")) for g in groups] == [r.index for r in job.runs]
        scales = []
        for g, run in zip(groups, job.runs, strict=True):
            reading = run.reading(pickup.name)
            line = g.find(f"{SVG}line")
            cx, cy = float(line.get("x1")), float(line.get("y1"))
            dx, dy = float(line.get("x2")) - cx, cy - float(line.get("y2"))  # y up
            # Rotor turns cw seen from the pickup side, so angles grow counter-clockwise on
            # paper from 0 at the top: paper angle (math convention) = 90 + phase.
            paper_deg = math.degrees(math.atan2(dy, dx))
            assert abs((paper_deg - 90.0 - reading.phase_deg + 180) % 360 - 180) < 0.2
            length = math.hypot(dx, dy)
            scales.append(length / reading.amplitude)
            circle = next(c for c in g.iter(f"{SVG}circle") if c.get("class") == "confidence")
            expected = confidence_radius(reading.amplitude, reading.confidence_deg) * scales[-1]
            assert float(circle.get("r")) == pytest.approx(max(expected, 0.8), abs=0.01)
        assert max(scales) - min(scales) < 0.02 * max(scales)  # one scale per plot


def test_confidence_radius_geometry() -> None:
    # A circle of radius A*sin(c) around the tip is seen from the origin under +/- c
    # (tangent from a point to a circle; elementary geometry).
    assert confidence_radius(2.0, 30.0) == pytest.approx(1.0)
    assert confidence_radius(2.0, 120.0) == pytest.approx(2.0)


def test_units_follow_the_machine_preferences(job: JobRecord) -> None:
    imperial = copy.deepcopy(job)
    imperial.machine.units.vibration = "in/s"
    imperial.machine.units.mass = "oz"
    imperial.machine.units.length = "in"
    page = ET.fromstring(html_report(imperial))
    rows = table(page, "before-after")
    # 1 in = 25.4 mm exactly (international yard and pound agreement, 1959; NIST SP 811 B.8)
    assert rows[1][1] == f"{job.runs[0].readings[0].amplitude / 25.4:.3f} in/s rms"
    # 1 oz (avoirdupois) = 28.349523125 g exactly (NIST SP 811 B.8)
    corrections = table(page, "corrections")
    assert corrections[1][3] == f"{4.70 / 28.349523125:.3f} oz" == "0.166 oz"
    assert "1.496 in" in "".join(page.itertext())  # 38 mm radius


def test_markdown_has_the_same_tables(job: JobRecord) -> None:
    text = markdown_report(job)
    assert text.startswith("# Balancing report: Bench grinder 200 mm")
    assert "| Pickup | Before (run 1) | Phase | After (run 4) | Phase | Change |" in text
    assert "| left bearing | 2.653 mm/s rms | 313.3\u00b0 \u00b1 1.6\u00b0 |" in text
    assert "## Sign-off" in text and "Machine serial number: ____" in text
    assert "## Cautions" in text and "<svg" not in text


def test_csv_holds_every_reading_exactly(job: JobRecord) -> None:
    rows = list(csv.DictReader(io.StringIO(readings_csv(job))))
    assert len(rows) == sum(len(r.readings) for r in job.runs)
    for row, (run, reading) in zip(rows, [(r, x) for r in job.runs for x in r.readings],
                                   strict=True):
        assert int(row["run"]) == run.index and row["sensor"] == reading.sensor
        assert float(row["amplitude"]) == reading.amplitude
        assert float(row["phase_deg"]) == reading.phase_deg
        assert float(row["confidence_deg"]) == reading.confidence_deg


def test_report_of_a_new_job_without_runs(tmp_path: Path, job: JobRecord) -> None:
    fresh = Workspace(tmp_path).new_job(job.machine, when="2026-12-01T08:00:00Z")
    page = ET.fromstring(html_report(fresh))
    assert "No verdict recorded yet." in "".join(page.itertext())
    assert table(page, "before-after") == [["Pickup", "Before", "Phase", "After", "Phase",
                                            "Change"]]
    grade = dict(tuple(r) for r in table(page, "kv grade"))
    assert grade["Service speed"].endswith("(highest working speed of the profile)")
    assert "No runs recorded yet." in "".join(page.itertext())
    assert len(table(page, "runs")) == 1
    text = markdown_report(fresh)
    assert "No verdict recorded yet." in text and "No hands-on steps recorded." in text


def test_cli_report_writes_html_and_csv(tmp_path: Path) -> None:
    out, sheet = tmp_path / "r.html", tmp_path / "r.csv"
    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        rc = main(["report", str(DEMO_JOB), "-o", str(out), "--csv", str(sheet)])
    assert rc == 0
    ET.parse(out)
    assert sheet.read_text().startswith("job_id,run,kind,label,time,sensor,amplitude")
    stdout = io.StringIO()
    with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(io.StringIO()):
        assert main(["report", str(DEMO_JOB), "-o", "-", "--format", "md"]) == 0
    assert stdout.getvalue().startswith("# Balancing report")


def test_unit_conversion_keeps_the_detector() -> None:
    from trueturn.jobs.profiles import convert_vibration

    # 1 in = 25.4 mm exactly, so 1 mil = 25.4 um (NIST SP 811 B.8); rms stays rms.
    assert convert_vibration(25.4, "mm/s rms", "in/s") == (1.0, "in/s rms")
    assert convert_vibration(1.0, "in/s pk", "mm/s") == (25.4, "mm/s pk")
    assert convert_vibration(50.8, "um pk-pk", "in/s", length="in") == (2.0, "mil pk-pk")
    assert convert_vibration(3.0, "mil pk-pk", "mm/s", length="mm") == pytest.approx(
        (76.2, "um pk-pk"))
    assert convert_vibration(0.4, "g pk", "in/s") == (0.4, "g pk")
    assert convert_vibration(0.02, "V pk", "mm/s") == (0.02, "V pk")


def test_plot_uses_the_dsp_confidence_radius_when_stored(job: JobRecord) -> None:
    from trueturn.jobs.report import polar_svg

    with_radius = copy.deepcopy(job)
    for run in with_radius.runs:
        run.readings = [dataclasses.replace(r, confidence_radius=r.amplitude / 2)
                        for r in run.readings]
    svg = ET.fromstring(polar_svg(with_radius, "left bearing"))
    for g in (g for g in svg.iter(f"{SVG}g") if g.get("class") == "run-vector"):
        line = g.find(f"{SVG}line")
        length = math.dist((float(line.get("x1")), float(line.get("y1"))),
                           (float(line.get("x2")), float(line.get("y2"))))
        circle = next(c for c in g.iter(f"{SVG}circle") if c.get("class") == "confidence")
        assert float(circle.get("r")) == pytest.approx(max(length / 2, 0.8), abs=0.02)


def test_an_open_job_shows_no_trial_run_as_after(job: JobRecord) -> None:
    # An open job stopped after its trial-weight run: the trial reading is a measurement
    # step, so nothing may stand in the "After" column, and the page says why.
    open_job = dataclasses.replace(copy.deepcopy(job), status="open", verdict=None,
                                   runs=copy.deepcopy(job.runs[:2]))
    assert open_job.runs[1].kind == "trial"
    page = ET.fromstring(html_report(open_job))
    rows = table(page, "before-after")
    assert rows[0][3] == "After"
    assert all(row[3] == "-" and row[4] == "-" and row[5] == "-" for row in rows[1:])
    assert "trial-weight runs are measurement steps" in "".join(page.itertext())
    assert "| - | - | - |" in markdown_report(open_job)


def test_e_per_u_per_and_the_service_speed(page: ET.Element, job: JobRecord) -> None:
    # ISO 21940-11:2016 (grade G = e_per * omega): e_per = G / omega at the maximum service speed,
    # U_per = e_per * m (G in mm/s, omega = 2 pi n / 60 in rad/s; e_per in um = g mm / kg).
    assert job.verdict is not None
    omega = 2 * math.pi * job.verdict.speed_rpm / 60
    e_per_um = 1000 * job.verdict.grade / omega
    grade = dict(tuple(r) for r in table(page, "kv grade"))
    assert grade["Service speed"] == f"{job.verdict.speed_rpm:g} rpm"
    assert grade["e_per"] == f"{e_per_um:.3g} \u00b5m (g\u00b7mm/kg)" == "20.4 \u00b5m (g\u00b7mm/kg)"
    assert grade["U_per (whole rotor)"] == f"{e_per_um * job.machine.rotor_mass_kg:.1f} g\u00b7mm"


def test_one_phase_format_and_times_with_their_zone(page: ET.Element) -> None:
    phases = [row[2] for row in table(page, "before-after")[1:]]
    phases += [row[4] for row in table(page, "before-after")[1:]]
    phases += [row[3] for row in table(page, "influence")[1:]]
    for row in table(page, "runs")[1:]:
        phases += [cell.split(" at ", 1)[1] for cell in row[4:6]]
    assert len(phases) == 2 + 2 + 4 + 8
    for phase in phases:  # "202.0 deg", never "202 deg" beside "313.3 deg"
        assert re.fullmatch(r"\d{1,3}\.\d\u00b0( \u00b1 \d+\.\d\u00b0)?", phase), phase
    job_rows = {r[0]: r[1] for t in page.iter(f"{XHTML}table") if t.get("class") == "kv"
                for r in (["".join(c.itertext()) for c in row] for row in t.iter(f"{XHTML}tr"))}
    assert job_rows["Started"] == "2026-11-28 14:02 UTC"
    assert "report generated 2026-12-01 10:00 UTC" in "".join(page.itertext())


def test_times_in_other_zones_are_shown_in_utc() -> None:
    from trueturn.jobs.report import short_time, time_text

    # ISO 8601 offsets: 15:02+01:00 is 14:02 UTC
    assert time_text("2026-11-28T15:02:10+01:00") == "2026-11-28 14:02 UTC"
    assert short_time("2026-11-28T14:02:10Z") == "2026-11-28 14:02"
    assert time_text("2026-11-28T14:02:10") == "2026-11-28 14:02 (zone?)"  # never called UTC
    assert time_text("yesterday") == "yesterday"


def test_imperial_job_uses_its_units_throughout(job: JobRecord) -> None:
    imperial = copy.deepcopy(job)
    imperial.machine.units.vibration = "in/s"
    imperial.machine.units.mass = "oz"
    imperial.machine.units.length = "in"
    imperial.notes = ""  # the person's own words may name any unit
    imperial.machine.name = "Bench grinder 8 in"
    page = ET.fromstring(html_report(imperial))
    text = "".join(next(page.iter(f"{XHTML}body")).itertext())
    # no metric figure left: unbalance, rotor mass, lengths, vibration, influence
    for metric in ("g\u00b7mm", " kg", " mm ", "mm/s", " \u00b5m", " per g"):
        assert metric not in text.replace("g\u00b7mm/kg", ""), metric
    verdict = table(page, "verdict")
    # 1 oz in = 28.349523125 g x 25.4 mm = 720.08 g mm (NIST SP 811 B.8)
    number, unit = verdict[1][2].split(" ")
    assert unit == "oz\u00b7in" and float(number) == pytest.approx(24.5 / (28.349523125 * 25.4),
                                                                   rel=2e-3)
    assert verdict[1][1].split(" ")[1] == "oz\u00b7in"
    grade = dict(tuple(r) for r in table(page, "kv grade"))
    # 1 lb = 0.45359237 kg (NIST SP 811 B.8); 1 mil = 25.4 um
    assert grade["Rotor mass"] == f"{2.4 / 0.45359237:.3g} lb" == "5.29 lb"
    assert grade["e_per"].endswith(" mil")
    influence = table(page, "influence")
    assert influence[1][2].endswith("in/s rms per oz")
    assert float(influence[1][2].split()[0]) == pytest.approx(0.5843 / 25.4 * 28.349523125,
                                                              rel=1e-3)


def test_page_footer_carries_the_job_id_safely(job: JobRecord) -> None:
    from trueturn.jobs.report import page_css

    odd = dataclasses.replace(job, job_id='x"; } body { display: none } </style><b>')
    text = html_report(odd)
    style = text[text.index("<style>"):text.index("</style>")]
    css = page_css(odd.job_id)
    assert css in style and "<" not in css and css.count('"') == 10
    assert "counter(page)" in css and "counter(pages)" in css
    # CSS Syntax Level 3, 4.3.7: \000022 followed by a space is the character '"'
    assert "x\\000022 \\00003b  \\00007d  body" in css


def test_report_has_lines_for_serial_number_and_signature(page: ET.Element) -> None:
    rows = table(page, "signoff")
    assert [r[0] for r in rows] == ["Machine serial number", "Balanced by (name)", "Signature",
                                    "Date"]
    assert all(r[1] == "" for r in rows)


def test_runs_differ_by_shape_and_labels_keep_off_the_markers(job: JobRecord) -> None:
    from trueturn.jobs.report import polar_svg

    for pickup in job.machine.pickups:
        svg = ET.fromstring(polar_svg(job, pickup.name))
        groups = [g for g in svg.iter(f"{SVG}g") if g.get("class") == "run-vector"]
        assert len({g.get("data-shape") for g in groups}) == len(groups)
        tips = []
        for g in groups:
            line = g.find(f"{SVG}line")
            tips.append((float(line.get("x2")), float(line.get("y2"))))
        for label in (t for t in svg.iter(f"{SVG}text") if t.get("class") == "label"):
            x, y = float(label.get("x")), float(label.get("y")) - 4.0  # centre of a 12-unit digit
            # every marker (8 units across) at least a marker and half a digit away
            assert min(math.dist((x, y), tip) for tip in tips) > 4 + 4


def _fitted_otherwise(job: JobRecord) -> JobRecord:
    """The demo job with its first correction part fitted otherwise: the person weighed a
    1.70 g part where the procedure asked for 1.83 g on position 1 (the job keeps both,
    issue #17)."""
    fitted = copy.deepcopy(job)
    change = next(ch for run in fitted.runs for ch in run.changes
                  if ch.action == "attach" and ch.purpose == "correction")
    change.mass_g = 1.7
    change.suggested = SuggestedMass(mass_g=1.83, angle_deg=0.0, position=1)
    return fitted


def test_the_changes_show_the_suggested_mass_beside_the_fitted_one(job: JobRecord) -> None:
    page = ET.fromstring(html_report(_fitted_otherwise(job)))
    changes = table(page, "changes")
    assert changes[0][-1] == "Suggested" and changes[0][4] == "Mass"
    differing = [row for row in changes[1:] if row[-1] != "-"]
    assert len(differing) == 1
    assert (differing[0][4], differing[0][-1]) == ("1.70 g", "1.83 g at position 1 (0\u00b0)")
    # a job where every part went on as suggested has no such column
    plain = table(ET.fromstring(html_report(job)), "changes")
    assert "Suggested" not in plain[0]
    assert "| Suggested |" in markdown_report(_fitted_otherwise(job))


def test_the_suggested_mass_is_in_the_profiles_units(job: JobRecord) -> None:
    imperial = _fitted_otherwise(job)
    imperial.machine.units.mass = "oz"
    imperial.machine.units.length = "in"
    changes = table(ET.fromstring(html_report(imperial)), "changes")
    row = next(r for r in changes[1:] if r[-1] != "-")
    # 1 oz (avoirdupois) = 28.349523125 g exactly (NIST SP 811, 2008, B.8): 1.70 g is
    # 0.0600 oz, 1.83 g is 0.0646 oz, each at the scale's 0.001 oz
    assert row[4] == f"{1.7 / 28.349523125:.3f} oz" == "0.060 oz"
    assert row[-1] == f"{1.83 / 28.349523125:.3f} oz at position 1 (0\u00b0)" == \
        "0.065 oz at position 1 (0\u00b0)"


def test_a_part_fitted_otherwise_in_the_app_reaches_the_report(tmp_path: Path) -> None:
    # the whole path: the procedure's suggestion, the person's entry, the job file, the report
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    keeper, suggested = fit_otherwise(rig, tmp_path, mass_g=0.5, angle_deg=30.0)
    rig.hands_on()  # confirmed: the keeper writes the part, as fitted, into the job
    assert keeper.path is not None
    changes = table(ET.fromstring(html_report(read_document(keeper.path, "job"))), "changes")
    assert changes[0][-1] == "Suggested"
    assert changes[1][4:6] == ["0.50 g", "30\u00b0"]
    assert changes[1][-1].startswith(f"{suggested.mass_g:.2f} g at ")
