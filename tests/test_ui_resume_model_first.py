"""A model-first job continued from its file (issues #17, #20 item 4, #22), without Textual.

The procedure runs on the simulated bench of tests/test_ui_procedure.py (the demo
scenarios' rotor physics); the coast-down is stood in for by the simulator's own rigid-body
modes (tests/test_procedure_model_first.py, coast_down_resonances). Outside checks:

* physics truth: the masses placed cut the modelled 1x at every pickup to a tenth
  (trueturn.sim.rotor, the same rotor law the demo runs on) and the job reaches PASS;
* the kept prior against an independent calculation: the first correction recomputed
  here with numpy from the job file's coefficients and covariance alone - recursive least
  squares with a Gaussian prior is the posterior mean ``(P0^-1 + phi^H phi / s2)^-1
  (P0^-1 h0 + phi^H y / s2)`` (Ljung, *System Identification*, 2nd ed., 1999, §11.2,
  from memory), the correction ``-H^+ b`` (Goodman 1964, least squares; from memory).
Resume itself is bookkeeping (common practice, no source): a job continued from its file
gives the very correction and verdict the uninterrupted procedure gives (to 1e-9).
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from test_jobs_keeper import follow
from test_procedure_model_first import coast_down_resonances
from test_ui_procedure import Rig
from trueturn.angles import phasor
from trueturn.balance.model_first import (
    CIRCLE95,
    PLACED_ANGLE_SIGMA_DEG,
    PLACED_MASS_REL_SIGMA,
    READING_REL_FLOOR,
)
from trueturn.dsp.findings import Code, Finding
from trueturn.dsp.severity import NoSeverity, Severity, Zone
from trueturn.dsp.unbalance import failing_rules
from trueturn.errors import UserError
from trueturn.jobs.store import Workspace, read_document, write_document
from trueturn.procedure.engine import BalanceEngine
from trueturn.procedure.guide import (
    MODEL_SWEEP_LOST,
    HandsOn,
    Measure,
    Mode,
    Procedure,
    ShowCorrection,
    ShowDoubt,
)
from trueturn.procedure.standstill import StandstillWatch
from trueturn.ui.jobfile import JobKeeper
from trueturn.ui.resume import as_found_condition, as_found_doubt, restore_procedure
from trueturn.ui.texts import condition_lines

#: the app's judgement of a machine with a strong 2x (a made-up ratio, demo only)
DOUBTFUL = (Finding(Code.BALANCING_MAY_NOT_HELP),
            Finding(Code.TWO_X_RATIO, "left", details={"ok": False, "ratio": 0.6}),
            Finding(Code.ONE_X_SHARE, "left", details={"ok": True, "share": 0.8}))


#: the overall levels the app measured with it (made-up, demo only)
LEVELS = (Severity("left", 5.8, Zone.D), Severity("right", None, None, None,
                                                   NoSeverity.UNCALIBRATED))


def keep_job(rig: Rig, tmp_path: Path, judged: tuple[Finding, ...] = ()) -> JobKeeper:
    """A job kept as the app keeps it: every hands-on step, every run (the as-found one
    with the app's judgement ``judged``), the model's answer and the answer to the
    question whether to go on."""
    keeper = JobKeeper(rig.profile, workspace=tmp_path / "ws")
    keeper.start(rig.proc)
    wire(rig, keeper, judged)
    return keeper


def wire(rig: Rig, keeper: JobKeeper, judged: tuple[Finding, ...] = ()) -> None:
    follow(rig, [])  # the hands-on steps: as the app keeps them (below, with the runs)
    proc = rig.proc
    done, record = proc.hands_on_done, proc.record
    analysed, go_on = proc.sweep_analysed, proc.go_on

    def hands_on_done(*args: Any) -> Any:
        changes = done(*args)
        keeper.hands_on(proc, changes)
        return changes

    def record_run(*args: Any, **kwargs: Any) -> Any:
        run = record(*args, **kwargs)
        as_found = len(proc.runs) == 1 and run is proc.runs[0]
        keeper.run(proc, run, (LEVELS, judged) if as_found and judged else None)
        if as_found and judged:
            proc.as_found_judged(failing_rules(judged))
        return run

    def sweep_analysed(resonances: object) -> Any:
        answer = analysed(resonances)
        keeper.model(proc)
        return answer

    def went_on() -> None:
        go_on()
        keeper.went_on(proc)

    proc.hands_on_done = hands_on_done  # type: ignore[method-assign]
    proc.record = record_run  # type: ignore[method-assign]
    proc.sweep_analysed = sweep_analysed  # type: ignore[method-assign]
    proc.go_on = went_on  # type: ignore[method-assign]


def restart(rig: Rig, keeper: JobKeeper) -> None:
    """The app closes and starts again: the procedure rebuilt from the job file alone."""
    assert keeper.path is not None
    job = keeper.workspace.resume_job(keeper.path)
    rig.proc = restore_procedure(job, BalanceEngine(), StandstillWatch(3.0))
    keeper.resume(job, keeper.path)
    wire(rig, keeper)


def without_pickup_angles(rig: Rig) -> None:
    """The profile does not say the pickups' angles from the tach: the model is not
    trusted (no phase can be predicted) and trials follow."""
    rig.setup = replace(rig.setup, pickup_angles_deg=(None, None))
    rig.proc = Procedure(rig.setup, BalanceEngine())


def same_solution(a: Procedure, b: Procedure) -> None:
    assert a.solution is not None and b.solution is not None
    assert a.step.title == b.step.title
    for c, s in zip(a.solution.corrections, b.solution.corrections, strict=True):
        assert c.plane == s.plane
        assert c.mass_g == pytest.approx(s.mass_g, rel=1e-9)
        assert c.angle_deg == pytest.approx(s.angle_deg, abs=1e-9)
    assert [(p.plane, p.position) for p in a.solution.parts] == \
        [(p.plane, p.position) for p in b.solution.parts]
    for p, q in zip(a.solution.parts, b.solution.parts, strict=True):
        assert p.mass_g == pytest.approx(q.mass_g, rel=1e-9)


@pytest.mark.parametrize("quit_at", ["correction", "placed"])
def test_a_trusted_model_job_resumes_with_the_uninterrupted_correction(
        tmp_path: Path, quit_at: str) -> None:
    straight = Rig("bench-grinder", Mode.MODEL_FIRST)
    rig = Rig("bench-grinder", Mode.MODEL_FIRST)
    keeper = keep_job(rig, tmp_path)
    before = rig.response()
    for r in (straight, rig):
        r.hands_on()
        r.run()  # as found
        r.proc.sweep_analysed(coast_down_resonances(r))
        assert r.proc.model is not None and r.proc.model.trusted
    if quit_at == "placed":
        for r in (straight, rig):
            r.proc.accept_correction()
            r.hands_on()  # the model's correction is on; its check run comes next
    restart(rig, keeper)
    proc = rig.proc
    assert proc.resumed and proc.model is not None and proc.model.trusted
    assert proc.model.mass_95_g == straight.proc.model.mass_95_g  # type: ignore[union-attr]
    if quit_at == "correction":
        assert isinstance(proc.step, ShowCorrection) and not proc.problem
        same_solution(proc, straight.proc)
        for r in (straight, rig):
            r.proc.accept_correction()
            r.hands_on()
    else:
        assert proc.checking_resumed_rotor and proc.on_rotor == straight.proc.on_rotor
        rig.hands_on()  # standstill proven afresh, the rotor checked
    assert isinstance(proc.step, Measure) and proc.step.run_label == "check"
    for r in (straight, rig):
        r.run()  # the check run: it refines the coefficients (it serves as the trial)
    # the verdict and the trim from the refined coefficients: the same as uninterrupted
    assert proc.verdict is not None and straight.proc.verdict is not None
    assert proc.verdict.passed == straight.proc.verdict.passed
    for a, b in zip(proc.verdict.rows(), straight.proc.verdict.rows(), strict=True):
        assert a[1] == pytest.approx(b[1], rel=1e-9)
    rig.complete()
    assert proc.verdict.passed
    rig.assert_cut(before)  # physics truth
    job = read_document(keeper.path, "job")  # type: ignore[arg-type]
    assert job.model is not None and job.model.trusted
    # every check run refined the model, each from every run so far
    assert [r.after_run for r in job.model.refined] == [r.index for r in job.runs[1:]]
    assert [r.runs for r in job.model.refined][0] == [1, 2]
    assert job.model.refined[-1].runs == [r.index for r in job.runs]


def test_the_kept_prior_gives_the_first_correction_by_an_independent_calculation(
        tmp_path: Path) -> None:
    rig = Rig("bench-grinder", Mode.MODEL_FIRST)
    keeper = keep_job(rig, tmp_path)
    rig.hands_on()
    rig.run()
    rig.proc.sweep_analysed(coast_down_resonances(rig))
    job = read_document(keeper.path, "job")  # type: ignore[arg-type]
    model = job.model
    assert model is not None and model.planes == ["left-wheel", "right-wheel"]
    sensors = [p.name for p in job.machine.pickups]
    table = {(c.sensor, c.plane): phasor(c.amp, c.phase_deg) for c in model.predicted}
    covs = {c.sensor: np.array(c.real) + 1j * np.array(c.imag) for c in model.covariance}
    b, h = [], []
    for s in sensors:
        reading = job.runs[0].reading(s)
        y = phasor(reading.amplitude, reading.phase_deg)
        sigma = max(reading.confidence_radius / CIRCLE95, READING_REL_FLOOR * abs(y))
        # unknowns [b, h1, h2]: flat prior on b, the kept prior on h; one run with u = 0
        info = np.zeros((3, 3), dtype=complex)
        info[1:, 1:] = np.linalg.inv(covs[s])
        moment = np.zeros(3, dtype=complex)
        moment[1:] = info[1:, 1:] @ np.array([table[s, p] for p in model.planes])
        phi = np.array([1.0, 0.0, 0.0])
        info += np.outer(phi, phi) / sigma**2
        moment += phi * y / sigma**2
        theta = np.linalg.solve(info, moment)
        b.append(theta[0])
        h.append(theta[1:])
    c, *_ = np.linalg.lstsq(np.array(h), -np.array(b), rcond=None)
    shown = rig.proc.solution
    assert shown is not None
    for j, corr in enumerate(shown.corrections):
        assert corr.mass_g == pytest.approx(abs(c[j]), rel=1e-6)
        assert (corr.angle_deg - np.degrees(np.angle(c[j])) + 180) % 360 - 180 == \
            pytest.approx(0.0, abs=1e-4)


def test_a_model_not_trusted_resumes_with_its_trials(tmp_path: Path) -> None:
    straight = Rig("bench-grinder", Mode.MODEL_FIRST)
    rig = Rig("bench-grinder", Mode.MODEL_FIRST)
    for r in (straight, rig):
        without_pickup_angles(r)
    keeper = keep_job(rig, tmp_path)
    before = rig.response()
    for r in (straight, rig):
        r.hands_on()
        r.run()
        r.proc.sweep_analysed(coast_down_resonances(r))
        r.hands_on()  # the first trial is on
    job = read_document(keeper.path, "job")  # type: ignore[arg-type]
    assert job.model is not None and not job.model.trusted
    assert [d.value for d in job.model.distrust] == ["no-pickup-angle"]
    assert job.model.predicted == [] and job.model.covariance == []
    restart(rig, keeper)
    proc = rig.proc
    assert proc.fallback and proc.model is not None
    assert proc.model.distrust == straight.proc.model.distrust  # type: ignore[union-attr]
    assert proc.checking_resumed_rotor
    rig.hands_on()
    assert isinstance(proc.step, Measure) and proc.step.run_label == "trial left-wheel"
    for r in (straight, rig):
        r.run()
        r.hands_on()
        r.run()
    same_solution(proc, straight.proc)
    rig.complete()
    assert proc.verdict is not None and proc.verdict.passed
    rig.assert_cut(before)


def test_quit_before_the_coast_down_measures_the_as_found_run_again(tmp_path: Path) -> None:
    rig = Rig("bench-grinder", Mode.MODEL_FIRST)
    keeper = keep_job(rig, tmp_path)
    before = rig.response()
    rig.hands_on()
    rig.run()  # as found; the app closes while the machine coasts down
    restart(rig, keeper)
    proc = rig.proc
    assert isinstance(proc.step, ShowCorrection) and proc.problem == MODEL_SWEEP_LOST
    assert not proc.awaiting_sweep and proc.sweep_lost
    proc.repeat_run()
    assert not proc.sweep_lost
    assert isinstance(proc.step, Measure) and proc.step.run_label == "as found"
    rig.run()
    assert proc.awaiting_sweep and proc.runs[0] is not None and proc.run_numbers == [2]
    proc.sweep_analysed(coast_down_resonances(rig))
    assert proc.model is not None and proc.model.trusted
    restart(rig, keeper)  # once more: run 2 replaces run 1, the model kept after run 2
    assert rig.proc.run_numbers == [2] and rig.proc.model is not None
    rig.complete()
    assert rig.proc.verdict is not None and rig.proc.verdict.passed
    rig.assert_cut(before)


@pytest.mark.parametrize("answered", [False, True])
def test_balancing_may_not_help_is_asked_again_unless_it_was_answered(
        tmp_path: Path, answered: bool) -> None:
    rig = Rig("bench-grinder", Mode.MODEL_FIRST)
    keeper = keep_job(rig, tmp_path, DOUBTFUL)
    rig.hands_on()
    rig.run()
    rig.proc.sweep_analysed(coast_down_resonances(rig))
    assert isinstance(rig.proc.step, ShowDoubt)
    if answered:
        rig.proc.go_on()
    job = read_document(keeper.path, "job")  # type: ignore[arg-type]
    assert as_found_doubt(job) == failing_rules(DOUBTFUL) == ("two_x_ratio",)
    # the app words the machine's condition of a continued job as it did live
    assert condition_lines(*as_found_condition(job), as_found=True) == \
        condition_lines(LEVELS, DOUBTFUL, as_found=True)
    assert (job.went_on is not None) is answered
    restart(rig, keeper)
    proc = rig.proc
    if answered:
        assert isinstance(proc.step, ShowCorrection) and proc.solution is not None
        assert job.went_on.because == ["two_x_ratio"]  # type: ignore[union-attr]
    else:
        assert isinstance(proc.step, ShowDoubt) and proc.step.because == ("two_x_ratio",)
        proc.go_on()
        assert isinstance(proc.step, ShowCorrection)
        restart(rig, keeper)  # answered now: not asked a third time
        assert isinstance(rig.proc.step, ShowCorrection)
    rig.complete()
    assert rig.proc.verdict is not None and rig.proc.verdict.passed


@pytest.mark.parametrize("answered", [False, True])
def test_the_question_comes_again_in_the_procedures_by_planes(tmp_path: Path,
                                                             answered: bool) -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    keeper = keep_job(rig, tmp_path, DOUBTFUL)
    rig.hands_on()
    rig.run()
    assert isinstance(rig.proc.step, ShowDoubt)
    if answered:
        rig.proc.go_on()
    trial = rig.proc._before_trials
    restart(rig, keeper)
    step = rig.proc.step
    if answered:
        assert step == trial and isinstance(step, HandsOn)
    else:
        assert isinstance(step, ShowDoubt)
        rig.proc.stop_here(rig.t)  # the person stops here this time
        assert rig.proc.finished


def test_old_job_files_without_the_model_still_load(tmp_path: Path) -> None:
    """A model-first job written before the job kept its model: it loads and reports; with
    more than its as-found run it cannot be continued (one line, no traceback)."""
    rig = Rig("bench-grinder", Mode.MODEL_FIRST)
    keeper = keep_job(rig, tmp_path)
    rig.hands_on()
    rig.run()
    rig.proc.sweep_analysed(coast_down_resonances(rig))
    rig.proc.accept_correction()
    rig.hands_on()
    rig.run()
    assert keeper.path is not None
    job = read_document(keeper.path, "job")
    old = tmp_path / "old.yaml"
    job.model, job.went_on = None, None
    write_document(old, "job", job)
    text = old.read_text()
    assert "model:" not in text and "went_on" not in text
    again = Workspace(tmp_path / "ws").load_job(old)
    assert again.model is None and len(again.runs) == 2
    with pytest.raises(UserError, match="before the job kept its model"):
        restore_procedure(again, BalanceEngine(), None)


def twin_jobs(tmp_path: Path, engine: type[BalanceEngine] = BalanceEngine,
              angle_offset_deg: float = 0.0, correction_scale: float = 1.0
              ) -> tuple[Rig, Rig, JobKeeper, dict[str, complex]]:
    """Two model-first jobs on the grinder alike: one uninterrupted, one kept in a file to
    be continued; the pickups' angles in the profile ``angle_offset_deg`` off, the person's
    corrections ``correction_scale`` of what was asked. Returns both rigs, the kept job's
    keeper and the physics' 1x as found."""
    rigs = []
    for _ in range(2):
        r = Rig("bench-grinder", Mode.MODEL_FIRST, correction_scale=correction_scale)
        if angle_offset_deg:
            angles = tuple((a or 0.0) + angle_offset_deg for a in r.setup.pickup_angles_deg)
            r.setup = replace(r.setup, pickup_angles_deg=angles)
        r.proc = Procedure(r.setup, engine())
        rigs.append(r)
    straight, rig = rigs
    return straight, rig, keep_job(rig, tmp_path), rig.response()


def model_correction_on(rig: Rig) -> None:
    """As found, its coast-down (the simulator's own modes), the model's correction
    accepted and placed."""
    rig.hands_on()
    rig.run()
    rig.proc.sweep_analysed(coast_down_resonances(rig))
    rig.proc.accept_correction()
    rig.hands_on()


def same_ending(rig: Rig, straight: Rig, before: dict[str, complex]) -> None:
    """The continued job ended as the uninterrupted one: the same runs, the same verdict
    (to 1e-9), a PASS, and the masses placed cut the physics' 1x to a tenth."""
    proc = rig.proc
    assert [x.label for x in proc.runs] == [x.label for x in straight.proc.runs]
    assert proc.verdict is not None and straight.proc.verdict is not None
    for a, b in zip(proc.verdict.rows(), straight.proc.verdict.rows(), strict=True):
        assert a[1] == pytest.approx(b[1], rel=1e-9)
    assert proc.verdict.passed
    rig.assert_cut(before)


@pytest.mark.parametrize("quit_at", ["refuted", "trial-on"])
def test_a_refuted_model_resumes_with_the_trials_it_fell_back_to(tmp_path: Path,
                                                                 quit_at: str) -> None:
    """A pickup angle mis-measured by 150 deg: the check run refutes the model (as in
    tests/test_procedure_model_first.py); quit then, or with the first trial on: the job
    continues exactly as the uninterrupted one, to PASS."""
    straight, rig, keeper, before = twin_jobs(tmp_path, angle_offset_deg=150.0)
    rigs = (straight, rig)
    for r in rigs:
        model_correction_on(r)
        r.run()  # the check run refutes the model
        assert r.proc.model is not None and r.proc.model.refuted_at is not None
        if quit_at == "trial-on":
            r.hands_on()  # the model's masses off, the first trial on
    job = read_document(keeper.path, "job")  # type: ignore[arg-type]
    assert job.model.trusted and job.model.refuted_by_run == 2  # type: ignore[union-attr]
    assert job.model.refuted_at == straight.proc.model.refuted_at  # type: ignore[union-attr]
    restart(rig, keeper)
    proc = rig.proc
    assert proc.model is not None and proc.model.refuted_at == straight.proc.model.refuted_at
    assert proc.fallback and proc.on_rotor == straight.proc.on_rotor
    if quit_at == "refuted":
        assert proc.step == straight.proc.step  # take the model's masses off, trial on
    else:
        assert proc.checking_resumed_rotor
        rig.hands_on()
        assert proc.step == straight.proc.step
    for r in rigs:
        r.complete()
    same_ending(rig, straight, before)


class _WrongModelEngine(BalanceEngine):
    """A model far off (as a profile whose pickups' angles are 180 deg out and whose supports
    are far softer than they are would give): its coefficients a third of the truth and of
    opposite sign, trusted all the same. Its correction puts on three times the unbalance
    the rotor has, on the same side: the check run's 1x is four times the as-found 1x
    (linear in the unbalance; Thearle 1934, from memory), over the runaway alarm's three."""

    def model_first(self, setup, runs, resonances, standstill=None):  # type: ignore[no-untyped-def]
        answer = super().model_first(setup, runs, resonances, standstill)
        prior = answer.prior
        wrong = replace(prior, matrix=prior.matrix * (-1.0 / 3.0),
                        magnitude=prior.magnitude / 3.0,
                        covariance=tuple(c / 9.0 for c in prior.covariance))
        solution = self._model_solution(setup, runs, self._estimate(setup, runs, wrong), False)
        return replace(answer, prior=wrong, solution=solution)


def _shake_at_the_model_check(rig: Rig) -> float:
    """As found, the coast-down, the model's correction on, its check run stopped by the
    runaway alarm and acknowledged; returns the level the alarm read (over the as-found)."""
    proc = rig.proc
    proc.arm_run(True, rig.t)
    rig.spin(2.0, rig.setup.speed_rpm)
    loud = rig.readings()
    as_found = proc.runs[0].readings
    ratio = max(loud[n].amplitude / as_found[n].amplitude for n in loud)
    assert {e.kind for e in proc.observe(loud, rig.setup.speed_rpm, rig.t)} == {"runaway"}
    rig.coast(rig.setup.speed_rpm)
    proc.acknowledge_alarm()
    return ratio


@pytest.mark.parametrize("quit_at", ["alarm", "trial-on"])
def test_a_model_correction_that_trips_the_runaway_alarm_is_refuted_and_trials_follow(
        tmp_path: Path, quit_at: str) -> None:
    """The check run of a wrong model's correction shakes the machine over the runaway
    alarm: it is stopped and not kept, so no reading can refute the model. The same run
    again would stop again; instead the step after the alarm takes the model's masses off
    and puts the first trial on, and trials lead to a PASS on the simulator's physics. The
    job keeps the refutation once that step is confirmed: quit before it, the job comes back
    to the model's check run (which stops again, the same way on); quit after it, the job
    goes on with the trials. Either way exactly as the uninterrupted job."""
    from trueturn.jobs.report import model_lines
    from trueturn.model import MassKind

    straight, rig, keeper, before = twin_jobs(tmp_path, _WrongModelEngine)
    rigs = (straight, rig)
    for r in rigs:
        model_correction_on(r)
        assert r.proc.model is not None and r.proc.model.trusted
        placed = [m for m in r.proc.on_rotor if m.kind == MassKind.CORRECTION]
        assert placed
        ratio = _shake_at_the_model_check(r)
        assert ratio > 3.5  # physics: about four times the as-found 1x
        shook, model = r.proc.model_shook, r.proc.model
        assert shook is not None and shook.level_ratio == pytest.approx(ratio)
        assert shook.after_run == 1  # stopped after the as-found run
        assert model is not None and not model.trusted and model.refuted_by_alarm
        assert model.refuted_at == shook.sensor and r.proc.fallback
        step = r.proc.step
        assert isinstance(step, HandsOn) and "model's correction comes off" in step.title
        assert [c.mass for c in step.changes if c.action == "detach"] == placed
        attached = [c.mass for c in step.changes if c.action == "attach"]
        assert len(attached) == 1 and attached[0] is not None
        assert attached[0].kind == MassKind.TRIAL
        assert [x.label for x in r.proc.runs] == ["as found"]  # the stopped run is not kept
    job = read_document(keeper.path, "job")  # type: ignore[arg-type]
    assert job.model is not None and job.model.refuted_by_alarm_after_run is None  # not yet
    if quit_at == "trial-on":
        for r in rigs:
            r.hands_on()  # the model's masses off, the first trial on
        job = read_document(keeper.path, "job")  # type: ignore[arg-type]
        entry = job.model
        assert entry is not None and entry.trusted and entry.refuted_by_alarm_after_run == 1
        assert entry.refuted_at == shook.sensor and entry.refuted_by_run is None
    restart(rig, keeper)
    proc = rig.proc
    assert proc.checking_resumed_rotor and proc.on_rotor == straight.proc.on_rotor
    rig.hands_on()
    if quit_at == "alarm":
        # back at the model's check run, its correction on: it stops again, the same way on
        assert isinstance(proc.step, Measure) and proc.step.run_kind == "check"
        assert not proc.fallback
        _shake_at_the_model_check(rig)
        assert proc.step == straight.proc.step
        for r in rigs:
            r.hands_on()
    else:
        assert proc.fallback and proc.model is not None and proc.model.refuted_by_alarm
    assert proc.step == straight.proc.step  # the first trial run
    for r in rigs:
        assert r.through_alarms() == 0
    same_ending(rig, straight, before)
    keeper.finish(proc)
    lines = model_lines(read_document(keeper.path, "job"))  # type: ignore[arg-type]
    assert any("runaway alarm" in line and shook.sensor in line for line in lines)
    assert not any("No check run has refined" in line for line in lines)


def test_a_trim_check_stopped_by_the_alarm_refutes_the_model_after_its_kept_runs(
        tmp_path: Path) -> None:
    """The model's correction comes out light (the weights 60 % of what was asked), its
    check run is kept and a trim follows; the trim goes on 180 deg out and twelve times too
    heavy (a slip the app cannot see): its check run trips the runaway alarm. The model is
    refuted after run 2 as after the as-found run: every model mass comes off, trials
    follow; the job continued after that step replays the refutation after run 2 and goes
    on exactly as the uninterrupted one, to PASS on the simulator's physics."""
    from trueturn.model import MassKind
    from trueturn.sim import Mass

    straight, rig, keeper, before = twin_jobs(tmp_path, correction_scale=0.6)
    rigs = (straight, rig)
    for r in rigs:
        model_correction_on(r)
        r.run()  # the model's check run: kept, the coefficients refined, a trim offered
        assert r.proc.step.kind == "correction" and r.proc.trims_done == 1
        r.proc.accept_correction()
        r.hands_on()  # the trim on
        trim = r.masses[-1]
        r.masses[-1] = Mass(trim.plane, 12.0 * trim.mass_g, trim.angle_deg + 180.0)
        assert _shake_at_the_model_check(r) > 3.0
        r.masses[-1] = trim  # the step lists the trim as asked: the person takes it off
        shook = r.proc.model_shook
        assert shook is not None and shook.after_run == 2 and r.proc.fallback
        step = r.proc.step
        assert isinstance(step, HandsOn)
        off = {c.mass.kind for c in step.changes if c.action == "detach" and c.mass}
        assert off == {MassKind.CORRECTION, MassKind.TRIM}
        assert [x.label for x in r.proc.runs] == ["as found"]
        r.hands_on()  # the model's masses off, the first trial on
    job = read_document(keeper.path, "job")  # type: ignore[arg-type]
    assert job.model is not None and job.model.refuted_by_alarm_after_run == 2
    assert [x.kind for x in job.runs] == ["initial", "check"]
    restart(rig, keeper)
    proc = rig.proc
    assert proc.fallback and proc.on_rotor == straight.proc.on_rotor
    assert [x.label for x in proc.runs] == ["as found"]
    rig.hands_on()  # the resumed job's check of the rotor
    assert proc.step == straight.proc.step  # the first trial run
    for r in rigs:
        r.through_alarms()
    same_ending(rig, straight, before)


# ---- the report (issue #20 item 4): what the model said, and how the check run refined it --


def posterior(prior_h: np.ndarray, prior_cov: np.ndarray,
              runs: list[tuple[np.ndarray, complex, float]]) -> np.ndarray:
    """Independent: the Gaussian posterior mean of ``[b, h]`` (flat prior on the as-found
    1x ``b``, ``N(prior_h, prior_cov)`` on the coefficients, ``prior_cov`` a complex
    covariance) from readings ``y = phi^T [b, h] + e``, ``e`` circular with per-part sigma
    ``s``, so ``E|e|^2 = 2 s^2``, and the masses' placement error on top (2 % and 2 degrees
    of each plane's effect, the prior's before the check run: Orear 1982's effective
    variance): information ``P0^-1 + sum conj(phi) phi^T / E|e|^2`` (Ljung 1999, §11.2;
    from memory)."""
    n = 1 + len(prior_h)
    info = np.zeros((n, n), dtype=complex)
    moment = np.zeros(n, dtype=complex)
    info[1:, 1:] = np.linalg.inv(prior_cov)
    moment[1:] = info[1:, 1:] @ prior_h
    placed_rel2 = PLACED_MASS_REL_SIGMA**2 + math.radians(PLACED_ANGLE_SIGMA_DEG) ** 2
    for phi, y, s in runs:
        e2 = 2 * s**2 + placed_rel2 * float(np.sum(np.abs(prior_h * phi[1:]) ** 2))
        info += np.outer(phi.conj(), phi) / e2
        moment += phi.conj() * y / e2
    return np.linalg.solve(info, moment)


def finished_model_job(tmp_path: Path, angles: bool = True) -> JobKeeper:
    rig = Rig("bench-grinder", Mode.MODEL_FIRST)
    if not angles:
        without_pickup_angles(rig)
    keeper = keep_job(rig, tmp_path)
    rig.hands_on()
    rig.run()
    rig.proc.sweep_analysed(coast_down_resonances(rig))
    rig.complete()
    keeper.finish(rig.proc)
    return keeper


def test_the_report_says_what_the_model_said_and_how_the_check_run_refined_it(
        tmp_path: Path) -> None:
    import xml.etree.ElementTree as ET

    from trueturn.jobs.report import html_report, markdown_report, model_lines, model_rows

    keeper = finished_model_job(tmp_path)
    job = read_document(keeper.path, "job")  # type: ignore[arg-type]
    model = job.model
    assert model is not None and model.trusted and model.refined
    first = model.refined[0]
    # the refined coefficients kept are the posterior of the kept prior and the two runs,
    # computed here independently (to 1e-6 of the coefficient)
    sensors = [p.name for p in job.machine.pickups]
    prior = {(c.sensor, c.plane): phasor(c.amp, c.phase_deg) for c in model.predicted}
    covs = {c.sensor: np.array(c.real) + 1j * np.array(c.imag) for c in model.covariance}
    kept = {(c.sensor, c.plane): phasor(c.amp, c.phase_deg) for c in first.coefficients}
    u = np.zeros(len(model.planes), dtype=complex)
    for ch in job.runs[1].changes:  # the correction placed before the check run
        if ch.action == "attach":
            u[model.planes.index(ch.plane)] += phasor(ch.mass_g, ch.angle_deg)
    for s in sensors:
        runs = []
        for k, phi in ((0, np.array([1.0, 0.0, 0.0], dtype=complex)),
                       (1, np.concatenate([[1.0 + 0j], u]))):
            r = job.runs[k].reading(s)
            y = phasor(r.amplitude, r.phase_deg)
            runs.append((phi, y, max(r.confidence_radius / CIRCLE95,
                                     READING_REL_FLOOR * abs(y))))
        theta = posterior(np.array([prior[s, p] for p in model.planes]), covs[s], runs)
        for j, p in enumerate(model.planes):
            assert abs(kept[s, p] - theta[1 + j]) <= 1e-6 * abs(theta[1 + j])
    # the check run added information: the correction's 95 % spread narrowed
    assert all(a < b for a, b in zip(first.mass_95_g, model.mass_95_g, strict=True))
    lines = model_lines(job)
    mass = job.machine.units.choice().mass_words
    assert f"left-wheel \u00b1 {mass(model.mass_95_g[0])}" in lines[0]
    assert f"{100 * model.residual_fraction_95:.0f} % of the as-found 1x" in lines[0]
    assert lines[1].startswith("Run 2 (the check run") and "runs 1, 2" in lines[1]
    moved = max(abs(kept[k] - prior[k]) / abs(prior[k]) for k in prior)
    assert f"moved by up to {100 * moved:.0f} %" in lines[1]
    assert len(model_rows(job)) == len(sensors) * len(model.planes)
    html = html_report(job)
    ET.fromstring(html.split("\n", 1)[1])  # well-formed (polyglot XHTML)
    assert 'id="model"' in html and "Predicted (95 %)" in html
    assert "## Model first" in markdown_report(job)


def test_the_report_words_each_reason_the_model_was_not_trusted(tmp_path: Path) -> None:
    from trueturn.balance.model_first import DISTRUST_WORDS, Distrust
    from trueturn.jobs.records import ModelEntry
    from trueturn.jobs.report import html_report, model_lines

    keeper = finished_model_job(tmp_path, angles=False)
    job = read_document(keeper.path, "job")  # type: ignore[arg-type]
    (line,) = model_lines(job)
    assert DISTRUST_WORDS["no-pickup-angle"] in line and "trial run per plane" in line
    for code in Distrust:  # every reason has words for a person, none shows as a code
        job.model = ModelEntry(1, "2026-01-01T00:00:00Z", False, [code])
        (line,) = model_lines(job)
        assert DISTRUST_WORDS[code.value] in line and code.value not in line.split("(")[0]
    job.model = None  # a job written before jobs kept their model
    assert "not kept in this job" in html_report(job)
    job.method = "two-plane"
    assert model_lines(job) == []
