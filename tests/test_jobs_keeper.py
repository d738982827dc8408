"""The app's job record goes through one persistence path (trueturn.jobs.store.Workspace),
whether the job lives in the workspace or in a file the person named with ``--job``: the same
content, the pending hands-on work (with its notes) folded into the next run, and a failed
save leaving the file and the job in memory as they were.

The procedure is driven on the simulated bench of tests/test_ui_procedure.py (the demo
scenarios' rotor physics); nothing here is checked against an outside source: these are
bookkeeping properties (common practice, no source).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest

from test_ui_procedure import Rig
from trueturn.errors import UserError
from trueturn.jobs import store
from trueturn.jobs.store import read_document
from trueturn.procedure.guide import Mode
from trueturn.schema import to_data
from trueturn.ui.jobfile import JobKeeper

NOTE = "set screw 2 was loose; tightened before the as-found run"


def follow(rig: Rig, keepers: list[JobKeeper], note_after_first_hands_on: str = "") -> None:
    """Feed the keepers what the app feeds them: every confirmed hands-on step and every
    recorded run, as the procedure reports them."""
    proc = rig.proc
    done, record = proc.hands_on_done, proc.record
    seen = {"hands_on": 0}

    def hands_on_done(*args: Any, **kwargs: Any) -> Any:
        changes = done(*args, **kwargs)
        for keeper in keepers:
            keeper.hands_on(proc, changes)
            if note_after_first_hands_on and seen["hands_on"] == 0:
                assert keeper.job is not None and keeper.job.pending is not None
                keeper.job.pending.notes = note_after_first_hands_on
        seen["hands_on"] += 1
        return changes

    def record_run(*args: Any, **kwargs: Any) -> Any:
        run = record(*args, **kwargs)
        for keeper in keepers:
            keeper.run(proc, run)
        return run

    proc.hands_on_done = hands_on_done  # type: ignore[method-assign]
    proc.record = record_run  # type: ignore[method-assign]


def without_times(data: Any) -> Any:
    """A job's data without what differs between two saves of the same work."""
    if isinstance(data, dict):
        return {k: without_times(v) for k, v in data.items()
                if k not in ("time", "created", "updated", "job_id")}
    if isinstance(data, list):
        return [without_times(v) for v in data]
    return data


def test_a_job_file_is_kept_exactly_like_a_workspace_job(tmp_path: Path) -> None:
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    job_file = tmp_path / "customer" / "grinder 2026.yaml"
    job_file.parent.mkdir()  # the person's folder: trueturn creates only the workspace's own
    in_workspace = JobKeeper(rig.profile, workspace=tmp_path / "ws")
    in_file = JobKeeper(rig.profile, workspace=tmp_path / "ws2", job_file=job_file)
    for keeper in (in_workspace, in_file):
        keeper.start(rig.proc)
    assert in_file.path == job_file and job_file.is_file()
    assert in_workspace.path is not None and in_workspace.path.parent == tmp_path / "ws" / "jobs"
    follow(rig, [in_workspace, in_file], note_after_first_hands_on=NOTE)
    rig.complete()
    rig.proc.finish()
    for keeper in (in_workspace, in_file):
        assert keeper.finish(rig.proc) == keeper.path
    assert in_file.path == job_file and in_file.report_path == job_file.with_suffix(".html")
    assert in_file.report_path.is_file()
    assert not (tmp_path / "ws2" / "jobs").exists()  # nothing of the file's job in a workspace

    mine = read_document(job_file, "job")
    theirs = read_document(in_workspace.path, "job")
    assert mine.job_id == "grinder 2026" and mine.status == "closed"
    # the pending work, its notes included, went into the first run; nothing left pending
    assert mine.pending is None and mine.runs[0].notes.startswith(NOTE)
    assert mine.runs[0].confirmations and mine.runs[1].changes
    assert without_times(to_data(mine)) == without_times(to_data(theirs))


def _to_the_first_run(rig: Rig) -> None:
    for _ in range(5):
        if rig.proc.step.kind == "run":
            return
        rig.hands_on()
    raise AssertionError(f"no run step: {rig.proc.step}")


def test_a_failed_save_leaves_the_file_and_keeps_every_step_in_memory(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # issue #18 item 3: a full disk never loses a step: the file stays as it was (atomic
    # save), the job in memory holds the run, and the next save writes the whole job
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    job_file = tmp_path / "fan.yaml"
    keeper = JobKeeper(rig.profile, workspace=tmp_path / "ws", job_file=job_file)
    keeper.start(rig.proc)
    follow(rig, [keeper], note_after_first_hands_on=NOTE)
    _to_the_first_run(rig)
    assert keeper.job is not None and keeper.job.pending is not None
    pending = keeper.job.pending
    before = job_file.read_bytes()

    real_write = store.atomic_write_text

    def disk_full(path: Any, text: str) -> Path:
        raise UserError(f"cannot write {path}: No space left on device")

    monkeypatch.setattr(store, "atomic_write_text", disk_full)
    rig.run()  # the run is measured; the file cannot take it, the job in memory does
    assert keeper.unsaved is not None and "No space left" in keeper.unsaved
    assert job_file.read_bytes() == before
    assert len(keeper.job.runs) == 1 and keeper.job.pending is None
    with pytest.raises(UserError, match="No space left"):
        keeper.save()

    monkeypatch.setattr(store, "atomic_write_text", real_write)
    assert keeper.save() == job_file and keeper.unsaved is None  # space freed: saved
    saved = read_document(job_file, "job")
    assert len(saved.runs) == 1 and saved.pending is None
    assert saved.runs[0].notes.startswith(NOTE)
    # nothing confirmed was lost by the failed save: the pending step's confirmations and
    # the one given since (the forces, when the run was armed) came with the run
    kept = saved.runs[0].confirmations
    assert kept[:len(pending.confirmations)] == pending.confirmations
    assert len(kept) == len(rig.proc.confirmations) > len(pending.confirmations)


def test_an_unwritable_workspace_keeps_the_job_in_memory_until_another_folder(
        tmp_path: Path) -> None:
    # issue #18 item 3: a file where the workspace folder should be
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    blocked = tmp_path / "ws"
    blocked.write_text("not a folder\n")
    keeper = JobKeeper(rig.profile, workspace=blocked)
    keeper.start(rig.proc)
    assert keeper.job is not None and keeper.unsaved is not None
    assert "cannot" in keeper.unsaved
    follow(rig, [keeper], note_after_first_hands_on=NOTE)
    _to_the_first_run(rig)
    rig.run()
    assert len(keeper.job.runs) == 1 and keeper.unsaved is not None
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    with pytest.raises(UserError, match="not a folder"):
        keeper.move_to(tmp_path / "missing")
    path = keeper.move_to(elsewhere)
    assert keeper.unsaved is None and path.parent == elsewhere / "jobs"
    saved = read_document(path, "job")
    assert len(saved.runs) == 1 and saved.runs[0].notes.startswith(NOTE)
    assert (elsewhere / "machines").is_dir()
    assert blocked.read_text() == "not a folder\n"


def test_a_new_job_file_never_overwrites_one(tmp_path: Path) -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    job_file = tmp_path / "fan.yaml"
    job_file.write_text("mine\n", encoding="utf-8")
    keeper = JobKeeper(rig.profile, workspace=tmp_path / "ws", job_file=job_file)
    with pytest.raises(UserError, match="exists"):
        keeper.start(rig.proc)
    assert job_file.read_text(encoding="utf-8") == "mine\n"
