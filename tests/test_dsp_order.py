"""Order tracking: per-revolution least squares checked against general-purpose references
and against the Cramér-Rao bound."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize

from trueturn.dsp.order import (
    estimate_orders,
    fit_block,
    fit_blocks,
    fit_even,
    group_for,
    revolution_basis,
    solve_orders,
    tone_basis,
)

TICK_HZ = 2_000_000


def _record(rot_hz: float, revs: int, fs_hz: float, orders: dict[int, complex],
            tones: dict[float, complex], sigma: float, seed: int, drift: float = 0.0,
            offset_ticks: int = 17):
    """Samples of a known signal with tach edges; speed ramps by +/-drift over the record."""
    rng = np.random.default_rng(seed)
    period = int(TICK_HZ / fs_hz)
    duration = revs / rot_hz
    n = int((revs + 1.5) / rot_hz * fs_hz)
    ticks = np.arange(n, dtype=np.int64) * period + offset_ticks
    t = ticks / TICK_HZ
    cycles = rot_hz * ((1 - drift) * t + drift * t * t / duration)
    y = rng.normal(0.0, sigma, n) + 3.0
    for h, c in orders.items():
        y += abs(c) * np.cos(h * 2 * np.pi * cycles - np.angle(c))
    for f, c in tones.items():
        y += abs(c) * np.cos(2 * np.pi * f * t + np.angle(c))
    # edges where cycles crosses an integer, to the nearest tick
    k = np.arange(1, int(cycles[-1]) + 1)
    fine = np.arange(0, ticks[-1], 50, dtype=np.int64)
    fine_cycles = rot_hz * ((1 - drift) * fine / TICK_HZ + drift * (fine / TICK_HZ) ** 2 / duration)
    edges = np.round(np.interp(k, fine_cycles, fine)).astype(np.int64)
    return ticks, y, edges[:revs + 1]


def test_matches_numpy_lstsq_two_stage_reference() -> None:
    # reference: numpy.linalg.lstsq, dense. Stage 1: hum coefficients from the window model
    # (synchronous part common to all revolutions + hum columns); stage 2: each revolution's
    # own least-squares fit after removing that hum.
    ticks, y, edges = _record(37.0, 12, 2000.0, {1: 5 + 2j, 2: 1j, 3: 0.3}, {50.0: 20 + 0j,
                              100.0: 3j}, sigma=0.5, seed=1, drift=0.02)
    est = estimate_orders(ticks, y, edges[:-1], edges[1:], TICK_HZ, (1, 2, 3), (50.0, 100.0))
    sel_all, theta_all = [], []
    for r in range(len(edges) - 1):
        sel = np.nonzero((ticks >= edges[r]) & (ticks < edges[r + 1]))[0]
        sel_all.append(sel)
        theta_all.append(2 * np.pi * (ticks[sel] - edges[r]) / (edges[r + 1] - edges[r]))
    idx = np.concatenate(sel_all)
    hum = tone_basis((ticks[idx] - edges[0]) / TICK_HZ, (50.0, 100.0))
    window = np.concatenate([revolution_basis(np.concatenate(theta_all), (1, 2, 3)), hum], axis=1)
    gamma = np.linalg.lstsq(window, y[idx], rcond=None)[0][-4:]
    clean = y[idx] - hum @ gamma
    at, ref = 0, []
    for theta in theta_all:
        coef = np.linalg.lstsq(revolution_basis(theta, (1, 2, 3)), clean[at:at + len(theta)],
                               rcond=None)[0]
        ref.append(coef[1::2] + 1j * coef[2::2])
        at += len(theta)
    np.testing.assert_allclose(est.phasors, np.array(ref), atol=1e-8)
    assert est.nuisance[50.0] == pytest.approx(complex(gamma[0], gamma[1]), abs=1e-8)
    assert abs(est.nuisance[50.0]) == pytest.approx(20.0, abs=0.1)  # and the truth, roughly


def test_single_revolution_matches_scipy_least_squares_in_polar_form() -> None:
    # reference: scipy.optimize.least_squares fitting d + A cos(theta - phi) directly in
    # amplitude/phase form (a different parameterisation, iterative solver)
    ticks, y, edges = _record(25.0, 1, 3000.0, {1: 4 * np.exp(1j * 2.2)}, {}, 0.3, seed=2)
    est = estimate_orders(ticks, y, edges[:1], edges[1:2], TICK_HZ, (1,), ())
    sel = (ticks >= edges[0]) & (ticks < edges[1])
    theta = 2 * np.pi * (ticks[sel] - edges[0]) / (edges[1] - edges[0])

    def resid(params: np.ndarray) -> np.ndarray:
        d, amp, phi = params
        return d + amp * np.cos(theta - phi) - y[sel]

    sol = optimize.least_squares(resid, x0=[0.0, 1.0, 0.0], xtol=1e-14, ftol=1e-14)
    _, amp, phi = sol.x
    ours = est.phasors[0, 0]
    assert abs(ours) == pytest.approx(abs(amp), rel=1e-7)
    assert np.angle(ours * np.exp(-1j * phi) * np.sign(amp)) == pytest.approx(0.0, abs=1e-7)


def test_truth_recovered_under_drift_and_strong_hum() -> None:
    # 1x at 50 Hz drifting +/-3 %, mains 60 Hz at ten times the 1x amplitude (10 Hz away)
    truth = 10 * np.exp(1j * np.radians(123.0))
    ticks, y, edges = _record(50.0, 200, 4000.0, {1: truth, 2: 2j}, {60.0: 100 + 30j,
                              120.0: 15.0}, sigma=1.0, seed=3, drift=0.03)
    est = estimate_orders(ticks, y, edges[:-1], edges[1:], TICK_HZ, (1, 2, 3), (60.0, 120.0))
    mean = est.phasors[:, 0].mean()
    assert abs(np.degrees(np.angle(mean / truth))) < 0.5
    assert abs(abs(mean) / abs(truth) - 1) < 0.01
    # without the hum terms the per-revolution vectors scatter far more (hum leaks in)
    plain = estimate_orders(ticks, y, edges[:-1], edges[1:], TICK_HZ, (1, 2, 3), ())
    assert np.std(plain.phasors[:, 0]) > 5 * np.std(est.phasors[:, 0])


def test_hum_one_hz_from_1x_is_separated() -> None:
    # induction motor: 1x at 59 Hz, hum at 60 Hz and 120 Hz, 3 s window (3 beats)
    truth = 4 * np.exp(1j * 1.0)
    ticks, y, edges = _record(59.0, 177, 4000.0, {1: truth}, {60.0: 30.0, 120.0: 10j}, 0.5,
                              seed=6)
    est = estimate_orders(ticks, y, edges[:-1], edges[1:], TICK_HZ, (1, 2, 3), (60.0, 120.0))
    assert est.dropped_hz == ()
    mean = est.phasors[:, 0].mean()
    assert abs(np.degrees(np.angle(mean / truth))) < 0.5 and abs(abs(mean / truth) - 1) < 0.01


def test_hum_on_an_order_is_dropped_not_divided_by_zero() -> None:
    ticks, y, edges = _record(50.0, 20, 4000.0, {1: 5.0}, {}, 0.2, seed=4)
    est = estimate_orders(ticks, y, edges[:-1], edges[1:], TICK_HZ, (1, 2, 3), (50.0, 100.0))
    assert est.dropped_hz == (50.0, 100.0)
    assert abs(est.phasors[:, 0].mean()) == pytest.approx(5.0, rel=0.01)


@pytest.mark.parametrize("snr_db", [-10.0, 0.0, 10.0])
def test_phase_efficiency_against_cramer_rao(snr_db: float) -> None:
    # from memory: S. M. Kay, Fundamentals of Statistical Signal Processing: Estimation
    # Theory (1993), sinusoidal parameter estimation: for a sinusoid of known frequency in
    # white Gaussian noise, var(phi_hat) >= 2 sigma^2 / (N A^2).
    sigma, rot_hz, fs_hz, revs = 1.0, 25.0, 2000.0, 10
    amp = math.sqrt(2 * sigma**2 * 10 ** (snr_db / 10))  # per-sample SNR A^2/(2 sigma^2)
    errors, n_used = [], 0
    for trial in range(250):
        true_phase = 0.7
        ticks, y, edges = _record(rot_hz, revs, fs_hz, {1: amp * np.exp(1j * true_phase)}, {},
                                  sigma, seed=1000 + trial)
        # hum model as the meter uses it: combs of three tones at 50 and 100 Hz
        est = estimate_orders(ticks, y, edges[:-1], edges[1:], TICK_HZ, (1, 2, 3),
                              (49.9, 50.0, 50.1, 99.8, 100.0, 100.2))
        errors.append(np.angle(est.phasors[:, 0].mean() * np.exp(-1j * true_phase)))
        n_used = int(((ticks >= edges[0]) & (ticks < edges[-1])).sum())
    crlb_std = math.sqrt(2 * sigma**2 / (n_used * amp**2))
    ratio = float(np.sqrt(np.mean(np.square(errors)))) / crlb_std
    # efficient estimator: ratio near 1; 250 trials give about +/-5 % sampling spread
    assert 0.85 < ratio < 1.15


@pytest.mark.parametrize("tones", [(60.0, 120.0), (49.9, 50.0, 50.1, 99.8, 100.0, 100.2),
                                   (59.9, 60.0, 60.1, 119.8, 120.0, 120.2), (37.0,)])
def test_tone_basis_products_match_direct_trig(tones: tuple[float, ...]) -> None:
    # reference: numpy.cos / numpy.sin evaluated directly, one tone at a time
    t = np.arange(20_000) / 4000.0 + 3600.0  # an hour into a stream
    direct = np.stack([fn(2 * np.pi * f * t) for f in tones for fn in (np.cos, np.sin)], axis=1)
    np.testing.assert_allclose(tone_basis(t, tones), direct, atol=1e-8)


def test_revolution_basis_matches_direct_trig() -> None:
    theta = np.linspace(0, 2 * np.pi, 501)
    direct = np.stack([np.ones_like(theta)] + [fn(h * theta) for h in (1, 2, 3)
                                               for fn in (np.cos, np.sin)], axis=1)
    np.testing.assert_allclose(revolution_basis(theta, (1, 2, 3)), direct, atol=1e-12)


def _group_sums(ticks, y, start, end, group, tones):
    """Reference for the grouped fit of one revolution: the per-sample design matrix (direct
    numpy.cos / numpy.sin) summed over groups of ``group`` samples, scaled 1/sqrt(n)."""
    sel = np.nonzero((ticks >= start) & (ticks < end))[0]
    theta = 2 * np.pi * (ticks[sel] - start) / (end - start)
    t = (ticks[sel] - start) / TICK_HZ
    cols = [np.ones_like(theta)] + [fn(h * theta) for h in (1, 2, 3) for fn in (np.cos, np.sin)]
    cols += [fn(2 * np.pi * f * t) for f in tones for fn in (np.cos, np.sin)]
    x = np.stack(cols + [y[sel]], axis=1)
    rows = [x[i:i + group].sum(axis=0) / math.sqrt(len(x[i:i + group]))
            for i in range(0, len(x), group)]
    return np.array(rows)


@pytest.mark.parametrize("group", [2, 4])
def test_grouped_fit_equals_least_squares_on_group_sums(group: int) -> None:
    # reference: numpy.linalg.lstsq on the explicitly summed design matrix (a revolution's
    # sums obey the same linear model, so the closed-form group columns must match it)
    tones = (49.9, 50.0, 50.1, 99.8, 100.0, 100.2)
    ticks, y, edges = _record(33.0, 6, 4000.0, {1: 4 + 1j, 2: 0.5j, 3: 0.2}, {50.03: 9 + 2j},
                              sigma=0.7, seed=5, drift=0.03)
    fit = fit_block(ticks, y, edges[:-1], edges[1:], TICK_HZ, (1, 2, 3), tones,
                    origin_tick=int(edges[0]), group=group)
    for r in range(len(edges) - 1):
        x = _group_sums(ticks, y, edges[r], edges[r + 1], group, ())
        coef = np.linalg.lstsq(x[:, :-1], x[:, -1], rcond=None)[0]
        np.testing.assert_allclose(fit.coef_y[r], coef, rtol=1e-9, atol=1e-9)
        assert fit.observations[r] == len(x)
        assert fit.sample_counts[r] == int(((ticks >= edges[r]) & (ticks < edges[r + 1])).sum())
    # the hum columns too: the reference times the tones from each revolution's own edge,
    # so each revolution is fitted alone with its time origin there
    ref = [_group_sums(ticks, y, edges[r], edges[r + 1], group, tones) for r in range(2)]
    for r in range(2):
        single = fit_block(ticks, y, edges[r:r + 1], edges[r + 1:r + 2], TICK_HZ, (1, 2, 3),
                           tones, origin_tick=int(edges[r]), group=group)
        gram = ref[r].T @ ref[r]
        p, q = 7, 12
        np.testing.assert_allclose(single.gram_an[0], gram[:p, p:p + q], rtol=1e-9, atol=1e-8)
        np.testing.assert_allclose(single.gram_nn[0], gram[p:p + q, p:p + q], rtol=1e-9,
                                   atol=1e-8)
        np.testing.assert_allclose(single.gram_ny[0], gram[p:p + q, -1], rtol=1e-9, atol=1e-7)


def test_grouped_fit_falls_back_to_samples_where_spacing_is_uneven() -> None:
    ticks, y, edges = _record(30.0, 4, 4000.0, {1: 3 + 0j}, {}, sigma=0.5, seed=9)
    ticks = ticks.copy()
    inside = int(np.searchsorted(ticks, edges[1])) + 10
    ticks[inside] += 7  # one late sample inside revolution 1
    exact = fit_block(ticks, y, edges[:-1], edges[1:], TICK_HZ, (1, 2, 3), (), group=1)
    grouped = fit_block(ticks, y, edges[:-1], edges[1:], TICK_HZ, (1, 2, 3), (), group=4)
    assert grouped.observations[1] == grouped.sample_counts[1]  # fitted sample by sample
    assert grouped.observations[0] < grouped.sample_counts[0]  # summed in fours
    np.testing.assert_allclose(grouped.coef_y[1], exact.coef_y[1], rtol=1e-12, atol=1e-12)


def test_group_for_keeps_twenty_sums_per_revolution() -> None:
    # common practice, no source: at least 20 values per revolution keep the 1x (and 3x) fit
    # close to the per-sample one (sinc^2(1/20) = 99 % of the 1x information)
    assert [group_for(n) for n in (20, 39, 40, 79, 80, 500)] == [1, 1, 2, 2, 4, 4]


@pytest.mark.parametrize("snr_db", [-10.0, 10.0])
def test_grouped_phase_efficiency_against_cramer_rao(snr_db: float) -> None:
    # from memory: S. M. Kay, Fundamentals of Statistical Signal Processing: Estimation
    # Theory (1993): var(phi_hat) >= 2 sigma^2 / (N A^2) with N the samples (not the sums).
    # The meter's grouped fit (4 samples summed; 1740 rpm at 4 kSps: 138 per revolution).
    sigma, rot_hz, fs_hz, revs = 1.0, 29.0, 4000.0, 12
    amp = math.sqrt(2 * sigma**2 * 10 ** (snr_db / 10))
    tones = (49.9, 50.0, 50.1, 99.8, 100.0, 100.2)
    errors, n_used = [], 0
    for trial in range(250):
        true_phase = 2.1
        ticks, y, edges = _record(rot_hz, revs, fs_hz, {1: amp * np.exp(1j * true_phase)}, {},
                                  sigma, seed=3000 + trial)
        fit = fit_block(ticks, y, edges[:-1], edges[1:], TICK_HZ, (1, 2, 3), tones,
                        origin_tick=int(edges[0]), group=group_for(fs_hz / rot_hz))
        est = solve_orders(fit)
        errors.append(np.angle(est.phasors[:, 0].mean() * np.exp(-1j * true_phase)))
        n_used = int(fit.sample_counts.sum())
    assert group_for(fs_hz / rot_hz) == 4
    crlb_std = math.sqrt(2 * sigma**2 / (n_used * amp**2))
    ratio = float(np.sqrt(np.mean(np.square(errors)))) / crlb_std
    assert 0.85 < ratio < 1.15


@pytest.mark.parametrize("group", [1, 2, 4])
def test_evenly_spaced_fit_equals_the_searched_fit(group: int) -> None:
    # fit_even finds each revolution's samples by arithmetic (the meter's usual case); it
    # must give what fit_blocks gives (itself checked against numpy.linalg.lstsq above) on
    # the same samples: two pickups interleaved on one ADC, the second a conversion later
    tones = (49.9, 50.0, 50.1, 99.8, 100.0, 100.2)
    ticks, y, edges = _record(31.0, 8, 8000.0, {1: 4 + 1j, 2: 0.5j, 3: 0.2}, {50.03: 9 + 2j},
                              sigma=0.7, seed=8, drift=0.02)
    # the samples stop inside the last revolution (it has fewer, the batch's end)
    cut = int(np.searchsorted(ticks, edges[-1])) - 90
    a_ticks, b_ticks = ticks[:cut:2], ticks[1:cut:2]
    a, b = y[:cut:2], y[1:cut:2] * 0.5 + 1.0
    starts, ends = edges[1:-1], edges[2:]  # the first revolution starts after the samples do
    searched = fit_blocks([a_ticks, b_ticks], [a, b], starts, ends, TICK_HZ, (1, 2, 3), tones,
                          int(edges[0]), group)
    even = fit_even([a, b], [int(a_ticks[0]), int(b_ticks[0])], int(a_ticks[1] - a_ticks[0]),
                    starts, ends, TICK_HZ, (1, 2, 3), tones, int(edges[0]), group)
    for s, e in zip(searched, even, strict=True):
        for name in ("coef_y", "coef_n", "schur_nn", "schur_ny", "resid_yy", "gram_aa",
                     "gram_an", "gram_nn", "gram_ay", "gram_ny"):
            np.testing.assert_allclose(getattr(e, name), getattr(s, name), rtol=1e-9,
                                       atol=1e-9 * np.abs(getattr(s, name)).max())
        np.testing.assert_array_equal(e.sample_counts, s.sample_counts)
        np.testing.assert_array_equal(e.observations, s.observations)
