"""Shaft angle and speed from once-per-rev tach edges, all in the board's timer ticks.

Every tach edge starts a revolution at shaft angle 0 (the reference mark passing the tach).
Between two accepted edges the angle is interpolated linearly in time (constant speed within
one revolution; at 3 % drift over a few seconds the error is far below 0.01 degrees).

Bad edges are found by the period ratio (new period / the period the recent good ones
predict, a Theil-Sen line; their median while fewer than four are known):
a ratio well below 1 is a double trigger (a scratch, a second reflective spot, noise) and the
edge is dropped; a ratio near 2 or more means edges were missed and the long interval is not
used as a revolution. Both are counted and flagged, never silently averaged in.

Timing jitter (a dirty or worn mark, a slow sensor, a loose mount) moves edges early or
late. Each accepted period is compared with the one predicted from the recent ones (a
Theil-Sen line, robust to the odd bad edge, so a spin-up or coast-down is not mistaken for
jitter), and each edge with the time where the good edges before it put it: the last point
of that time line plus the predicted period. A good edge moves the time line halfway to
itself (``ANCHOR_GAIN``: white jitter averages out); an edge more than ``uneven_fraction``
of a turn off it is off and does not move it. A run of off edges closes at the next good
edge, and every revolution that starts or ends at an off edge is listed in ``uneven`` so
averages leave it out: runs of knocked edges (two or three in a row, either way) are
cleaned as well as single ones, and the good edges around them are judged against the
time line, not against the knocked edges. While a run is open its revolutions are undecided
(``undecided_from``; the live meter holds them). A run that does not close within
``max_uneven_run`` edges starts the time line again from the latest edge: when its offsets
grew steadily one way it was a change of speed the prediction had not caught up with and
its revolutions are kept, otherwise (edges wandering, heavy jitter) they are left out. The period residuals' scatter
gives the edge timing scatter in degrees: white edge jitter of sigma shows as period
residuals of sigma * sqrt(2) (common practice, no source).

Tach edges the board saw but the USB link lost (``add_edge(..., lost_before=n)``, from the
tach message's edge counter) are link loss, not a sensor fault: the interval across them is
not used and they are counted in ``link_lost_edges``, apart from ``missing_edges``.
"""

from __future__ import annotations

import functools
import math
from collections import deque
from collections.abc import Sequence
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

TICK_WRAP = 1 << 32
# How far a good tach edge moves the time line the next edges are judged against (1: to the
# edge itself). Below 1, white edge jitter averages out over a few edges, so one edge a little
# early does not make the good edges after it look late (an alpha tracker; common practice,
# no source); a knocked edge (off) does not move it at all.
ANCHOR_GAIN = 0.5


def extend_tick(tick_u32: int, reference_tick: int) -> int:
    """The 64-bit tick nearest ``reference_tick`` whose low 32 bits are ``tick_u32``.

    The board's Timer1 count is extended to 32 bits (wraps every 35.8 min at 2 MHz); the host
    keeps one unwrapped time line by placing each new value next to a recent one.

    Parameters
    ----------
    tick_u32 : int
        The board's 32-bit tick count, board timer ticks.
    reference_tick : int
        A recent unwrapped tick, board timer ticks (64-bit).

    Returns
    -------
    int
        The unwrapped tick within half a wrap of ``reference_tick``, board timer ticks.

    References
    ----------
    .. [1] Serial-number arithmetic (unwrapping a counter by the nearest value; as RFC 1982
       does for sequence numbers, from memory); protocol/SPEC.md for the board's clock.
    """
    delta = (tick_u32 - reference_tick + (TICK_WRAP >> 1)) % TICK_WRAP - (TICK_WRAP >> 1)
    return reference_tick + delta


def speed_rpm_from_period(period_ticks: float, tick_hz: float) -> float:
    """Shaft speed from one revolution's length.

    Parameters
    ----------
    period_ticks : float
        Length of one revolution, board timer ticks.
    tick_hz : float
        The board's timer tick rate, Hz.

    Returns
    -------
    float
        Speed, rpm (``60 tick_hz / period_ticks``).

    References
    ----------
    .. [1] Definition of rev/min (common practice, no source).
    """
    return 60.0 * tick_hz / period_ticks


def rpm_to_hz(speed_rpm: float) -> float:
    """Rotation frequency (1x) of a speed; 3000 rpm is 50 Hz.

    Parameters
    ----------
    speed_rpm : float
        Speed, rpm.

    Returns
    -------
    float
        Rotation frequency, Hz.

    References
    ----------
    .. [1] Definition of rev/min (common practice, no source).
    """
    return speed_rpm / 60.0


def hz_to_rpm(frequency_hz: float) -> float:
    """Speed of a rotation frequency.

    Parameters
    ----------
    frequency_hz : float
        Rotation frequency, Hz.

    Returns
    -------
    float
        Speed, rpm.

    References
    ----------
    .. [1] Definition of rev/min (common practice, no source).
    """
    return frequency_hz * 60.0


class Revolution(NamedTuple):
    """One whole revolution between two accepted tach edges (64-bit ticks, end exclusive).

    Immutable; a named tuple (one is made every revolution in the meter's hot path).
    """

    number: int
    start_tick: int
    end_tick: int

    @property
    def period_ticks(self) -> int:
        return self.end_tick - self.start_tick

    def speed_rpm(self, tick_hz: float) -> float:
        """The revolution's mean speed.

        Parameters
        ----------
        tick_hz : float
            The board's timer tick rate, Hz.

        Returns
        -------
        float
            Speed, rpm.

        References
        ----------
        .. [1] Definition of rev/min (common practice, no source).
        """
        return speed_rpm_from_period(self.period_ticks, tick_hz)


@dataclass(frozen=True)
class EdgeFlag:
    """A tach edge that was not used: ``kind`` is ``double``, ``missing``, ``link`` (edges
    lost on the USB link before it) or ``restart``."""

    tick: int
    kind: str
    period_ratio: float
    edges_missed: int = 0


class TachTracker:
    """Tach edges in, whole revolutions out; double and missing edges flagged and excluded.

    ``double_ratio``/``missing_ratio``: a period shorter than ``double_ratio`` times the
    reference (median of the last ``history`` good periods) is a double edge, one longer
    than ``missing_ratio`` times it hides missed edges. After ``restart_after`` rejections in
    a row (a real change of speed, a stop and restart) the reference is learned again.
    Memory is bounded: the flag list keeps the last ``max_flags`` entries.
    """

    def __init__(self, double_ratio: float = 0.7, missing_ratio: float = 1.5,
                 history: int = 9, restart_after: int = 4, max_flags: int = 256,
                 uneven_fraction: float = 0.01, max_uneven_run: int = 4) -> None:
        self.double_ratio = double_ratio
        self.uneven_fraction = uneven_fraction
        self.max_uneven_run = max_uneven_run
        self.uneven_revolutions = 0
        self.uneven: deque[int] = deque(maxlen=max_flags)  # numbers of uneven revolutions
        self._uneven_set: set[int] = set()  # the same, for lookups
        self._residuals: deque[float] = deque(maxlen=64)  # (period - predicted) / predicted
        self._anchor: float | None = None  # where the time line puts the last edge (ticks)
        self._run: list[int] = []  # numbers of the revolutions of the open run
        self._run_offsets: list[float] = []  # the offsets of its edges (fraction of a turn)
        self.link_lost_edges = 0
        self.missing_ratio = missing_ratio
        self.restart_after = restart_after
        self._periods: deque[int] = deque(maxlen=history)
        self._last_edge: int | None = None
        self._rejected_in_row = 0
        self._candidate: int | None = None
        self.revolutions = 0
        self.double_edges = 0
        self.missing_edges = 0
        self.restarts = 0
        self.flags: deque[EdgeFlag] = deque(maxlen=max_flags)

    @property
    def reference_period_ticks(self) -> float | None:
        """Median of the recent good periods, or None while still learning."""
        if not self._periods:
            return None
        return float(_median(list(self._periods)))

    @property
    def last_edge_tick(self) -> int | None:
        return self._last_edge

    def reset(self) -> None:
        """Forget the edge history (a new stream); the counters are kept.

        References
        ----------
        .. [1] Double and missed edges by the period ratio against the predicted period
           (0.7 and 1.5): common practice, no source.
        """
        self._periods.clear()
        self._residuals.clear()
        self._run.clear()
        self._run_offsets.clear()
        self._anchor = None
        self._last_edge = None
        self._candidate = None
        self._rejected_in_row = 0

    def add_edge(self, tick: int, lost_before: int = 0) -> Revolution | None:
        """Take one tach edge; return the revolution it completes, if any.

        Parameters
        ----------
        tick : int
            The edge's time, unwrapped board timer ticks (:func:`extend_tick`).
        lost_before : int, default 0
            Edges the board counted before this one that never arrived (lost on the USB link):
            the interval across them is no revolution and the edges are counted in
            ``link_lost_edges``, not as missed by the sensor.

        Returns
        -------
        Revolution or None
            The revolution ended by this edge (start and end in ticks), or None when the edge is
            a double trigger, closes an interval with missed or lost edges, or starts the
            history.

        References
        ----------
        .. [1] Double and missed edges by the period ratio against the predicted period
           (0.7 and 1.5): common practice, no source.
        .. [2] Theil-Sen line for the predicted period (median of pairwise slopes; H. Theil 1950,
           P. K. Sen 1968, from memory); the time line moved halfway by each good edge (an alpha
           tracker): common practice, no source.
        """
        last = self._last_edge
        if lost_before > 0 and last is not None:
            self.link_lost_edges += lost_before
            self.flags.append(EdgeFlag(tick, "link", 0.0, lost_before))
            self._last_edge = tick
            self.close_run()
            self._anchor = float(tick)
            return None
        if last is None:
            self._last_edge = tick
            return None
        period = tick - last
        if period <= 0:
            self.flags.append(EdgeFlag(tick, "double", 0.0))
            self.double_edges += 1
            return None
        if not self._periods:
            return self._learn(tick, period)
        recent = list(self._periods)
        # against the period the recent ones predict (a coast-down's last turns lengthen by
        # 10 % or more each, which a median of nine would take for missed edges); the
        # median (reference_period_ticks) while fewer than four are known
        predicted = self._predicted(recent)
        ratio = period / (predicted if predicted is not None and predicted > 0
                          else _median(recent))
        if ratio < self.double_ratio:
            self.double_edges += 1
            self.flags.append(EdgeFlag(tick, "double", ratio))
            self._rejected(tick)
            return None
        if ratio > self.missing_ratio:
            missed = max(1, int(math.floor(ratio + 0.5)) - 1)
            self.missing_edges += missed
            self.flags.append(EdgeFlag(tick, "missing", ratio, missed))
            self._last_edge = tick
            self.close_run()
            self._anchor = float(tick)
            self._rejected(tick)
            return None
        residual, predicted = self._residual(period, recent, predicted)
        self._rejected_in_row = 0
        self._periods.append(period)
        self._last_edge = tick
        rev = self._emit(last, tick)
        self._judge(rev, residual, predicted)
        return rev

    @property
    def timing_scatter_deg(self) -> float:
        """RMS scatter of single tach edges in shaft degrees over the recent revolutions
        (nan until a few are known); well under 0.5 deg for a clean mark and sensor."""
        if len(self._residuals) < 4:
            return math.nan
        rms = math.sqrt(sum(r * r for r in self._residuals) / len(self._residuals))
        return 360.0 * rms / math.sqrt(2.0)

    def _residual(self, period: int, recent: list[int],
                  predicted: float | None) -> tuple[float | None, float | None]:
        """(``period`` against ``predicted``, the one the ``recent`` periods predict, as a
        fraction of it; the prediction in ticks), or (None, None) while fewer than four are
        known."""
        if predicted is None:
            return None, None
        _, inflation = _theil_sen_table(len(recent))
        residual = (period - predicted) / predicted
        self._residuals.append(residual / inflation)
        return residual, predicted

    @staticmethod
    def _predicted(recent: list[int]) -> float | None:
        """The next period by a Theil-Sen line through ``recent`` (None below four)."""
        n = len(recent)
        if n < 4:
            return None
        pairs, _ = _theil_sen_table(n)
        # Theil-Sen line through the recent periods (robust to the odd bad edge), one step on
        slope = _median([(recent[j] - recent[i]) / d for i, j, d in pairs])
        intercept = _median([p - slope * i for i, p in enumerate(recent)])
        return intercept + slope * n

    @property
    def undecided_from(self) -> int | None:
        """The number of the first revolution not judged yet (an open run), or None."""
        return self._run[0] if self._run else None

    def close_run(self) -> None:
        """End an open run of off edges without its way back.

        Called at a gap in the edges or the end of the data: the run's revolutions are left out,
        as they may hold knocked edges.

        References
        ----------
        .. [2] Theil-Sen line for the predicted period (median of pairwise slopes; H. Theil 1950,
           P. K. Sen 1968, from memory); the time line moved halfway by each good edge (an alpha
           tracker): common practice, no source.
        """
        for number in self._run:
            self._mark(number)
        self._run.clear()
        self._run_offsets.clear()

    def _judge(self, rev: Revolution, residual: float | None,
               predicted: float | None) -> None:
        """Judge the edge that closed ``rev`` by its offset from where the good edges before
        it put it; open, extend or close a run of off edges."""
        if residual is None or predicted is None or self._anchor is None:
            self._anchor = float(rev.end_tick)  # still learning: the edge is the time line
            return
        expected = self._anchor + predicted
        offset = (rev.end_tick - expected) / predicted  # fraction of a turn
        if abs(offset) <= self.uneven_fraction:  # a good edge
            if self._run:  # back in step: the run's edges were off
                self._run.append(rev.number)  # it starts at the last off edge
                self.close_run()
            # the good edge moves the time line part of the way (white edge jitter averages)
            self._anchor = expected + ANCHOR_GAIN * (rev.end_tick - expected)
            return
        self._run.append(rev.number)
        self._run_offsets.append(offset)
        if len(self._run) > self.max_uneven_run:
            # no way back. Offsets growing steadily one way are a change of speed (or of
            # acceleration) the prediction had not caught up with: nothing was knocked, keep
            # the revolutions. Otherwise the edges wander (heavy jitter): leave them out.
            steps = np.diff(np.abs(self._run_offsets))
            same_side = all(o * offset > 0 for o in self._run_offsets)
            # growing, or levelling off as the prediction catches up (a motor switched off:
            # within a quarter of the off limit, far below a knocked edge's 5-15 degrees)
            if same_side and (steps >= -0.25 * self.uneven_fraction).all():
                self._run.clear()
            self.close_run()
            self._anchor = float(rev.end_tick)
            return
        self._anchor = expected  # an off edge does not move the time line

    def _mark(self, number: int) -> None:
        if number not in self._uneven_set:
            if len(self.uneven) == self.uneven.maxlen:
                self._uneven_set.discard(self.uneven[0])
            self.uneven.append(number)
            self._uneven_set.add(number)
            self.uneven_revolutions += 1

    def is_uneven(self, number: int) -> bool:
        """Whether revolution ``number`` starts or ends at an off edge (a set lookup).

        Parameters
        ----------
        number : int
            The revolution's number (:attr:`Revolution.number`).

        Returns
        -------
        bool
            True when the revolution is left out for a knocked edge.

        References
        ----------
        .. [2] Theil-Sen line for the predicted period (median of pairwise slopes; H. Theil 1950,
           P. K. Sen 1968, from memory); the time line moved halfway by each good edge (an alpha
           tracker): common practice, no source.
        """
        return number in self._uneven_set

    def _emit(self, start: int, end: int) -> Revolution:
        rev = Revolution(self.revolutions, start, end)
        self.revolutions += 1
        return rev

    def _learn(self, tick: int, period: int) -> Revolution | None:
        """No reference yet: accept once two consecutive periods agree within 15 %."""
        previous = self._candidate
        self._candidate = period
        start = self._last_edge
        self._last_edge = tick
        if previous is not None and 1 / 1.15 <= period / previous <= 1.15:
            self._periods.append(previous)
            self._periods.append(period)
            self._candidate = None
            assert start is not None
            return self._emit(start, tick)
        return None

    def _rejected(self, tick: int) -> None:
        self._rejected_in_row += 1
        if self._rejected_in_row >= self.restart_after:
            self.restarts += 1
            self.flags.append(EdgeFlag(tick, "restart", 0.0))
            self._periods.clear()
            self._candidate = None
            self._last_edge = tick
            self._rejected_in_row = 0


def _median(values: Sequence[float]) -> float:
    """Median as :func:`statistics.median` gives it (mean of the middle two for even n)."""
    ordered = sorted(values)
    mid = len(ordered) // 2
    return ordered[mid] if len(ordered) % 2 else (ordered[mid - 1] + ordered[mid]) / 2


@functools.cache
def _theil_sen_table(n: int) -> tuple[tuple[tuple[int, int, int], ...], float]:
    """(index pairs i < j with j - i, prediction inflation) for a line through n points.

    The prediction's own noise inflates the residual; for a least-squares line the variance
    factor is 1 + 1/n + (n - mean)^2 / Sxx (textbook regression prediction).
    """
    pairs = tuple((i, j, j - i) for i in range(n) for j in range(i + 1, n))
    mean_x = (n - 1) / 2
    sxx = sum((i - mean_x) ** 2 for i in range(n))
    return pairs, math.sqrt(1 + 1 / n + (n - mean_x) ** 2 / sxx)


def shaft_angle_rad(ticks: np.ndarray, start_tick: int, end_tick: int) -> np.ndarray:
    """Shaft angle within one revolution, linear in time between the two tach edges.

    Parameters
    ----------
    ticks : numpy.ndarray
        Sample times, board timer ticks.
    start_tick : int
        The tach edge that starts the revolution, ticks (angle 0).
    end_tick : int
        The tach edge that ends it, ticks (angle 2 pi).

    Returns
    -------
    numpy.ndarray
        Shaft angle, rad (0 at the tach edge, increasing with rotation).

    References
    ----------
    .. [1] Order tracking by resampling on a once-per-rev reference with constant speed within
       a revolution (computed order tracking; common practice, no source).
    """
    return (2.0 * math.pi / (end_tick - start_tick)) * (np.asarray(ticks, dtype=float) - start_tick)
