"""The streaming meter: decoded messages in, one :class:`PickupReading` per pickup out.

:class:`LiveAnalyzer` takes identity, stream_config, samples and tach messages one at a
time (duck-typed: anything with ``.name`` and ``[field]``, e.g.
:class:`trueturn.link.codec.Message`). Memory is bounded: raw samples are kept only until the
revolutions they belong to are fitted, then each revolution is a few dozen numbers
(:class:`trueturn.dsp.order.BlockFit` rows) in a window of ``max_revs``.

A revolution is fitted as soon as the samples covering its end have arrived (one sample
block after the tach edge); :meth:`LiveAnalyzer.readings` then costs well under a
millisecond, so the app can refresh after every revolution.

Sample times: conversion index i was triggered at ``start_tick + i * period_ticks`` and held
``aperture_delay_ticks`` later (identity message), so the fit uses
``start_tick + i * period_ticks + aperture_delay_ticks``; the channel-to-channel skew of the
multiplexed ADC is part of that formula. ``start_tick`` and ``period_ticks`` are read from
every sample block (SPEC 4.4), so a lost stream_config never misplaces a sample in time.
"""

from __future__ import annotations

import bisect
import dataclasses
import math
from collections import deque
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np

from trueturn.dsp.averaging import (
    SteadinessLimits,
    VectorStats,
    combined_radius,
    pair_half_order,
    steadiness,
    subtended_deg,
    vector_stats,
)
from trueturn.dsp.findings import Code, Finding, describe
from trueturn.dsp.order import (
    ROW_FIELDS,
    BlockFit,
    fit_blocks,
    fit_even,
    group_for,
    solve_orders,
)
from trueturn.dsp.shaft import Revolution, TachTracker, extend_tick
from trueturn.dsp.spectrum import Spectrum, name_by_levels, spectrum
from trueturn.dsp.units import (
    PickupProfile,
    chain_response,
    conversion_factors,
    convert_phasor,
    default_unit,
)
from trueturn.link.catalogue import Limit, load_catalogue
from trueturn.model import Reading

DEFAULT_TICK_HZ = load_catalogue().limit("board_tick_hz").min
DEFAULT_ADC_BITS = 10
DEFAULT_REFERENCE_MV = 5000
#: ADC references the meter converts with (SPEC 4.10): outside, readings are refused. The
#: standard build's AVCC (and a nominal reference) within usable_reference_mv; the AREF build's
#: external reference (identity.adc_reference_kind aref_vs_bandgap) within usable_aref_mv.
USABLE_REFERENCE_MV = load_catalogue().limit("usable_reference_mv")
USABLE_AREF_MV = load_catalogue().limit("usable_aref_mv")
AREF_KIND = {name: code for code, name in load_catalogue().reference_kinds.items()}["aref_vs_bandgap"]
MAX_REVOLUTION_S = 10.0  # slowest shaft measured: 6 rpm
TACH_SCATTER_WARN_DEG = 0.5  # tach edges scattering more than this are worth a word
# Timing bias bound, in board ticks: the input capture holds the tick in which the tach edge
# came (up to 1 tick after it, ATmega328P datasheet, "Input Capture Unit", from memory), and
# identity.aperture_delay_ticks is the trigger-to-hold delay rounded to whole ticks (0.5).
TIMING_BIAS_TICKS = 1.5



#: The longest window the live meter averages to tell a 1x from a mains hum line next to it
#: (``order_on_mains`` with ``revolutions_needed``: one beat between them): 6 s of signal, a
#: beat of at least 1/6 Hz, so the 1x at least about 0.27 Hz from the line (past the hum
#: comb's +/-0.1 Hz). Why no longer: the hum is fitted as a comb of fixed tones 1/30 Hz
#: apart (:data:`MAINS_COMB_STEPS`), which follows a grid a few hundredths of a hertz off
#: only while its tones drift apart by well under half a cycle over the window (0.2 cycle at
#: 6 s); beyond that the grid's offset leaks into the 1x past its circle (measured with five
#: tones 0.05 Hz apart: 0.25 Hz from the line over 6.7 s, grid 0.02 Hz off, hum three times
#: the 1x: errors 1.3 times the
#: circle). And the beat must stay well above the motor's own speed wander within the window
#: (an induction motor's slip follows its load: about 0.1 % of 3600 rpm is 0.06 Hz; common
#: practice, from memory). Nearer the line the reading is refused with what the person can
#: do (another speed, less hum) rather than waited for. The meter then holds at most
#: :func:`mains_hold_revs` revolutions (722 on 60 Hz mains, about 16.7 kB each per pickup:
#: 24 MB at two pickups).
MAINS_WINDOW_MAX_S = 6.0
#: The hum comb of a meter that waits out a mains line, in steps of its spread: seven tones
#: 1/30 Hz apart at the line (1/15 Hz at twice it). Three tones 0.1 Hz apart follow a grid a
#: few hundredths of a hertz off over a window of a second or two, not over the several
#: seconds of a wait: with the grid 0.02 Hz off and a hum three times the 1x, 0.3-0.4 Hz
#: from the line, the 1x read over one beat was 0.5-1.7 counts off against a circle of 0.1.
#: Measured 0.3 Hz from the line, hum three times the 1x, grid 0.03 Hz off: five tones 0.05
#: Hz apart held the true 1x in 56 of 60 seeds, seven in 59 of 60 (tests/test_dsp_mains_wait.py,
#: bench/bench_dsp.py); each revolution then keeps about 16.7 kB per pickup (three tones:
#: 4.4 kB) and a reading over 60 revolutions costs about 6 ms instead of 4 (one BLAS thread).
MAINS_COMB_STEPS = (-1.0, -2.0 / 3.0, -1.0 / 3.0, 0.0, 1.0 / 3.0, 2.0 / 3.0, 1.0)
#: a longer reading is fitted again after this fraction of its window is new (the app
#: refreshes ten times a second; a 1200-revolution fit takes tens of milliseconds)
MAINS_REFIT_FRACTION = 0.05
#: A 1x nearer than this to a mains hum line is read over at most :data:`MAINS_WINDOW_MAX_S`
#: of signal by a meter that waits out the line (``trueturn analyze`` reads a whole capture
#: that way): over a longer window the hum comb no longer follows a grid a few hundredths of
#: a hertz off and what it leaves leaks into the 1x past its circle. Measured with the seven
#: tones over 20 s captures, hum three times the 1x, grid 0.03 Hz off: 0.6 Hz from the line
#: 52 of 60 seeds inside the circle, 0.8 Hz 57, 1 Hz 60 (three tones, 0.4 Hz from the line,
#: 10 s: 0 of 31); over the last 6 s 97-99 of 100 at 0.3-0.5 Hz
#: (tests/test_analysis_mains_window.py).
MAINS_NEAR_HZ = 1.0


def mains_hold_revs(mains_hz: float | None, hum_spread_hz: float = 0.1) -> int:
    """The revolutions a meter that waits out a mains line holds: :data:`MAINS_WINDOW_MAX_S`
    of the fastest 1x that can lie next to a hum line (twice the line plus its comb's
    spread); 0 without mains.

    Parameters
    ----------
    mains_hz : float or None
        The line frequency, Hz.
    hum_spread_hz : float, default 0.1
        The hum comb's spread at the line (twice it at twice the line), Hz.

    Returns
    -------
    int
        Revolutions.

    References
    ----------
    .. [1] Common practice, no source (see :data:`MAINS_WINDOW_MAX_S`).
    """
    if not mains_hz:
        return 0
    return math.ceil(MAINS_WINDOW_MAX_S * 2.0 * (mains_hz + hum_spread_hz))


def near_mains_line(one_x_hz: float, mains_hz: float | None) -> float | None:
    """The hum line (the mains frequency or twice it) within :data:`MAINS_NEAR_HZ` of a 1x,
    the nearer one; None when neither is (or no mains, or no speed).

    Parameters
    ----------
    one_x_hz : float
        The 1x (the shaft's speed), Hz.
    mains_hz : float or None
        The line frequency, Hz.

    Returns
    -------
    float or None
        The hum line's nominal frequency, Hz.

    References
    ----------
    .. [1] Common practice, no source (see :data:`MAINS_NEAR_HZ`).
    """
    if not mains_hz or not math.isfinite(one_x_hz):
        return None
    base = min((mains_hz, 2.0 * mains_hz), key=lambda b: abs(one_x_hz - b))
    return base if abs(one_x_hz - base) < MAINS_NEAR_HZ else None


#: the speed counts as steady for the spectrum while every revolution stays within this
#: fraction of the first settled one (our choice: a motor's load wander stays well inside,
#: a run-up or coast-down leaves it within a few revolutions)
STEADY_SPECTRUM_FRACTION = 0.02

class MessageLike(Protocol):
    @property
    def name(self) -> str: ...

    def __getitem__(self, key: str) -> Any: ...


@dataclass(frozen=True)
class Harmonic:
    """One order of a reading: amplitude and phase (lag, degrees) in the reading's unit."""

    order: int
    amplitude: float
    phase_deg: float


@dataclass(frozen=True)
class PickupReading(Reading):
    """The 1x reading of one pickup over the averaged revolutions (a :class:`model.Reading`,
    so every layer takes it as it is), with what the meter knows besides: the channel, the
    2x/3x, the noise and hum, the findings, and what the 95 % circle is made of."""

    channel: int = 0
    warnings: tuple[str, ...] = ()
    harmonics: tuple[Harmonic, ...] = ()
    noise_rms_v: float = math.nan
    hum_v: dict[float, float] = field(default_factory=dict)
    findings: tuple[Finding, ...] = ()  # the warnings as data (trueturn.dsp.findings)
    # What the 95 % circle is made of (dsp/README.md, "What the 95 % circle covers"):
    # the random part from the revolutions' scatter, plus a bound on the timing bias
    confidence_random: float = math.nan  # the random part: scatter and hum fit together
    confidence_scatter: float = math.nan  # radius from the scatter alone
    timing_bias_deg: float = 0.0  # phase bound of tach capture and aperture rounding
    window_s: float = math.nan  # time spanned by the averaged revolutions
    #: samples of this channel at an ADC rail (count 0 or 2^bits - 1) within the averaged
    #: revolutions; ``clipped`` is True when there is any (the 1x then reads low)
    clipped_samples: int = 0

    @property
    def phasor(self) -> complex:
        """``amplitude * exp(i phase)`` (see trueturn.angles)."""
        return self.vector

    def as_reading(self) -> Reading:
        """The plain reading other layers keep (a job file stores this), unknowns as None.

        Returns
        -------
        Reading
            Amplitude in ``unit``, phase (degrees, lag), confidence (degrees and radius in
            ``unit``), revolutions, steadiness and speed (rpm); non-finite values as None.

        References
        ----------
        .. [1] The shared nouns: model/README.md (ours; no external source).
        """
        return Reading(
            self.sensor, self.amplitude, self.unit, self.phase_deg, self.confidence_deg,
            self.revolutions, self.steady,
            self.speed_rpm if self.speed_rpm is not None and math.isfinite(self.speed_rpm)
            else None,
            self.confidence_radius if self.confidence_radius is not None
            and math.isfinite(self.confidence_radius) else None,
            self.clipped, self.no_tach)


class _Ring:
    """The last ``size`` samples of one channel, in order (for the spectrum)."""

    def __init__(self, size: int) -> None:
        self.data = np.zeros(size)
        self.count = 0
        self.pos = 0

    def clear(self) -> None:
        self.count = 0
        self.pos = 0

    def extend(self, values: np.ndarray) -> None:
        size = self.data.size
        if values.size >= size:
            self.data[:] = values[-size:]
            self.pos, self.count = 0, size
            return
        end = self.pos + values.size
        if end <= size:
            self.data[self.pos:end] = values
        else:
            cut = size - self.pos
            self.data[self.pos:] = values[:cut]
            self.data[: end - size] = values[cut:]
        self.pos = end % size
        self.count = min(size, self.count + values.size)

    def values(self) -> np.ndarray:
        if self.count < self.data.size:
            return self.data[: self.count].copy()
        return np.concatenate([self.data[self.pos:], self.data[: self.pos]])




class _RowStore:
    """The last ``limit`` rows of several arrays, appended in blocks (amortised O(1) per row)."""

    def __init__(self, limit: int) -> None:
        self.limit = limit
        self.count = 0
        self.arrays: dict[str, np.ndarray] = {}

    def append(self, block: dict[str, np.ndarray]) -> None:
        new = len(next(iter(block.values())))
        if new >= self.limit:
            self.arrays = {k: np.array(v[-self.limit:]) for k, v in block.items()}
            self.count = self.limit
            return
        if not self.arrays and new:
            # the first block is kept as it is (no copy: the caller hands it over); the next
            # one grows the store into arrays of its own
            self.arrays = dict(block)
            self.count = new
            return
        if not self.arrays:
            cap = min(self.limit, max(256, 2 * new))
            self.arrays = {k: np.zeros((cap,) + v.shape[1:], v.dtype) for k, v in block.items()}
        cap = len(next(iter(self.arrays.values())))
        if self.count + new > cap:
            if cap < self.limit:  # grow
                cap = min(self.limit, max(2 * cap, self.count + new))
                for k, v in self.arrays.items():
                    grown = np.zeros((cap,) + v.shape[1:], v.dtype)
                    grown[: self.count] = v[: self.count]
                    self.arrays[k] = grown
            if self.count + new > cap:  # full at the limit: drop the oldest rows
                drop = self.count + new - cap
                for v in self.arrays.values():
                    v[: self.count - drop] = v[drop: self.count]
                self.count -= drop
        for k, v in block.items():
            self.arrays[k][self.count: self.count + new] = v
        self.count += new

    def last(self, n: int) -> dict[str, np.ndarray]:
        start = max(0, self.count - n)
        return {k: v[start: self.count] for k, v in self.arrays.items()}

    def __len__(self) -> int:
        return self.count


class LiveAnalyzer:
    """Streaming order-tracked meter for all pickups of one board.

    ``profiles``: one :class:`PickupProfile` per channel (missing ones are uncalibrated,
    named "pickup N"); ``unit``: a key of :data:`trueturn.dsp.units.UNITS` or None for
    each profile's default; ``mains_hz`` 50 or 60 (hum at it and twice it is fitted out);
    ``max_revs`` revolutions averaged (a sliding window); ``batch_revs`` revolutions fitted
    together when nobody asks for readings in between (bounded memory in batch use).
    ``hum_spread_hz``: the grid is never exactly at 50/60 Hz, so each hum frequency is fitted
    as a comb of three tones ``f, f +/- spread`` (twice the spread at 2x line), which follows
    a grid off by a few hundredths of a hertz over a window of a few seconds; 0 fits one tone.
    ``wait_out_mains``: when the 1x over ``max_revs`` cannot be told from a mains line
    (``order_on_mains`` blocking, with ``revolutions_needed``), :meth:`readings` averages the
    revolutions it needs instead, up to :data:`MAINS_WINDOW_MAX_S` of signal (the meter then
    holds up to :func:`mains_hold_revs` revolutions); until it has them the finding says how
    many it holds (``revolutions_held``); its hum comb then has seven tones
    (:data:`MAINS_COMB_STEPS`).
    """

    def __init__(self, profiles: Sequence[PickupProfile] = (), unit: str | None = None,
                 mains_hz: float | None = 50.0, max_revs: int = 100,
                 orders: tuple[int, ...] = (1, 2, 3), limits: SteadinessLimits | None = None,
                 spectrum_seconds: float = 4.0, batch_revs: int = 256,
                 hum_spread_hz: float = 0.1, wait_out_mains: bool = False) -> None:
        if 1 not in orders:
            raise ValueError("orders must include 1")
        self.wait_out_mains = wait_out_mains
        self.profiles = tuple(profiles)
        self.unit = unit
        self.mains_hz = mains_hz
        self.max_revs = max_revs
        self.orders = tuple(orders)
        self.limits = limits or SteadinessLimits()
        self.spectrum_seconds = spectrum_seconds
        self.batch_revs = batch_revs
        self.hum_spread_hz = hum_spread_hz
        #: the revolutions held (the longest window a reading may average)
        self.hold_revs = max(max_revs, mains_hold_revs(mains_hz, hum_spread_hz)) \
            if wait_out_mains else max_revs
        self.tick_hz = DEFAULT_TICK_HZ
        self.adc_bits = DEFAULT_ADC_BITS
        self.reference_mv = DEFAULT_REFERENCE_MV  # the one in use (SPEC 4.10)
        self.reference_field = "identity.adc_reference_mv"  # where it came from
        self._identity_reference_mv = DEFAULT_REFERENCE_MV
        self.reference_kind = 0  # identity.adc_reference_kind (0 nominal until one is seen)
        self.aperture_ticks = 0
        self.identity_seen = False
        self.streams = 0  # streams that carried samples (a configure-only one does not count)
        self.tach = TachTracker()
        self.timebase_from_blocks = 0  # streams whose stream_config never arrived
        self.block_max = 0  # the most samples one block held
        self._edge_count: int | None = None  # the last tach message's edge_count
        self._last_status: MessageLike | None = None
        self._reset_stream(None)

    # ---------------------------------------------------------------- stream state
    def _reset_stream(self, config: MessageLike | None) -> None:
        self.config = config
        self.channels = int(config["channels"]) if config else 0
        self.rate_hz = float(config["rate_hz"]) if config else 0.0
        self.period_ticks = int(config["period_ticks"]) if config else 0
        self.start_tick = int(config["start_tick"]) if config else 0
        # SPEC 4.10: convert with the reference the board measured at this stream's start
        try:
            self.reference_mv = int(config["adc_reference_mv"]) if config else 0
            self.reference_field = "stream_config.adc_reference_mv"
        except KeyError:
            self.reference_mv = 0
        if not self.reference_mv:
            self.reference_mv = self._identity_reference_mv
            self.reference_field = "identity.adc_reference_mv"
        self._next_index: int | None = None
        self._chunks: deque[tuple[int, np.ndarray]] = deque()  # (first index, interleaved)
        self._fresh: list[np.ndarray] = []  # blocks not yet in the ring nor clip-counted
        self._gaps: deque[tuple[int, int]] = deque(maxlen=64)
        self._pending: list[Revolution] = []
        self._pending_ends: list[int] = []
        self._rows = [_RowStore(self.hold_revs) for _ in range(self.channels)]
        # per channel, each fitted revolution's samples at an ADC rail (aligned with _rows)
        self._clips = [_RowStore(self.hold_revs) for _ in range(self.channels)]
        self._periods = _RowStore(self.hold_revs)
        self._revs_fitted = 0  # every revolution fitted in this stream (the rows slide)
        # per channel: (window, revolutions fitted then, reading) of the last longer reading
        self._long: dict[int, tuple[int, int, PickupReading]] = {}
        # per channel: the same for a reading shortened next to a hum line (_near_mains)
        self._near: dict[int, tuple[int, int, PickupReading]] = {}
        # how long the speed has held within STEADY_SPECTRUM_FRACTION of one value: the
        # spectrum looks at no samples from before (a run-up's sweeping 1x is no peak)
        self._steady_ref_rpm: float | None = None
        self._steady_s = 0.0
        ring_len = max(64, int(self.spectrum_seconds * self.rate_hz)) * max(self.channels, 1)
        self._ring = _Ring(ring_len)
        self._latest_tick = self.start_tick
        self._last_update_tick = self.start_tick
        self.revs_with_gaps = 0
        self.revs_uneven = 0
        self._levels: dict[int, dict[str, float]] = {}  # per channel, from the last reading
        self._ended = False
        self.revs_skipped = 0
        self.clipped_samples = 0
        self.samples_seen = 0
        # board counters (status, totals since reset) at the stream's start and now
        self._board_base: dict[str, int] | None = (
            _board_counters(self._last_status) if self._last_status is not None else None)
        self._board_now: dict[str, int] | None = None
        self.tach.reset()

    def feed(self, msg: MessageLike) -> bool:
        """Take one decoded message; True when the readings should be refreshed.

        That is when a revolution's samples are complete (about one 15 ms sample block after its
        closing tach edge at 2 x 4 kSps), and at least once per second of stream time even without
        revolutions, so a stalled tach or a very slow shaft still shows.

        Parameters
        ----------
        msg : MessageLike
            A decoded message (identity, stream_config, samples, tach, status; others ignored).

        Returns
        -------
        bool
            True when :meth:`readings` has something new.

        References
        ----------
        .. [1] protocol/SPEC.md (the messages, their counters and timebase; ours).
        .. [2] Order fit and averaging: see :mod:`trueturn.dsp.order` (S. M. Kay, "Fundamentals of
           Statistical Signal Processing: Estimation Theory", 1993, from memory) and
           :mod:`trueturn.dsp.averaging` (circular T^2, Victor & Mast 1991, from memory).
        """
        name = msg.name
        if name == "samples":
            return self._samples(msg)
        if name == "tach":
            count = int(msg["edge_count"])
            # the board counts every edge it takes (16 bits, SPEC 4.5): a jump is edges the
            # USB link lost, not edges the sensor missed; the same count again is the same
            # edge (SPEC 5, no loss, nothing new), a count going back started again
            lost = 0
            if self._edge_count is not None:
                step = (count - self._edge_count) & 0xFFFF
                if step == 0:
                    return False
                if step < 0x8000:
                    lost = step - 1
            self._edge_count = count
            if self.config is not None:
                tick = extend_tick(int(msg["tick"]), self._latest_tick)
                rev = self.tach.add_edge(tick, lost)
                if rev is not None:
                    self._pending.append(rev)
                    self._pending_ends.append(rev.end_tick)
                    # (its samples usually come with the next block: nothing ready yet)
                    return self._latest_tick >= self._pending_ends[0] and \
                        self._ready_count() > 0
            return False
        if name == "status":
            self._status(msg)
        elif name == "stream_config":
            self._reset_stream(msg)
        elif name == "identity":
            self._edge_count = None  # a board restart counts from 0 again
            self.identity_seen = True
            self.tick_hz = int(msg["tick_hz"])
            self.adc_bits = int(msg["adc_bits"])
            self._identity_reference_mv = int(msg["adc_reference_mv"])
            try:
                self.reference_kind = int(msg["adc_reference_kind"])
            except KeyError:
                self.reference_kind = 0
            if self.config is None or self.reference_field.startswith("identity"):
                self.reference_mv = self._identity_reference_mv
                self.reference_field = "identity.adc_reference_mv"
            self.aperture_ticks = int(msg["aperture_delay_ticks"])
        return False

    def _status(self, msg: MessageLike) -> None:
        """Track the board's loss counters over the stream (SPEC 4.6: totals since reset)."""
        self._last_status = msg
        counters = _board_counters(msg)
        if self.config is None or self._next_index is None:
            self._board_base = counters  # before the stream's first sample block
            return
        if self._board_base is None or any(counters.get(k, 0) < v
                                           for k, v in self._board_base.items()):
            self._board_base = counters  # first status of the stream, or the board restarted
        self._board_now = counters

    def board_losses(self) -> dict[str, int]:
        """How much each board counter rose during this stream, as far as status messages tell.

        Returns
        -------
        dict of str to int
            Rise of ``adc_overruns``, ``samples_dropped``, ``frames_dropped``,
            ``tach_suppressed`` and ``capture_overwrites`` (those the board sends); empty before
            two status messages of the stream.

        References
        ----------
        .. [1] protocol/SPEC.md (the messages, their counters and timebase; ours).
           Section 4.6 (status: totals since reset).
        """
        if self._board_base is None or self._board_now is None:
            return {}
        return {k: v - self._board_base.get(k, v) for k, v in self._board_now.items()}

    @property
    def adc_late_unexplained(self) -> bool:
        """The board counted late ADC conversions in this stream but no gap in the sample
        indices was seen: firmware that shifts sample times instead of skipping them (a wrong
        reading), so readings are refused."""
        return self.board_losses().get("adc_overruns", 0) > 0 and not self._gaps

    @property
    def usable_reference(self) -> Limit:
        """The references counts are converted with (SPEC 4.10): limits.usable_aref_mv for the
        AREF build's external reference, else limits.usable_reference_mv (AVCC)."""
        return USABLE_AREF_MV if self.reference_kind == AREF_KIND else USABLE_REFERENCE_MV

    @property
    def reference_problem(self) -> str | None:
        """Why counts cannot become volts (SPEC 4.10): the ADC reference outside its usable
        limit, the field named (the words of findings.describe); None when it is usable."""
        if self.reference_mv in self.usable_reference:
            return None
        return describe(self._reference_finding())

    def _reference_finding(self) -> Finding:
        usable = self.usable_reference
        return Finding(Code.ADC_REFERENCE_REFUSED, details={
            "field": self.reference_field, "reference_mv": self.reference_mv,
            "min_mv": usable.min, "max_mv": usable.max,
            "aref": int(self.reference_kind == AREF_KIND)})

    def end_of_stream(self) -> None:
        """No more messages will come (the end of a capture).

        Stops holding back the newest revolution for the edge after it, and leaves out a run of
        off tach edges that never came back in step.

        References
        ----------
        .. [1] Theil-Sen time line of the tach edges: see :class:`trueturn.dsp.shaft.TachTracker`
           (common practice, no source).
        """
        self._ended = True
        self.tach.close_run()

    def _sample_tick(self, index: int) -> int:
        return self.start_tick + index * self.period_ticks + self.aperture_ticks

    def _samples(self, msg: MessageLike) -> bool:
        v = getattr(msg, "values", msg)  # the field dict of a codec Message: fewer calls
        start, period, ch = v["start_tick"], v["period_ticks"], v["channels"]
        if self.config is None or start != self.start_tick & 0xFFFFFFFF or \
                period != self.period_ticks or ch != self.channels:
            # SPEC 4.4: every block carries its stream's timebase, so a lost (or unrecorded)
            # stream_config costs nothing: the block starts the stream it belongs to
            self.timebase_from_blocks += 1
            self._reset_stream(_BlockTimebase(int(start), int(period), int(ch), self.tick_hz))
        first = int(v["first_index"])
        expected = self._next_index
        if expected is None:
            self.streams += 1
        elif first != expected & 0xFFFFFFFF:  # (the usual block follows on: no arithmetic)
            first = extend_tick(first, expected)
            if first < expected:
                return False  # repeated or stale block
            self._gaps.append((self._sample_tick(expected), self._sample_tick(first)))
            self._fresh.clear()
            self._ring.clear()
        else:
            first = expected
        # kept as received (a numpy array from the codec: no copy); converted to float in
        # bulk when revolutions are fitted, counted for clipping and put in the spectrum ring
        # in bulk too (per-block numpy calls cost more than the arithmetic at 2 x 4 kSps)
        values = np.asarray(v["samples"])
        n = values.size - values.size % ch
        if n != values.size:
            values = values[:n]
        self._next_index = first + n
        self.samples_seen += n
        if n > self.block_max:
            self.block_max = n
        self._chunks.append((first, values))
        self._fresh.append(values)
        if len(self._fresh) >= 64:
            self._flush_fresh()
        self._latest_tick = self.start_tick + (first + n) * self.period_ticks + \
            self.aperture_ticks
        ready = self._ready_count() if self._pending and \
            self._latest_tick >= self._pending_ends[0] else 0
        if ready >= self.batch_revs:
            self._process()
        elif not self._pending:
            # keep what the revolution in progress needs, but never more than the longest
            # revolution measured (MAX_REVOLUTION_S): a stopped shaft must not fill memory
            oldest = self._latest_tick - int(MAX_REVOLUTION_S * self.tick_hz)
            last_edge = self.tach.last_edge_tick
            self._trim(max(last_edge, oldest) if last_edge is not None else oldest)
        # new revolutions, or a second of stream time without any (slow shaft, lost tach):
        # either way the display should refresh
        if ready or self._latest_tick - self._last_update_tick >= self.tick_hz:
            self._last_update_tick = self._latest_tick
            return True
        return False

    def _flush_fresh(self) -> None:
        """Count clipped samples of the blocks received since last time; feed the ring."""
        if not self._fresh:
            return
        values = np.concatenate(self._fresh).astype(float)
        self._fresh.clear()
        self._ring.extend(values)
        top = (1 << self.adc_bits) - 1
        if values.size and (values.max() >= top or values.min() <= 0):
            self.clipped_samples += int(np.count_nonzero((values <= 0) | (values >= top)))

    def _ready_count(self) -> int:
        if self._next_index is None:
            return 0
        ready = bisect.bisect_right(self._pending_ends, self._latest_tick)
        # The newest revolution waits for the next edge, which tells whether the edge that
        # closed it came early or late (TachTracker.uneven); not longer than two of its
        # periods, so a stopped shaft or a missed edge does not hold it for ever.
        if ready and ready == len(self._pending) and not self._ended:
            newest = self._pending[-1]
            if newest.number == self.tach.revolutions - 1 and \
                    self._latest_tick < newest.end_tick + 2 * newest.period_ticks:
                ready -= 1
        undecided = self.tach.undecided_from  # a run of off tach edges not closed yet
        if undecided is not None:
            while ready and self._pending[ready - 1].number >= undecided:
                ready -= 1
        return ready

    # ---------------------------------------------------------------- processing
    def _trim(self, keep_from_tick: int) -> None:
        """Drop sample blocks that end before ``keep_from_tick``."""
        chunks = self._chunks
        if not chunks or self.period_ticks <= 0:
            return
        # first conversion index at or after keep_from_tick
        offset = keep_from_tick - self.start_tick - self.aperture_ticks
        keep_index = -(-offset // self.period_ticks)
        while chunks and chunks[0][0] + chunks[0][1].size <= keep_index:
            chunks.popleft()

    def _contiguous(self) -> tuple[int, np.ndarray] | None:
        """(first conversion index, values) of the held samples when no index is missing
        between them (they are then evenly spaced in time), else None."""
        chunks = self._chunks
        if not chunks:
            return None
        expected = chunks[0][0]
        for first, values in chunks:
            if first != expected:
                return None
            expected = first + values.size
        return chunks[0][0], np.concatenate([v for _, v in chunks]).astype(float)

    def _channel_samples(self) -> tuple[np.ndarray, np.ndarray]:
        """(conversion indices, values) of every held sample, oldest first."""
        firsts = np.array([f for f, _ in self._chunks], dtype=np.int64)
        sizes = np.array([v.size for _, v in self._chunks], dtype=np.int64)
        values = np.concatenate([v for _, v in self._chunks]).astype(float)
        offsets = np.cumsum(sizes) - sizes
        index = np.repeat(firsts - offsets, sizes) + np.arange(values.size, dtype=np.int64)
        return index, values

    def _process(self) -> None:
        self._flush_fresh()
        n_ready = self._ready_count()
        if not n_ready or not self.channels:
            return
        ready = self._pending[:n_ready]
        del self._pending[:n_ready]
        del self._pending_ends[:n_ready]
        use = []
        for rev in ready:
            if any(g0 < rev.end_tick and g1 > rev.start_tick for g0, g1 in self._gaps):
                self.revs_with_gaps += 1
            elif self.tach.is_uneven(rev.number):
                self.revs_uneven += 1
            else:
                use.append(rev)
        first_tick = self._sample_tick(self._chunks[0][0]) if self._chunks else self._latest_tick
        kept = [rev for rev in use if rev.start_tick >= first_tick]
        self.revs_skipped += len(use) - len(kept)
        if kept:
            starts = np.array([r.start_tick for r in kept], dtype=np.int64)
            ends = np.array([r.end_tick for r in kept], dtype=np.int64)
            ch = self.channels
            samples_per_rev = float((ends - starts).min()) / (ch * self.period_ticks)
            group = group_for(samples_per_rev)
            contiguous = self._contiguous()
            if contiguous is not None:  # the usual case: no sample lost in what is held
                first, values = contiguous
                offsets = [(c - first) % ch for c in range(ch)]
                per_channel = [values[o::ch] for o in offsets]
                first_ticks = [self._sample_tick(first + o) for o in offsets]
                fits = fit_even(per_channel, first_ticks,
                                ch * self.period_ticks, starts, ends, self.tick_hz,
                                self.orders, self._nuisance_hz(), self.start_tick, group)
                step = ch * self.period_ticks
                clips = [_rail_counts(self._at_rail(x), np.ceil((starts - t0) / step),
                                      np.ceil((ends - t0) / step))
                         for x, t0 in zip(per_channel, first_ticks, strict=True)]
            else:
                index, values = self._channel_samples()
                ticks = self.start_tick + index * self.period_ticks + self.aperture_ticks
                phase = int(index[0] % ch)
                sels = [slice((c - phase) % ch, None, ch) for c in range(ch)]
                fits = fit_blocks([ticks[s] for s in sels], [values[s] for s in sels], starts,
                                  ends, self.tick_hz, self.orders, self._nuisance_hz(),
                                  self.start_tick, group)
                clips = [_rail_counts(self._at_rail(values[s]),
                                      np.searchsorted(ticks[s], starts, "left"),
                                      np.searchsorted(ticks[s], ends, "left")) for s in sels]
            for c, fit in enumerate(fits):
                self._rows[c].append({name: getattr(fit, name) for name in ROW_FIELDS})
                self._clips[c].append({"at_rail": clips[c]})
            self._periods.append({"ticks": ends - starts})
            self._revs_fitted += len(kept)
            for period_s in (ends - starts) / float(self.tick_hz):
                rpm = 60.0 / float(period_s)
                if (self._steady_ref_rpm is None
                        or abs(rpm / self._steady_ref_rpm - 1.0) > STEADY_SPECTRUM_FRACTION):
                    self._steady_ref_rpm, self._steady_s = rpm, 0.0
                self._steady_s += float(period_s)
        keep_from = min(self._pending[0].start_tick if self._pending else ready[-1].end_tick,
                        ready[-1].end_tick)
        self._trim(keep_from)

    def _at_rail(self, values: np.ndarray) -> np.ndarray:
        """True where a sample is at an ADC rail: 0 or 2^bits - 1 counts (the ATmega328P's
        10-bit result runs 0..1023; datasheet, "ADC Conversion Result")."""
        return (values <= 0) | (values >= (1 << self.adc_bits) - 1)

    def _hum_groups(self) -> dict[float, tuple[float, ...]]:
        """Hum frequency -> the comb of tones fitted for it (below the Nyquist frequency)."""
        if not self.mains_hz:
            return {}
        nyquist = self.rate_hz / 2.0
        groups: dict[float, tuple[float, ...]] = {}
        # waiting out a line means windows of up to MAINS_WINDOW_MAX_S: the comb then has
        # tones half the spread apart too (MAINS_COMB_STEPS)
        steps = MAINS_COMB_STEPS if self.wait_out_mains else (-1.0, 0.0, 1.0)
        for multiple in (1, 2):
            base = multiple * self.mains_hz
            spread = multiple * self.hum_spread_hz
            comb: tuple[float, ...] = tuple(base + k * spread for k in steps) if spread > 0 \
                else (base,)
            comb = tuple(f for f in comb if 0 < f < nyquist)
            if comb:
                groups[base] = comb
        return groups

    def _on_mains(self, dropped_hz: tuple[float, ...], mean_hz: float,
                  pickup: str) -> list[Finding]:
        """An ``order_on_mains`` finding per hum frequency whose fitted tones were dropped
        (:func:`trueturn.dsp.order.solve_orders`: less than about half a beat per window
        from an order). When the mains line itself (the comb's middle tone) is dropped next
        to the 1x it blocks the reading: the hum adds to the 1x in full and no circle can
        hold it. A comb's outer tone alone (they follow a grid a few hundredths of a hertz
        off over long windows) leaves the line fitted: a note (its circle held 95-100 % of
        true errors 1 Hz from the line, grid 0.04 Hz off, tests/test_dsp_hum_circle.py).
        ``revolutions_needed``: one beat between the 1x and the nearest dropped tone, the
        window that tells them apart (Dirichlet kernel: a tone ``df`` from an order is
        orthogonal to it over a window of ``1/df``; common practice, no source);
        ``revolutions_max``: the most worth averaging at this speed (:data:`MAINS_WINDOW_MAX_S`
        of signal, at most the revolutions held when the meter waits out the line);
        ``offset_hz``: the 1x from the line itself."""
        out = []
        for base, comb in self._hum_groups().items():
            gone = [f for f in comb if f in dropped_hz]
            if not gone:
                continue
            order = round(base / mean_hz) if mean_hz > 0 else 0
            order = order if order in self.orders else 0
            details: dict[str, Any] = {"order": order, "hum_hz": base}
            if order == 1:
                beat_hz = min(abs(f - mean_hz) for f in gone)
                details["beat_hz"] = round(beat_hz, 4)
                details["revolutions_needed"] = (math.ceil(mean_hz / beat_hz) if beat_hz > 0
                                                 else None)
                # the longest window worth waiting for (MAINS_WINDOW_MAX_S), and what the
                # app's meter can hold
                most = math.floor(MAINS_WINDOW_MAX_S * mean_hz)
                if self.wait_out_mains:
                    most = min(most, self.hold_revs)
                details["revolutions_max"] = most
                details["seconds_needed"] = round(1.0 / beat_hz, 1) if beat_hz > 0 else None
                details["window_max_s"] = MAINS_WINDOW_MAX_S
                details["offset_hz"] = round(abs(mean_hz - base), 3)
            out.append(Finding(Code.ORDER_ON_MAINS, pickup, details=details,
                               blocking=order == 1 and base in gone))
        return out

    def _nuisance_hz(self) -> tuple[float, ...]:
        return tuple(f for comb in self._hum_groups().values() for f in comb)

    # ---------------------------------------------------------------- results
    @property
    def volts_per_count(self) -> float:
        return (self.reference_mv / 1000.0) / (1 << self.adc_bits)

    def profile(self, channel: int) -> PickupProfile:
        """The pickup profile of a channel.

        Parameters
        ----------
        channel : int
            Channel index, from 0.

        Returns
        -------
        PickupProfile
            The profile given for it, or an uncalibrated one named "pickup N" (N from 1).

        References
        ----------
        .. [1] Lookup only; common practice, no source.
        """
        if channel < len(self.profiles):
            return self.profiles[channel]
        return PickupProfile(name=f"pickup {channel + 1}")

    def stream_findings(self) -> list[Finding]:
        """Problems with the stream as a whole (tach, link, set-up), as data.

        Returns
        -------
        list of Finding
            Stream findings (pickup None), in a fixed order; see dsp/README.md, "Findings".

        References
        ----------
        .. [1] protocol/SPEC.md (the messages, their counters and timebase; ours).
        """
        out: list[Finding] = []
        self._flush_fresh()
        if self.config is None:
            out.append(Finding(Code.NO_STREAM))
            return out
        tach = self.tach
        if self.samples_seen and tach.revolutions == 0:
            out.append(Finding(Code.NO_TACH))
        if not self.identity_seen:
            out.append(Finding(Code.NO_IDENTITY, details={
                "adc_bits": DEFAULT_ADC_BITS, "reference_mv": DEFAULT_REFERENCE_MV,
                "tick_hz": DEFAULT_TICK_HZ}))
        if tach.double_edges:
            out.append(Finding(Code.TACH_EXTRA_EDGES, count=tach.double_edges))
        if tach.missing_edges:
            out.append(Finding(Code.TACH_MISSED_EDGES, count=tach.missing_edges))
        if tach.link_lost_edges:
            out.append(Finding(Code.LINK_TACH_LOST, count=tach.link_lost_edges))
        scatter = tach.timing_scatter_deg
        if self.revs_uneven or scatter > TACH_SCATTER_WARN_DEG:
            out.append(Finding(Code.TACH_UNEVEN, count=self.revs_uneven, details={
                "scatter_deg": round(scatter, 3) if math.isfinite(scatter) else math.nan}))
        if self.revs_with_gaps:
            out.append(Finding(Code.LINK_SAMPLES_LOST, count=self.revs_with_gaps))
        if self.reference_problem:
            out.append(self._reference_finding())
        losses = self.board_losses()
        if self.adc_late_unexplained:
            out.append(Finding(Code.ADC_LATE_REFUSED, count=losses["adc_overruns"]))
        elif losses.get("adc_overruns", 0) > 0:
            out.append(Finding(Code.ADC_LATE, count=losses["adc_overruns"]))
        if losses.get("tach_suppressed", 0) > 0:
            out.append(Finding(Code.TACH_CHATTER_SUPPRESSED, count=losses["tach_suppressed"]))
        if losses.get("capture_overwrites", 0) > 0:
            out.append(Finding(Code.TACH_CAPTURE_OVERWRITTEN,
                               count=losses["capture_overwrites"]))
        if self.clipped_samples:
            out.append(Finding(Code.CLIPPED, count=self.clipped_samples))
        return out

    def stream_warnings(self) -> list[str]:
        """:meth:`stream_findings` in words, one line each.

        Returns
        -------
        list of str
            One sentence per finding (:func:`trueturn.dsp.findings.describe`).

        References
        ----------
        .. [1] protocol/SPEC.md (the messages, their counters and timebase; ours).
        """
        return [describe(f) for f in self.stream_findings()]

    def _stacked(self, channel: int, last: int | None) -> dict[str, np.ndarray]:
        n = min(last or self.max_revs, self.hold_revs)
        return self._rows[channel].last(n)

    def _stacked_ticks(self, last: int | None) -> np.ndarray:
        n = min(last or self.max_revs, self.hold_revs)
        if not len(self._periods):
            return np.zeros(0, dtype=np.int64)
        return self._periods.last(n)["ticks"]

    def speeds_rpm(self, last: int | None = None) -> np.ndarray:
        """Speed of each averaged revolution, oldest first.

        Parameters
        ----------
        last : int or None, default None
            Number of revolutions; None gives ``max_revs`` (at most the revolutions held).

        Returns
        -------
        numpy.ndarray
            Speeds, rpm (``60 tick_hz / period_ticks``).

        References
        ----------
        .. [1] Definition of rev/min (common practice, no source).
        """
        n = min(last or self.max_revs, self.hold_revs)
        if not len(self._periods):
            return np.zeros(0)
        return 60.0 * self.tick_hz / self._periods.last(n)["ticks"].astype(float)

    @property
    def revolutions_fitted(self) -> int:
        """Every revolution fitted since this analyser's stream began (the window slides
        over the last :attr:`max_revs` of them)."""
        return self._revs_fitted

    @property
    def speed_rpm(self) -> float:
        """Speed of the last complete revolution, NaN before the first one."""
        if not len(self._periods):
            return math.nan
        return 60.0 * self.tick_hz / float(self._periods.last(1)["ticks"][0])

    def readings(self, last: int | None = None) -> list[PickupReading]:
        """One reading per pickup over the last ``last`` revolutions.

        Each reading is the mean of the per-revolution 1x phasors with its 95 % circle (random
        part plus a timing-bias bound), its steadiness verdict and findings, converted to the
        asked unit at the measured speed.

        Parameters
        ----------
        last : int or None, default None
            Number of revolutions averaged; None gives ``max_revs``.

        Returns
        -------
        list of PickupReading
            One per pickup with a revolution to average; empty when readings are refused (a
            late-ADC or reference problem, see :meth:`stream_findings`).

        References
        ----------
        .. [2] Order fit and averaging: see :mod:`trueturn.dsp.order` (S. M. Kay, "Fundamentals of
           Statistical Signal Processing: Estimation Theory", 1993, from memory) and
           :mod:`trueturn.dsp.averaging` (circular T^2, Victor & Mast 1991, from memory).
        .. [3] dsp/README.md, "What the 95 % circle covers" (the timing bias bound: 1.5 ticks at
           1x; ours).
        """
        self._process()
        out: list[PickupReading] = []
        if self.adc_late_unexplained or self.reference_problem:
            return out
        stream = tuple(self.stream_findings())
        for c in range(self.channels):
            if not len(self._rows[c]):
                continue
            reading = self._reading(c, last, stream)
            if self.wait_out_mains and last is None:
                reading = self._near_mains(c, reading, stream)
                reading = self._waited_out(c, reading, stream)
            out.append(reading)
        return out

    def _near_mains(self, c: int, reading: PickupReading,
                    stream: tuple[Finding, ...]) -> PickupReading:
        """A reading longer than :data:`MAINS_WINDOW_MAX_S` whose 1x lies within
        :data:`MAINS_NEAR_HZ` of a hum line, read again over its last
        :data:`MAINS_WINDOW_MAX_S` of signal (the hum comb follows an off grid only that
        long), with a ``mains_window`` note saying so; else ``reading``."""
        mean_hz = reading.speed_rpm / 60.0 if reading.speed_rpm is not None else math.nan
        if not math.isfinite(mean_hz) or reading.window_s <= MAINS_WINDOW_MAX_S:
            return reading
        base = near_mains_line(mean_hz, self.mains_hz)
        if base is None:
            return reading
        window = math.floor(MAINS_WINDOW_MAX_S * mean_hz)
        cached = self._near.get(c)
        if cached is not None and cached[0] == window and \
                self._revs_fitted - cached[1] < max(1, MAINS_REFIT_FRACTION * window):
            return cached[2]
        shorter = self._reading(c, window, stream)
        note = Finding(Code.MAINS_WINDOW, reading.sensor, details={
            "order": 1, "hum_hz": base, "offset_hz": round(abs(mean_hz - base), 3),
            "revolutions_read": shorter.revolutions, "revolutions_offered": reading.revolutions,
            "window_max_s": MAINS_WINDOW_MAX_S, "near_hz": MAINS_NEAR_HZ})
        findings = (*shorter.findings, note)
        shorter = dataclasses.replace(shorter, findings=findings,
                                      warnings=tuple(describe(f) for f in findings))
        self._near[c] = (window, self._revs_fitted, shorter)
        return shorter

    def _waited_out(self, c: int, reading: PickupReading,
                    stream: tuple[Finding, ...]) -> PickupReading:
        """The reading over the revolutions its 1x needs to be told from a mains line
        (``order_on_mains`` blocking, ``revolutions_needed`` within ``revolutions_max``),
        once that many are held; until then ``reading`` with the finding saying how many are
        (``revolutions_held``), or as it is once the stream has ended (nothing more will
        come: the finding says how long a recording would do). A longer reading is fitted
        again only after :data:`MAINS_REFIT_FRACTION` of its window is new."""
        held = len(self._rows[c])
        window = 0
        for _ in range(3):  # a longer window may move the speed, so the beat, a little
            needed = _mains_wait(reading)
            if needed is None or needed <= window:
                return reading
            if held < needed:
                return reading if self._ended else _with_held(reading, held)
            window = needed
            cached = self._long.get(c)
            if cached is not None and cached[0] == window and \
                    self._revs_fitted - cached[1] < max(1, MAINS_REFIT_FRACTION * window):
                reading = cached[2]
            else:
                reading = self._reading(c, window, stream)
                self._long[c] = (window, self._revs_fitted, reading)
        return reading

    def revolution_vectors(self, c: int, unit: str | None = None
                           ) -> tuple[np.ndarray, np.ndarray, np.ndarray, str]:
        """Each held revolution's own 1x at one pickup, for a sweep (:mod:`trueturn.dsp.sweep`).

        Parameters
        ----------
        c : int
            Channel index, from 0.
        unit : str or None, default None
            A key of :data:`trueturn.dsp.units.UNITS`; None takes the meter's unit or the
            profile's default.

        Returns
        -------
        tuple
            ``(speeds_rpm, phasors, sigmas, unit_used)``: per revolution (oldest first) its
            speed (rpm), its 1x phasor converted at its own speed, and the standard error of
            each of the phasor's components from that revolution's own residual noise,
            ``noise sqrt(2 / samples)`` (both in ``unit_used``).

        References
        ----------
        .. [1] Least-squares sinusoid amplitude variance ``2 sigma^2 / N`` per component in
           white noise (S. M. Kay, "Fundamentals of Statistical Signal Processing: Estimation
           Theory", 1993; from memory); order fit as :meth:`readings`.
        """
        self._process()
        empty = np.zeros(0)
        if c >= self.channels or not len(self._rows[c]):
            return empty, empty.astype(complex), empty, unit or self.unit or "V pk"
        rows = self._stacked(c, None)
        est = solve_orders(BlockFit(self.orders, self._nuisance_hz(), **rows))
        good = np.isfinite(rows["coef_y"]).all(axis=1)
        speeds = self.speeds_rpm()[-len(good):][good]
        profile = self.profile(c)
        factors, used = conversion_factors(profile, speeds / 60.0,
                                           unit or self.unit or default_unit(profile))
        vectors = est.phasors[:, self.orders.index(1)] * self.volts_per_count * factors
        counts = np.maximum(rows["sample_counts"][good].astype(float), 1.0)
        # each revolution's own residual (hum left in: a little conservative), so a noisy
        # stretch (a resonance passed fast, clipping) does not blur the quiet ones
        fitted = rows["coef_y"].shape[1]
        noise = np.sqrt(np.maximum(rows["resid_yy"][good], 0.0)
                        / np.maximum(rows["observations"][good] - fitted, 1.0))
        sigmas = noise * self.volts_per_count * np.abs(factors) * np.sqrt(2.0 / counts)
        return speeds, vectors, sigmas, used

    def _reading(self, c: int, last: int | None, stream: tuple[Finding, ...]) -> PickupReading:
        rows = self._stacked(c, last)
        est = solve_orders(BlockFit(self.orders, self._nuisance_hz(), **rows))
        good = np.isfinite(rows["coef_y"]).all(axis=1)
        speeds = self.speeds_rpm(last)[-len(good):][good]
        freqs_hz = speeds / 60.0
        profile = self.profile(c)
        unit = self.unit or default_unit(profile)
        vpc = self.volts_per_count
        findings = list(stream)
        # Per-revolution 1x vectors converted at each revolution's own speed.
        factors, used_unit = conversion_factors(profile, freqs_hz, unit)
        if used_unit != unit:
            findings.append(Finding(Code.UNCALIBRATED, profile.name,
                                    details={"asked_unit": unit}))
        k1 = self.orders.index(1)
        vectors = est.phasors[:, k1] * vpc * factors
        # a line at 0.5x alternates in the per-revolution 1x: then whole pairs of revolutions
        paired = pair_half_order(vectors)
        vstats: VectorStats = vector_stats(paired.vectors)
        scatter_radius = vstats.confidence_radius
        # what the hum fit adds to the mean and the scatter does not show (dsp/README.md,
        # "What the 95 % circle covers"): part of the random radius, so of the steadiness too
        scale = vpc * float(np.abs(factors).mean()) if len(factors) else vpc
        random_radius = combined_radius(vstats, est.order_unseen_variance(1) * scale ** 2)
        vstats = dataclasses.replace(
            vstats, confidence_radius=random_radius,
            confidence_deg=subtended_deg(random_radius, vstats.amplitude))
        used_revs = len(vectors)
        if paired.paired:
            used_revs = 2 * len(paired.vectors)
            vstats = dataclasses.replace(vstats, revolutions=used_revs)
        steady, reasons = steadiness(vstats, speeds, self.limits, profile.name)
        mean_hz = float(freqs_hz.mean()) if freqs_hz.size else math.nan
        groups = self._hum_groups()
        on_mains = self._on_mains(est.dropped_hz, mean_hz, profile.name)
        # the 1x on a hum line it cannot be told from blocks the reading (its circle could
        # not hold the hum's share); blocking findings first, then notes
        blocking = [f for f in (*reasons, *on_mains) if f.blocking]
        steady = steady and not blocking
        findings += blocking + [f for f in (*reasons, *on_mains) if not f.blocking]
        if paired.paired:  # a note, after what blocks the reading
            findings.append(Finding(Code.HALF_ORDER, profile.name, details={
                "level": abs(paired.alternating), "unit": used_unit}))
        harmonics = []
        levels: dict[str, float] = {}  # volts pk, as the spectrum sees them (no chain)
        for k, h in enumerate(self.orders):
            mean_v = complex(est.phasors[len(est.phasors) - used_revs:, k].mean()) * vpc \
                if len(est.phasors) else 0j
            levels[f"{h}x"] = abs(mean_v)
            value, _ = convert_phasor(mean_v, profile, h * mean_hz, unit) \
                if math.isfinite(mean_hz) else (0j, unit)
            harmonics.append(Harmonic(h, abs(value),
                                      math.degrees(math.atan2(value.imag, value.real)) % 360.0))
        hum_v = {base: est.tone_amplitude(comb) * vpc for base, comb in groups.items()
                 if not any(f in est.dropped_hz for f in comb)}
        for base, level in hum_v.items():
            levels["line" if base == self.mains_hz else "2x line"] = level
        self._levels[c] = levels
        # the 95 % circle: the random part (the scatter, and what the hum fit adds that the
        # scatter does not show), plus the timing bias bound, added (conservative)
        bias_rad = 2.0 * math.pi * mean_hz * TIMING_BIAS_TICKS / self.tick_hz \
            if math.isfinite(mean_hz) else 0.0
        radius = random_radius + vstats.amplitude * bias_rad
        window_s = float(self._stacked_ticks(last)[-len(good):][good].sum()) / self.tick_hz
        # the reading's own window: every averaged revolution (a revolution left out of the
        # average as not finite still counts: its samples were at the rail all the same)
        at_rail = int(self._clips[c].last(len(good))["at_rail"].sum()) if len(good) else 0
        # (the words stay the stream's CLIPPED finding, already among these findings)
        return PickupReading(
            sensor=profile.name, channel=c, amplitude=vstats.amplitude, unit=used_unit,
            phase_deg=vstats.phase_deg,
            confidence_deg=subtended_deg(radius, vstats.amplitude),
            confidence_radius=radius, revolutions=vstats.revolutions,
            steady=steady, speed_rpm=float(speeds.mean()) if speeds.size else math.nan,
            warnings=tuple(describe(f) for f in findings), harmonics=tuple(harmonics),
            noise_rms_v=est.noise_rms * vpc,
            hum_v=hum_v, findings=tuple(findings),
            no_tach=any(f.code is Code.NO_TACH for f in findings),
            confidence_random=random_radius, confidence_scatter=scatter_radius,
            timing_bias_deg=math.degrees(bias_rad),
            window_s=window_s, clipped=at_rail > 0, clipped_samples=at_rail,
        )

    def spectra(self, resolution_hz: float = 1.0) -> list[Spectrum | None]:
        """Welch spectrum of each pickup's recent samples, peaks named by the fitted levels.

        Parameters
        ----------
        resolution_hz : float, default 1.0
            Wanted bin width, Hz.

        Returns
        -------
        list of Spectrum or None
            Per pickup, in g for a calibrated pickup, else volts (peak amplitudes), the
            profile's input chain (RC low-pass corners, delay) taken out of the density and
            the peaks as from the readings; None for a pickup with fewer than 64 recent
            samples.

        References
        ----------
        .. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of power
           spectra", IEEE Trans. Audio Electroacoust. 15(2), 1967; see
           :func:`trueturn.dsp.spectrum.spectrum`.
        """
        out: list[Spectrum | None] = []
        rot_hz = None
        if len(self._periods):
            recent = self.speeds_rpm()[-max(1, int(self.spectrum_seconds * self.speed_rpm / 60)):]
            rot_hz = float(recent.mean()) / 60.0
        self._flush_fresh()
        interleaved = self._ring.values()
        steady = None
        if len(self._periods):
            # only the samples since the speed settled: a run-up or coast-down in the window
            # smears the 1x into bins below it, a "peak at no shaft order" that is not there
            steady = max(1, int(self._steady_s * self.rate_hz))
        for c in range(self.channels):
            values = interleaved[c::self.channels]
            if steady is not None and steady < values.size:
                values = values[-steady:]
            if values.size < 64:
                out.append(None)
                continue
            scale = self.volts_per_count
            profile = self.profile(c)
            if profile.calibrated:
                assert profile.sensitivity_v_per_g is not None
                scale /= profile.sensitivity_v_per_g
            spec = spectrum(values * scale, self.rate_hz, rot_hz, self.mains_hz, resolution_hz)
            levels = self._levels.get(c)
            if levels:  # name coinciding peaks by the fitted levels; show hidden mains lines
                named = name_by_levels(spec.peaks, {k: v * scale / self.volts_per_count
                                                    for k, v in levels.items()},
                                       self.mains_hz, rot_hz, spec.resolution_hz,
                                       spec.detect_amplitude)
                spec = dataclasses.replace(spec, peaks=named)
            out.append(undo_chain(spec, profile))
        return out

    def spectrum_unit(self, channel: int) -> str:
        """The unit of a channel's spectrum peaks.

        Parameters
        ----------
        channel : int
            Channel index, from 0.

        Returns
        -------
        str
            ``"g pk"`` for a calibrated pickup, ``"V pk"`` otherwise.

        References
        ----------
        .. [1] Common practice, no source.
        """
        return "g pk" if self.profile(channel).calibrated else "V pk"


def _mains_wait(reading: PickupReading) -> int | None:
    """The revolutions a reading's 1x needs to be told from the mains line that blocks it,
    when that is worth waiting for (within ``revolutions_max``); else None."""
    for f in reading.findings:
        if f.code is Code.ORDER_ON_MAINS and f.blocking:
            needed = f.details.get("revolutions_needed")
            most = f.details.get("revolutions_max")
            if needed is not None and most is not None and needed <= most:
                return int(needed)
    return None


def _with_held(reading: PickupReading, held: int) -> PickupReading:
    """``reading`` with its blocking ``order_on_mains`` saying how many revolutions are held
    (the meter is waiting for the rest)."""
    findings = tuple(
        dataclasses.replace(f, details={**f.details, "revolutions_held": held})
        if f.code is Code.ORDER_ON_MAINS and f.blocking else f for f in reading.findings)
    return dataclasses.replace(reading, findings=findings,
                               warnings=tuple(describe(f) for f in findings))


def undo_chain(spec: Spectrum, profile: PickupProfile) -> Spectrum:
    """A spectrum with the pickup's known input chain taken out: density and peak amplitudes
    divided by the chain's gain ``|H(f)|`` at their frequency (for an RC low-pass
    ``1/sqrt(1 + (f/fc)^2)``, :func:`trueturn.dsp.units.chain_response`).

    Parameters
    ----------
    spec : Spectrum
        As measured at the ADC.
    profile : PickupProfile
        The pickup's low-pass corners and delay (a delay changes no amplitude).

    Returns
    -------
    Spectrum
        The same spectrum when the profile has no low-pass corner, else the corrected one
        (the detection threshold stays as measured).

    References
    ----------
    .. [1] First-order RC low-pass ``|H| = 1/sqrt(1 + (f/fc)^2)`` (any circuits textbook, e.g.
       P. Horowitz, W. Hill, "The Art of Electronics", 3rd ed., 2015, ch. 1; from memory).
    """
    if not profile.lowpass_corners_hz:
        return spec
    gain = np.abs(np.asarray(chain_response(profile, spec.frequencies_hz)))
    peaks = tuple(dataclasses.replace(p, amplitude=p.amplitude / abs(chain_response(profile, p.hz)))
                  for p in spec.peaks)
    return dataclasses.replace(spec, asd=spec.asd / gain, peaks=peaks)


def _rail_counts(at_rail: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """How many of ``at_rail`` are True in each index range ``[lo, hi)`` (clamped to the
    array), by a cumulative sum: one pass however many revolutions."""
    cum = np.concatenate(([0], np.cumsum(at_rail, dtype=np.int64)))
    size = at_rail.size
    lo_i = np.clip(np.asarray(lo), 0, size).astype(np.int64)
    hi_i = np.clip(np.asarray(hi), 0, size).astype(np.int64)
    return np.maximum(cum[hi_i] - cum[lo_i], 0)


class _BlockTimebase:
    """A stream set-up taken from a sample block (its stream_config was lost)."""

    name = "stream_config"

    def __init__(self, start_tick: int, period_ticks: int, channels: int, tick_hz: int) -> None:
        self.values = {"start_tick": start_tick, "period_ticks": period_ticks,
                       "channels": channels, "tach_edge": None,
                       "rate_hz": tick_hz / (period_ticks * channels) if period_ticks else 0.0}

    def __getitem__(self, key: str) -> Any:
        return self.values[key]


#: board counters followed over a stream; the last two exist from protocol 3 on
BOARD_COUNTERS = ("adc_overruns", "samples_dropped", "frames_dropped", "tach_suppressed",
                  "capture_overwrites")


def _board_counters(msg: MessageLike) -> dict[str, int]:
    out = {}
    for k in BOARD_COUNTERS:
        try:
            out[k] = int(msg[k])
        except (KeyError, TypeError, ValueError):
            continue  # a status from an older protocol
    return out
