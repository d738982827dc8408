"""Trials sized from the as-found run's coast-down (issue #20 item 3).

After the as-found run of a procedure by planes, the app fits the rigid rotor on its
supports to the coast-down's whole curve (``BalanceEngine.trial_sensitivity``; seconds of
work, so off the screen's thread) and sizes the trials from it. Until the fit is in, the
first trial's hands-on step does not open and shows no size: the size a person weighs out
is the one used. A continued job sizes from the coast-down the job kept, as the live app
does.

Checked against the simulator's physics (the bench grinder on its rubber feet, its 4-DOF
rotor, sim/rotor.py; not our estimator): the trial sized from the fit changes the 1x by the
margin common practice asks (about 25-30 % in amplitude, the issue's own words; common
practice, no source) without shaking the machine to the runaway alarm's limit.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest

from test_procedure_speed_slopes import coast_down  # noqa: F401 - the module's fixture
from test_ui_procedure import Rig
from test_ui_resume import keep_job, restart, trial_step
from trueturn.balance.model_first import PredictedInfluence
from trueturn.dsp.coast import SweepOutcome
from trueturn.jobs.store import read_document
from trueturn.model import MassKind, PlacedMass
from trueturn.procedure.engine import BalanceEngine, sweep_evidence
from trueturn.procedure.guide import (
    DEFAULT_RUNAWAY_FACTOR,
    TRIAL_SIZING_WAIT,
    GateRefused,
    HandsOn,
    Mode,
)
from trueturn.sim import Mass
from trueturn.ui.resume import job_coast_down_evidence

#: common practice asks a trial to change the 1x by about 25-30 % in amplitude (issue #20
#: item 3; common practice, no source); the trial sizing aims higher
SEEN_CHANGE = 0.25


def trial_of(step: object) -> PlacedMass:
    assert isinstance(step, HandsOn)
    masses = [c.mass for c in step.changes if c.action == "attach" and c.mass is not None
              and c.mass.kind == MassKind.TRIAL]
    assert len(masses) == 1, step
    return masses[0]


def waiting_rig() -> Rig:
    """The grinder by two planes after its as-found run, its first trial waiting for the
    size from the coast-down."""
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    trial_step(rig)
    rig.proc.await_trial_sizing()
    return rig


def sized_by_the_engine(rig: Rig) -> PlacedMass:
    """The trial the step shows, checked to be the size the engine gives now."""
    proc = rig.proc
    trial = trial_of(proc.step)
    assert trial.mass_g == proc.engine.trial_mass(proc.setup, proc.plane(trial.plane),
                                                  proc.runs).mass_g
    return trial


def fitted(rig: Rig, outcome: SweepOutcome) -> PredictedInfluence:
    """The engine's fit to the coast-down, as the app asks it once the sweep is kept."""
    evidence = sweep_evidence(outcome, rig.setup.sensors, rig.setup.speed_rpm)
    sensitivity = rig.proc.engine.trial_sensitivity(rig.proc.setup, evidence)
    assert isinstance(sensitivity, PredictedInfluence)
    return sensitivity


def effect(rig: Rig, trial: PlacedMass) -> tuple[float, float]:
    """The trial on the simulated rotor as found: the largest change of the 1x over the
    pickups, and the largest level, both as a fraction of the as-found 1x there."""
    speed = rig.setup.speed_rpm
    before = rig.scenario.rotor.response_1x(speed, rig.masses)
    after = rig.scenario.rotor.response_1x(
        speed, [*rig.masses, Mass(trial.plane, trial.mass_g, trial.angle_deg)])
    change = max(abs(after[n] - before[n]) / abs(before[n]) for n in before)
    level = max(abs(after[n]) / abs(before[n]) for n in before)
    return change, level


def test_the_grinders_trial_is_sized_from_its_coast_down_and_seen(
        coast_down: SweepOutcome) -> None:  # noqa: F811 - the fixture
    rig = waiting_rig()      # set-up, as found: the first trial's step, sized as before
    proc = rig.proc
    step = proc.step
    assert proc.trial_sizing_awaited and proc.sizing_trial
    rig.settle()
    with pytest.raises(GateRefused) as refused:
        proc.lock_out(rig.t)
    assert str(refused.value) == TRIAL_SIZING_WAIT
    assert proc.fittable() == ()   # no size shown: nothing to enter as fitted instead
    sensitivity = fitted(rig, coast_down)
    proc.trial_sizing_in(sensitivity)
    assert not proc.trial_sizing_awaited and not proc.sizing_trial
    # the step shows the size the engine gives with the fit, on the same plane and spot
    trial = sized_by_the_engine(rig)
    assert (trial.plane, trial.angle_deg) == (trial_of(step).plane, trial_of(step).angle_deg)
    # on the simulator's physics it is seen, and the machine is not shaken to the alarm
    change, level = effect(rig, trial)
    assert change >= SEEN_CHANGE, (change, trial)
    assert level < DEFAULT_RUNAWAY_FACTOR, (level, trial)
    # the lock-out opens; the second trial is sized from the fit too
    rig.hands_on()
    rig.run()
    assert proc.setup.trial_sensitivity is sensitivity
    assert sized_by_the_engine(rig).plane != trial.plane


def test_no_fit_keeps_the_size_and_opens_the_gate() -> None:
    # the coast-down was not kept or could not be fitted: the trial keeps the size it had
    rig = waiting_rig()
    before = trial_of(rig.proc.step)
    assert rig.proc.sizing_trial
    rig.proc.trial_sizing_in(None)
    assert not rig.proc.sizing_trial and trial_of(rig.proc.step) == before
    rig.hands_on()   # the lock-out opens


def test_nothing_waits_where_the_fit_cannot_size() -> None:
    # amplitude only (its trials at 0/120/240 deg are judged by amplitude), and a profile
    # that does not place the bearings (no rotor on supports to fit): no wait
    rig = Rig("bench-grinder", Mode.AMPLITUDE_ONLY)
    trial_step(rig)
    rig.proc.await_trial_sizing()
    assert not rig.proc.trial_sizing_awaited
    rig.hands_on()
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.proc.setup = dataclasses.replace(rig.proc.setup, bearings=())
    trial_step(rig)
    rig.proc.await_trial_sizing()
    assert not rig.proc.trial_sizing_awaited


def test_a_trial_behind_the_doubt_question_gets_the_fitted_size(
        coast_down: SweepOutcome) -> None:  # noqa: F811 - the fixture
    # the as-found run failed a rule (is it unbalance?): the question comes first; the fit
    # arriving meanwhile sizes the trial the person goes on to
    rig = waiting_rig()
    proc = rig.proc
    proc.as_found_judged(("harmonics",))
    assert proc.step.kind == "doubt" and not proc.sizing_trial
    proc.trial_sizing_in(fitted(rig, coast_down))
    proc.go_on()
    sized_by_the_engine(rig)
    rig.hands_on()


def test_a_continued_job_sizes_its_trial_from_the_kept_coast_down(
        tmp_path: Path, coast_down: SweepOutcome) -> None:  # noqa: F811 - the fixture
    # live: the as-found run, its coast-down kept, the fit in; the app closes before the
    # trial goes on. Continued: the same coast-down read back from the job gives the same
    # evidence, so the same fit and the same trial
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    keeper = keep_job(rig, tmp_path)
    trial_step(rig)
    keeper.sweep(1, coast_down)
    rig.proc.await_trial_sizing()
    live = sweep_evidence(coast_down, rig.setup.sensors, rig.proc.runs[0].speed_rpm or 0.0)
    rig.proc.trial_sizing_in(rig.proc.engine.trial_sensitivity(rig.proc.setup, live))
    live_trial = trial_of(rig.proc.step)
    assert keeper.path is not None
    job = keeper.workspace.resume_job(keeper.path)
    kept = job_coast_down_evidence(job, rig.setup.sensors)
    assert kept is not None and live is not None
    assert kept.resonances == live.resonances
    assert kept.curve is not None and live.curve is not None
    np.testing.assert_array_equal(kept.curve.speeds_rpm, live.curve.speeds_rpm)
    np.testing.assert_allclose(kept.curve.phasors_m_s2, live.curve.phasors_m_s2, rtol=1e-12)
    np.testing.assert_allclose(kept.curve.sigma_m_s2, live.curve.sigma_m_s2, rtol=1e-12)
    restart(rig, keeper)
    proc = rig.proc
    proc.await_trial_sizing()
    assert proc.sizing_trial
    proc.trial_sizing_in(proc.engine.trial_sensitivity(proc.setup, kept))
    assert trial_of(proc.step) == live_trial


def test_a_coast_down_that_clipped_is_kept_so_and_not_fitted(
        tmp_path: Path, coast_down: SweepOutcome) -> None:  # noqa: F811 - the fixture
    # a resonance drove a pickup past the ADC's range: the points' 1x read low, so the
    # curve is not fitted live (engine.curve_from_sweep); the job keeps that, so a
    # continued job does not fit it either
    clipped = dataclasses.replace(coast_down, clipped_samples=12)
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    keeper = keep_job(rig, tmp_path)
    trial_step(rig)
    keeper.sweep(1, clipped)
    assert keeper.path is not None
    raw = read_document(keeper.path, "job")
    assert raw.runs[0].sweeps[0].clipped_samples == 12
    kept = job_coast_down_evidence(keeper.workspace.resume_job(keeper.path), rig.setup.sensors)
    assert kept is not None and kept.curve is None
    assert BalanceEngine().trial_sensitivity(rig.proc.setup, kept) is None


def test_in_the_app_a_fit_that_fails_keeps_the_size_and_says_so(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # the app on the simulated grinder: the as-found run, the demo motor off; the fit to the
    # coast-down raises (whatever the cause): the person is told, the trial keeps the size
    # it had, and the lock-out opens - the job is not stuck waiting
    import asyncio

    from test_ui_app import (
        SIZE,
        connect,
        make_app,
        press,
        screen_text,
        through_hands_on_gates,
        wait_for,
    )
    from test_ui_reliability import to_the_as_found_run
    from trueturn.ui import texts

    def broken(self: BalanceEngine, setup: object, evidence: object) -> None:
        raise FloatingPointError("the fit diverged")

    monkeypatch.setattr(BalanceEngine, "trial_sensitivity", broken)

    async def scenario() -> None:
        app = make_app("bench-grinder", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await to_the_as_found_run(app, pilot, "2")
            proc = app.procedure
            assert proc is not None
            await press(app, pilot, "enter")   # the forces: the as-found run
            await wait_for(pilot, lambda: len(proc.runs) == 1, 90)
            before = trial_of(proc.step)
            assert proc.sizing_trial
            await press(app, pilot, "x")        # the demo motor off: it coasts down
            await wait_for(pilot, lambda: not proc.sizing_trial, 120)
            assert app.message == texts.TRIAL_FIT_FAILED
            assert trial_of(proc.step) == before
            await wait_for(pilot, lambda: "Attach trial mass" in screen_text(app), 10)
            await through_hands_on_gates(app, pilot)   # the lock-out opens
            assert proc.step.kind == "run"
            await press(app, pilot, "q", "q")
    asyncio.run(scenario())


def test_a_trial_waiting_behind_a_second_start_gets_the_fitted_size(
        coast_down: SweepOutcome) -> None:  # noqa: F811 - the fixture
    # a second start as found (is it unbalance?) while the trial waits for its size: the
    # fit arriving during it sizes the trial the second start comes back to
    rig = waiting_rig()
    proc = rig.proc
    rig.settle()
    proc.start_again()
    assert proc.step.kind == "run" and not proc.sizing_trial
    proc.trial_sizing_in(fitted(rig, coast_down))
    rig.run()   # the second start, measured
    assert proc.second_start is not None and proc.step.kind == "hands-on"
    sized_by_the_engine(rig)
    rig.hands_on()
