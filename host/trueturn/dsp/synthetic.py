"""Known-truth frame streams for tests and bench figures (no physics: exact signals).

A :class:`SyntheticRun` describes shaft speed (with an optional linear drift), what each
pickup sees (order components at given amplitude and phase in the trueturn convention,
extra tones such as mains hum, white noise) and tach faults; :func:`synthesize` returns the
protocol v1 bytes a board would send, in time order, plus the exact truth. The analyser
must recover the truth from the bytes alone.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from trueturn.link.catalogue import load_catalogue
from trueturn.link.codec import encode_frame


@dataclass(frozen=True)
class OrderComponent:
    """``amplitude_counts * cos(order * theta - phase)``: positive peak ``phase/order`` after the mark.

    ``order`` 0.5 is a line locked at half the running speed (a 2:1 belt or gear), theta
    counted from the first edge on, so it alternates in sign from one revolution to the next.
    """

    order: float
    amplitude_counts: float
    phase_deg: float


@dataclass(frozen=True)
class ToneComponent:
    """A tone locked to time, not to the shaft: ``amplitude * cos(2 pi f t + phase)``."""

    hz: float
    amplitude_counts: float
    phase_deg: float = 0.0


@dataclass(frozen=True)
class SyntheticRun:
    """One synthetic recording; ``drift_fraction`` d ramps speed from (1-d) to (1+d) times nominal."""

    speed_rpm: float = 3000.0
    duration_s: float = 4.0
    rate_hz: int = 4000
    channels: int = 2
    orders: tuple[tuple[OrderComponent, ...], ...] = ((OrderComponent(1, 100.0, 30.0),),
                                                      (OrderComponent(1, 60.0, 200.0),))
    tones: tuple[tuple[ToneComponent, ...], ...] = ((), ())
    noise_counts: float = 2.0
    dc_counts: float = 512.0
    drift_fraction: float = 0.0
    tick_hz: int = load_catalogue().limit("board_tick_hz").min
    start_tick: int = 1000
    aperture_delay_ticks: int = 0
    adc_bits: int = 10
    adc_reference_mv: int = 5000
    first_edge_rev: float = 0.3
    block_conversions: int = 118  # whole sets of 1 or 2 channels, the most a frame holds
    double_edges_after: tuple[int, ...] = ()  # edge numbers followed by a spurious edge
    missing_edges: tuple[int, ...] = ()  # edge numbers never sent (lost on the link: counted)
    lost_blocks: tuple[int, ...] = ()  # sample block numbers never sent
    send_identity: bool = True
    seed: int = 0

    @property
    def period_ticks(self) -> int:
        period = self.tick_hz / (self.rate_hz * self.channels)
        if period != int(period):
            raise ValueError("tick_hz must be a whole multiple of rate_hz * channels")
        return int(period)


@dataclass
class SyntheticTruth:
    """Exact values behind a synthetic stream."""

    edge_ticks: list[int] = field(default_factory=list)
    order_phasors: list[dict[float, complex]] = field(default_factory=list)
    mean_speed_rpm: float = 0.0


def revolutions_at(run: SyntheticRun, t_s: np.ndarray) -> np.ndarray:
    """Shaft revolutions turned since the first tach edge at the given times.

    With a linear speed drift ``d`` over the run the speed is ``f0 ((1 - d) + 2 d t / T)``,
    integrated to ``f0 ((1 - d) t + d t^2 / T)``.

    Parameters
    ----------
    run : SyntheticRun
        The run: speed (rpm), drift fraction, duration (s), phase of the first edge (rev).
    t_s : numpy.ndarray
        Times after sample index 0, s.

    Returns
    -------
    numpy.ndarray
        Revolutions turned (0 at the first tach edge), same shape.

    References
    ----------
    .. [1] Integral of a linearly ramped frequency (elementary calculus; common practice, no
       source).
    """
    f0 = run.speed_rpm / 60.0
    d = run.drift_fraction
    return f0 * ((1.0 - d) * t_s + d * t_s * t_s / run.duration_s) - run.first_edge_rev


def edge_times_s(run: SyntheticRun) -> np.ndarray:
    """Times at which the shaft passes the mark: where :func:`revolutions_at` is a whole number.

    Parameters
    ----------
    run : SyntheticRun
        The run.

    Returns
    -------
    numpy.ndarray
        Edge times after sample index 0, s (the roots of the quadratic when the speed drifts).

    References
    ----------
    .. [1] Roots of a quadratic (elementary algebra; common practice, no source).
    """
    f0 = run.speed_rpm / 60.0
    d = run.drift_fraction
    total = float(revolutions_at(run, np.array([run.duration_s]))[0])
    k = np.arange(0, math.floor(total) + 1, dtype=float) + run.first_edge_rev
    if d == 0:
        return k / f0
    a = d * f0 / run.duration_s
    b = (1.0 - d) * f0
    return (-b + np.sqrt(b * b + 4.0 * a * k)) / (2.0 * a)


def synthesize(run: SyntheticRun) -> tuple[bytes, SyntheticTruth]:
    """Frame bytes a board would send for the run, and the exact truth behind them.

    Parameters
    ----------
    run : SyntheticRun
        Speed, drift, pickups' order components and tones (ADC counts), noise, tach faults,
        lost blocks.

    Returns
    -------
    data : bytes
        Protocol frames (identity, stream_config, samples and tach in time order).
    truth : SyntheticTruth
        Tach edge ticks, the order phasors per pickup (ADC counts) and the mean speed (rpm).

    References
    ----------
    .. [1] protocol/SPEC.md (the frame format; ours); signals are exact sums of cosines, no
       physics (common practice for known-truth tests, no source).
    """
    rng = np.random.default_rng(run.seed)
    period = run.period_ticks
    ch = run.channels
    n_conv = int(run.duration_s * run.rate_hz) * ch
    n_conv -= n_conv % run.block_conversions
    index = np.arange(n_conv)
    t_s = (index * period + run.aperture_delay_ticks) / run.tick_hz
    theta = 2.0 * math.pi * revolutions_at(run, t_s)
    channel = index % ch
    values = np.full(n_conv, run.dc_counts, dtype=float)
    for c in range(ch):
        sel = channel == c
        for comp in run.orders[c] if c < len(run.orders) else ():
            values[sel] += comp.amplitude_counts * np.cos(
                comp.order * theta[sel] - math.radians(comp.phase_deg))
        for tone in run.tones[c] if c < len(run.tones) else ():
            values[sel] += tone.amplitude_counts * np.cos(
                2.0 * math.pi * tone.hz * t_s[sel] + math.radians(tone.phase_deg))
    values += rng.normal(0.0, run.noise_counts, n_conv) if run.noise_counts else 0.0
    counts = np.clip(np.rint(values), 0, (1 << run.adc_bits) - 1).astype(int)

    edges = edge_times_s(run)
    edge_ticks = [run.start_tick + int(round(t * run.tick_hz)) for t in edges]
    events: list[tuple[int, int, str, dict]] = []
    edge_no = 0
    for k, tick in enumerate(edge_ticks):
        if k not in run.missing_edges:
            events.append((tick, 1, "tach", {"tick": tick % (1 << 32), "edge_count": edge_no}))
        edge_no += 1
        if k in run.double_edges_after:
            extra = tick + int(0.37 * (edge_ticks[min(k + 1, len(edge_ticks) - 1)] - tick) or 1)
            events.append((extra, 1, "tach", {"tick": extra % (1 << 32),
                                              "edge_count": edge_no}))
            edge_no += 1
    # edge_count counts every edge the board saw, so a missing one shows as a gap
    block = run.block_conversions
    for b, first in enumerate(range(0, n_conv, block)):
        done_tick = run.start_tick + (first + block - 1) * period + run.aperture_delay_ticks
        if b in run.lost_blocks:
            continue
        events.append((done_tick + 1, 0, "samples", {
            "first_index": first, "channels": ch, "start_tick": run.start_tick % (1 << 32),
            "period_ticks": period, "samples": counts[first:first + block].tolist()}))
    events.sort(key=lambda e: (e[0], e[1]))

    cat = load_catalogue()
    out = bytearray()
    seq = 0
    if run.send_identity:
        out += encode_frame("identity", seq, {
            "protocol_version": cat.protocol_version, "definition_hash": cat.definition_hash,
            "firmware_major": 0, "firmware_minor": 1, "firmware_patch": 0, "board_id": 2,
            "tick_hz": run.tick_hz, "adc_bits": run.adc_bits,
            "adc_reference_mv": run.adc_reference_mv, "adc_reference_kind": 0,
            "aperture_delay_ticks": run.aperture_delay_ticks, "max_channels": 2,
            "channel0_pin": 0, "channel1_pin": 1, "tach_pin": 8, "reset_flags": 1}, cat)
        seq += 1
    out += encode_frame("stream_config", seq, {
        "rate_hz": run.rate_hz, "channels": ch, "period_ticks": period, "tach_edge": 1,
        "start_tick": run.start_tick % (1 << 32), "adc_reference_mv": run.adc_reference_mv},
        cat)
    seq += 1
    for _tick, _prio, name, values_dict in events:
        out += encode_frame(name, seq & 0xFF, values_dict, cat)
        seq += 1

    truth = SyntheticTruth(edge_ticks=edge_ticks)
    for c in range(ch):
        truth.order_phasors.append({
            comp.order: comp.amplitude_counts * complex(math.cos(math.radians(comp.phase_deg)),
                                                        math.sin(math.radians(comp.phase_deg)))
            for comp in (run.orders[c] if c < len(run.orders) else ())})
    truth.mean_speed_rpm = run.speed_rpm
    return bytes(out), truth
