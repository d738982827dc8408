"""The 1x's 95 % circle near a mains hum line (a 2-pole motor on its own mains).

Synthetic captures with known amplitudes (invented numbers: a 40-count 1x, a small 2x, hum
of about one count at the line frequency and half that at twice it, 1 count of white
noise, as the balancing bench's shops), analysed by ``dsp.analyze_capture`` over 30
revolutions as the app keeps a run. Checks:

* the meter's share of the hum fit that the revolutions' scatter cannot show
  (:func:`trueturn.dsp.order.unseen_covariance`) equals the exact covariance of the
  estimator, found independently by pushing every unit sample through it (the estimator is
  linear in the samples: ``Cov = sigma^2 L L'``; Kay, Fundamentals of Statistical Signal
  Processing: Estimation Theory, 1993, ch. 4 and 8, from memory);
* the true 1x lies inside the reading's 95 % circle in at least 90 % of 200 fixed seeds at
  1, 2 and 5 Hz from the line, once with the grid 0.04 Hz off (the binomial spread of 200 trials at 95 % is 1.5 %, so 90 %
  is over three of them below; before the hum fit's share was counted the circle held about
  30 % at 1 Hz and 50 % at 2 Hz);
* nearer than the window can resolve (0.4 Hz over half a second) the reading is either
  covered or blocked with ``order_on_mains`` naming the 1x and the revolutions that would
  separate them; over that many it is steady again and covered;
* far from the line the circle is as tight as the scatter's (it costs nothing there).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from trueturn.dsp import analyze_capture
from trueturn.dsp.findings import Code, describe
from trueturn.dsp.order import estimate_orders
from trueturn.dsp.synthetic import OrderComponent, SyntheticRun, ToneComponent, synthesize

VOLTS_PER_COUNT = 5.0 / 1024
MAINS_HZ = 60.0
REVS = 30
SEEDS = 200


def capture(offset_hz: float, seed: int, revs: int = REVS, noise_counts: float = 1.0,
            grid_hz: float = 0.0) -> tuple[bytes, complex]:
    """A 1x ``offset_hz`` from the nominal mains line, the grid ``grid_hz`` off it, random
    phases per seed; the true 1x (V)."""
    rng = np.random.default_rng(seed)
    rot_hz = MAINS_HZ + offset_hz
    phases = rng.uniform(0.0, 360.0, 4)
    run = SyntheticRun(
        speed_rpm=60.0 * rot_hz, duration_s=(revs + 2) / rot_hz, rate_hz=4000, channels=1,
        orders=((OrderComponent(1, 40.0, phases[0]), OrderComponent(2, 3.0, phases[1])),),
        tones=((ToneComponent(MAINS_HZ + grid_hz, 1.2, phases[2]),
                ToneComponent(2 * (MAINS_HZ + grid_hz), 0.6, phases[3])),),
        noise_counts=noise_counts, first_edge_rev=float(rng.uniform()), seed=seed)
    raw, truth = synthesize(run)
    return raw, truth.order_phasors[0][1] * VOLTS_PER_COUNT


def read(offset_hz: float, seed: int, revs: int = REVS,
         grid_hz: float = 0.0):  # type: ignore[no-untyped-def]
    raw, true_v = capture(offset_hz, seed, revs, grid_hz=grid_hz)
    r = analyze_capture(raw, revs=revs, mains_hz=MAINS_HZ, unit="V pk").readings[0]
    return r, true_v


def blocked_on_mains(r) -> bool:  # type: ignore[no-untyped-def]
    return any(f.code is Code.ORDER_ON_MAINS and f.details.get("order") == 1 and f.blocking
               for f in r.findings)


def test_the_unseen_share_is_the_estimators_exact_covariance() -> None:
    # a short record, so the linear map can be found sample by sample: 1x 2 Hz under 50 Hz,
    # under a beat per window (every tone is fitted, none dropped)
    tick_hz, fs_hz, rot_hz, revs = 2_000_000, 1000.0, 48.0, 20
    comb = (49.9, 50.0, 50.1, 99.8, 100.0, 100.2)
    n = int((revs + 1) / rot_hz * fs_hz)
    ticks = np.arange(n, dtype=np.int64) * int(tick_hz / fs_hz) + 17
    edges = np.round(np.arange(revs + 1) / rot_hz * tick_hz).astype(np.int64) + 300
    used = (ticks >= edges[0]) & (ticks < edges[-1])

    def per_rev(y: np.ndarray) -> np.ndarray:
        est = estimate_orders(ticks, y, edges[:-1], edges[1:], tick_hz, (1, 2, 3), comb)
        return est.phasors[:, 0]

    # columns: the effect of each sample on each revolution's 1x (real, imaginary)
    effect = np.array([per_rev(np.eye(n)[i]) for i in np.nonzero(used)[0]]).T  # (R, m)
    rows = np.concatenate([effect.real, effect.imag])  # (2R, m): a_r then b_r
    mean_map = np.stack([rows[:revs].mean(axis=0), rows[revs:].mean(axis=0)])
    total = mean_map @ mean_map.T
    dev_a = rows[:revs] - rows[:revs].mean(axis=0)
    dev_b = rows[revs:] - rows[revs:].mean(axis=0)
    seen = np.zeros((2, 2))
    for r in range(revs):
        d = np.stack([dev_a[r], dev_b[r]])
        seen += d @ d.T
    seen /= revs * (revs - 1)
    exact_unseen = total - seen
    rng = np.random.default_rng(3)
    y = rng.normal(0.0, 1.0, n)
    est = estimate_orders(ticks, y, edges[:-1], edges[1:], tick_hz, (1, 2, 3), comb)
    assert not est.dropped_hz
    formula = est.unseen_cov[1:3, 1:3] / est.noise_rms ** 2
    assert formula == pytest.approx(exact_unseen, rel=1e-6, abs=1e-9 * np.abs(total).max())
    # and it matters here: most of the mean's variance is not in the scatter
    assert np.trace(exact_unseen) > 0.5 * np.trace(total)
    assert est.order_unseen_variance(1) == pytest.approx(
        float(np.linalg.eigvalsh(formula)[-1]) * est.noise_rms ** 2, rel=1e-9)


@pytest.mark.parametrize(("offset_hz", "grid_hz"),
                         [(-1.0, 0.0), (1.0, 0.04), (2.0, 0.0), (-5.0, 0.0)])
def test_the_circle_holds_the_true_1x_near_the_hum_line(offset_hz: float,
                                                         grid_hz: float) -> None:
    inside = blocked = 0
    for seed in range(SEEDS):
        r, true_v = read(offset_hz, seed, grid_hz=grid_hz)
        if blocked_on_mains(r):
            blocked += 1
            continue
        inside += abs(r.phasor - true_v) <= r.confidence_radius
    shown = SEEDS - blocked
    assert shown >= 0.9 * SEEDS  # a resolvable distance is read, not refused
    assert inside / shown >= 0.90, (inside, shown)


def test_too_near_the_line_is_covered_or_blocked_and_a_longer_run_separates() -> None:
    offset_hz = 0.4  # under one beat over 30 revolutions (0.5 s): the hum is not separable
    outcomes = []
    needed = []
    for seed in range(60):
        r, true_v = read(offset_hz, seed)
        covered = abs(r.phasor - true_v) <= r.confidence_radius
        if blocked_on_mains(r):
            assert not r.steady
            f = next(f for f in r.findings if f.code is Code.ORDER_ON_MAINS)
            needed.append(f.details["revolutions_needed"])
            assert "at least" in describe(f)
        outcomes.append(covered or blocked_on_mains(r))
    assert all(outcomes)
    assert needed, "the hum was never found inseparable at 0.4 Hz over half a second"
    # one beat between the 1x and the nearest comb tone: 60.4 Hz / 0.3 Hz
    assert max(needed) == math.ceil((MAINS_HZ + offset_hz) / (offset_hz - 0.1))
    longer = max(needed)
    inside = 0
    for seed in range(40):
        r, true_v = read(offset_hz, seed, revs=longer)
        assert not blocked_on_mains(r)
        assert r.steady
        inside += abs(r.phasor - true_v) <= r.confidence_radius
    assert inside >= 34  # 95 % of 40, less three binomial spreads (1.4 each)


def test_far_from_the_line_the_circle_is_the_scatters() -> None:
    ratios = []
    for seed in range(10):
        r, _ = read(-10.0, seed)
        ratios.append(r.confidence_random / r.confidence_scatter)
    assert min(ratios) >= 1.0
    assert float(np.median(ratios)) <= 1.1
