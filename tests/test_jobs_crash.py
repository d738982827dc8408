"""A job file survives ``kill -9`` at any moment: never corrupt, never empty, never behind.

Each round forks a child process (it inherits the imported modules, so a round costs
milliseconds instead of an interpreter start-up) that resumes the job and saves it in a loop.
The child pauses inside every save (tests/kill_points.py) and the parent sends SIGKILL at a
seeded point, then checks the file: it must parse and validate, and be exactly the file of the
last save that finished its rename. Rename-based atomic replacement is the POSIX guarantee this
relies on (POSIX.1-2017, rename(): "a link named new shall remain visible to other threads
throughout the renaming operation and refer either to the file referred to by new or old").
"""

from __future__ import annotations

import os
import random
import signal
import sys
from pathlib import Path

import pytest

import kill_points
from trueturn.jobs import (
    MachineProfile,
    PendingStep,
    Pickup,
    Plane,
    RunEntry,
    Workspace,
)
from trueturn.jobs.store import read_document
from trueturn.model import Reading

pytestmark = pytest.mark.skipif(not hasattr(os, "fork") or sys.platform == "darwin",
                                reason="needs fork() (POSIX, Linux)")

MAX_RUNS = 12
KILLS = 20


def lathe() -> MachineProfile:
    """An invented lathe faceplate (demo numbers)."""
    return MachineProfile(
        name="Lathe faceplate", rotor_kind="faceplate with fixture", rotor_mass_kg=6.5,
        speed_min_rpm=300, speed_max_rpm=900, max_speed_rpm=1000, rotation="ccw",
        planes=[Plane("faceplate", radius_mm=140.0)],
        pickups=[Pickup("headstock", sensitivity_mv_per_g=100.0),
                 Pickup("tailstock", sensitivity_mv_per_g=100.0)])


def make_run(index: int) -> RunEntry:
    """A run whose numbers are a function of its index, so the parent can check content."""
    readings = [Reading(sensor=name, amplitude=index + k / 10, unit="mm/s pk",
                        phase_deg=(37.0 * index + 90 * k) % 360, confidence_deg=1.5,
                        revolutions=32, speed_rpm=600.0) for k, name in
                enumerate(("headstock", "tailstock"))]
    return RunEntry(index=index, kind="initial" if index == 1 else "trim",
               time=f"2026-11-30T12:{index % 60:02d}:00Z", speed_rpm=600.0, readings=readings,
               notes="x" * (200 * index))  # grows the file so writes take a little longer


def child_loop(root: Path, job_id: str) -> None:
    ws = Workspace(root)
    job = ws.resume_job(job_id)
    tick = 0
    while True:
        tick += 1
        if len(job.runs) < MAX_RUNS:
            ws.append_run(job, make_run(job.next_run_index))
        else:
            ws.record_pending(job, PendingStep(notes=f"waiting {tick}"))


def check_job_file(path: Path, at_least_runs: int) -> int:
    text = path.read_bytes()
    assert text, "empty job file"
    job = read_document(path, "job")  # parses and validates, or raises
    assert len(job.runs) >= at_least_runs
    for run in job.runs:
        assert run == make_run(run.index)
    return len(job.runs)


def test_sigkill_during_saves_never_corrupts_and_resume_continues(tmp_path: Path) -> None:
    # Each child is killed at a seeded point inside a save (half written, before or after the
    # rename; tests/kill_points.py), never after a random sleep: the same kills on an idle
    # or a loaded machine.
    rng = random.Random(20261130)
    ws = Workspace(tmp_path)
    job = ws.new_job(lathe(), when="2026-11-30T12:00:00Z")
    path = ws.job_path(job.job_id)
    committed = [path.read_bytes()]  # the file as the last finished save left it

    def look(point: int) -> None:
        if point == kill_points.AFTER_RENAME:
            committed.append(path.read_bytes())

    runs_seen = 0
    points_killed: set[int] = set()
    for _ in range(KILLS):
        outcome = kill_points.run_child(lambda: child_loop(tmp_path, job.job_id),
                                        kill_at=rng.randint(1, 15), on_point=look)
        assert outcome.killed, "child stopped on its own (an exception in the save loop?)"
        points_killed.add(outcome.killed_at)  # type: ignore[arg-type]
        if outcome.killed_at in (kill_points.WRITE_HALF, kill_points.BEFORE_RENAME):
            assert path.read_bytes() == committed[-1]  # never behind, never torn
        else:  # killed just after the rename: the new file is in place
            committed.append(path.read_bytes())
        runs_seen = check_job_file(path, at_least_runs=runs_seen)
    assert points_killed == {kill_points.WRITE_HALF, kill_points.BEFORE_RENAME,
                             kill_points.AFTER_RENAME}
    assert runs_seen == MAX_RUNS
    # Leftover temp files from killed saves are never taken for jobs.
    assert [p.name for p in ws.jobs_dir.glob("*.yaml")] == [path.name]
    assert len(ws.job_summaries()) == 1
    # And the job can be continued and closed normally afterwards.
    resumed = ws.resume_job(job.job_id)
    assert resumed.next_run_index == MAX_RUNS + 1
    ws.append_run(resumed, make_run(MAX_RUNS + 1))
    ws.close_job(resumed)
    assert read_document(path, "job").status == "closed"


def test_kill_between_write_and_rename_keeps_the_previous_file(tmp_path: Path) -> None:
    """The worst moment, made certain: the temp file is written and synced, then SIGKILL."""
    ws = Workspace(tmp_path)
    job = ws.new_job(lathe(), when="2026-11-30T12:00:00Z")
    ws.append_run(job, make_run(1))
    before = ws.job_path(job.job_id).read_bytes()
    pid = os.fork()
    if pid == 0:
        try:
            real_fsync = os.fsync

            def fsync_then_die(fd: int) -> None:
                real_fsync(fd)
                os.kill(os.getpid(), signal.SIGKILL)

            os.fsync = fsync_then_die
            ws.append_run(job, make_run(2))
        finally:
            os._exit(3)
    _, status = os.waitpid(pid, 0)
    assert os.WIFSIGNALED(status) and os.WTERMSIG(status) == signal.SIGKILL
    assert ws.job_path(job.job_id).read_bytes() == before
    temps = list(ws.jobs_dir.glob(".tt-*.tmp"))
    assert len(temps) == 1 and temps[0].stat().st_size > len(before)  # the new text, orphaned
    assert len(ws.resume_job(job.job_id).runs) == 1
