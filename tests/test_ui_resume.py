"""Issue #17, items 1 and 2 without Textual: what was actually fitted, and an open job
continued from its file.

The procedure runs on the simulated bench of tests/test_ui_procedure.py (the demo
scenarios' rotor physics). Outside checks:

* the fitted mass: the single-plane influence coefficient method by least squares over
  the pickups, computed here with numpy from the runs' readings and the fitted trial
  (from memory: Wowk, "Machinery Vibration: Balancing", the single-plane vector method:
  H = (V1 - V0) / T, C = -V0 / H, least squares when several pickups see one plane);
* the physics: the correction placed after a fitted trial cuts the modelled 1x
  (trueturn.sim.rotor.RigidRotor.response_1x, the same rotor law the demo runs on).
Resume and undo are bookkeeping properties (common practice, no source): a job continued
from its file gives the very correction the uninterrupted procedure gives.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from test_jobs_keeper import follow
from test_ui_procedure import Rig
from trueturn.errors import UserError
from trueturn.jobs.store import read_document
from trueturn.model import PlacedMass
from trueturn.procedure.engine import BalanceEngine
from trueturn.procedure.guide import GateRefused, HandsOn, Measure, Mode, ShowCorrection
from trueturn.procedure.standstill import StandstillWatch
from trueturn.ui.jobfile import JobKeeper
from trueturn.ui.resume import profile_change, restore_procedure, rotor_lines, rotor_state


def trial_step(rig: Rig) -> HandsOn:
    """Set-up and the as-found run; the step that attaches the first trial."""
    rig.hands_on()
    rig.run()
    step = rig.proc.step
    assert isinstance(step, HandsOn) and rig.proc.fittable()
    return step


def vec(amp: float, phase_deg: float) -> complex:
    return complex(amp * np.exp(1j * np.deg2rad(phase_deg)))


def test_a_fitted_trial_changes_the_correction_as_the_physics_says() -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    before = rig.response()
    step = trial_step(rig)
    item = rig.proc.fittable()[0]
    suggested = step.changes[item].mass
    assert suggested is not None and suggested.position == 0
    fitted_g = round(suggested.mass_g * 0.9, 2)  # the washer on the bench weighs less
    rig.proc.fit(item, mass_g=fitted_g, position=2)  # and went on position 3, not 1
    rig.hands_on()  # the rig's rotor gets what was fitted
    rig.run()
    proc = rig.proc
    assert isinstance(proc.step, ShowCorrection) and proc.solution is not None
    trial = next(m for m in proc.runs[1].masses if m.kind == "trial")
    assert trial.mass_g == fitted_g and trial.angle_deg == pytest.approx(120.0)

    # independent: H_s = (V1 - V0) / T per pickup, C = -sum(conj(H) V0) / sum(|H|^2)
    def correction(t_g: float, t_deg: float) -> complex:
        v0 = np.array([vec(r.amplitude, r.phase_deg or 0.0)
                       for r in proc.runs[0].readings.values()])
        v1 = np.array([vec(r.amplitude, r.phase_deg or 0.0)
                       for r in proc.runs[1].readings.values()])
        h = (v1 - v0) / vec(t_g, t_deg)
        return complex(-np.sum(np.conj(h) * v0) / np.sum(np.abs(h) ** 2))

    c = proc.solution.corrections[0]
    expected = correction(fitted_g, 120.0)
    assert c.mass_g == pytest.approx(abs(expected), rel=1e-3)
    assert (c.angle_deg - np.degrees(np.angle(expected)) + 180) % 360 - 180 == \
        pytest.approx(0.0, abs=0.1)
    # with the suggestion instead of what was fitted, the answer would be another one
    wrong = correction(suggested.mass_g, suggested.angle_deg)
    assert abs(wrong - expected) > 0.5 * abs(expected)
    rig.complete()
    assert proc.verdict is not None and proc.verdict.passed
    rig.assert_cut(before)


def test_fitted_entries_are_checked_and_undone_last_first() -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    step = trial_step(rig)
    item = rig.proc.fittable()[0]
    original = step.changes[item]
    proc = rig.proc
    for kwargs, why in [({"mass_g": 0.0}, "more than 0 g"),
                        ({"mass_g": float("nan")}, "more than 0 g"),
                        ({"position": 6}, "positions 1 to 6"),
                        ({"angle_deg": 30.0}, "numbered positions only"),
                        ({"removal": True}, "not a hole")]:
        with pytest.raises(GateRefused, match=why):
            proc.fit(item, **kwargs)  # type: ignore[arg-type]
    assert proc.step.changes[item] is original  # type: ignore[union-attr]
    first = proc.fit(item, mass_g=0.5)
    second = proc.fit(item, position=4)
    assert second.mass is not None and second.mass.mass_g == 0.5
    assert second.mass.position == 4 and second.suggested == original.mass
    assert proc.undo_fit() is first
    assert proc.undo_fit() is original
    with pytest.raises(GateRefused, match="nothing to undo"):
        proc.undo_fit()
    back = proc.fit(item, mass_g=original.mass.mass_g)  # type: ignore[union-attr]
    assert back.suggested is None  # entered as suggested: nothing to keep beside it
    proc.fit(item, mass_g=0.7)
    rig.hands_on()
    with pytest.raises(GateRefused):
        proc.undo_fit()  # the step is done: its entries stand
    assert isinstance(proc.step, Measure) and proc.fittable() == (0,)
    # before the run starts, the mass just put on can still be entered as fitted
    on = proc.fit(0, mass_g=0.65)
    assert on.mass is not None and proc.on_rotor == [on.mass]
    assert on.suggested == original.mass
    assert proc.undo_fit().mass == replace(original.mass, mass_g=0.7)  # type: ignore[arg-type]
    assert [m.mass_g for m in proc.on_rotor] == [0.7]
    proc.arm_run(True, rig.t)
    with pytest.raises(GateRefused, match="before its run starts"):
        proc.fit(0, mass_g=1.0)


def test_a_hole_only_where_the_profile_allows_removal() -> None:
    rig = Rig("lathe-faceplate", Mode.ONE_PLANE)
    rig.allow_removal()
    trial_step(rig)
    rig.hands_on()
    rig.run()
    proc = rig.proc
    assert isinstance(proc.step, ShowCorrection) and not proc.problem
    proc.accept_correction()
    item = proc.fittable()[0]
    part = proc.step.changes[item].mass  # type: ignore[union-attr]
    assert part is not None and not part.removal
    hole = proc.fit(item, removal=True, angle_deg=part.angle_deg + 180.0)
    assert hole.mass is not None and hole.mass.removal
    # the same effect as the weight asked for: a hole opposite
    assert hole.mass.vector_g == pytest.approx(part.vector_g)


def keep_job(rig: Rig, tmp_path: Path) -> JobKeeper:
    keeper = JobKeeper(rig.profile, workspace=tmp_path / "ws")
    keeper.start(rig.proc)
    follow(rig, [keeper])
    return keeper


def fit_otherwise(rig: Rig, tmp_path: Path, **fitted: float) -> tuple[JobKeeper, PlacedMass]:
    """A kept job up to its first trial, fitted otherwise than suggested (``fitted``: the
    arguments of Procedure.fit); the keeper and the suggested mass."""
    keeper = keep_job(rig, tmp_path)
    step = trial_step(rig)
    item = rig.proc.fittable()[0]
    suggested = step.changes[item].mass
    assert suggested is not None
    rig.proc.fit(item, **fitted)
    return keeper, suggested


def test_the_job_file_keeps_the_suggested_and_the_fitted_mass(tmp_path: Path) -> None:
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    keeper, suggested = fit_otherwise(rig, tmp_path, mass_g=0.5, angle_deg=30.0)
    rig.hands_on()
    # entered again before the run starts: the pending record follows
    before = rig.proc.fit_target(0)
    after = rig.proc.fit(0, mass_g=0.55)
    keeper.refit(rig.proc, before, after)
    assert keeper.path is not None
    job = read_document(keeper.path, "job")
    assert len(job.pending.changes) == 1
    change = job.pending.changes[0]
    assert (change.mass_g, change.angle_deg, change.position) == (0.55, 30.0, None)
    assert change.suggested is not None
    assert (change.suggested.mass_g, change.suggested.angle_deg) == (suggested.mass_g,
                                                                       suggested.angle_deg)


def restart(rig: Rig, keeper: JobKeeper) -> None:
    """The app closes and starts again: the job is read back from its file and the
    procedure rebuilt from it, with a fresh standstill watch (nothing proven)."""
    assert keeper.path is not None
    job = keeper.workspace.resume_job(keeper.path)
    rig.proc = restore_procedure(job, BalanceEngine(), StandstillWatch(3.0))
    keeper.resume(job, keeper.path)  # the app's keeper takes the job up again
    follow(rig, [keeper])


def test_resume_with_a_trial_on_gives_the_uninterrupted_correction(tmp_path: Path) -> None:
    straight = Rig("bench-grinder", Mode.TWO_PLANE)
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    keeper = keep_job(rig, tmp_path)
    before = rig.response()
    for r in (straight, rig):
        trial_step(r)
        r.hands_on()  # the trial on the left wheel is on
    restart(rig, keeper)
    proc = rig.proc
    assert proc.resumed and proc.checking_resumed_rotor
    assert [c.action for c in proc.step.changes] == ["check"]  # type: ignore[union-attr]
    assert proc.on_rotor == straight.proc.on_rotor
    # no standstill proof carried across the restart: the gate waits for fresh evidence
    with pytest.raises(GateRefused, match="no fresh data"):
        proc.tick_next()
    with pytest.raises(GateRefused):
        proc.lock_out(rig.t)
    rig.hands_on()  # proves standstill afresh, checks the rotor
    assert isinstance(proc.step, Measure) and proc.step.run_label == "trial left-wheel"
    for r in (straight, rig):
        r.run()  # trial 1
        r.hands_on()  # move the trial to the right wheel
        r.run()
    assert isinstance(proc.step, ShowCorrection) and straight.proc.solution is not None
    assert proc.solution is not None
    assert proc.solution.parts == straight.proc.solution.parts
    for c, s in zip(proc.solution.corrections, straight.proc.solution.corrections, strict=True):
        assert c.mass_g == pytest.approx(s.mass_g, rel=1e-9)
    rig.complete()
    assert proc.verdict is not None and proc.verdict.passed
    rig.assert_cut(before)
    job = read_document(keeper.path, "job")  # type: ignore[arg-type]
    assert [r.index for r in job.runs] == [1, 2, 3, 4]


def test_resume_after_a_run_offers_the_step_after_it(tmp_path: Path) -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    keeper = keep_job(rig, tmp_path)
    live = trial_step(rig)  # the as-found run is kept; the trial is not on yet
    restart(rig, keeper)
    step = rig.proc.step
    assert isinstance(step, HandsOn) and step.changes == live.changes
    assert not rig.proc.checking_resumed_rotor


def test_resume_at_the_correction_after_a_redone_trial(tmp_path: Path) -> None:
    """A run measured again (here: the trial, with the larger mass the engine asked for)
    replaces the first one in the rebuilt procedure as it did live."""
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    keeper = keep_job(rig, tmp_path)
    trial_step(rig)
    item = rig.proc.fittable()[0]
    rig.proc.fit(item, mass_g=0.01)  # a trial far too small to be seen
    rig.hands_on()
    rig.run()
    proc = rig.proc
    assert proc.too_small_trial is not None and proc.too_small_trial.suggested_g
    proc.redo_trial_larger()
    rig.hands_on()
    restart(rig, keeper)  # quit with the larger trial on, before its run
    assert rig.proc.checking_resumed_rotor
    rig.hands_on()
    assert isinstance(rig.proc.step, Measure) and rig.proc.step.title.startswith("Run again")
    rig.run()
    assert isinstance(rig.proc.step, ShowCorrection) and not rig.proc.problem
    restart(rig, keeper)  # quit at the correction: run 3 replaces run 2
    job = read_document(keeper.path, "job")  # type: ignore[arg-type]
    assert job.runs[2].replaces == 2
    assert isinstance(rig.proc.step, ShowCorrection) and not rig.proc.problem
    assert len(rig.proc.runs) == 2 and rig.proc.run_numbers == [1, 3]


def test_a_closed_job_or_a_changed_profile_is_not_resumed(tmp_path: Path) -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    keeper = keep_job(rig, tmp_path)
    trial_step(rig)
    rig.hands_on()
    assert keeper.path is not None
    job = read_document(keeper.path, "job")
    state = rotor_state(job)
    (line,) = rotor_lines(job, state.on_rotor)
    assert line.startswith("blades: trial ") and "position 1" in line
    changed = replace(rig.profile, max_speed_rpm=rig.profile.max_speed_rpm - 100)
    assert profile_change(job, changed) == ["max_speed_rpm"]
    job.status = "closed"
    with pytest.raises(UserError, match="closed"):
        restore_procedure(job, BalanceEngine(), None)


def test_a_fitted_correction_part_is_kept_through_a_restart(tmp_path: Path) -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    keeper = keep_job(rig, tmp_path)
    trial_step(rig)
    rig.hands_on()
    rig.run()
    rig.proc.accept_correction()
    item = rig.proc.fittable()[0]
    part = rig.proc.step.changes[item].mass  # type: ignore[union-attr]
    assert part is not None
    rig.proc.fit(item, mass_g=round(part.mass_g * 1.05, 2))
    rig.hands_on()
    on_rotor = list(rig.proc.on_rotor)
    assert any(m.mass_g == round(part.mass_g * 1.05, 2) for m in on_rotor)
    restart(rig, keeper)
    assert rig.proc.on_rotor == on_rotor  # the fitted part, as fitted
    assert rig.proc.checking_resumed_rotor
    rig.hands_on()
    assert isinstance(rig.proc.step, Measure) and rig.proc.step.run_label == "check"


def test_an_amplitude_only_job_resumes_with_its_own_method(tmp_path: Path) -> None:
    """Four-run method: quit with the second trial position on; the rebuilt procedure
    keeps the method (the job says four-run) and gives the uninterrupted answer."""
    straight = Rig("shop-fan", Mode.AMPLITUDE_ONLY)
    rig = Rig("shop-fan", Mode.AMPLITUDE_ONLY)
    keeper = keep_job(rig, tmp_path)
    for r in (straight, rig):
        r.hands_on()
        r.run()  # as found
        r.hands_on()
        r.run()  # trial at 0 deg
        r.hands_on()  # the trial moved to 120 deg
    assert read_document(keeper.path, "job").method == "four-run"  # type: ignore[arg-type]
    restart(rig, keeper)
    assert rig.proc.setup.mode is Mode.AMPLITUDE_ONLY and rig.proc.checking_resumed_rotor
    rig.hands_on()
    assert rig.proc.run_label == straight.proc.run_label == "trial blades at 120 deg"
    for r in (straight, rig):
        r.complete()
    assert [r.label for r in rig.proc.runs] == [r.label for r in straight.proc.runs]
    assert rig.proc.solution is not None and straight.proc.solution is not None
    assert rig.proc.on_rotor == straight.proc.on_rotor  # the same parts were placed


def test_a_trim_job_resumes_with_the_coefficients_it_started_with(tmp_path: Path) -> None:
    from trueturn.jobs.records import CoefficientSet, InfluenceEntry
    from trueturn.procedure.guide import Procedure
    from trueturn.ui.machine import setup_from_profile

    first = Rig("bench-grinder", Mode.TWO_PLANE)
    first.complete()
    model = first.proc.solution.coefficients  # type: ignore[union-attr]
    saved = CoefficientSet(first.setup.speed_rpm, "m/s2", [
        InfluenceEntry(c.sensor, c.plane, c.amp_per_g, c.phase_deg % 360.0)
        for c in model.as_saved()])  # type: ignore[attr-defined]
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.setup = setup_from_profile(rig.profile, Mode.SAVED_TRIM, saved=saved)
    rig.proc = Procedure(rig.setup, BalanceEngine())
    keeper = JobKeeper(rig.profile, workspace=tmp_path / "ws")
    keeper.start(rig.proc, saved)
    follow(rig, [keeper])
    before = rig.response()
    rig.hands_on()
    rig.run()  # as found: the trim is shown
    assert isinstance(rig.proc.step, ShowCorrection)
    shown = rig.proc.solution
    restart(rig, keeper)
    assert rig.proc.setup.mode is Mode.SAVED_TRIM
    assert rig.proc.solution is not None and shown is not None
    assert rig.proc.solution.parts == shown.parts
    rig.complete()
    assert rig.proc.verdict is not None and rig.proc.verdict.passed
    rig.assert_cut(before)
