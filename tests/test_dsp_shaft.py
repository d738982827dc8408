"""Shaft angle, speed and tach edge checks (trueturn.dsp.shaft)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from trueturn.dsp.shaft import (
    TICK_WRAP,
    TachTracker,
    extend_tick,
    hz_to_rpm,
    rpm_to_hz,
    shaft_angle_rad,
    speed_rpm_from_period,
)


def test_rpm_hz_common_practice() -> None:
    # common practice, no source: 1x frequency in Hz is rpm / 60; 3000 rpm is 50 Hz,
    # 1800 rpm is 30 Hz, 3600 rpm is 60 Hz (two-pole motor on 60 Hz mains, no slip)
    assert rpm_to_hz(3000.0) == pytest.approx(50.0)
    assert rpm_to_hz(1800.0) == pytest.approx(30.0)
    assert hz_to_rpm(60.0) == pytest.approx(3600.0)
    # 2 MHz board clock (16 MHz / 8): one revolution at 3000 rpm lasts 20 ms = 40 000 ticks
    assert speed_rpm_from_period(40_000, 2_000_000) == pytest.approx(3000.0)


@pytest.mark.parametrize("reference, raw, expected", [
    (1000, 1500, 1500),
    (TICK_WRAP - 100, 50, TICK_WRAP + 50),          # timer wrapped after the reference
    (TICK_WRAP + 50, TICK_WRAP - 100, TICK_WRAP - 100),  # edge slightly older than reference
    (5 * TICK_WRAP + 7, 3, 5 * TICK_WRAP + 3),
])
def test_extend_tick(reference: int, raw: int, expected: int) -> None:
    assert extend_tick(raw % TICK_WRAP, reference) == expected


def _edges(period: float, count: int, start: int = 0) -> list[int]:
    return [start + round(k * period) for k in range(count)]


def test_clean_edges_give_every_revolution() -> None:
    tracker = TachTracker()
    revs = [r for t in _edges(40_000, 20) if (r := tracker.add_edge(t))]
    # learning needs two agreeing periods, so the first complete revolution is the second
    assert len(revs) == 18
    assert all(r.period_ticks == 40_000 for r in revs)
    assert revs[0].speed_rpm(2_000_000) == pytest.approx(3000.0)
    assert tracker.double_edges == tracker.missing_edges == 0


def test_double_edge_is_flagged_and_dropped() -> None:
    edges = _edges(40_000, 20)
    edges.insert(10, edges[9] + 9_000)  # a scratch on the shaft triggers 81 deg after the mark
    tracker = TachTracker()
    revs = [r for t in edges if (r := tracker.add_edge(t))]
    assert tracker.double_edges == 1
    assert [f.kind for f in tracker.flags] == ["double"]
    assert all(r.period_ticks == 40_000 for r in revs)
    assert len(revs) == 18  # nothing lost: the true edge after the scratch still closes rev 9


def test_missing_edge_is_flagged_and_long_interval_excluded() -> None:
    edges = _edges(40_000, 20)
    del edges[10]
    tracker = TachTracker()
    revs = [r for t in edges if (r := tracker.add_edge(t))]
    assert tracker.missing_edges == 1
    assert tracker.flags[0].kind == "missing" and tracker.flags[0].edges_missed == 1
    assert all(r.period_ticks == 40_000 for r in revs)
    assert len(revs) == 16  # the two revolutions around the gap are not used


def test_speed_step_relearns() -> None:
    # after a stop and restart at a much lower speed every period looks "long" at first
    edges = _edges(40_000, 10) + _edges(70_000, 12, start=40_000 * 9 + 70_000)
    tracker = TachTracker()
    revs = [r for t in edges if (r := tracker.add_edge(t))]
    assert tracker.restarts == 1
    assert revs[-1].period_ticks == 70_000
    assert len([r for r in revs if r.period_ticks == 70_000]) >= 5


def test_gradual_spin_up_is_tracked_without_flags() -> None:
    periods = 80_000 * 0.99 ** np.arange(140)  # 1 % faster every revolution, 4x overall
    edges = np.concatenate([[0], np.cumsum(np.round(periods))]).astype(int).tolist()
    tracker = TachTracker()
    revs = [r for t in edges if (r := tracker.add_edge(t))]
    assert not tracker.flags
    assert len(revs) == len(periods) - 1


def test_shaft_angle_interpolation() -> None:
    angles = shaft_angle_rad(np.array([1000, 1250, 1500, 1999]), 1000, 2000)
    assert angles == pytest.approx([0.0, math.pi / 2, math.pi, 2 * math.pi * 0.999])
