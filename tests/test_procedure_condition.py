"""Is it unbalance? in the pure procedure (issue #22): the optional second start as found,
and the choice to stop the job when balancing may not help.

The procedure is driven on the demo rotors' physics (test_ui_procedure.Rig, invented
scenarios); the rules themselves (dsp/unbalance.py) are common practice, no source, and are
checked in test_dsp_unbalance / test_dsp_repeat; here only the sequence is checked: a second
start costs nothing unless asked for, is taken only after a stop, never counts as a run of
the coefficient set, and a stop is kept with its reason.
"""

from __future__ import annotations

import pytest

from test_ui_procedure import Rig
from trueturn.model import RunKind
from trueturn.procedure.guide import (
    SECOND_START_LABEL,
    GateRefused,
    HandsOn,
    HandsOnPhase,
    Measure,
    Mode,
    ShowDoubt,
    Stopped,
)


def _as_found(rig: Rig) -> None:
    rig.hands_on()  # mount the pickups
    rig.run()       # as found (ends coasting: not yet at proven standstill)


def test_a_second_start_is_offered_after_the_as_found_run_and_costs_nothing_unless_taken():
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    assert not rig.proc.offers_second_start  # before the as-found run
    _as_found(rig)
    trial_step = rig.proc.step
    assert isinstance(trial_step, HandsOn) and rig.proc.offers_second_start
    # not taken: the trial goes on exactly as before
    rig.hands_on()
    assert not rig.proc.offers_second_start
    assert isinstance(rig.proc.step, Measure) and rig.proc.step.run_kind is RunKind.TRIAL


def test_the_second_start_needs_a_stop_and_is_kept_beside_the_runs():
    rig = Rig("bench-grinder", Mode.ONE_PLANE)
    _as_found(rig)
    trial_step = rig.proc.step
    rig.spin(1.0, rig.setup.speed_rpm)  # still running: no restart to compare
    with pytest.raises(GateRefused, match="compared after a stop"):
        rig.proc.start_again()
    rig.coast(rig.setup.speed_rpm)
    rig.settle()
    rig.proc.start_again()
    step = rig.proc.step
    assert isinstance(step, Measure) and step.run_label == SECOND_START_LABEL
    rig.run()
    assert len(rig.proc.runs) == 1 and rig.proc.second_start is not None
    assert rig.proc.second_start.label == SECOND_START_LABEL
    assert rig.proc.step == trial_step  # back at the trial's lock-out gate
    assert not rig.proc.offers_second_start  # once
    with pytest.raises(GateRefused):
        rig.proc.start_again()
    rig.complete()  # the coefficient set is as-found + trial: the second start is not in it
    assert rig.proc.verdict is not None
    assert [r.kind for r in rig.proc.runs][:2] == [RunKind.AS_FOUND, RunKind.TRIAL]


def test_a_second_start_stopped_is_dropped_and_offered_again():
    rig = Rig("bench-grinder", Mode.ONE_PLANE)
    _as_found(rig)
    trial_step = rig.proc.step
    rig.settle()
    rig.proc.start_again()
    rig.proc.abort_run(rig.t)
    assert rig.proc.step == trial_step and rig.proc.second_start is None
    assert rig.proc.offers_second_start


def test_not_offered_without_trial_runs_or_phase():
    for mode in (Mode.AMPLITUDE_ONLY,):
        rig = Rig("shop-fan", mode)
        _as_found(rig)
        assert not rig.proc.offers_second_start


def test_balancing_may_not_help_asks_first_then_stop_keeps_the_reason():
    rig = Rig("belt-misaligned", Mode.ONE_PLANE)
    _as_found(rig)
    with pytest.raises(GateRefused, match="only when balancing may not help"):
        rig.proc.stop_here(rig.t)
    rig.proc.as_found_judged(("two_x_ratio",))
    step = rig.proc.step
    assert isinstance(step, ShowDoubt) and step.because == ("two_x_ratio",)
    assert rig.proc.offers_second_start  # still offered from the question
    stop = rig.proc.stop_here(rig.t)
    assert isinstance(rig.proc.step, Stopped) and rig.proc.finished
    assert stop.reason == "balancing_may_not_help" and stop.because == ("two_x_ratio",)
    assert stop.after_run == 1 and rig.proc.verdict is None
    assert not rig.proc.offers_second_start


def test_go_on_anyway_returns_to_the_trial_and_a_clean_judgement_asks_nothing():
    rig = Rig("belt-misaligned", Mode.ONE_PLANE)
    _as_found(rig)
    trial_step = rig.proc.step
    rig.proc.as_found_judged(())
    assert rig.proc.step == trial_step
    rig.proc.as_found_judged(("two_x_ratio", "nonsync_peak"))
    rig.proc.go_on()
    assert rig.proc.step == trial_step and rig.proc.doubt == ("two_x_ratio", "nonsync_peak")
    rig.hands_on()  # the trial goes on; a later judgement no longer asks
    rig.proc.as_found_judged(("two_x_ratio",))
    assert isinstance(rig.proc.step, Measure)


def test_a_second_start_that_moved_raises_the_question_after_it():
    rig = Rig("bench-grinder", Mode.ONE_PLANE)
    _as_found(rig)
    rig.proc.as_found_judged(())  # the first start looked like unbalance
    rig.settle()
    rig.proc.start_again()
    rig.run()
    rig.proc.as_found_judged(("phase_repeatable",))  # the app compared the two starts
    assert isinstance(rig.proc.step, ShowDoubt)
    assert rig.proc.step.because == ("phase_repeatable",)
    rig.proc.go_on()
    assert isinstance(rig.proc.step, HandsOn) and rig.proc.step.phase is HandsOnPhase.LOCKOUT
