"""Model-first on a stiff mount: the optional tap (bump) test at standstill (issue #20).

Checked against the simulator's physics (its 4-DOF rotor, trueturn.sim.rotor; not our
estimator). The lathe faceplate's supports are stiff: its rigid-body modes (29-70 Hz) lie
above the balancing speed, so the coast-down finds none. The coast-down's curve is stood in
for by the simulator's own 1x from the speed down to a quarter of it with a measurement
scatter (tests/test_balance_support_fit.py ``_curve``); the tap by the simulator's damped
modes at rest each pickup sees (tests/test_balance_support_fit_tap.py ``_tap``; the
eigenproblem of K and M, Rao, *Mechanical Vibrations*, from memory), each frequency with
a 1 % error. Physics truth: the masses placed cut the modelled 1x at every pickup to a
tenth and the job reaches PASS. A tap test is a hands-on step: proven standstill and the
checklist (common practice, no source: lock out, strike the housing, never the rotor).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from test_balance_support_fit_tap import _tap
from test_procedure_model_first import coast_down_resonances
from test_ui_procedure import Rig, pickups, tick_all
from test_ui_resume_model_first import keep_job, restart
from trueturn.angles import amplitude_phase
from trueturn.balance.model_first import CIRCLE95
from trueturn.balance.support_fit import SweepCurve
from trueturn.dsp.coast import SweepOutcome
from trueturn.dsp.sweep import Sweep, SweepPoint, SweepValue
from trueturn.jobs.report import model_lines
from trueturn.model import Correction
from trueturn.procedure.engine import (
    TAP_ANSWERS,
    BalanceEngine,
    SweepEvidence,
    short_of_grade,
    sweep_evidence,
)
from trueturn.procedure.guide import (
    GateRefused,
    Mode,
    ShowCorrection,
    TapOutcome,
    TapPhase,
    TapRefusal,
    TapTest,
)
from trueturn.procedure.standstill import StandstillState
from trueturn.ui.jobfile import JobKeeper

#: the curve's scatter per part, m/s^2 (a very noisy coast-down: the model alone may leave
#: more of the 1x than a trial would, balance.model_first.MAX_RESIDUAL_FRACTION_95)
SCATTER_M_S2 = 2.0


def stiff_sweep(rig: Rig, seed: int = 0, scatter_m_s2: float = SCATTER_M_S2
                ) -> tuple[SweepEvidence, np.random.Generator]:
    """The as-found coast-down of the rig's rotor: no resonance below the speed (the
    simulator's own criticals) and the whole curve, noisy (``scatter_m_s2`` per part); and
    the random stream after it."""
    rng = np.random.default_rng(seed)
    rotor, speed = rig.scenario.rotor, rig.setup.speed_rpm
    speeds = speed * np.geomspace(1.0, 0.25, 278)
    truth = np.array([[rotor.response_1x(float(n), rig.masses)[k] for k in rig.setup.sensors]
                      for n in speeds])
    sigma = scatter_m_s2 + 0.003 * np.abs(truth)
    noisy = truth + sigma * (rng.normal(size=truth.shape) + 1j * rng.normal(size=truth.shape))
    resonances = coast_down_resonances(rig)
    assert not any(resonances.values())  # a stiff mount: nothing below the speed
    return SweepEvidence(resonances, SweepCurve(speeds, noisy, sigma)), rng


def offered(rig: Rig) -> np.random.Generator:
    """Set-up, the as-found run and its coast-down: the tap test is offered."""
    rig.hands_on()
    rig.run()
    evidence, rng = stiff_sweep(rig)
    rig.proc.sweep_analysed(evidence)
    model = rig.proc.model
    assert model is not None and not model.trusted and model.tap_may_help, model
    assert isinstance(rig.proc.step, TapTest) and rig.proc.step.phase is TapPhase.OFFERED
    return rng


def tapped(rig: Rig, rng: np.random.Generator) -> TapOutcome:
    modes = _tap(rig.scenario.rotor, rng)
    return TapOutcome({k: tuple(v) for k, v in modes.items()}, taps=5, time_s=rig.t)


def begin(rig: Rig) -> None:
    rig.settle()
    tick_all(rig.proc)
    rig.proc.begin_tap(rig.t)


def test_offered_on_a_stiff_mount_whose_curve_was_fitted() -> None:
    # the grinder's soft mounts: the coast-down finds its supports; trusted, no tap
    soft = Rig("bench-grinder", Mode.MODEL_FIRST)
    soft.hands_on()
    soft.run()
    soft.proc.sweep_analysed(coast_down_resonances(soft))
    assert soft.proc.model is not None and soft.proc.model.trusted
    assert not soft.proc.model.tap_may_help and isinstance(soft.proc.step, ShowCorrection)
    # the lathe without the curve (resonances only): the tap has no fit to hold, trials
    flat = Rig("lathe-faceplate", Mode.MODEL_FIRST)
    flat.hands_on()
    flat.run()
    flat.proc.sweep_analysed(coast_down_resonances(flat))
    assert flat.proc.model is not None and "stiffness-unknown" in flat.proc.model.distrust
    assert not flat.proc.model.tap_may_help and flat.proc.fallback
    assert flat.proc.step.kind == "hands-on" and "trial" in flat.proc.step.title
    # the lathe with its noisy curve: too uncertain, the tap is offered
    offered(Rig("lathe-faceplate", Mode.MODEL_FIRST))


def test_skipping_the_tap_goes_on_with_trials() -> None:
    rig = Rig("lathe-faceplate", Mode.MODEL_FIRST)
    before = rig.response()
    offered(rig)
    rig.proc.skip_tap()
    assert rig.proc.fallback and rig.proc.tap is None
    assert rig.proc.step.kind == "hands-on" and "trial" in rig.proc.step.title
    rig.complete()
    assert rig.proc.verdict is not None and rig.proc.verdict.passed
    rig.assert_cut(before)
    assert [r.label for r in rig.proc.runs][:2] == ["as found", "trial faceplate"]


def test_the_tap_needs_standstill_and_the_checklist() -> None:
    rig = Rig("lathe-faceplate", Mode.MODEL_FIRST)
    offered(rig)
    rig.spin(1.0, 300.0)   # someone turned the rotor over by hand: no standstill
    with pytest.raises(GateRefused, match="turning|checking standstill"):
        rig.proc.tick_next()
    with pytest.raises(GateRefused):
        rig.proc.begin_tap(rig.t)
    rig.settle()
    with pytest.raises(GateRefused, match="tick every item"):
        rig.proc.begin_tap(rig.t)
    tick_all(rig.proc)
    assert len(rig.proc.checklist()) == 4
    rig.proc.begin_tap(rig.t)
    assert rig.proc.step.phase is TapPhase.TAPPING  # type: ignore[union-attr]
    assert rig.proc.confirmations[-1][1].startswith("lock-out before: Tap test")
    assert rig.proc.evidence_log[-1].proven


def test_a_tap_with_modes_makes_the_model_trusted_and_balances_without_trials() -> None:
    # on this rotor and coast-down the model alone is too uncertain; held to the tapped
    # modes it is trusted (bench/bench_balance.py, "[model first, with a tap test]": most
    # one-plane stiff mounts become trusted), and its correction cuts the 1x to a tenth
    rig = Rig("lathe-faceplate", Mode.MODEL_FIRST)
    before = rig.response()
    rng = offered(rig)
    blind = rig.proc.model
    assert blind is not None and "too-uncertain" in blind.distrust
    assert set(blind.distrust) <= {d.value for d in TAP_ANSWERS}
    begin(rig)
    outcome = tapped(rig, rng)
    assert rig.proc.tap_recorded(outcome) is None
    model = rig.proc.model
    assert model is not None and model.trusted and model.tapped and rig.proc.tap == outcome
    assert blind.residual_fraction_95 is not None and model.residual_fraction_95 is not None
    assert model.residual_fraction_95 < blind.residual_fraction_95
    assert isinstance(rig.proc.step, ShowCorrection) and not rig.proc.fallback
    rig.complete()
    assert rig.proc.verdict is not None and rig.proc.verdict.passed
    rig.assert_cut(before)
    assert not any(r.label.startswith("trial") for r in rig.proc.runs)


@pytest.mark.parametrize("why", ["no-modes", "no-taps", "steady-line", "tach-edge",
                                 "watch-steady-line"])
def test_a_tap_recording_that_cannot_be_used_is_refused_and_can_be_redone(why: str) -> None:
    rig = Rig("lathe-faceplate", Mode.MODEL_FIRST)
    rng = offered(rig)
    begin(rig)
    good = tapped(rig, rng)
    bad = {"no-modes": TapOutcome({n: () for n in rig.setup.sensors}, taps=4),
           "no-taps": TapOutcome({}, taps=0),
           "steady-line": TapOutcome(good.modes, taps=5, steady_line=True),
           "tach-edge": good, "watch-steady-line": good}[why]
    if why == "tach-edge":
        rig.spin(0.5, 120.0)   # the tach saw the rotor turn during the recording
    if why == "watch-steady-line":
        # the watch knows the tap test is recorded (as the app's session tells it): a line
        # that keeps its level behind the silent tach is still a fault, and refuses it
        rig.proc.watch.tap_test(True)
        rig.t += 0.5
        rig.proc.watch.motion(rig.t, pickups(rig.setup.sensors, 19.0))
        assert rig.proc.watch.evidence().state is StandstillState.TACH_FAULT
    expected = {"no-modes": TapRefusal.NO_MODES, "no-taps": TapRefusal.NO_TAPS,
                "steady-line": TapRefusal.TURNING, "tach-edge": TapRefusal.TURNING,
                "watch-steady-line": TapRefusal.TURNING}[why]
    assert rig.proc.tap_recorded(bad) is expected
    step = rig.proc.step
    assert isinstance(step, TapTest) and step.phase is TapPhase.REFUSED
    assert step.refused is expected and rig.proc.tap is None
    with pytest.raises(GateRefused):
        rig.proc.tap_recorded(good)   # not recording: a redo opens the gate again
    rig.proc.watch.tap_test(False)
    begin(rig)
    rig.proc.watch.tap_test(True)   # a new recording starts clean
    assert rig.proc.tap_recorded(good) is None
    assert rig.proc.model is not None and rig.proc.model.tapped


def test_a_resumed_job_keeps_the_tap_and_its_report_says_so(tmp_path: Path) -> None:
    rig = Rig("lathe-faceplate", Mode.MODEL_FIRST)
    keeper = keep_job(rig, tmp_path)
    rng = offered(rig)
    begin(rig)
    rig.proc.tap_recorded(tapped(rig, rng))
    keeper.model(rig.proc)
    straight = rig.proc
    assert straight.solution is not None
    restart(rig, keeper)
    proc = rig.proc
    assert proc.model is not None and proc.model.trusted and proc.model.tapped
    assert proc.tap is not None and proc.tap.modes.keys() == straight.tap.modes.keys()  # type: ignore[union-attr]
    for name, modes in straight.tap.modes.items():  # type: ignore[union-attr]
        assert [m.frequency_hz for m in proc.tap.modes[name]] == pytest.approx(
            [m.frequency_hz for m in modes], rel=1e-12)
    assert isinstance(proc.step, ShowCorrection) and proc.solution is not None
    for a, b in zip(proc.solution.corrections, straight.solution.corrections, strict=True):
        assert a.mass_g == pytest.approx(b.mass_g, rel=1e-9)
    job = keeper.job
    assert job is not None
    tap_lines = [line for line in model_lines(job) if line.startswith("A tap test")]
    assert len(tap_lines) == 1 and "Hz" in tap_lines[0], model_lines(job)


def test_short_of_grade_weighs_the_bound_against_the_iso_allowance() -> None:
    # ISO 21940-11:2016: U_per = 1000 G m / omega (from memory; the formula
    # balance.iso21940 is checked against elsewhere); G 6.3, 10 kg at 3000 rpm ->
    # 1000 * 6.3 * 10 / 314.16 = 200.5 g mm. A correction of 10 g at 100 mm stands for
    # 1000 g mm as found: the grade permits leaving 20.05 % of it
    one = [Correction("rim", 10.0, 0.0, radius_mm=100.0)]
    assert short_of_grade(0.2010, one, 6.3, 3000.0, 10.0)
    assert not short_of_grade(0.2000, one, 6.3, 3000.0, 10.0)
    # two planes: the unbalance as found is the planes' sum (5 g + 5 g at 100 mm)
    two = [Correction("left", 5.0, 0.0, radius_mm=100.0),
           Correction("right", 5.0, 180.0, radius_mm=100.0)]
    assert short_of_grade(0.2010, two, 6.3, 3000.0, 10.0)
    assert not short_of_grade(0.2000, two, 6.3, 3000.0, 10.0)
    # a correction without its radius has nothing to weigh: never short
    assert not short_of_grade(5.0, [Correction("rim", 10.0, 0.0)], 6.3, 3000.0, 10.0)


def test_a_trusted_model_short_of_the_grade_offers_the_tap_and_skipping_keeps_its_correction(
        ) -> None:
    # a clean coast-down (scatter 0.1 m/s^2): the model is trusted, but its correction may
    # leave about 45 % of the 1x where the grade permits about a tenth: the tap is offered
    rig = Rig("lathe-faceplate", Mode.MODEL_FIRST)
    before = rig.response()
    rig.hands_on()
    rig.run()
    evidence, _ = stiff_sweep(rig, scatter_m_s2=0.1)
    rig.proc.sweep_analysed(evidence)
    blind = rig.proc.model
    assert blind is not None and blind.trusted and blind.tap_may_help, blind
    assert blind.solution is not None and blind.residual_fraction_95 is not None
    setup = rig.setup
    assert short_of_grade(blind.residual_fraction_95, blind.solution.corrections,
                          setup.grade_mm_per_s, setup.speed_rpm, setup.rotor_mass_kg)
    assert isinstance(rig.proc.step, TapTest) and rig.proc.solution is None
    rig.proc.skip_tap()
    # skipped: the very correction the model gave, no trial run
    assert isinstance(rig.proc.step, ShowCorrection) and not rig.proc.fallback
    assert rig.proc.solution is blind.solution and rig.proc.tap is None
    rig.complete()
    assert rig.proc.verdict is not None and rig.proc.verdict.passed
    rig.assert_cut(before)
    assert not any(r.label.startswith("trial") for r in rig.proc.runs)


def test_a_trusted_model_short_of_the_grade_is_narrowed_by_the_tap() -> None:
    rig = Rig("lathe-faceplate", Mode.MODEL_FIRST)
    rig.hands_on()
    rig.run()
    evidence, rng = stiff_sweep(rig, scatter_m_s2=0.1)
    rig.proc.sweep_analysed(evidence)
    blind = rig.proc.model
    assert blind is not None and blind.trusted and isinstance(rig.proc.step, TapTest)
    begin(rig)
    assert rig.proc.tap_recorded(tapped(rig, rng)) is None
    model = rig.proc.model
    assert model is not None and model.trusted and model.tapped and not model.tap_may_help
    assert blind.residual_fraction_95 is not None and model.residual_fraction_95 is not None
    assert model.residual_fraction_95 < blind.residual_fraction_95
    assert isinstance(rig.proc.step, ShowCorrection) and not rig.proc.fallback


def stiff_outcome(rig: Rig, scatter_m_s2: float = SCATTER_M_S2
                  ) -> tuple[SweepOutcome, np.random.Generator]:
    """:func:`stiff_sweep`'s curve as the DSP layer's coast-down (m/s^2 pk, each point's
    95 % circle from its 1 sigma), as the app keeps it in the job."""
    evidence, rng = stiff_sweep(rig, scatter_m_s2=scatter_m_s2)
    curve = evidence.curve
    assert curve is not None
    points = tuple(SweepPoint(float(speed), 8, tuple(
        SweepValue(name, *amplitude_phase(complex(v)), float(sigma) * CIRCLE95)
        for name, v, sigma in zip(rig.setup.sensors, row, sigmas, strict=True)))
        for speed, row, sigmas in zip(curve.speeds_rpm, curve.phasors_m_s2, curve.sigma_m_s2,
                                      strict=True))[::-1]
    sweep = Sweep("m/s2 pk", points, (), float(curve.speeds_rpm.min()),
                  float(curve.speeds_rpm.max()), True)
    return SweepOutcome("coastdown", sweep, float(curve.speeds_rpm.max()), ()), rng


def kept_at_the_offer(rig: Rig, tmp_path: Path, scatter_m_s2: float
                      ) -> tuple[JobKeeper, np.random.Generator]:
    """The as-found run and its coast-down kept in the job as the app keeps them, the
    model's answer with the tap test on offer."""
    keeper = keep_job(rig, tmp_path)
    rig.hands_on()
    rig.run()
    outcome, rng = stiff_outcome(rig, scatter_m_s2)
    keeper.sweep(1, outcome)
    rig.proc.sweep_analysed(sweep_evidence(outcome, rig.setup.sensors,
                                           rig.proc.runs[0].speed_rpm or rig.setup.speed_rpm))
    assert isinstance(rig.proc.step, TapTest) and keeper.job is not None
    assert keeper.job.model is not None and keeper.job.model.tap_offered
    return keeper, rng


def test_a_job_kept_at_the_tap_offer_offers_it_again_with_the_same_fit(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # the model alone not trusted: continued, the tap is offered again, and the taps give
    # the answer the uninterrupted job would have given (the same kept coast-down)
    rig = Rig("lathe-faceplate", Mode.MODEL_FIRST)
    keeper, rng = kept_at_the_offer(rig, tmp_path, SCATTER_M_S2)
    straight = rig.proc
    assert straight.model is not None and not straight.model.trusted
    asked = []
    fit = BalanceEngine.model_first

    def counted(self, *args, **kwargs):  # type: ignore[no-untyped-def]
        asked.append(kwargs.get("standstill"))
        return fit(self, *args, **kwargs)

    monkeypatch.setattr(BalanceEngine, "model_first", counted)
    restart(rig, keeper)
    # the kept answer offers the tap again: no support fit at start-up (seconds on the
    # screen's thread); the model is asked again only with the taps
    assert asked == []
    proc = rig.proc
    assert isinstance(proc.step, TapTest) and proc.step.phase is TapPhase.OFFERED
    assert proc.model is not None and proc.model.tap_may_help and not proc.fallback
    assert proc.model.distrust == straight.model.distrust
    begin(rig)
    outcome = tapped(rig, rng)
    assert proc.tap_recorded(outcome) is None
    assert len(asked) == 1 and asked[0] is not None
    live = straight.tap_answer(outcome)
    assert proc.model is not None and proc.model.trusted and live.trusted
    assert proc.solution is not None and live.solution is not None
    for a, b in zip(proc.solution.corrections, live.solution.corrections, strict=True):
        assert a.mass_g == pytest.approx(b.mass_g, rel=1e-6)
        assert a.angle_deg == pytest.approx(b.angle_deg, abs=1e-4)


def test_a_job_kept_at_the_offer_of_a_trusted_model_keeps_its_correction_when_skipped(
        tmp_path: Path) -> None:
    rig = Rig("lathe-faceplate", Mode.MODEL_FIRST)
    keeper, _ = kept_at_the_offer(rig, tmp_path, 0.1)
    straight = rig.proc.model
    assert straight is not None and straight.trusted and straight.solution is not None
    restart(rig, keeper)
    assert isinstance(rig.proc.step, TapTest)
    rig.proc.skip_tap()
    keeper.model(rig.proc)   # as the app keeps it: the offer is closed
    assert isinstance(rig.proc.step, ShowCorrection) and rig.proc.solution is not None
    for a, b in zip(rig.proc.solution.corrections, straight.solution.corrections,
                    strict=True):
        assert a.mass_g == pytest.approx(b.mass_g, rel=1e-6)
    # skipped and kept: continued again, the tap is not offered again
    assert keeper.job is not None and keeper.job.model is not None
    assert not keeper.job.model.tap_offered
    restart(rig, keeper)
    assert isinstance(rig.proc.step, ShowCorrection) and not rig.proc.fallback
