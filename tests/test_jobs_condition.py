"""The machine's condition in a job and its report (issue #22 item 3 of the lead's order:
severity and the unbalance judgement in the HTML/Markdown report).

The judgement comes from a real analysis of simulated captures (invented demo scenarios:
the bench grinder and the misaligned belt drive), is kept in the job file (optional fields
of schema version 2) and read back into the report. Zones: ISO 10816-1:1995 Annex B Class I
boundaries (from memory); the unbalance rules are common practice, no source.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest

from trueturn.dsp.analysis import Analysis, analyze_capture
from trueturn.errors import UserError
from trueturn.jobs import JobRecord, Workspace
from trueturn.jobs.condition import severity_entries, unbalance_entry
from trueturn.jobs.records import SeverityEntry
from trueturn.jobs.report import condition_notes, html_report, markdown_report
from trueturn.jobs.store import read_document
from trueturn.link.codec import encode_frame
from trueturn.link.ports import open_port

DEMO_JOB = Path(__file__).parent / "data" / "demo_bench_grinder_job.yaml"


def _analysis(scenario: str) -> Analysis:
    from trueturn.dsp.units import PickupProfile
    from trueturn.sim import load_scenario

    sc = load_scenario(scenario)
    port = open_port(f"sim://{scenario}?realtime=0&seed=2")
    try:
        port.write(encode_frame("start", 1))
        raw = bytearray()
        while len(raw) < 90_000:
            raw += port.read(8192)
    finally:
        port.close()
    profiles = [PickupProfile(p.name, sensitivity_v_per_g=e.sensitivity_v_per_g)
                for p, e in zip(sc.rotor.pickups, sc.electrical, strict=True)]
    return analyze_capture(bytes(raw), profiles=profiles, unit="mm/s rms",
                           mains_hz=float(sc.motor.mains_hz))


@pytest.fixture(scope="module")
def belt() -> Analysis:
    return _analysis("belt-misaligned")


def _with_condition(job: JobRecord, analysis: Analysis, run: int = 0) -> JobRecord:
    runs = list(job.runs)
    runs[run] = dataclasses.replace(runs[run], severity=severity_entries(analysis.severity),
                                    unbalance=unbalance_entry(analysis.unbalance))
    return dataclasses.replace(job, runs=runs)


def test_condition_round_trips_through_the_job_file(tmp_path, belt):
    job = _with_condition(read_document(DEMO_JOB, "job"), belt)
    ws = Workspace(tmp_path)
    ws.save_job(job)
    loaded = ws.load_job(job.job_id)
    assert loaded.runs[0].severity == job.runs[0].severity
    assert loaded.runs[0].unbalance == job.runs[0].unbalance
    assert loaded.runs[0].unbalance.verdict == "balancing_may_not_help"
    # a run without them reads as before (optional fields)
    assert loaded.runs[-1].severity == [] and loaded.runs[-1].unbalance is None


def test_report_shows_severity_and_says_balancing_may_not_help(belt):
    job = _with_condition(read_document(DEMO_JOB, "job"), belt)
    severity = belt.severity[0]
    assert severity.velocity_rms_mm_s is not None and severity.zone is not None
    for text in (html_report(job), markdown_report(job)):
        assert "Machine condition" in text
        assert f"{severity.velocity_rms_mm_s:.2f} mm/s rms" in text
        assert "balancing may not help" in text
        assert "check alignment and mounting bolts first" in text
        assert "ISO 10816-1" in text


def test_a_balanced_rotor_in_a_bad_zone_is_said_plainly(belt):
    job = read_document(DEMO_JOB, "job")
    assert job.verdict is not None and job.verdict.passed
    runs = list(job.runs)
    runs[-1] = dataclasses.replace(runs[-1], severity=[
        SeverityEntry(runs[-1].readings[0].sensor, 6.2, "D")])
    job = dataclasses.replace(job, runs=runs)
    notes = " ".join(condition_notes(job))
    assert "meets its balance grade" in notes and "zone D" in notes
    assert "meets its balance grade" in html_report(job)


def test_a_refused_severity_is_not_shown_as_a_number():
    job = read_document(DEMO_JOB, "job")
    runs = list(job.runs)
    runs[0] = dataclasses.replace(runs[0], severity=[
        SeverityEntry(runs[0].readings[0].sensor, None, None, "uncalibrated")])
    text = markdown_report(dataclasses.replace(job, runs=runs))
    assert "no sensitivity known" in text


def _starts(scenario: str, seeds: tuple[int, int]) -> Analysis:
    """Two starts of one machine (invented demo scenario), compared (dsp.compare_starts)."""
    from trueturn.dsp.analysis import compare_starts

    first, second = (_analysis_seed(scenario, seed) for seed in seeds)
    return compare_starts(first, second)


def _analysis_seed(scenario: str, seed: int) -> Analysis:
    from trueturn.dsp.units import PickupProfile
    from trueturn.sim import load_scenario

    sc = load_scenario(scenario)
    port = open_port(f"sim://{scenario}?realtime=0&seed={seed}")
    try:
        port.write(encode_frame("start", 1))
        raw = bytearray()
        while len(raw) < 90_000:
            raw += port.read(8192)
    finally:
        port.close()
    profiles = [PickupProfile(p.name, sensitivity_v_per_g=e.sensitivity_v_per_g)
                for p, e in zip(sc.rotor.pickups, sc.electrical, strict=True)]
    return analyze_capture(bytes(raw), profiles=profiles, unit="mm/s rms",
                           mains_hz=float(sc.motor.mains_hz))


def test_a_second_start_and_a_stop_round_trip_and_show_in_the_report(tmp_path):
    # the loose flange (invented scenario): the 1x moved between starts; the job is
    # stopped there by the person's choice (issue #22); seeds 1 and 7 settle 93 deg apart
    from trueturn.jobs.records import SecondStartEntry, StopEntry

    both = _starts("loose-hub", (1, 7))
    assert both.second_start is not None
    job = read_document(DEMO_JOB, "job")
    # stopped after the as-found run: no other runs, no verdict, still open
    job = dataclasses.replace(job, runs=job.runs[:1], verdict=None, influence=None,
                              status="open", pending=None)
    job = _with_condition(job, both)
    job.runs[0] = dataclasses.replace(job.runs[0], unbalance=None)
    ws = Workspace(tmp_path)
    ws.save_job(job)
    sensor = job.runs[0].readings[0].sensor  # the demo job's pickup names
    from trueturn.model import Reading

    readings = [Reading(sensor, r.amplitude, r.unit, r.phase_deg, min(180.0, r.confidence_deg),
                        r.revolutions, r.steady, r.speed_rpm, r.confidence_radius)
                for r in both.second_start.readings]
    second = SecondStartEntry("2026-12-02T10:00:00Z", both.second_start.speed_rpm, readings)
    ws.record_second_start(job, second, unbalance_entry(both.unbalance))
    ws.stop_job(job, StopEntry("balancing_may_not_help", 1, "2026-12-02T10:01:00Z",
                               ["phase_repeatable"]))
    loaded = ws.load_job(job.job_id)
    assert loaded.status == "closed" and loaded.verdict is None
    assert loaded.stopped == job.stopped and loaded.runs[0].second_start == second
    moved = [e for e in loaded.runs[0].unbalance.evidence if e.code == "phase_repeatable"]
    assert moved and not moved[0].ok and moved[0].phases_deg is not None
    for text in (html_report(loaded), markdown_report(loaded)):
        assert "Stopped after run 1 by the person" in text
        assert "No balance verdict" in text
        assert "1x not the same after a restart" in text
        assert "moved between starts" in text
        assert "2nd start" in text
    with pytest.raises(UserError, match="closed"):
        ws.record_second_start(loaded, second, None)


def test_a_repeated_1x_is_said_in_the_report(tmp_path):
    both = _starts("bench-grinder", (1, 2))
    job = _with_condition(read_document(DEMO_JOB, "job"), both)
    notes = " ".join(condition_notes(job))
    assert "started twice" in notes and "repeatable, as an unbalance is" in notes
