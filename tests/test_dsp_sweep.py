"""Sweeps (dsp/sweep.py): resonance speed and damping against the closed-form response of a
single-degree-of-freedom system to a rotating unbalance, and the local slope.

Sources:
- S. S. Rao, *Mechanical Vibrations*, "Response of a damped system under rotating
  unbalance": ``M X / (m e) = r^2 / ((1 - r^2) + i 2 zeta r)``, ``r = omega / omega_n``
  (from memory); the accelerometer sees ``omega^2 X``.
- D. J. Ewins, *Modal Testing: Theory, Practice and Application* (2000), sec. 4.2: the
  half-power points and ``eta = (omega_b^2 - omega_a^2) / (2 omega_r^2)`` (from memory).
- The issue's acceptance: natural speed within 2 %, damping within 20 %.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from trueturn.dsp.sweep import (
    MIN_SIGNAL_TO_CIRCLE,
    analyse_sweep,
    bin_revolutions,
    half_power_resonances,
    local_slope,
    normalised_response,
    revolution_spans_rpm,
)


def sdof_acceleration(speeds_rpm: np.ndarray, natural_rpm: float, zeta: float) -> np.ndarray:
    """Rao's rotating-unbalance response as acceleration phasors (project convention: the
    phasor of Re(X e^{i w t}) is conj(X), phase = lag)."""
    r = np.asarray(speeds_rpm) / natural_rpm
    x = r ** 2 / ((1 - r ** 2) + 2j * zeta * r)
    return np.conj(-(np.asarray(speeds_rpm) / 1000.0) ** 2 * x)


def coast(natural_rpm: float, zeta: float, step: float, noise: float = 0.0,
          seed: int = 0) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """One 'revolution' per speed, log-spaced ``step`` apart, from 0.3 to 3.6 x natural."""
    speeds = natural_rpm * 0.3 * np.exp(np.arange(0.0, math.log(12.0), step))
    rng = np.random.default_rng(seed)
    clean = sdof_acceleration(speeds, natural_rpm, zeta)
    noisy = clean + noise * (rng.normal(size=speeds.size) + 1j * rng.normal(size=speeds.size))
    return speeds, noisy, np.full(speeds.size, max(noise, 1e-12))


@pytest.mark.parametrize("zeta", [0.02, 0.05, 0.1])
@pytest.mark.parametrize("natural_rpm", [850.0, 1000.0, 2400.0])
def test_half_power_recovers_natural_speed_and_damping_of_rao_sdof(natural_rpm: float,
                                                                    zeta: float) -> None:
    # Rao (rotating unbalance) + Ewins (half-power); acceptance: 2 % and 20 %
    speeds, a, sig = coast(natural_rpm, zeta, 0.004)
    sweep = analyse_sweep(speeds, {"p": a}, {"p": sig}, "g pk")
    assert sweep.is_sweep
    [res] = sweep.resonances
    assert res.speed_rpm == pytest.approx(natural_rpm, rel=0.02)
    assert res.damping_ratio == pytest.approx(zeta, rel=0.20)
    assert res.lower_rpm < res.speed_rpm < res.upper_rpm


def test_half_power_with_noise_still_within_the_acceptance() -> None:
    # 1 % noise on the peak-free part of the curve at 1 point per 0.5 % (Rao + Ewins)
    speeds, a, sig = coast(1000.0, 0.05, 0.005, noise=0.002, seed=3)
    sweep = analyse_sweep(speeds, {"p": a}, {"p": sig}, "g pk")
    near = [r for r in sweep.resonances if abs(r.speed_rpm / 1000.0 - 1) < 0.2]
    assert len(near) == 1
    assert near[0].speed_rpm == pytest.approx(1000.0, rel=0.02)
    assert near[0].damping_ratio == pytest.approx(0.05, rel=0.20)
    # no resonance invented elsewhere from the noise (low speeds are below the circle)
    assert len(sweep.resonances) == 1


def test_a_band_too_coarse_gives_no_damping() -> None:
    # 2 % damping: half-power band 4 % wide; points 3 % apart leave it unresolved
    speeds, a, sig = coast(1000.0, 0.02, 0.03)
    [res] = half_power_resonances(speeds, normalised_response(speeds, np.abs(a), "g pk"))
    assert res.damping_ratio is None and res.points_in_band < 3
    assert res.speed_rpm == pytest.approx(1000.0, rel=0.05)


def test_normalisation_powers() -> None:
    # unbalance force ~ n^2, and acceleration = omega^2 x, velocity = omega x (kinematics)
    n = np.array([1000.0, 2000.0])
    assert normalised_response(n, np.array([1.0, 16.0]), "g pk")[1] == pytest.approx(1.0)
    assert normalised_response(n, np.array([1.0, 8.0]), "mm/s rms")[1] == pytest.approx(1.0)
    assert normalised_response(n, np.array([1.0, 4.0]), "um pk-pk")[1] == pytest.approx(1.0)
    assert normalised_response(n, np.array([1.0, 16.0]), "V pk")[1] == pytest.approx(1.0)
    with pytest.raises(ValueError, match="unknown unit"):
        normalised_response(n, n, "furlongs")


def test_two_modes_adding_up_without_a_phase_turn_are_not_a_resonance() -> None:
    # a hump in amplitude whose phase hardly moves is no single-degree-of-freedom resonance
    # (Ewins sec. 2.2: the phase turns by 90 deg between the half-power points)
    speeds = 1000.0 * np.exp(np.arange(-0.7, 0.7, 0.005))
    hump = 1.0 + 2.0 * np.exp(-((np.log(speeds / 1000.0)) / 0.1) ** 2)
    amplitude = hump * (speeds / 1000.0) ** 4
    phase = np.full(speeds.size, 30.0)
    assert half_power_resonances(speeds, normalised_response(speeds, amplitude, "g pk"))
    assert not half_power_resonances(speeds, normalised_response(speeds, amplitude, "g pk"),
                                     phases_deg=phase)


def test_steady_capture_is_not_a_sweep() -> None:
    rng = np.random.default_rng(1)
    speeds = 3000.0 * (1 + 0.003 * rng.standard_normal(400))
    a = np.full(400, 0.5 + 0.2j)
    sweep = analyse_sweep(speeds, {"p": a}, {"p": np.full(400, 0.01)}, "g pk")
    assert not sweep.is_sweep and not sweep.resonances
    assert sweep.high_rpm / sweep.low_rpm < 1.3


def test_bins_average_vectors_and_give_a_95_percent_circle() -> None:
    speeds = np.array([1000.0, 1001.0, 1002.0, 1100.0])
    a = np.array([1 + 0j, 1j, -1 + 0j, 2 + 0j])
    points = bin_revolutions(speeds, {"p": a}, {"p": np.full(4, 0.1)}, "g pk")
    assert [p.revolutions for p in points] == [3, 1]
    first = points[0].value("p")
    assert first is not None
    assert first.amplitude == pytest.approx(abs((1 + 1j - 1) / 3))
    assert first.phase_deg == pytest.approx(90.0)
    # sigma of a mean of 3: 0.1 / sqrt 3; 95 % radius sqrt(-2 ln 0.05) sigma (Rayleigh)
    assert first.confidence_radius == pytest.approx(math.sqrt(-2 * math.log(0.05)) * 0.1 / math.sqrt(3))
    assert first.usable == (first.amplitude >= MIN_SIGNAL_TO_CIRCLE * first.confidence_radius)
    with pytest.raises(ValueError, match="one value per speed"):
        bin_revolutions(speeds, {"p": a[:2]}, {"p": np.full(4, 0.1)})


@pytest.mark.parametrize("ratio", [0.5, 0.9, 1.1, 2.0])
def test_local_slope_is_the_closed_form_derivative(ratio: float) -> None:
    # d ln|A| / d ln n and d phase / d ln n of Rao's response, differentiated numerically
    # (central difference) for the truth
    natural, zeta = 1000.0, 0.05
    speeds, a, sig = coast(natural, zeta, 0.002)
    sweep = analyse_sweep(speeds, {"p": a}, {"p": sig}, "g pk")
    at = ratio * natural
    slope = local_slope(sweep.points, "p", at, window_fraction=0.012)
    assert slope is not None
    h = 1e-5
    up, down = sdof_acceleration(np.array([at * (1 + h)]), natural, zeta)[0], \
        sdof_acceleration(np.array([at * (1 - h)]), natural, zeta)[0]
    p_true = (math.log(abs(up)) - math.log(abs(down))) / (math.log1p(h) - math.log1p(-h))
    q_true = math.degrees(np.angle(up / down)) / (math.log1p(h) - math.log1p(-h))
    assert slope.amplitude_exponent == pytest.approx(p_true, abs=0.05 * abs(p_true) + 0.05)
    assert slope.phase_deg_per_ln_speed == pytest.approx(q_true, abs=0.05 * abs(q_true) + 2.0)
    # far below and far above the resonance the acceleration goes as n^4 and n^2
    if ratio == 0.5:
        assert 3.5 < slope.amplitude_exponent < 5.0
    if ratio == 2.0:
        assert 1.0 < slope.amplitude_exponent < 2.5


def test_one_x_not_rising_below_resonance_says_balancing_may_not_help() -> None:
    # common practice, no source: an unbalance's displacement grows as n^2 below resonance
    # (Rao); a 1x that stays flat there (runout of the shaft under the pickup, an electrical
    # 1x) is not unbalance-like
    from trueturn.dsp.findings import Code, describe
    from trueturn.dsp.sweep import rise_below_first_resonance
    from trueturn.dsp.unbalance import sweep_evidence, verdict
    speeds, a, sig = coast(1000.0, 0.05, 0.004)
    unbalance = analyse_sweep(speeds, {"p": a}, {"p": sig}, "g pk")
    rise = rise_below_first_resonance(unbalance, "p")
    # the truth: the log-log slope of Rao's |r^2 / (1 - r^2 + 2i zeta r)| over the same points
    below = speeds[speeds <= 700.0]
    r = below / 1000.0
    truth = np.polyfit(np.log(below), np.log(np.abs(r ** 2 / (1 - r ** 2 + 0.1j * r))), 1)[0]
    assert rise is not None and rise[0] == pytest.approx(truth, abs=0.05)
    assert 2.0 < truth < 3.0
    assert sweep_evidence("p", *rise).details["ok"]
    # the same resonance, but below it a 1x whose displacement is flat (acceleration ~ n^2)
    flat = a + 0.05 * (speeds / 1000.0) ** 2 * np.exp(1j)
    flat[speeds < 700] = 0.05 * (speeds[speeds < 700] / 1000.0) ** 2 * np.exp(1j)
    other = analyse_sweep(speeds, {"p": flat}, {"p": sig}, "g pk")
    rise = rise_below_first_resonance(other, "p")
    assert rise is not None and abs(rise[0]) < 0.3
    evidence = sweep_evidence("p", *rise)
    assert not evidence.details["ok"]
    judged = verdict([evidence], 0)
    assert judged.code is Code.BALANCING_MAY_NOT_HELP
    assert judged.details["because"] == ["one_x_rises_with_speed"]
    assert "not rising with speed" in describe(judged)
    assert "less than speed^1" in describe(evidence)


def test_tach_tracker_takes_a_coast_down_for_a_speed_change_not_bad_edges() -> None:
    # a motor switched off at 3540 rpm: w(t) = (w0 + f tau) exp(-t/tau) - f tau (constant
    # friction plus a drag proportional to speed, the closed form of that ODE); edges where
    # the angle passes each 2 pi, with 5 us of white jitter. Nothing is a missed, double or
    # knocked edge while the shaft still turns faster than 120 rpm.
    from trueturn.dsp.shaft import TachTracker
    tick_hz, tau, w0 = 2_000_000, 6.0, 3540 * 2 * math.pi / 60
    f = w0 / 24.0
    rng = np.random.default_rng(4)
    stop_w = 120 * 2 * math.pi / 60
    coast_s = tau * math.log((w0 + f * tau) / (stop_w + f * tau))  # until 120 rpm
    t = np.arange(0.0, 3.0 + coast_s, 2e-5)
    after = np.clip(t - 3.0, 0.0, None)
    # the angle: w0 t at speed, then the integral of the coast's w(t)
    angle = np.where(t < 3.0, w0 * t, w0 * 3.0 + (w0 + f * tau) * tau * (1 - np.exp(-after / tau))
                     - f * tau * after)
    turns = np.arange(1, int(angle[-1] / (2 * math.pi)) + 1) * 2 * math.pi
    times = np.interp(turns, angle, t) + rng.normal(0.0, 5e-6, turns.size)
    tracker = TachTracker()
    for when in times:
        tracker.add_edge(int(round(when * tick_hz)))
    assert tracker.missing_edges == 0 and tracker.double_edges == 0
    assert tracker.uneven_revolutions == 0 and tracker.restarts == 0
    assert tracker.revolutions == len(times) - 2  # the first two edges learn the period


@pytest.mark.parametrize("zeta", [0.02, 0.05])
def test_sdof_fit_recovers_a_coarsely_sampled_resonance(zeta: float) -> None:
    # points 3 % apart: the half-power band of 2 % damping holds 1-2 of them; the SDOF curve
    # fit (Ewins sec. 4.3-4.4) uses amplitude and phase and recovers Rao's fn and zeta
    speeds, a, sig = coast(1000.0, zeta, 0.03, noise=1e-4, seed=2)
    sweep = analyse_sweep(speeds, {"p": a}, {"p": sig}, "g pk", min_ratio=1.3)
    [res] = [r for r in sweep.resonances if abs(r.speed_rpm / 1000 - 1) < 0.1]
    assert res.fit_speed_rpm == pytest.approx(1000.0, rel=0.01)
    assert res.fit_damping_ratio == pytest.approx(zeta, rel=0.10)


def test_sdof_fit_refuses_what_is_not_one_mode() -> None:
    from trueturn.dsp.sweep import sdof_fit
    n = np.linspace(800.0, 1200.0, 15)
    rng = np.random.default_rng(0)
    z = rng.normal(size=15) + 1j * rng.normal(size=15)  # no resonance at all
    assert sdof_fit(n, z, np.full(15, 1e-3), 1000.0) is None
    assert sdof_fit(n[:3], z[:3], np.full(3, 1e-3), 1000.0) is None  # too few points


def test_a_peak_of_two_modes_gives_no_damping() -> None:
    # two Rao SDOF modes 10 % apart add up to one hump: no single mode explains it, so no
    # damping may be claimed for it (the SDOF fit misses by 8 %, above the 5 % allowed)
    speeds = 1000.0 * 0.5 * np.exp(np.arange(0.0, math.log(4.0), 0.004))
    both = sdof_acceleration(speeds, 1000.0, 0.06) + sdof_acceleration(speeds, 1100.0, 0.06)
    sweep = analyse_sweep(speeds, {"p": both}, {"p": np.full(speeds.size, 1e-6)}, "g pk")
    assert sweep.resonances and not any(r.single_mode for r in sweep.resonances)
    for res in sweep.resonances:
        if res.single_mode:
            # a damping is given only where one mode explains the peak
            assert min(abs(res.fit_speed_rpm / m - 1) for m in (1000.0, 1100.0)) < 0.03
        else:
            assert res.damping_ratio is None and res.fit_damping_ratio is None
    # a single mode is one
    one = analyse_sweep(speeds, {"p": sdof_acceleration(speeds, 1000.0, 0.06)},
                        {"p": np.full(speeds.size, 1e-6)}, "g pk")
    assert [r.single_mode for r in one.resonances] == [True]


# --- the SDOF fit's damping and its 95 % interval on sparse, noisy points --------------------
# Sources: the response of a damped SDOF system to a rotating unbalance (J. P. Den Hartog,
# *Mechanical Vibrations*, 4th ed., 1956, sec. 3.3; S. S. Rao, as above; from memory); the
# SDOF curve fit and its residual terms: Ewins 2000, sec. 4.3-4.4 (from memory). Each check's
# tolerance is the estimator's own 95 % interval; the coverage bound is binomial.

def sparse_coast(zeta: float, per_band: float, noise_of_peak: float, seed: int,
                 averaged: bool = False) -> tuple[np.ndarray, np.ndarray, np.ndarray,
                                                  np.ndarray | None]:
    """Rao's SDOF (natural speed 1000 rpm) sampled ``per_band`` points across its half-power
    band (``2 zeta`` wide), from 0.6 to 1.5 x natural, with complex normal noise of
    ``noise_of_peak`` x the peak acceleration per component. ``averaged``: each point is the
    mean of the response across its own speed step (a revolution of a fast coast-down),
    computed with 400 sub-points (a plain mean, independent of the fit's quadrature)."""
    step = 2.0 * zeta / per_band
    rng = np.random.default_rng(seed)
    speeds = 1000.0 * np.exp(np.arange(math.log(0.6), math.log(1.5), step)
                             + step * rng.uniform(-0.5, 0.5))
    if averaged:
        spans = speeds * step
        sub = np.linspace(-0.5, 0.5, 400)
        clean = np.array([sdof_acceleration(s + w * sub, 1000.0, zeta).mean()
                          for s, w in zip(speeds, spans, strict=True)])
    else:
        spans = None
        clean = sdof_acceleration(speeds, 1000.0, zeta)
    sigma = noise_of_peak * float(np.abs(sdof_acceleration(np.array([1000.0]), 1000.0,
                                                              zeta))[0])
    noisy = clean + sigma * (rng.normal(size=speeds.size) + 1j * rng.normal(size=speeds.size))
    return speeds, noisy, np.full(speeds.size, sigma), spans


@pytest.mark.parametrize("averaged", [False, True])
@pytest.mark.parametrize("per_band", [3.0, 5.0])
def test_sdof_fit_damping_interval_covers_the_true_damping(per_band: float,
                                                           averaged: bool) -> None:
    # 3-5 points across the half-power band (where the half-power method has too few),
    # noise 1 % of the peak per component (a coast-down revolution's 1x at the DSP's level)
    seeds = range(40)
    covered = resolved = 0
    for zeta in (0.01, 0.03):
        for seed in seeds:
            speeds, a, sig, spans = sparse_coast(zeta, per_band, 0.01, seed, averaged)
            sweep = analyse_sweep(speeds, {"p": a}, {"p": sig}, "g pk", spans_rpm=spans)
            near = [r for r in sweep.resonances if abs(r.speed_rpm / 1000.0 - 1) < 0.1]
            assert len(near) == 1
            [res] = near
            assert res.method == "sdof_fit"
            if res.damping_ratio is None:
                assert res.damping_ratio_95 is None  # never an interval without a value
                continue
            resolved += 1
            assert res.damping_ratio_95 is not None
            low, high = res.damping_ratio_95
            assert low < res.damping_ratio < high
            covered += low <= zeta <= high
    # the fit resolves these (the points tell zeta within a factor 1.5) in most seeds
    assert resolved >= 0.9 * 2 * len(seeds)
    # 95 % nominal; at 80 runs the binomial sigma is 2.4 %, so 87 % is about 3 sigmas below
    assert covered >= 0.87 * resolved


def test_sdof_fit_says_not_resolved_when_the_noise_hides_the_damping() -> None:
    # the same sparse resonance under noise of 30 % of its peak: the points cannot tell zeta
    # within a factor 1.5, so no damping is given (never a number that only looks precise)
    for seed in range(10):
        speeds, a, sig, _ = sparse_coast(0.03, 3.0, 0.3, seed)
        sweep = analyse_sweep(speeds, {"p": a}, {"p": sig}, "g pk")
        for res in sweep.resonances:
            if res.damping_ratio is not None:
                assert res.damping_ratio_95 is not None
                low, high = res.damping_ratio_95
                assert high / low <= 1.5 ** 2 + 1e-9  # only when its interval is that tight
                assert low <= 0.03 <= high


def test_sdof_fit_models_the_revolution_average() -> None:
    # a fast coast-down's revolution spans the whole half-power band of a 1 % mode: read as
    # point samples the peak looks wider (damping too high); with the spans given, the fit
    # averages its model alike and recovers Rao's zeta within its own interval
    speeds, a, sig, spans = sparse_coast(0.01, 1.0, 1e-3, 5, averaged=True)
    assert spans is not None
    fair = analyse_sweep(speeds, {"p": a}, {"p": sig}, "g pk", spans_rpm=spans)
    [res] = [r for r in fair.resonances if abs(r.speed_rpm / 1000.0 - 1) < 0.1]
    assert res.damping_ratio is not None and res.damping_ratio_95 is not None
    assert res.damping_ratio_95[0] <= 0.01 <= res.damping_ratio_95[1]
    naive = analyse_sweep(speeds, {"p": a}, {"p": sig}, "g pk")
    for r in naive.resonances:
        # ignoring the average either misfits (no damping) or reads it clearly too high
        assert r.damping_ratio is None or r.damping_ratio > 1.1 * 0.01


def swept_coast(natural_rpm: float, zeta: float, rate_rpm_s: float, noise_of_peak: float,
                seed: int, low_fraction: float = 0.7,
                second: tuple[float, float] | None = None
                ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A real coast-down through Den Hartog's SDOF (rotating unbalance on a spring-damper):
    ``x'' + 2 zeta wn x' + wn^2 x = w(t)^2 e^{i theta(t)}`` integrated in time by
    :func:`scipy.integrate.solve_ivp` (the build-up and lag of a fast sweep included, as
    F. M. Lewis, Trans. ASME 1932, describes; from memory), speed falling at a constant
    ``rate_rpm_s`` from 1.4 to ``low_fraction`` x natural; ``second`` (natural rpm, zeta)
    adds a second such mode, with its own equation, to the motion. Per revolution its mean
    speed and 1x phasor (project convention: conj of the mean of ``x e^{-i theta}``) with
    complex normal noise."""
    from scipy.integrate import solve_ivp

    wn = natural_rpm * math.pi / 30.0
    rate = rate_rpm_s * math.pi / 30.0
    w0 = 1.4 * wn
    stop_s = (w0 - low_fraction * wn) / rate
    t = np.arange(0.0, stop_s, 1 / 6000.0)

    def one_mode(mode_rpm: float, mode_zeta: float) -> np.ndarray:
        wm = mode_rpm * math.pi / 30.0

        def motion(time_s: float, y: np.ndarray) -> list[float]:
            w = w0 - rate * time_s
            x, v = y[0] + 1j * y[1], y[2] + 1j * y[3]
            acc = (w * w * np.exp(1j * (w0 * time_s - 0.5 * rate * time_s * time_s))
                   - 2 * mode_zeta * wm * v - wm * wm * x)
            return [v.real, v.imag, acc.real, acc.imag]

        x0 = w0 ** 2 / (wm ** 2 - w0 ** 2 + 2j * mode_zeta * wm * w0)  # steady at the start
        sol = solve_ivp(motion, (0.0, stop_s), [x0.real, x0.imag, -w0 * x0.imag, w0 * x0.real],
                        t_eval=t, rtol=1e-9, atol=1e-12, max_step=5e-4)
        return sol.y[0] + 1j * sol.y[1]

    x = one_mode(natural_rpm, zeta)
    if second is not None:
        x = x + one_mode(*second)
    theta = w0 * t - 0.5 * rate * t * t
    turn = np.floor(theta / (2 * math.pi)).astype(int)
    speeds, phasors = [], []
    for k in range(int(turn.max())):
        sel = turn == k
        speeds.append(60.0 / (t[sel][-1] - t[sel][0] + 1 / 6000.0))
        phasors.append(np.conj(np.mean(x[sel] * np.exp(-1j * theta[sel]))))
    a = np.array(phasors)
    sigma = noise_of_peak * float(np.abs(a).max())
    rng = np.random.default_rng(seed)
    a = a + sigma * (rng.normal(size=a.size) + 1j * rng.normal(size=a.size))
    return np.array(speeds), a, np.full(a.size, sigma)


def test_a_fast_coast_down_is_fitted_with_its_build_up_and_lag() -> None:
    # the grinder's rubber-feet mode at its coast-down rate: 3 % damping at 823 rpm passed at
    # 284 rpm/s (sweep rate / (zeta wn)^2 about 4.4): the 1x lags, its peak falls about 9 %
    # below the mode and a steady model reads the damping about 3 times too high. The swept
    # model (the build-up computed along the revolutions' own speeds) recovers Den Hartog's
    # zeta within its interval, or says not resolved; it never gives the steady reading.
    covered = resolved = 0
    for seed in range(6):
        speeds, a, sig = swept_coast(823.0, 0.03, 284.0, 0.003, seed)
        sweep = analyse_sweep(speeds, {"p": a}, {"p": sig}, "um pk-pk",
                              spans_rpm=revolution_spans_rpm(speeds))
        assert sweep.resonances
        for res in sweep.resonances:
            if res.damping_ratio is None:
                continue
            resolved += 1
            assert res.swept is True
            assert res.damping_ratio_95 is not None
            covered += res.damping_ratio_95[0] <= 0.03 <= res.damping_ratio_95[1]
            assert res.fit_speed_rpm == pytest.approx(823.0, rel=0.02)
    assert resolved >= 5
    assert covered >= resolved - 1  # 95 % nominal: at most one miss in six


def test_the_ringing_after_a_fast_passage_is_no_resonance() -> None:
    # Den Hartog's SDOF (823 rpm, 3 %) coasted at 284 rpm/s on down to 0.4 x its natural
    # speed: the free vibration left by the fast passage beats against the falling 1x
    # (Lewis 1932) and the normalised response shows two more peaks below the mode, whose
    # phase keeps turning. They are no resonance: the swept model of the mode explains them.
    # A real second mode down there (560 rpm) is kept.
    for seed in range(3):
        speeds, a, sig = swept_coast(823.0, 0.03, 284.0, 0.003, seed, low_fraction=0.4)
        sweep = analyse_sweep(speeds, {"p": a}, {"p": sig}, "um pk-pk",
                              spans_rpm=revolution_spans_rpm(speeds))
        used = [(p.speed_rpm, v.amplitude, v.phase_deg) for p in sweep.points
                for v in p.pickups if v.usable]
        n = np.array([u[0] for u in used])
        peaks = half_power_resonances(n, normalised_response(
            n, np.array([u[1] for u in used]), "um pk-pk"), "p", np.array([u[2] for u in used]))
        assert len([p for p in peaks if p.speed_rpm < 0.8 * 823.0]) >= 2  # the ringing shows
        [res] = sweep.resonances
        assert res.speed_rpm == pytest.approx(823.0, rel=0.02)
        assert res.peak_rpm is not None and res.peak_rpm < 0.92 * 823.0  # the lagged peak
        assert res.swept is True and res.damping_ratio_95 is not None
        assert res.damping_ratio_95[0] <= 0.03 <= res.damping_ratio_95[1]
        assert res.sweep_rate_parameter is not None and res.sweep_rate_parameter > 1.0
        speeds, a, sig = swept_coast(823.0, 0.03, 284.0, 0.003, seed, low_fraction=0.4,
                                     second=(560.0, 0.03))
        sweep = analyse_sweep(speeds, {"p": a}, {"p": sig}, "um pk-pk",
                              spans_rpm=revolution_spans_rpm(speeds))
        assert any(r.speed_rpm < 0.8 * 823.0 for r in sweep.resonances)  # the second mode
        for r in sweep.resonances:
            if r.damping_ratio is None:
                continue
            # the first mode's fit reaches into the second's swept response, which its steady
            # residual terms model only roughly: about 8 % high, at the edge of its interval
            # (a known limit of the one-mode fit, not hidden here)
            assert r.speed_rpm == pytest.approx(823.0, rel=0.02)
            assert r.damping_ratio == pytest.approx(0.03, rel=0.1)


def test_a_neighbouring_mode_widens_the_damping_interval_to_hold_the_truth() -> None:
    # Den Hartog's SDOF modes at 823 rpm and 560 rpm (3 % each, solve_ivp, Lewis's fast
    # coast-down at 284 rpm/s): the first mode's swept window (its ringing, to 1.5x below
    # it) reaches into the second mode's build-up, which its steady residual terms model only
    # roughly, and its damping reads about 8 % high. The misfit runs smoothly along the
    # revolutions, so the interval widens (fewer effective points) and, with the one-mode
    # model's own error, holds the true 3 % at about its nominal rate; before it missed in
    # all six seeds (its low end 3.005-3.052 %).
    resolved = covered = 0
    for seed in range(6):
        speeds, a, sig = swept_coast(823.0, 0.03, 284.0, 0.003, seed, low_fraction=0.4,
                                     second=(560.0, 0.03))
        sweep = analyse_sweep(speeds, {"p": a}, {"p": sig}, "um pk-pk",
                              spans_rpm=revolution_spans_rpm(speeds))
        [first] = [r for r in sweep.resonances if abs(r.speed_rpm / 823.0 - 1) <= 0.02]
        if first.damping_ratio is None:
            continue
        resolved += 1
        assert first.damping_ratio_95 is not None
        covered += first.damping_ratio_95[0] <= 0.03 <= first.damping_ratio_95[1]
    assert resolved >= 5
    assert covered >= resolved - 1


def _swept_by_polynomial_bilinear(natural_rpm: float, zeta: float, history_rpm: np.ndarray,
                                  power: int = 0, samples_per_rev: int = 64,
                                  sensed_power: int | None = None) -> np.ndarray:
    """The swept mode's per-revolution 1x as dsp/sweep.py computed it before its closed-form
    coefficients: scipy.signal.bilinear (prewarped at wn) and lfilter from the steady state,
    the grid rebuilt on every call (kept here as the reference the faster path must match)."""
    from scipy import signal

    n = np.asarray(history_rpm, dtype=float)
    w_rev = n * (math.pi / 30.0)
    durations = 60.0 / n
    ends = np.cumsum(durations)
    mids = ends - 0.5 * durations
    dt = float(durations.min()) / samples_per_rev
    t = np.arange(0.0, float(ends[-1]), dt)
    w = np.interp(t, mids, w_rev)
    theta = np.concatenate([[0.0], np.cumsum(0.5 * (w[1:] + w[:-1]) * dt)])
    wn = natural_rpm * math.pi / 30.0
    warped = 2.0 / dt * math.tan(wn * dt / 2.0)
    b, a = signal.bilinear([wn * wn], [1.0, 2.0 * zeta * warped, warped * warped], 1.0 / dt)
    b, a = np.real(b), np.real(a)
    force = (w / wn) ** 2 * np.exp(1j * theta)
    z0 = complex(np.exp(1j * w[0] * dt))
    gain = complex(np.polyval(b[::-1], 1 / z0) / np.polyval(a[::-1], 1 / z0))
    u1, u2 = force[0] / z0, force[0] / (z0 * z0)
    s2 = b[2] * u1 - a[2] * gain * u1
    s1 = b[1] * u1 - a[1] * gain * u1 + b[2] * u2 - a[2] * gain * u2
    x = signal.lfilter(b, a, force, zi=np.array([s1, s2]))[0]
    rev = np.minimum(np.searchsorted(ends, t, side="right"), n.size - 1)
    own = max((power if sensed_power is None else sensed_power) - 2, 0)
    reading = x
    if own >= 1:
        velocity = np.gradient(x, dt)
        reading = velocity / (1j * w_rev[rev])
        if own >= 2:
            accel = wn * wn * force - 2.0 * zeta * wn * velocity - wn * wn * x
            reading = accel / (-(w_rev[rev] ** 2))
    demod = reading * np.exp(-1j * theta)
    count = np.maximum(np.bincount(rev, minlength=n.size), 1)
    mean = (np.bincount(rev, demod.real, n.size) + 1j * np.bincount(rev, demod.imag, n.size)) \
        / count
    return mean / (w_rev / wn) ** 2


@pytest.mark.parametrize("power,sensed", [(0, None), (3, 4), (4, None), (2, 4)])
@pytest.mark.parametrize("natural_rpm,zeta,rate_rpm_s", [(823.0, 0.03, 284.0),
                                                         (3000.0, 0.0083, 645.0),
                                                         (1500.0, 0.1, -400.0)])
def test_swept_mode_response_closed_form_matches_the_polynomial_bilinear(
        natural_rpm: float, zeta: float, rate_rpm_s: float, power: int,
        sensed: int | None) -> None:
    # the closed-form prewarped bilinear coefficients (Oppenheim & Schafer) give the same
    # filter as scipy.signal.bilinear's polynomial algebra: the same per-revolution 1x to
    # rounding, on coast-downs and a run-up (negative rate), for each quantity sensed
    from scipy import signal

    from trueturn.dsp.sweep import bilinear_sdof, swept_mode_response

    speeds = [1.4 * natural_rpm] if rate_rpm_s > 0 else [0.7 * natural_rpm]
    while 0.6 * natural_rpm < speeds[-1] < 1.5 * natural_rpm:
        speeds.append(speeds[-1] - rate_rpm_s * 60.0 / speeds[-1])  # one revolution later
    history = np.array(speeds)
    new = swept_mode_response(natural_rpm, zeta, history, power, sensed_power=sensed)
    old = _swept_by_polynomial_bilinear(natural_rpm, zeta, history, power, sensed_power=sensed)
    assert np.abs(new - old).max() <= 1e-9 * np.abs(old).max()
    wn, dt = natural_rpm * math.pi / 30.0, 60.0 / history.max() / 64
    warped = 2.0 / dt * math.tan(wn * dt / 2.0)
    b, a = bilinear_sdof(wn, zeta, dt)
    b_ref, a_ref = signal.bilinear([wn * wn], [1.0, 2.0 * zeta * warped, warped ** 2], 1 / dt)
    assert np.allclose(b, b_ref, rtol=1e-12) and np.allclose(a, a_ref, rtol=1e-12)


def test_swept_mode_response_follows_den_hartogs_sdof_integrated_in_time() -> None:
    # the swept model's per-revolution 1x against Den Hartog's SDOF under a rotating
    # unbalance integrated by scipy's solve_ivp through a fast coast-down (swept_coast,
    # noise-free): both start steady and are driven by w^2 e^{i theta}; they differ only in
    # the time grid (64 steps per revolution against 6000 Hz), where each starts and the
    # speed between revolutions (linear between their middles against a constant rate):
    # 0.6 % of the peak at most (measured), 1 % allowed
    from trueturn.dsp.sweep import swept_mode_response

    for natural_rpm, zeta, rate in ((823.0, 0.03, 284.0), (1000.0, 0.01, 150.0)):
        speeds, a, _ = swept_coast(natural_rpm, zeta, rate, 0.0, 0)
        model = swept_mode_response(natural_rpm, zeta, speeds) * (speeds / natural_rpm) ** 2
        truth = np.conj(a)
        assert speeds.size >= 25
        error = np.abs(model - truth).max() / np.abs(truth).max()
        assert error < 0.01, error
