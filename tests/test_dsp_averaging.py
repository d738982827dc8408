"""Averaging, confidence circle and steadiness verdict (trueturn.dsp.averaging)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from trueturn.dsp.averaging import confidence_radius, steadiness, vector_stats
from trueturn.dsp.findings import Code, describe


def test_radius_formula_against_scipy_f_quantile() -> None:
    # circular T^2 (from memory: Victor & Mast 1991): n |mean - mu|^2 / s^2 ~ F(2, 2n-2);
    # reference quantile from scipy.stats.f
    assert confidence_radius(4.0, 10) == pytest.approx(math.sqrt(stats.f.ppf(0.95, 2, 18) * 0.4))
    # large n: F(2, inf) = chi2_2 / 2, 95 % quantile = -ln(0.05) = 2.9957 (closed form)
    assert confidence_radius(1.0, 100_000) ** 2 * 100_000 == pytest.approx(2.9957, rel=1e-3)


def test_coverage_is_95_percent() -> None:
    rng = np.random.default_rng(11)
    mu = 3.0 + 1.0j
    trials, inside = 4000, 0
    for _ in range(trials):
        z = mu + (rng.normal(size=10) + 1j * rng.normal(size=10)) * 0.8
        s = vector_stats(z)
        inside += abs(s.mean - mu) <= s.confidence_radius
    # binomial spread at 4000 trials is +/-0.0034 (1 sigma); bounds are about 4 sigma
    assert 0.935 < inside / trials < 0.965


def test_confidence_angle_and_scatter() -> None:
    z = np.array([1.0 + 0.1j, 1.0 - 0.1j] * 10)
    s = vector_stats(z)
    assert s.mean == pytest.approx(1.0)
    assert s.scatter_rms == pytest.approx(0.1)
    assert s.confidence_deg == pytest.approx(math.degrees(math.asin(s.confidence_radius)))
    assert s.phase_deg == pytest.approx(0.0)


def test_steadiness_verdicts() -> None:
    rng = np.random.default_rng(2)
    good = 2.0 * np.exp(1j * 0.5) + 0.02 * (rng.normal(size=40) + 1j * rng.normal(size=40))
    speeds = np.full(40, 1800.0)
    ok, reasons = steadiness(vector_stats(good), speeds)
    assert ok and reasons == ()
    ok, reasons = steadiness(vector_stats(good[:4]), speeds[:4])
    assert not ok and reasons[0].code is Code.FEW_REVOLUTIONS and reasons[0].count == 4
    assert "only 4 revolutions" in describe(reasons[0])
    ok, reasons = steadiness(vector_stats(good), np.linspace(1750, 1850, 40), pickup="left")
    assert not ok and reasons[0].code is Code.SPEED_VARIES and reasons[0].pickup == "left"
    # spread (max - min) / mean: 100 / 1800 = 5.56 %
    assert reasons[0].details["spread_pct"] == pytest.approx(100 * 100 / 1800, rel=1e-3)
    assert describe(reasons[0]).startswith("left: speed varies by 5.6 %")
    noisy = good + 3 * (rng.normal(size=40) + 1j * rng.normal(size=40))
    ok, reasons = steadiness(vector_stats(noisy), speeds)
    assert not ok and {r.code for r in reasons} & {Code.PHASE_UNCERTAIN,
                                                   Code.NOT_ABOVE_SCATTER}
    assert all(r.blocking for r in reasons)
    warming = good * np.linspace(1.0, 1.3, 40)  # amplitude still rising (rotor warming up)
    ok, reasons = steadiness(vector_stats(warming), speeds)
    assert not ok and any(r.code is Code.VECTOR_DRIFTING for r in reasons)
    assert any("still changing" in describe(r) for r in reasons)


def test_small_settled_1x_is_ready_with_a_note() -> None:
    # a well-balanced rotor at the check run: 1x smaller than the per-revolution scatter
    rng = np.random.default_rng(9)
    small = 0.05 + 0.2 * (rng.normal(size=200) + 1j * rng.normal(size=200))
    speeds = np.full(200, 3000.0)
    ok, notes = steadiness(vector_stats(small[:40]), speeds[:40])
    assert not ok  # too early to say
    ok, notes = steadiness(vector_stats(small), speeds)
    assert ok and not notes[0].blocking and notes[0].count == 200
    assert "settled after 200 revolutions" in describe(notes[0])


def test_a_speed_still_changing_is_not_steady_but_scatter_around_a_steady_mean_is() -> None:
    """The 1x of rotating unbalance goes as speed^p, p about 2...4 (forced response of a
    single-degree-of-freedom system, from memory: any vibration textbook): a run whose
    second half is 0.5 % faster than its first belongs to no one speed (its 1x moved by
    1...2 %), while revolution-to-revolution scatter of +/-0.5 % around a steady mean moves
    the averaged 1x only by p (p - 1) / 2 * (relative spread)^2, under 0.01 %."""
    rng = np.random.default_rng(3)
    good = 2.0 * np.exp(1j * 0.5) + 0.02 * (rng.normal(size=40) + 1j * rng.normal(size=40))
    rising = np.linspace(1800.0 * (1 - 0.005), 1800.0 * (1 + 0.005), 40)  # halves 0.5 % apart
    ok, reasons = steadiness(vector_stats(good), rising, pickup="left")
    codes = [r.code for r in reasons]
    assert not ok and codes == [Code.SPEED_DRIFTING]
    drift = reasons[0].details["drift_pct"]
    half = 20
    want = 100 * (rising[half:].mean() - rising[:half].mean()) / rising[:half].mean()
    assert drift == pytest.approx(want, rel=1e-3) and drift > 0.3
    assert "speed still rising" in describe(reasons[0])
    assert steadiness(vector_stats(good), rising[::-1])[1][0].details["drift_pct"] < -0.3
    scatter = 1800.0 * (1 + 0.005 * rng.uniform(-1, 1, 40))  # +/-0.5 %, no trend
    ok, reasons = steadiness(vector_stats(good), scatter)
    assert ok and reasons == ()
    slow_drift = np.linspace(1800.0, 1800.0 * 1.002, 40)  # halves 0.1 % apart: fine
    assert steadiness(vector_stats(good), slow_drift)[0]
