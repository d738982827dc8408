"""The pickups' evidence of standstill (trueturn.dsp.motion): a signal that cannot show
motion is no evidence.

A still accelerometer sits near its zero-g output, mid-range (ADXL335-class modules at
3.3 V: about 1.65 V, a third of a 5 V ADC's range; datasheet, from memory), with its own
noise. A pickup stuck at an ADC limit (unwired, no supply, an open AREF pin) or clipping
against one reads flat or flat-topped: a quiet level there proves nothing, so it must never
vouch for standstill - the case of a dark tach on a spinning rotor whose pickup cable is
off. Invented signals.
"""

from __future__ import annotations

import numpy as np

from trueturn.dsp.motion import RAIL_FRACTION_LIMIT, MotionMonitor
from trueturn.procedure.guide import standstill_refusal
from trueturn.procedure.standstill import StandstillWatch

RATE_HZ = 4000.0
ADC_MAX = 1023
G_PER_COUNT = 5.0 / 1024 / 0.33  # 10-bit, 5 V reference, 330 mV/g


def _monitor(counts: np.ndarray) -> MotionMonitor:
    m = MotionMonitor(("left",), (G_PER_COUNT,), RATE_HZ, 50.0, adc_max_count=ADC_MAX)
    m.feed(counts.astype(np.int64), 1)
    return m


def test_a_still_working_pickup_is_live_and_quiet() -> None:
    rng = np.random.default_rng(7)
    counts = np.round(338 + 0.6 * rng.normal(size=int(3 * RATE_HZ)))
    (p,) = _monitor(counts).judge()
    assert p.at_rail_fraction == 0.0 and p.live and p.quiet


def test_a_pickup_stuck_at_a_limit_is_no_evidence() -> None:
    for rail in (0, ADC_MAX):
        (p,) = _monitor(np.full(int(3 * RATE_HZ), rail)).judge()
        assert p.at_rail_fraction == 1.0 and not p.live and not p.quiet
        assert p.level_g_rms < p.limit_g_rms  # flat: it *looks* quiet, which is the danger


def test_a_pickup_clipping_on_a_violent_machine_is_no_evidence() -> None:
    t = np.arange(int(3 * RATE_HZ)) / RATE_HZ
    counts = np.clip(np.round(338 + 900 * np.sin(2 * np.pi * 59.0 * t)), 0, ADC_MAX)
    (p,) = _monitor(counts).judge()
    assert p.at_rail_fraction is not None and p.at_rail_fraction > RAIL_FRACTION_LIMIT
    assert not p.live and not p.quiet


def test_a_dark_tach_and_an_unwired_pickup_never_prove_standstill() -> None:
    """Board data keep coming, the tach says nothing (dark), the only pickup is stuck at
    0 V: a minute later standstill is still not proven, and the refusal names the pickup."""
    watch = StandstillWatch(3.0)
    stuck = _monitor(np.zeros(int(3 * RATE_HZ))).judge()
    t = 0.0
    while t < 60.0:
        t += 0.2
        watch.motion(t, stuck)
    ev = watch.evidence()
    assert not ev.proven
    words = standstill_refusal(ev)
    assert "pickup left reads at the ADC limit" in words and "cannot vouch" in words
