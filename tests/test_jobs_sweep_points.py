"""A kept sweep's points live in a side file beside the job (issue #20, the refresh's cost):
written once when the sweep is kept and before the job that names it, so a save of the job
does not grow with its sweeps; the job loads, resumes and reports without them, saying in
one line why (never a traceback, never a lost job).

Crash safety as tests/test_jobs_crash.py: SIGKILL at seeded points inside the saves
(tests/kill_points.py); the job read back after every kill names only side files that were
written whole (POSIX.1-2017 rename(): the new name refers to the old file or the new one).
Sweep numbers here are invented (no physics is checked: the app-level sweeps are checked
against the simulator's own resonances in tests/test_ui_sweep.py).
"""

from __future__ import annotations

import os
import random
import sys
from dataclasses import replace
from pathlib import Path

import pytest

import kill_points
from cli_helpers import run_cli
from test_jobs_crash import lathe, make_run
from trueturn.errors import UserError
from trueturn.jobs import Workspace
from trueturn.jobs import store as store_module
from trueturn.jobs.records import (
    JobRecord,
    ResonanceEntry,
    RunEntry,
    SweepEntry,
    SweepPointEntry,
    SweepPointsFile,
    SweepValueEntry,
)
from trueturn.jobs.report import html_report
from trueturn.jobs.store import read_document

POINTS = 200  # about a full coast-down of the demo grinder


def make_sweep(kind: str, run_index: int, points: int = POINTS) -> SweepEntry:
    """An invented sweep whose numbers follow from its run and kind (checked on reading)."""
    shift = run_index + (0.5 if kind == "runup" else 0.0)
    rows = [SweepPointEntry(300.0 + 3.0 * k + shift, 2, [
        SweepValueEntry(name, 0.1 + 0.01 * k + shift, (7.0 * k + 30 * n) % 360, 0.01)
        for n, name in enumerate(("headstock", "tailstock"))]) for k in range(points)]
    return SweepEntry(kind, "2026-11-30T12:00:00Z", "mm/s pk", rows[0].speed_rpm,  # type: ignore[arg-type]
                      rows[-1].speed_rpm, rows,
                      [ResonanceEntry(700.0, "headstock", 0.05, 680.0, 720.0, 4, 3.0)],
                      900.0)


def bare(sweeps: list[SweepEntry]) -> list[SweepEntry]:
    """The sweeps without the names of their side files (to compare with the kept ones)."""
    return [replace(sw, points_file=None) for sw in sweeps]


def with_runup(index: int) -> RunEntry:
    run = make_run(index)
    run.sweeps = [make_sweep("runup", index)]
    return run


class Writes:
    """Counts the files written through the store's one atomic write (by name)."""

    def __init__(self, monkeypatch: pytest.MonkeyPatch) -> None:
        self.names: list[str] = []
        real = store_module.atomic_write_text

        def counted(path: str | os.PathLike[str], text: str) -> Path:
            self.names.append(Path(path).name)
            return real(path, text)

        monkeypatch.setattr(store_module, "atomic_write_text", counted)


def test_a_sweep_is_written_once_beside_the_job_and_read_back(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    ws = Workspace(tmp_path)
    job = ws.new_job(lathe(), when="2026-11-30T12:00:00Z")
    path = ws.job_path(job.job_id)
    writes = Writes(monkeypatch)
    ws.append_run(job, with_runup(1))  # the run and its run-up: one save of the job
    side = f"{job.job_id}.run-1-runup.sweep.yml"
    assert writes.names == [side, path.name]
    ws.record_sweep(job, 1, make_sweep("coastdown", 1))
    assert writes.names[2:] == [f"{job.job_id}.run-1-coastdown.sweep.yml", path.name]
    for k in range(2, 5):  # later saves write the job only, never the kept sweeps again
        ws.append_run(job, make_run(k))
    assert writes.names[4:] == [path.name] * 3
    # the job file names its side files and holds no points; its resonances stay in it
    on_disk = read_document(path, "job")
    assert [s.points_file for s in on_disk.runs[0].sweeps] == [
        side, f"{job.job_id}.run-1-coastdown.sweep.yml"]
    assert all(not s.points and s.resonances for s in on_disk.runs[0].sweeps)
    assert "headstock" not in path.read_text(encoding="utf-8").split("sweeps:")[1].split(
        "points_file")[0].split("resonances")[0]
    # the job loaded through the workspace has every point back, as kept
    loaded = ws.load_job(job.job_id)
    assert bare(loaded.runs[0].sweeps) == [make_sweep("runup", 1), make_sweep("coastdown", 1)]
    assert loaded.runs[0].sweeps[0].points_problem is None
    # the listing of jobs never takes a side file for a job
    assert [s.job_id for s in ws.job_summaries()] == [job.job_id]


def test_a_job_saves_in_the_same_time_with_or_without_sweeps_by_its_size(
        tmp_path: Path) -> None:
    # the save's cost not growing with the sweeps, told by the bytes written (no timing):
    # the job file with eight sweeps of 200 points is within 10 % of the one without
    plain, swept = Workspace(tmp_path / "a"), Workspace(tmp_path / "b")
    jobs = [ws.new_job(lathe(), when="2026-11-30T12:00:00Z") for ws in (plain, swept)]
    for k in range(1, 5):
        plain.append_run(jobs[0], make_run(k))
        swept.append_run(jobs[1], with_runup(k))
        swept.record_sweep(jobs[1], k, make_sweep("coastdown", k))
    sizes = [ws.job_path(j.job_id).stat().st_size for ws, j in zip((plain, swept), jobs,
                                                                   strict=True)]
    side = sum(p.stat().st_size for p in swept.jobs_dir.glob("*.sweep.yml"))
    assert side > 10 * sizes[1]  # the points are kept, beside it
    assert sizes[1] < 1.1 * sizes[0] + 8 * 600  # a name and a resonance per sweep


def test_a_missing_or_wrong_side_file_is_one_line_and_the_job_still_loads(
        tmp_path: Path) -> None:
    ws = Workspace(tmp_path)
    job = ws.new_job(lathe(), when="2026-11-30T12:00:00Z")
    ws.append_run(job, with_runup(1))
    ws.record_sweep(job, 1, make_sweep("coastdown", 1))
    ws.append_run(job, with_runup(2))
    runup1 = ws.jobs_dir / f"{job.job_id}.run-1-runup.sweep.yml"
    coast1 = ws.jobs_dir / f"{job.job_id}.run-1-coastdown.sweep.yml"
    runup2 = ws.jobs_dir / f"{job.job_id}.run-2-runup.sweep.yml"
    runup1.unlink()  # lost
    coast1.write_text("schema_version: 2\nkind: sweep\npoints: [\n", encoding="utf-8")  # torn
    runup2.write_bytes(b"")  # emptied
    loaded = ws.resume_job(job.job_id)  # the job itself loads and resumes
    problems = [s.points_problem for r in loaded.runs for s in r.sweeps]
    assert all(p is not None and "\n" not in p for p in problems), problems
    assert str(runup1) in problems[0]
    assert str(coast1) in problems[1] and str(runup2) in problems[2]
    assert [len(s.points) for r in loaded.runs for s in r.sweeps] == [0, 0, 0]
    # the report says it in place of each plot, and keeps the resonances found
    report = html_report(loaded)
    assert report.count("No plot of the") == 3 and "<td>700 rpm</td>" in report
    # the command line says it in one line per sweep, writes the report, exits 0
    code, _, err = run_cli(["report", job.job_id, "--workspace", str(tmp_path),
                            "-o", str(tmp_path / "r.html")])
    assert code == 0, err
    notes = [line for line in err.splitlines() if line.startswith("note:")]
    assert len(notes) == 3 and "Traceback" not in err
    assert (tmp_path / "r.html").is_file()
    # saved again, the job keeps naming the files it could not read (nothing forgotten)
    ws.append_run(loaded, make_run(3))
    again = read_document(ws.job_path(job.job_id), "job")
    assert [s.points_file for r in again.runs for s in r.sweeps] == [
        runup1.name, coast1.name, runup2.name]
    # a side file of another run is refused for this one, in one line
    ws.append_run(loaded, with_runup(4))
    (ws.jobs_dir / f"{job.job_id}.run-4-runup.sweep.yml").write_text(
        store_module.document_text("sweep", SweepPointsFile(
            job.job_id, 2, "runup", make_sweep("runup", 2).points)), encoding="utf-8")
    last = ws.load_job(job.job_id).runs[3].sweeps[0]
    assert last.points_problem is not None and "not the runup of run 4" in last.points_problem


def test_a_side_file_that_cannot_be_written_leaves_the_job_as_it_was(tmp_path: Path) -> None:
    ws = Workspace(tmp_path)
    job = ws.new_job(lathe(), when="2026-11-30T12:00:00Z")
    ws.append_run(job, make_run(1))
    path = ws.job_path(job.job_id)
    before = path.read_bytes()
    (ws.jobs_dir / f"{job.job_id}.run-2-runup.sweep.yml").mkdir()  # in the way: a folder
    with pytest.raises(UserError) as caught:
        ws.append_run(job, with_runup(2))
    assert "\n" not in str(caught.value)
    assert len(job.runs) == 1 and path.read_bytes() == before  # nothing half-kept


def test_a_job_written_before_side_files_loads_and_moves_its_points_out(
        tmp_path: Path) -> None:
    # the points inline, as jobs were saved before (no points_file): read as before
    ws = Workspace(tmp_path)
    job = ws.new_job(lathe(), when="2026-11-30T12:00:00Z")
    ws.append_run(job, with_runup(1))
    path = ws.job_path(job.job_id)
    inline = store_module.document_text("job", job)  # the whole job, points inline
    for side in ws.jobs_dir.glob("*.sweep.yml"):
        side.unlink()
    data = inline.replace(f'    points_file: "{job.job_id}.run-1-runup.sweep.yml"\n', "")
    assert "points_file" not in data
    path.write_text(data, encoding="utf-8")
    old: JobRecord = ws.load_job(job.job_id)
    assert bare(old.runs[0].sweeps) == [make_sweep("runup", 1)]
    ws.append_run(old, make_run(2))  # the next save keeps the points beside it
    assert read_document(path, "job").runs[0].sweeps[0].points == []
    assert bare(ws.load_job(job.job_id).runs[0].sweeps) == [make_sweep("runup", 1)]


def test_a_job_file_named_elsewhere_keeps_its_sweeps_beside_it(tmp_path: Path) -> None:
    ws = Workspace(tmp_path / "ws")
    folder = tmp_path / "shop"
    folder.mkdir()
    job = ws.new_job(lathe(), path=folder / "fan-7.yaml")
    ws.append_run(job, with_runup(1))
    assert (folder / "fan-7.run-1-runup.sweep.yml").is_file()
    assert not ws.jobs_dir.exists() or not list(ws.jobs_dir.iterdir())
    assert bare(ws.load_job(folder / "fan-7.yaml").runs[0].sweeps) == [make_sweep("runup", 1)]


def child_loop(root: Path, job_id: str) -> None:
    ws = Workspace(root)
    job = ws.resume_job(job_id)
    while len(job.runs) < 6:
        ws.append_run(job, with_runup(job.next_run_index))
        ws.record_sweep(job, len(job.runs), make_sweep("coastdown", len(job.runs), 40))


@pytest.mark.skipif(not hasattr(os, "fork") or sys.platform == "darwin",
                    reason="needs fork() (POSIX, Linux)")
def test_sigkill_while_keeping_sweeps_never_names_a_missing_side_file(tmp_path: Path) -> None:
    rng = random.Random(20261202)
    ws = Workspace(tmp_path)
    job = ws.new_job(lathe(), when="2026-11-30T12:00:00Z")
    killed: set[int] = set()
    for _ in range(40):
        outcome = kill_points.run_child(lambda: child_loop(tmp_path, job.job_id),
                                        kill_at=rng.randint(1, 12))
        if not outcome.killed:
            assert outcome.exit_code == 0  # the child finished its work
            break
        killed.add(outcome.killed_at)
        loaded = ws.load_job(job.job_id)
        for run in loaded.runs:
            assert run.readings == make_run(run.index).readings
            for sw in run.sweeps:  # every sweep the job names is whole beside it
                assert sw.points_problem is None, sw.points_problem
                assert replace(sw, points_file=None) == make_sweep(sw.kind, run.index, 40 if sw.kind == "coastdown"
                                        else POINTS)
    assert killed == {kill_points.WRITE_HALF, kill_points.BEFORE_RENAME,
                      kill_points.AFTER_RENAME}
    final = ws.load_job(job.job_id)
    assert all(sw.points for run in final.runs for sw in run.sweeps)


def test_a_job_saved_in_another_folder_takes_its_sweeps_with_it(tmp_path: Path) -> None:
    # as the app's "save elsewhere" after a storage fault (JobKeeper.move_to): the side
    # files are written again beside the job's new file, from the points in memory
    ws = Workspace(tmp_path / "ws")
    job = ws.new_job(lathe(), when="2026-11-30T12:00:00Z")
    ws.append_run(job, with_runup(1))
    elsewhere = Workspace(tmp_path / "usb")
    (tmp_path / "usb").mkdir()
    moved = elsewhere.save_job(job, tmp_path / "usb" / "fan.yaml")
    assert (tmp_path / "usb" / "fan.run-1-runup.sweep.yml").is_file()
    assert bare(elsewhere.load_job(moved).runs[0].sweeps) == [make_sweep("runup", 1)]
