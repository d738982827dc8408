"""A tap test rings the supports on purpose: the standstill watch expects it, and still
blames a line that keeps its level.

Physics (S. S. Rao, Mechanical Vibrations, 2.6 and ch. 3, from memory): struck at rest, a
lightly damped support mode vibrates freely, ``X e^{-zeta omega_n t} cos(omega_d t)``, and
dies out between strikes; a turning rotor forces its 1x at a level that holds from turn to
turn. The rule (trueturn.procedure.standstill): while a tap test is recorded (and while the
pickups' window still holds some of it) a line that lulls between strikes is its ringing,
``TAP_RINGING``, not a tach fault and not a standstill; a line that keeps its level behind a
silent tach is still ``TACH_FAULT`` (latched), an edge still ``TURNING``, and either marks
the tap test as turned: its recording is refused (test_procedure_tap_test.py).
"""

from __future__ import annotations

import math

import numpy as np

from test_standstill_ringdown import HOLD_S, _Bench
from trueturn.dsp.motion import WINDOW_S, PickupMotion, lulls
from trueturn.procedure.guide import standstill_refusal
from trueturn.procedure.standstill import StandstillState

RATE_HZ = 2000.0


def _taps(line_hz: float = 29.0, zeta: float = 0.03, period_s: float = 2.0,
          peak_g: float = 0.5, seconds: float = WINDOW_S, seed: int = 0) -> np.ndarray:
    """Strikes every ``period_s``, each a free damped vibration (Rao 2.6), plus sensor
    noise (about an ADXL335's over 1 kHz, from memory: 150 ug/sqrt(Hz))."""
    t = np.arange(int(seconds * RATE_HZ)) / RATE_HZ
    omega = 2.0 * math.pi * line_hz
    x = np.zeros_like(t)
    for start in np.arange(0.3, seconds, period_s):
        after = t >= start
        tau = t[after] - start
        x[after] += peak_g * np.exp(-zeta * omega * tau) * np.sin(
            omega * math.sqrt(1.0 - zeta ** 2) * tau)
    return x + np.random.default_rng(seed).normal(0.0, 150e-6 * math.sqrt(1000.0), t.size)


def _steady(line_hz: float = 29.0, amplitude_g: float = 0.05, seed: int = 1) -> np.ndarray:
    """A turning rotor's 1x at a steady speed (forced response: a constant amplitude)."""
    t = np.arange(int(WINDOW_S * RATE_HZ)) / RATE_HZ
    noise = np.random.default_rng(seed).normal(0.0, 150e-6 * math.sqrt(1000.0), t.size)
    return amplitude_g * np.sin(2.0 * math.pi * line_hz * t + 0.4) + noise


def test_strikes_lull_between_them_a_turning_rotors_line_does_not() -> None:
    assert lulls(_taps(), RATE_HZ, 29.0)
    # a lighter damping (1 %, the fan's supports) still dies out between strikes 2 s apart
    assert lulls(_taps(zeta=0.01), RATE_HZ, 29.0)
    assert not lulls(_steady(), RATE_HZ, 29.0)
    # a steady line near the pickups' threshold (3 mg, dsp.motion.PERIODIC_MIN_G)
    assert not lulls(_steady(amplitude_g=0.003), RATE_HZ, 29.0)
    # too short to say: not a lull (the safe side)
    assert not lulls(_taps(seconds=0.2), RATE_HZ, 29.0)


def _pickups(line_hz: float | None, lull: bool) -> tuple[PickupMotion, ...]:
    level = 0.006 if line_hz is None else 0.05
    return tuple(PickupMotion(n, level, 0.02, line_hz, None if line_hz is None else 0.05,
                              WINDOW_S, lulls=lull) for n in ("a", "b"))


def _tapping() -> _Bench:
    """A trusted tach, the rotor stopped and proven still, then a tap test begins."""
    bench = _Bench()
    bench.judge(WINDOW_S + HOLD_S + 0.4, _pickups(None, False))
    assert bench.watch.evidence().proven
    bench.watch.tap_test(True)
    return bench


def test_the_ringing_of_a_tap_test_is_expected_not_a_tach_fault() -> None:
    bench = _tapping()
    seen = bench.judge(10.0, _pickups(29.0, lull=True))
    assert set(seen) == {StandstillState.TAP_RINGING}
    assert not bench.watch.fault_latched and not bench.watch.tap_turned
    ev = bench.watch.evidence()
    assert not ev.proven and "tap test" in standstill_refusal(ev)
    # the recording ends; the ringing still in the pickups' window is the tap test's
    bench.watch.tap_test(False)
    seen = bench.judge(WINDOW_S - 0.5, _pickups(29.0, lull=True))
    assert set(seen) == {StandstillState.TAP_RINGING}
    # it dies out: the trusted tach and the quiet pickups agree again, no long hold
    bench.judge(HOLD_S + 0.4, _pickups(None, False))
    ev = bench.watch.evidence()
    assert ev.proven and ev.tach_trusted and ev.tach_hold_needed_s < 20.0


def test_a_steady_line_during_a_tap_test_is_still_a_tach_fault() -> None:
    bench = _tapping()
    seen = bench.judge(1.0, _pickups(29.0, lull=False))   # a rotor behind a dark tach
    assert seen[-1] is StandstillState.TACH_FAULT
    assert bench.watch.fault_latched and bench.watch.tap_turned
    assert "TACH FAULT" in standstill_refusal(bench.watch.evidence())
    # the strikes' ringing after it does not clear what was seen
    bench.judge(2.0, _pickups(29.0, lull=True))
    assert bench.watch.tap_turned and bench.watch.fault_latched


def test_an_edge_during_a_tap_test_says_turning_and_marks_it() -> None:
    bench = _tapping()
    bench.judge(2.0, _pickups(29.0, lull=True))
    bench.watch.edge(bench.t + 0.05)
    assert bench.watch.evidence().state is StandstillState.TURNING
    assert bench.watch.tap_turned
    # a new tap test starts clean
    bench.watch.tap_test(True)
    assert not bench.watch.tap_turned


def test_without_a_tap_test_a_lulling_line_behind_a_silent_tach_is_a_fault() -> None:
    # the allowance is the tap test's alone: a knock or a rotor nobody tapped for is not
    # excused (the ring-down rule of test_standstill_ringdown.py still applies)
    bench = _Bench()
    bench.judge(WINDOW_S + HOLD_S + 0.4, _pickups(None, False))
    seen = bench.judge(1.0, _pickups(29.0, lull=True))
    assert seen[-1] is StandstillState.TACH_FAULT and bench.watch.fault_latched
    # nor once the tap test's recording has left the pickups' window
    bench = _tapping()
    bench.judge(2.0, _pickups(29.0, lull=True))
    bench.watch.tap_test(False)
    seen = bench.judge(WINDOW_S + 0.4, _pickups(29.0, lull=True))
    assert seen[-1] is StandstillState.TACH_FAULT
