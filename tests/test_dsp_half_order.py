"""A line at exactly 0.5x (a 2:1 pulley) and the per-revolution 1x fit (issue #22 bug).

Synthetic signals with known amplitudes (invented numbers): a 1x and a half-order line locked
to the shaft, white noise. Checks, as the other statistical tests of the meter do (tolerances
from the estimator's own 95 % circle, coverage over many seeds):
* the 1x reading holds the true 1x inside its own stated 95 % circle in about 95 % of seeds;
* its circle is as tight as without the line (the line no longer inflates the scatter) and
  the reading is steady; the line is said (``half_order``);
* with an odd number of revolutions the oldest is dropped (a whole number of pairs);
* without the line nothing is paired (the T^2 test at 0.999 keeps ordinary readings as they
  were).
The projection that makes the leak alternate: the integrals of cos(theta/2) against cos theta
and sin theta over [0, 2 pi) are 0 and 8/3 (elementary calculus; common practice, no source).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from trueturn.dsp import LiveAnalyzer
from trueturn.dsp.averaging import pair_half_order
from trueturn.dsp.findings import Code, describe
from trueturn.dsp.synthetic import OrderComponent, SyntheticRun, synthesize
from trueturn.link.codec import Message, StreamDecoder

VOLTS_PER_COUNT = 5.0 / 1024


def reading(seed: int, half_counts: float, one_x_counts: float = 20.0,
            duration_s: float = 3.0):  # type: ignore[no-untyped-def]
    run = SyntheticRun(
        speed_rpm=2700.0, duration_s=duration_s,
        orders=((OrderComponent(1, one_x_counts, 40.0), OrderComponent(0.5, half_counts, 100.0)),
                (OrderComponent(1, 30.0, 250.0),)),
        noise_counts=2.0, seed=seed)
    raw, truth = synthesize(run)
    meter = LiveAnalyzer(max_revs=400, unit="V pk", mains_hz=60.0)
    for m in StreamDecoder().feed(raw):
        if isinstance(m, Message):
            meter.feed(m)
    r = meter.readings()[0]
    return r, truth.order_phasors[0][1] * VOLTS_PER_COUNT


def test_the_leak_alternates_as_the_projection_says() -> None:
    # one revolution sampled finely: LS fit of cos(theta/2) on [1, cos, sin] over [0, 2 pi)
    theta = (np.arange(4000) + 0.5) / 4000 * 2 * math.pi
    design = np.column_stack([np.ones_like(theta), np.cos(theta), np.sin(theta)])
    coef = np.linalg.lstsq(design, np.cos(theta / 2), rcond=None)[0]
    assert coef[1] == pytest.approx(0.0, abs=1e-6)
    assert coef[2] == pytest.approx((8 / 3) / math.pi, rel=1e-4)  # integral / pi
    coef_next = np.linalg.lstsq(design, np.cos(theta / 2 + math.pi), rcond=None)[0]
    assert coef_next[2] == pytest.approx(-coef[2])


def test_a_half_order_line_leaves_the_1x_unbiased_inside_its_own_circle() -> None:
    seeds = range(40)
    inside, radii, plain_radii = 0, [], []
    for seed in seeds:
        r, truth = reading(seed, half_counts=40.0)  # the 0.5x twice the 1x
        assert r.steady
        assert any(f.code is Code.HALF_ORDER for f in r.findings)
        inside += abs(r.phasor - truth) <= r.confidence_radius
        radii.append(r.confidence_radius)
        plain, _ = reading(seed, half_counts=0.0)
        plain_radii.append(plain.confidence_radius)
        assert not any(f.code is Code.HALF_ORDER for f in plain.findings)
    # 95 % nominal; 34 of 40 is about 2.6 binomial sigmas below it
    assert inside >= 34
    # the line no longer widens the circle: as tight as without it (pairs: F(2, n-2))
    assert float(np.median(radii)) == pytest.approx(float(np.median(plain_radii)), rel=0.25)
    half = next(f for f in r.findings if f.code is Code.HALF_ORDER)
    assert "half the running speed" in describe(half)


def test_an_odd_number_of_revolutions_drops_the_oldest() -> None:
    rng = np.random.default_rng(5)
    mu, leak = 1.0 + 0.5j, 0.8 - 0.3j
    n = 41
    z = mu + leak * (-1.0) ** np.arange(n) + 0.01 * (rng.normal(size=n) + 1j * rng.normal(size=n))
    paired = pair_half_order(z)
    assert paired.paired and len(paired.vectors) == 20
    assert abs(complex(paired.vectors.mean()) - mu) < 0.02
    assert abs(paired.alternating) == pytest.approx(abs(leak), rel=0.05)
    # the mean of all 41 carries one unpaired leak: biased by |leak| / 41
    assert abs(complex(z.mean()) - mu) > 0.015
    # no alternation: left as it is
    plain = mu + 0.01 * (rng.normal(size=n) + 1j * rng.normal(size=n))
    assert not pair_half_order(plain).paired
