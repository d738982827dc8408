"""Bump test (dsp/bump.py) against the free response of a viscously damped mode.

Every recording here is a sum of free decays ``x(t) = A e^{-zeta w_n t} cos(w_d t + phi)``,
``w_d = w_n sqrt(1 - zeta^2)`` after each tap (S. S. Rao, *Mechanical Vibrations*, sec. 2.6,
underdamped free vibration; from memory), plus white noise, mains hum at the line and twice
it, and the ADC's rounding to 10-bit counts (3.3 V reference, 0.3 V/g: an ADXL335-class
pickup as the kit's). The estimator must give back ``w_n / 2 pi`` and ``zeta`` within its
own stated standard errors (coverage over seeds), and say what it cannot do as codes.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from trueturn.dsp.bump import (
    MATCH_FRACTION,
    RUNNING_SPEED_MARGIN,
    bump_test,
    running_speed_findings,
)
from trueturn.dsp.findings import Code, describe

RATE_HZ = 2000.0
G_PER_COUNT = 3.3 / 1024 / 0.3  # 10-bit ADC, 3.3 V reference, 0.3 V/g
FULL_SCALE = 1023
MODES = ((18.0, 0.03), (47.0, 0.02), (130.0, 0.05))  # (natural frequency Hz, zeta): invented


def recording(seed: int, modes: tuple[tuple[float, float], ...] = MODES,
              taps_s: tuple[float, ...] = (0.7, 2.8, 4.9), seconds: float = 7.0,
              hum_g: float = 0.02, noise_g: float = 0.004, tap_g: float = 1.0,
              mains_hz: float = 60.0, extra: tuple[float, float] | None = None,
              ) -> tuple[np.ndarray, np.ndarray]:
    """(values in g, at_rail) of one pickup: free decays after each tap (Rao 2.6)."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * RATE_HZ)) / RATE_HZ
    x = np.zeros_like(t)
    for t0 in taps_s:
        after = t >= t0
        tt = t[after] - t0
        size = tap_g * rng.uniform(0.7, 1.0)
        for fn, zeta in modes:
            wn = 2 * math.pi * fn
            wd = wn * math.sqrt(1 - zeta * zeta)
            x[after] += size * rng.uniform(0.4, 1.0) * np.exp(-zeta * wn * tt) * np.cos(
                wd * tt + rng.uniform(0, 2 * math.pi))
    # the grid a little off its nominal frequency, as it always is
    x += hum_g * np.cos(2 * math.pi * (mains_hz + 0.03) * t + rng.uniform(0, 6))
    x += hum_g / 3 * np.cos(2 * math.pi * 2 * (mains_hz + 0.03) * t + rng.uniform(0, 6))
    if extra is not None:  # a line that does not decay (a machine running at extra[0] Hz)
        x += extra[1] * np.cos(2 * math.pi * extra[0] * t)
    x += rng.normal(0.0, noise_g, t.size)
    counts = np.clip(np.rint(x / G_PER_COUNT + 512), 0, FULL_SCALE)
    return (counts - 512) * G_PER_COUNT, (counts <= 0) | (counts >= FULL_SCALE)


def run(values: np.ndarray, rail: np.ndarray, mains_hz: float | None = 60.0):
    return bump_test([values], RATE_HZ, ["left"], mains_hz=mains_hz,
                     units_per_count=[G_PER_COUNT], at_rail=[rail])


def nearest(result, frequency_hz: float):
    found = [m for m in result.modes if abs(m.frequency_hz / frequency_hz - 1) < 0.05]
    assert len(found) == 1, (frequency_hz, result.modes)
    return found[0]


def test_frequency_and_damping_within_their_stated_standard_errors_over_seeds() -> None:
    """Coverage: a normal estimate lies within 2 standard errors 95 % of the time; over 16
    seeds x 3 modes at least 85 % must (P(fewer) < 1 % for a true 95 %), and none beyond
    5 standard errors (a gross error). The tolerance is the estimator's own uncertainty."""
    z_freq: list[float] = []
    z_damp: list[float] = []
    for seed in range(16):
        values, rail = recording(seed)
        result = run(values, rail)
        assert len(result.taps) == 3
        assert not result.findings, result.findings
        assert len(result.modes) == len(MODES), result.modes
        for fn, zeta in MODES:
            m = nearest(result, fn)
            assert m.taps == 3
            z_freq.append((m.frequency_hz - fn) / m.frequency_se_hz)
            z_damp.append((m.damping_ratio - zeta) / m.damping_se)
    for z in (np.abs(z_freq), np.abs(z_damp)):
        assert np.mean(z <= 2.0) >= 0.85, z
        assert z.max() < 5.0, z


def test_two_close_modes_resolved() -> None:
    """20.0 and 21.5 Hz (7 % apart, half-power bands 0.8 Hz wide at 2 %) come out as two."""
    close = ((20.0, 0.02), (21.5, 0.02))
    values, rail = recording(3, modes=close)
    result = run(values, rail)
    assert len(result.modes) == 2, result.modes
    for fn, zeta in close:
        m = nearest(result, fn)
        assert abs(m.frequency_hz - fn) <= 4 * m.frequency_se_hz
        assert abs(m.damping_ratio - zeta) <= 4 * m.damping_se


@pytest.mark.parametrize("mains_hz, told", [(50.0, True), (60.0, True), (60.0, False)])
def test_hum_is_never_a_mode(mains_hz: float, told: bool) -> None:
    """Hum five times the noise-floor tap threshold's share (0.05 g at the line) does not
    decay: no mode within 2 Hz of the line or twice it, with the mains told or not."""
    values, rail = recording(5, hum_g=0.05, mains_hz=mains_hz)
    result = run(values, rail, mains_hz if told else None)
    for m in result.modes:
        assert min(abs(m.frequency_hz - mains_hz), abs(m.frequency_hz - 2 * mains_hz)) > 2.0
    assert len(result.modes) == len(MODES)
    assert not any(f.code is Code.STEADY_LINE for f in result.findings)


def test_quantisation_alone_makes_no_mode() -> None:
    """Noise well under one count (the ADC's rounding dominates): one mode in, one out."""
    values, rail = recording(7, modes=((33.0, 0.04),), noise_g=0.0005, hum_g=0.0)
    result = run(values, rail)
    assert [round(m.frequency_hz) for m in result.modes] == [33]


def test_no_taps_says_none_found() -> None:
    values, rail = recording(2, taps_s=())
    result = run(values, rail)
    assert result.taps == () and result.modes == ()
    assert [f.code for f in result.findings] == [Code.NO_TAPS]
    assert result.to_json()["taps"] == 0


def test_clipped_tap_flagged_and_its_decay_still_used() -> None:
    """A tap hard enough to reach the rails (5.5 g here) is flagged with its samples; the
    decay after the last clipped sample is the same free vibration."""
    values, rail = recording(4, tap_g=9.0, taps_s=(0.7, 2.8))
    assert rail.any()
    result = run(values, rail)
    clipped = [f for f in result.findings if f.code is Code.TAP_CLIPPED]
    assert clipped and all(f.count and f.count > 0 for f in clipped)
    assert any(t.clipped == ("left",) for t in result.taps)
    for fn, _ in MODES[:2]:
        m = nearest(result, fn)
        assert abs(m.frequency_hz - fn) <= 4 * m.frequency_se_hz
    assert "ADC limit" in describe(clipped[0])


def test_single_tap_says_so_and_stays_within_its_uncertainty() -> None:
    values, rail = recording(8, taps_s=(1.0,), seconds=3.5)
    result = run(values, rail)
    assert len(result.taps) == 1
    assert Code.SINGLE_TAP in [f.code for f in result.findings]
    for fn, _ in MODES:
        m = nearest(result, fn)
        assert m.taps == 1
        assert abs(m.frequency_hz - fn) <= 4 * m.frequency_se_hz


def test_a_running_line_is_no_mode_and_is_said() -> None:
    """A 29.5 Hz line that keeps its level (a rotor turning behind a dark tach) is not a
    mode: the finding ``steady_line`` names it, blocking."""
    values, rail = recording(6, extra=(29.5, 0.05))
    result = run(values, rail)
    assert len(result.taps) == 3
    assert all(abs(m.frequency_hz - 29.5) > 1.0 for m in result.modes)
    steady = [f for f in result.findings if f.code is Code.STEADY_LINE]
    assert len(steady) == 1 and steady[0].blocking
    assert abs(steady[0].details["frequency_hz"] - 29.5) < 0.1


def test_a_running_machine_hides_the_taps_and_is_said() -> None:
    """A line far above the taps' threshold: no tap stands out; the line is named."""
    values, rail = recording(6, extra=(29.5, 0.5))
    result = run(values, rail)
    codes = [f.code for f in result.findings]
    assert Code.NO_TAPS in codes and Code.STEADY_LINE in codes
    steady = next(f for f in result.findings if f.code is Code.STEADY_LINE)
    assert abs(steady.details["frequency_hz"] - 29.5) < 0.2


def test_a_mode_seen_in_one_tap_of_several_is_not_reported() -> None:
    """Mode grouping: taps agree within MATCH_FRACTION; a 75 Hz ring only the first tap
    had (a loose part that settled) is not a mode of the machine."""
    values, rail = recording(9, taps_s=(0.7, 2.8, 4.9))
    t = np.arange(values.size) / RATE_HZ
    after = (t >= 0.7) & (t < 2.8)
    wn = 2 * math.pi * 75.0
    values = values + np.where(after, 0.8 * np.exp(-0.02 * wn * (t - 0.7))
                               * np.cos(wn * (t - 0.7)), 0.0)
    result = run(values, rail)
    assert all(abs(m.frequency_hz - 75.0) > 75.0 * MATCH_FRACTION for m in result.modes)
    lone = [f for f in result.findings if f.code is Code.MODE_UNCONFIRMED]
    assert any(abs(f.details["frequency_hz"] - 75.0) < 1.0 for f in lone)


def test_running_speed_near_a_mode() -> None:
    """The usual 15 % margin (common practice, no source), the same as the model-first
    balancing's near-resonance margin."""
    from trueturn.balance.model_first import NEAR_RESONANCE_FRACTION

    assert RUNNING_SPEED_MARGIN == NEAR_RESONANCE_FRACTION
    values, rail = recording(1)
    result = run(values, rail)
    near = running_speed_findings(result, 1000.0)  # 16.7 Hz: 7 % below the 18 Hz mode
    assert [round(f.details["frequency_hz"]) for f in near] == [18]
    assert near[0].code is Code.SPEED_NEAR_MODE and near[0].details["separation"] < 0
    assert running_speed_findings(result, 1500.0) == []  # 25 Hz: 39 % above 18, 47 % below 47
