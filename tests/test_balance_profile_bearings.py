"""Bearing positions in the machine profile: old profiles still load; the report says where
the verdict was judged. Uses the invented demo job tests/data/demo_bench_grinder_job.yaml."""

from __future__ import annotations

import copy
import dataclasses
from pathlib import Path

import pytest

from trueturn.errors import UserError
from trueturn.jobs.profiles import Bearing
from trueturn.jobs.report import html_report, markdown_report, verdict_at_bearings
from trueturn.jobs.store import document_text, parse_document, read_document

DEMO_JOB = Path(__file__).parent / "data" / "demo_bench_grinder_job.yaml"


@pytest.fixture
def job():
    return read_document(DEMO_JOB, "job")


def test_old_profile_without_bearings_loads_and_is_judged_in_the_planes(job):
    assert job.machine.bearings == [] and job.machine.bearing_positions_mm() is None
    assert job.machine.cg_axial_mm is None
    assert not verdict_at_bearings(job)
    assert "not judged at the bearings" in markdown_report(job)


def test_profile_with_bearings_round_trips(job):
    machine = copy.deepcopy(job.machine)
    machine.bearings = [Bearing("motor end", 60.0), Bearing("free end", 230.0)]
    machine.cg_axial_mm = 140.0
    machine.planes[0] = dataclasses.replace(machine.planes[0], max_mass_g=12.0)
    again = parse_document(document_text("machine", machine), "machine", "m.yaml")
    assert again.bearing_positions_mm() == (60.0, 230.0)
    assert again.cg_axial_mm == 140.0 and again.planes[0].max_mass_g == 12.0


@pytest.mark.parametrize(("bearings", "needle"), [
    ([Bearing("a", 10.0)], "exactly two"),
    ([Bearing("a", 10.0), Bearing("b", 10.0)], "different positions"),
    ([Bearing("a", 10.0), Bearing("a", 20.0)], "used twice"),
])
def test_bad_bearings_are_one_line(job, bearings, needle):
    machine = copy.deepcopy(job.machine)
    machine.bearings = bearings
    with pytest.raises(UserError) as info:
        parse_document(document_text("machine", machine), "machine", "m.yaml")
    assert needle in str(info.value) and "\n" not in str(info.value)


def test_report_names_the_bearings_when_the_verdict_is_at_them(job):
    assert job.verdict is not None
    job.machine.bearings = [Bearing("motor end", 60.0), Bearing("free end", 230.0)]
    for pv, name in zip(job.verdict.planes, ("motor end", "free end"), strict=False):
        pv.plane = name
    assert verdict_at_bearings(job)
    page = html_report(job)
    assert "<th>Bearing</th>" in page and "judged at the bearing planes" in page
    assert "| Bearing |" in markdown_report(job)
