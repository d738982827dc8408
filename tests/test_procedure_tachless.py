"""Standstill and run gates of the amplitude-only procedure without a tach (#17 item 6).

The rule (ARCHITECTURE.md, "Safety"; procedure/standstill.py): with no tach, standstill is
every pickup live (not railed) and quiet for the long hold, plus the person's confirmation;
a pickup line without tach edges is no tach fault then; an edge still says "turning".
"""

from __future__ import annotations

import pytest

from trueturn.dsp.motion import PickupMotion
from trueturn.model import Reading, RunKind
from trueturn.procedure.engine import BalanceEngine
from trueturn.procedure.guide import (
    GateRefused,
    Measure,
    Mode,
    Procedure,
    RunPhase,
    standstill_basis_words,
    standstill_refusal,
)
from trueturn.procedure.standstill import (
    UNTRUSTED_TACH_HOLD_S,
    Basis,
    StandstillState,
    StandstillWatch,
)
from trueturn.ui.launch import scenario_profile
from trueturn.ui.machine import setup_from_profile

NAMES = ("a", "b")


def motion(line_hz: float | None, railed: float | None = None) -> tuple[PickupMotion, ...]:
    return tuple(PickupMotion(n, 0.001 if line_hz is None else 0.3, 0.02, line_hz,
                              None if line_hz is None else 0.4, 4.0, at_rail_fraction=railed)
                 for n in NAMES)


def watch_at(clock: list[float]) -> StandstillWatch:
    w = StandstillWatch(3.0, clock=lambda: clock[0])
    w.set_tach_absent(True)
    return w


def quiet_for(w: StandstillWatch, start: float, seconds: float,
              railed: float | None = None) -> float:
    t = start
    while t < start + seconds:
        t += 0.2
        w.motion(t, motion(None, railed))
    return t


def test_no_tach_standstill_rests_on_live_quiet_pickups_for_the_long_hold() -> None:
    wall = [0.0]
    w = watch_at(wall)
    t = 0.0
    for _ in range(50):  # the machine runs: a line, no edge, for 10 s
        t += 0.2
        w.motion(t, motion(29.0))
    ev = w.evidence()
    assert ev.state is StandstillState.CHECKING and not w.fault_latched  # no TACH FAULT
    assert "not quiet" in standstill_refusal(ev)
    t = quiet_for(w, t, UNTRUSTED_TACH_HOLD_S - 1.0)
    ev = w.evidence()
    assert not ev.proven and "no tach on this machine" in standstill_refusal(ev)
    t = quiet_for(w, t, 1.5)
    ev = w.evidence()
    assert ev.proven and ev.basis is Basis.PICKUPS_NO_TACH and ev.tach_absent
    assert standstill_basis_words(ev).startswith("no tach on this machine")
    w.edge(t + 0.1)  # an edge, should one come, still says the rotor turns
    assert w.evidence().state is StandstillState.TURNING


def test_a_tach_fitted_to_an_amplitude_only_job_is_believed_but_not_relied_on() -> None:
    # The amplitude-only job may meet a tach after all (the meter then reads the 1x locked to
    # it, ui.meter). Its edges say the rotor turns; its silence proves nothing: standstill
    # still rests on the pickups' long hold, and the words say a tach is fitted, not that
    # there is none.
    wall = [0.0]
    w = watch_at(wall)
    t = 0.0
    for _ in range(50):  # the machine runs with the tach's edges, 29 Hz
        t += 0.2
        w.motion(t, motion(29.0))
        for k in range(6):
            w.edge(t + k / 29.0)
    assert w.evidence().state is StandstillState.TURNING
    t = quiet_for(w, t + 1.0, 10.0)  # the tach silent and the pickups quiet for 10 s
    ev = w.evidence()
    assert not ev.proven  # a trusted tach's 3 s hold would have proven it by now
    assert "this method does not rely on the tach" in standstill_refusal(ev)
    t = quiet_for(w, t, UNTRUSTED_TACH_HOLD_S)
    ev = w.evidence()
    assert ev.proven and ev.basis is Basis.PICKUPS_NO_TACH
    assert standstill_basis_words(ev).startswith(
        "a tach is fitted but this method does not rely on it: every pickup live and quiet")


def test_no_tach_railed_pickups_prove_nothing() -> None:
    wall = [0.0]
    w = watch_at(wall)
    quiet_for(w, 0.0, 3 * UNTRUSTED_TACH_HOLD_S, railed=0.5)  # stuck at an ADC limit
    ev = w.evidence()
    assert not ev.proven and "ADC limit" in standstill_refusal(ev)


def test_the_procedure_tells_the_watch_and_takes_spectrum_readings() -> None:
    profile = scenario_profile("shop-fan")
    amp = Procedure(setup_from_profile(profile, Mode.AMPLITUDE_ONLY), BalanceEngine())
    assert amp.watch.tach_absent and "no tach needed" in amp.step.title
    one = Procedure(setup_from_profile(profile, Mode.ONE_PLANE), BalanceEngine(),
                    watch=amp.watch)
    assert not one.watch.tach_absent  # the same watch, a procedure with a tach
    reading = {s: Reading(s, 10.0, "mm/s rms", None, 180.0, 900, True, 1737.0, 0.2,
                          no_tach=True) for s in amp.setup.sensors}
    # both at a running measurement without going through the gates: only ready() is under
    # test here (the gates have their own tests)
    for proc in (amp, one):
        proc.step = Measure("As-found run", "as found", RunKind.AS_FOUND, RunPhase.RUNNING)
    assert amp.ready(reading, tach_live=False)
    assert not one.ready(reading, tach_live=False)
    assert not one.ready(reading, tach_live=True)  # no phase: never for influence coefficients
    wide = {s: Reading(s, 10.0, "mm/s rms", None, 180.0, 900, True, 1737.0, 0.8, no_tach=True)
            for s in amp.setup.sensors}
    assert not amp.ready(wide, tach_live=False)  # 95 % radius over 5 % of the amplitude
    with pytest.raises(GateRefused):
        amp.record(wide, 1737.0, 1.0, tach_live=False)
