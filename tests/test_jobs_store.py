"""Machine profiles and job records: YAML round trip, one-line schema errors, the workspace.

The demo job in tests/data/demo_bench_grinder_job.yaml is invented (a made-up bench grinder);
it exercises the file format, it is not a reference for any physical result.
"""

from __future__ import annotations

import contextlib
import copy
import dataclasses
import io
import os
from pathlib import Path

import pytest

from trueturn.cli.main import main
from trueturn.errors import UserError
from trueturn.jobs import (
    CoefficientSet,
    Confirmation,
    InfluenceEntry,
    MachineProfile,
    MassChange,
    PendingStep,
    Pickup,
    Plane,
    PlaneLayout,
    RunEntry,
    SchemaError,
    Workspace,
)
from trueturn.jobs import store as store_module
from trueturn.jobs.schema import to_data
from trueturn.jobs.store import (
    atomic_write_text,
    default_workspace,
    document_text,
    parse_document,
    read_document,
    resolve_workspace,
)
from trueturn.model import Reading

DEMO_JOB = Path(__file__).parent / "data" / "demo_bench_grinder_job.yaml"


def shop_fan() -> MachineProfile:
    """An invented single-plane shop fan (demo numbers)."""
    return MachineProfile(
        name="Shop fan 500", rotor_kind="5-blade fan", rotor_mass_kg=1.9,
        speed_min_rpm=1300, speed_max_rpm=1450, max_speed_rpm=1500, rotation="ccw",
        planes=[Plane("hub", radius_mm=120.0, layout=PlaneLayout(kind="angles",
                                                               angles_deg=[0, 72, 144, 216, 288]))],
        pickups=[Pickup("motor", sensitivity_mv_per_g=330.0, direction="vertical")])


def reading(sensor: str = "motor", amplitude: float = 3.1, phase_deg: float = 40.0) -> Reading:
    return Reading(sensor=sensor, amplitude=amplitude, unit="mm/s rms", phase_deg=phase_deg,
                   confidence_deg=2.5, revolutions=48, speed_rpm=1420.0)


def run(index: int, kind: str = "initial") -> RunEntry:
    return RunEntry(index=index, kind=kind, time="2026-11-30T10:00:00Z", speed_rpm=1420.0,
               readings=[reading()])


# --------------------------------------------------------------------------------------------
# Round trip


def test_demo_job_round_trips_exactly() -> None:
    job = read_document(DEMO_JOB, "job")
    text = document_text("job", job)
    again = parse_document(text, "job", "again.yaml")
    assert again == job
    assert to_data(again) == to_data(job)
    assert document_text("job", again) == text  # stable: saving twice gives the same bytes


def test_profile_round_trip_keeps_every_field(tmp_path: Path) -> None:
    ws = Workspace(tmp_path)
    profile = shop_fan()
    path = ws.save_machine(profile)
    assert path == tmp_path / "machines" / "shop-fan-500.yaml"
    loaded = ws.load_machine("Shop fan 500")
    assert loaded == profile
    assert loaded.planes[0].layout.position_angles_deg() == (0, 72, 144, 216, 288)
    assert ws.machine_names() == ["Shop fan 500"]


def test_equal_layout_positions() -> None:
    layout = PlaneLayout(kind="equal", positions=8, offset_deg=10.0)
    assert layout.position_angles_deg() == (10.0, 55.0, 100.0, 145.0, 190.0, 235.0, 280.0, 325.0)


# --------------------------------------------------------------------------------------------
# Schema errors: one line naming file, line and field


def demo_text() -> str:
    return DEMO_JOB.read_text(encoding="utf-8")


def error_of(text: str) -> str:
    with pytest.raises(SchemaError) as info:
        parse_document(text, "job", "jobs/x.yaml")
    message = str(info.value)
    assert "\n" not in message
    assert message.startswith("jobs/x.yaml:")
    return message


def line_of(text: str, needle: str) -> int:
    for number, line in enumerate(text.splitlines(), start=1):
        if needle in line:
            return number
    raise AssertionError(needle)


def test_missing_field_names_the_field_and_line() -> None:
    text = demo_text()
    broken = text.replace("  rotor_mass_kg: 2.4\n", "")
    message = error_of(broken)
    assert "machine.rotor_mass_kg: missing field" in message
    assert message.startswith(f"jobs/x.yaml:{line_of(broken, 'machine:')}:")


def test_negative_mass_names_the_field_and_line() -> None:
    text = demo_text().replace("  rotor_mass_kg: 2.4\n", "  rotor_mass_kg: -2.4\n")
    message = error_of(text)
    line = line_of(text, "rotor_mass_kg: -2.4")
    assert message == (f"jobs/x.yaml:{line}: machine.rotor_mass_kg: must be greater than 0, "
                       "got -2.4")


def test_negative_part_mass_inside_a_run() -> None:
    text = demo_text()
    first = text.index("mass_g: 2.0")
    text = text[:first] + "mass_g: -2.0" + text[first + len("mass_g: 2.0"):]
    message = error_of(text)
    assert ".changes[0].mass_g: must be greater than 0, got -2" in message
    assert message.startswith(f"jobs/x.yaml:{line_of(text, 'mass_g: -2.0')}:")


def test_wrong_unit_in_a_reading() -> None:
    text = demo_text().replace("unit: mm/s rms", "unit: cm/s rms", 1)
    message = error_of(text)
    assert "runs[0].readings[0].unit: 'cm/s rms' is not one of: mm/s rms, mm/s pk, in/s pk" in message
    assert message.startswith(f"jobs/x.yaml:{line_of(text, 'unit: cm/s rms')}:")


def test_reading_units_cover_every_dsp_unit_label() -> None:
    """A job must be able to store whatever unit the DSP layer reports (and read it back)."""
    import typing

    from trueturn.dsp.units import UNITS
    from trueturn.model.units import VIBRATION_UNIT_LABELS, VibrationUnit

    assert set(UNITS) <= set(VIBRATION_UNIT_LABELS)
    assert typing.get_args(VibrationUnit) == VIBRATION_UNIT_LABELS


def test_wrong_unit_preference() -> None:
    text = demo_text().replace("    mass: g\n", "    mass: lb\n")
    message = error_of(text)
    assert "machine.units.mass: 'lb' is not one of: g, oz" in message


def test_unknown_field_is_a_typo_not_silently_dropped() -> None:
    text = demo_text().replace("  rotor_mass_kg: 2.4\n", "  rotor_mass_kg: 2.4\n  rotor_mas_kg: 3\n")
    message = error_of(text)
    assert "machine.rotor_mas_kg: unknown field" in message


def test_cross_field_rule_and_references() -> None:
    text = demo_text().replace("sensor: left bearing", "sensor: left bearng", 1)
    message = error_of(text)
    assert "runs[0]: sensor 'left bearng' is not a pickup of the machine" in message
    assert message.startswith(f"jobs/x.yaml:{line_of(text, '- index: 1')}:")  # that run's line
    text = demo_text().replace("  speed_min_rpm: 2800\n", "  speed_min_rpm: 3500\n")
    assert "machine.speed_min_rpm: must not exceed speed_max_rpm" in error_of(text)


def test_yaml_syntax_error_and_empty_file() -> None:
    message = error_of("schema_version: 1\nkind: job\njob_id: [unclosed\n")
    assert message.startswith("jobs/x.yaml:4: not valid YAML")
    assert error_of("") == "jobs/x.yaml:1: the file is empty"
    assert error_of("schema_version: 1\nkind: machine\n").endswith("kind: expected 'job', got 'machine'")


def test_newer_schema_is_refused_in_one_line() -> None:
    text = demo_text().replace("schema_version: 1", "schema_version: 99")
    message = error_of(text)
    assert "written by a newer trueturn" in message


def test_older_schema_goes_through_the_migrations(monkeypatch: pytest.MonkeyPatch) -> None:
    """A file of this version read by the next version's tool is lifted by its migration."""
    def rename_operator(data: dict) -> dict:
        data = dict(data)
        data["operator"] = data.pop("technician", "")
        return data

    now = store_module.SCHEMA_VERSION
    monkeypatch.setattr(store_module, "SCHEMA_VERSION", now + 1)
    monkeypatch.setitem(store_module.MIGRATIONS, "job",
                        {**store_module.MIGRATIONS["job"], now: rename_operator})
    text = demo_text().replace("operator: J. Example", "technician: J. Example")
    job = parse_document(text, "job", "old.yaml")
    assert job.operator == "J. Example"
    assert document_text("job", job).splitlines()[1] == f"schema_version: {now + 1}"


def test_a_version_1_job_reads_with_the_axial_positions_renamed() -> None:
    """Version 1 named axial positions ``axial_position_mm`` and the removal flag ``removal``;
    version 2 uses the model's names. The shipped version-1 demo job still reads, with the
    same numbers, and is written back as version 2 with the new names."""
    old = (Path(__file__).parent / "data" / "demo_bench_grinder_job.yaml").read_text()
    assert "schema_version: 1" in old and "axial_position_mm: 290.0" in old
    job = parse_document(old, "job", "demo.yaml")
    assert [p.axial_mm for p in job.machine.planes] == [0.0, 290.0]
    text = document_text("job", job)
    assert "schema_version: 2" in text and "axial_position_mm" not in text
    assert parse_document(text, "job", "again.yaml").machine.planes == job.machine.planes


def test_cli_prints_one_line_and_exits_2_for_a_broken_job(tmp_path: Path) -> None:
    bad = tmp_path / "bad.yaml"
    bad.write_text(demo_text().replace("  rotor_mass_kg: 2.4\n", "  rotor_mass_kg: -1\n"))
    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        rc = main(["report", str(bad), "-o", str(tmp_path / "r.html")])
    assert rc == 2
    lines = err.getvalue().splitlines()
    assert len(lines) == 1
    assert "bad.yaml:" in lines[0] and "machine.rotor_mass_kg" in lines[0]
    assert not (tmp_path / "r.html").exists()


# --------------------------------------------------------------------------------------------
# Workspace: atomic saves, resume, history, coefficients


def test_atomic_write_replaces_and_leaves_no_temp(tmp_path: Path) -> None:
    target = tmp_path / "a" / "job.yaml"
    target.parent.mkdir()  # a save never creates the folder it was given (trueturn.files)
    atomic_write_text(target, "one\n")
    atomic_write_text(target, "two\n")
    assert target.read_text() == "two\n"
    assert sorted(p.name for p in target.parent.iterdir()) == ["job.yaml"]


def test_job_saved_after_every_run_resumes_where_it_stopped(tmp_path: Path) -> None:
    ws = Workspace(tmp_path)
    job = ws.new_job(shop_fan(), when="2026-11-30T09:58:00Z")
    assert job.job_id == "2026-11-30-shop-fan-500-001"
    ws.append_run(job, run(1))
    trial = MassChange(action="attach", plane="hub", mass_g=5.0, angle_deg=72.0, purpose="trial",
                       position=2)
    confirm = Confirmation(time="2026-11-30T10:02:00Z", step="attach trial weight",
                           standstill_by_tach=True, tach_rpm=0.0, text="stopped and unplugged")
    ws.record_pending(job, PendingStep(changes=[trial], confirmations=[confirm]))
    # The process dies here; a fresh workspace object reads the file back.
    resumed = Workspace(tmp_path).resume_job(job.job_id)
    assert resumed.next_run_index == 2
    assert resumed.parts_on_rotor() == [trial]
    ws2 = Workspace(tmp_path)
    ws2.append_run(resumed, run(2, "trial"))
    final = ws2.load_job(job.job_id)
    assert final.pending is None
    assert final.runs[1].changes == [trial] and final.runs[1].confirmations == [confirm]
    with pytest.raises(ValueError):
        ws2.append_run(final, run(5))


def test_second_job_gets_the_next_number_and_history_lists_both(tmp_path: Path) -> None:
    ws = Workspace(tmp_path)
    first = ws.new_job(shop_fan(), when="2026-11-30T09:00:00Z")
    ws.append_run(first, run(1))
    ws.close_job(first)
    second = ws.new_job(shop_fan(), when="2026-11-30T15:00:00Z")
    assert second.job_id.endswith("-002")
    other = copy.deepcopy(shop_fan())
    other.name = "Lathe faceplate"
    ws.new_job(other, when="2026-11-30T16:00:00Z")
    history = ws.history("Shop fan 500")
    assert [h.job_id for h in history] == [first.job_id, second.job_id]
    assert [(h.status, h.runs) for h in history] == [("closed", 1), ("open", 0)]
    with pytest.raises(UserError, match="closed"):
        ws.resume_job(first.job_id)
    assert len(ws.job_summaries()) == 3


def test_coefficients_kept_per_machine_and_speed(tmp_path: Path) -> None:
    ws = Workspace(tmp_path)
    assert ws.find_coefficients("Shop fan 500", 1420.0) is None

    def coefficients(speed_rpm: float, amp: float) -> CoefficientSet:
        return CoefficientSet(speed_rpm=speed_rpm, unit="mm/s rms", job_id="j",
                              entries=[InfluenceEntry("motor", "hub", amp, 118.0)])

    ws.save_coefficients("Shop fan 500", coefficients(1420.0, 0.21))
    ws.save_coefficients("Shop fan 500", coefficients(950.0, 0.09))
    ws.save_coefficients("Shop fan 500", coefficients(1425.0, 0.22))  # replaces the 1420 set
    stored = ws.load_coefficient_file("Shop fan 500")
    assert [s.speed_rpm for s in stored.sets] == [950.0, 1425.0]
    assert ws.find_coefficients("Shop fan 500", 1400.0).entries[0].amp == 0.22
    assert ws.find_coefficients("Shop fan 500", 1200.0) is None
    (value,) = ws.find_coefficients("Shop fan 500", 960.0).matrix(["motor"], ["hub"])[0]
    assert abs(abs(value) - 0.09) < 1e-12


def test_workspace_choice_option_then_environment_then_platform(
        monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    monkeypatch.setenv("TRUETURN_WORKSPACE", str(tmp_path / "env"))
    assert resolve_workspace(str(tmp_path / "opt")) == tmp_path / "opt"
    assert resolve_workspace(None) == tmp_path / "env"
    monkeypatch.delenv("TRUETURN_WORKSPACE")
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "xdg"))
    if os.name == "posix" and not str(default_workspace()).endswith("Application Support/trueturn"):
        # XDG Base Directory Specification: $XDG_DATA_HOME/<app>
        assert resolve_workspace(None) == tmp_path / "xdg" / "trueturn"


def test_report_finds_a_job_by_id_in_the_workspace(tmp_path: Path,
                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    ws = Workspace(tmp_path / "ws")
    job = read_document(DEMO_JOB, "job")
    ws.save_job(job)
    monkeypatch.setenv("TRUETURN_WORKSPACE", str(tmp_path / "ws"))
    out = tmp_path / "r.md"
    assert main(["report", job.job_id, "-o", str(out)]) == 0
    assert out.read_text().startswith("# Balancing report: Bench grinder 200 mm")
    assert ws.find_job(f"{job.job_id}.yaml") == ws.job_path(job.job_id)  # name as listed
    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        assert main(["report", "no-such-job", "--workspace", str(tmp_path / "ws")]) == 2
    assert err.getvalue().count("\n") == 1 and "no job 'no-such-job'" in err.getvalue()


def test_a_job_that_would_not_read_back_is_never_written(tmp_path: Path) -> None:
    ws = Workspace(tmp_path)
    job = ws.new_job(shop_fan(), when="2026-11-30T09:00:00Z")
    before = ws.job_path(job.job_id).read_bytes()
    bad = run(1)
    bad.readings[0] = dataclasses.replace(bad.readings[0], unit="furlongs/fortnight")
    with pytest.raises(SchemaError, match=r"\(not saved\): runs\[0\]\.readings\[0\]\.unit"):
        ws.append_run(job, bad)
    assert ws.job_path(job.job_id).read_bytes() == before
    assert job.runs == [] and job.next_run_index == 1  # the job in memory is unchanged too


def test_job_in_a_file_of_the_persons_choosing(tmp_path: Path) -> None:
    ws = Workspace(tmp_path / "ws")
    job = ws.new_job(shop_fan(), when="2026-11-30T09:00:00Z")
    own = tmp_path / "customer" / "fan-job.yaml"
    own.parent.mkdir()  # the person's folder exists: trueturn creates only its own folders
    ws.append_run(job, run(1), path=own)
    ws.close_job(job, path=own)
    assert read_document(own, "job").status == "closed"
    assert ws.load_job(str(own)).runs == [run(1)]


def test_a_job_created_at_a_path_is_held_there_for_every_save(tmp_path: Path) -> None:
    ws = Workspace(tmp_path / "ws")
    own = tmp_path / "customer" / "fan job.yaml"
    own.parent.mkdir()
    job = ws.new_job(shop_fan(), when="2026-11-30T09:00:00Z", notes="four-run", path=own)
    assert job.job_id == "fan job" and ws.path_of(job) == own
    ws.record_pending(job, PendingStep(notes="hub cleaned"))
    assert ws.append_run(job, run(1)) == own
    assert ws.close_job(job) == own
    saved = read_document(own, "job")
    assert saved.status == "closed" and saved.notes == "four-run"
    assert saved.runs[0].notes == "hub cleaned" and saved.pending is None  # the notes merge
    assert not ws.jobs_dir.exists()
    with pytest.raises(UserError, match="exists"):
        ws.new_job(shop_fan(), path=own)  # never overwrites


def test_a_job_read_from_elsewhere_is_saved_back_there(tmp_path: Path) -> None:
    ws = Workspace(tmp_path / "ws")
    own = tmp_path / "fan.yaml"
    ws.new_job(shop_fan(), when="2026-11-30T09:00:00Z", path=own)
    again = Workspace(tmp_path / "ws").resume_job(str(own))
    ws_again = Workspace(tmp_path / "ws")
    job = ws_again.load_job(str(own))
    ws_again.append_run(job, run(1))
    assert read_document(own, "job").runs == [run(1)] and again.runs == []
    assert not ws.jobs_dir.exists()
    # a workspace job stays a workspace job
    mine = ws.new_job(shop_fan(), when="2026-11-30T09:00:00Z")
    loaded = ws.load_job(mine.job_id)
    assert ws.path_of(loaded) == ws.job_path(mine.job_id)


def test_failed_pending_and_closing_saves_leave_the_job_unchanged(tmp_path: Path) -> None:
    ws = Workspace(tmp_path)
    job = ws.new_job(shop_fan(), when="2026-11-30T09:00:00Z")
    ws.append_run(job, run(1))
    before_text = ws.job_path(job.job_id).read_bytes()
    before = copy.deepcopy(job)
    bad_part = MassChange("attach", "hub", -1.0, 0.0)  # refused by the file's limits
    with pytest.raises(SchemaError, match="mass_g"):
        ws.record_pending(job, PendingStep(changes=[bad_part]))
    assert job == before
    from trueturn.jobs import PlaneVerdict, VerdictEntry
    late = VerdictEntry(6.3, 1450.0, after_run=5, planes=[PlaneVerdict("hub", 10.0, 20.0, True)],
                        passed=True)  # run 5 never was
    with pytest.raises(SchemaError, match="verdict: refers to run 5"):
        ws.close_job(job, late)
    assert job == before and job.status == "open" and job.verdict is None
    assert ws.job_path(job.job_id).read_bytes() == before_text


# --------------------------------------------------------------------------------------------
# Our YAML writer against PyYAML's reader (reference library: PyYAML, pure-Python SafeLoader
# and libyaml CSafeLoader)

from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

_scalars = (st.none() | st.booleans() | st.integers(-10**12, 10**12)
            | st.floats(allow_nan=False) | st.text(max_size=30))
_keys = st.text(min_size=1, max_size=12)
_documents = st.recursive(
    _scalars, lambda inner: st.lists(inner, max_size=4) | st.dictionaries(_keys, inner, max_size=4),
    max_leaves=25)


@settings(max_examples=60, deadline=None)
@given(st.dictionaries(_keys, _documents, min_size=1, max_size=5))
def test_yaml_writer_reads_back_identically_with_pyyaml(data: dict) -> None:
    import yaml

    from trueturn.jobs.schema import dump_yaml_text

    text = dump_yaml_text(data, header="a header\nsecond line")
    assert yaml.load(text, Loader=yaml.SafeLoader) == data  # noqa: S506 - SafeLoader
    if hasattr(yaml, "CSafeLoader"):
        assert yaml.load(text, Loader=yaml.CSafeLoader) == data  # noqa: S506


def test_yaml_writer_quotes_what_yaml_would_read_as_something_else() -> None:
    from trueturn.jobs.schema import dump_yaml_text

    tricky = ["yes", "No", "on", "null", "~", "1.5", "2026-11-28", "0x1F", "a: b", "#x", "-x",
              "x ", " x", "", "3e5", ".inf", "@x", "a\nb", "\u2028", "\x85", "\ufeff"]
    import yaml

    text = dump_yaml_text({"values": tricky, "map": {t or "empty": t for t in tricky}})
    assert yaml.safe_load(text) == {"values": tricky, "map": {t or "empty": t for t in tricky}}
    assert "name: Bench grinder 200 mm" in DEMO_JOB.read_text()  # plain where it is safe


def test_cli_lists_jobs_and_a_machines_history(tmp_path: Path) -> None:
    ws = Workspace(tmp_path)
    first = ws.new_job(shop_fan(), when="2026-11-30T09:00:00Z")
    ws.append_run(first, run(1))
    ws.new_job(read_document(DEMO_JOB, "job").machine, when="2026-11-30T10:00:00Z")
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert main(["report", "--list", "--machine", "Shop fan 500",
                     "--workspace", str(tmp_path)]) == 0
    lines = out.getvalue().splitlines()
    assert len(lines) == 1 and lines[0].startswith(first.job_id) and "1 runs" in lines[0]
    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        assert main(["report", "--workspace", str(tmp_path)]) == 2
    assert err.getvalue().count("\n") == 1
