"""The bring-up check's judgement: a few seconds of a wired board's data in, findings out.

Pure: numpy/scipy arrays and numbers in, :class:`Finding` records (an item, pass or fail, a
code and the figures behind it) out; no I/O and no sentences (``trueturn.bringup.words``
puts findings into words). ``trueturn check`` gathers the data (cli/cmd_check.py).

Methods
-------
* Noise floor: the median over frequency of a Welch power spectrum whose segments are
  averaged by their median (``scipy.signal.welch(average="median")``), so the machine's
  tones, hum and 1x do not count as noise; floor power x bandwidth = rms in ADC counts.
* Floating input: an open AVR ADC input keeps most of the sample capacitor's charge from the
  conversion before it, so it reads a copy of the other channel *including its noise*. Two
  real pickups share the machine's tones but not their noise: the median magnitude-squared
  coherence over frequency (``scipy.signal.coherence``) is near 1 for a ghost and near 0 for
  two pickups (common practice, no source). Which channel is the copy: the one whose samples
  follow the other's by one conversion (the lag with the higher correlation of differences).
* Tach: :class:`trueturn.dsp.shaft.TachTracker` finds double and missing edges, revolutions
  made uneven by an edge early or late (a knocked or smudged mark) and the edge timing
  scatter; the board's ``tach_suppressed`` counter shows chatter its hold-off dropped. The
  duty (share of a turn the sensor sees the mark) comes from falling edges heard between two
  stretches of rising edges, placed on the rising edges' time line (:func:`tach_duty`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from enum import Enum

import numpy as np
from scipy import signal

from trueturn.dsp.shaft import TachTracker
from trueturn.link.catalogue import load_catalogue

#: The recommended ±3 g MEMS module powered from 3.3 V: zero g at half its supply, about
#: 330 mV/g (from memory: the datasheet gives 300 mV/g at 3 V; output ratiometric).
MODULE_ZERO_G_V = 1.65
MODULE_SENSITIVITY_V_PER_G = 0.33
#: Below this, or this close to the reference, an input reads no pickup at all.
RAIL_MARGIN_V = 0.15
#: A level this many g from zero g on the axis: gravity along it (1 g), or across (0 g).
GRAVITY_TOLERANCE_G = 0.3
#: Noise floor above this, in ADC counts rms (1 count = 4.9 mV at 5 V, about 15 mg at
#: 330 mV/g): the wiring picks up noise. Common practice, no source: a clean pickup sits
#: within a count or two (the ADC's own quantisation is 0.29 counts rms).
NOISE_FAIL_COUNTS = 3.0
#: Median coherence above this between the two channels: one of them is a ghost copy.
GHOST_COHERENCE = 0.5
#: Edge timing scatter above this (degrees of a turn): the tach set-up is unsteady.
JITTER_FAIL_DEG = 1.0
#: Share of revolutions made uneven by a knocked edge above which the mark is suspect.
UNEVEN_FAIL_SHARE = 0.01
#: Fewer revolutions than this in the check: nothing can be judged about the tach.
MIN_REVOLUTIONS = 5
#: The mark's share of a turn the sensor may see: outside it the sensor barely sees the mark,
#: or sees "mark" almost all the time (common practice, no source).
DUTY_RANGE = (0.01, 0.6)
#: The protocol catalogue's reference kinds and the usable AVCC range (the same limits the
#: meter refuses readings outside of): USB gives 4.75-5.25 V at the port (from memory: USB
#: 2.0 specification) less the board's diode; the bandgap the board measures it against is
#: 1.1 V +-9 % (from memory: ATmega328P datasheet), so the figure is that uncertain.
_CAT = load_catalogue()
REFERENCE_KINDS = {name: code for code, name in _CAT.reference_kinds.items()}
AVCC_RANGE_V = (_CAT.limit("usable_reference_mv").min / 1000.0,
                _CAT.limit("usable_reference_mv").max / 1000.0)
#: The AREF build (firmware ``make ADC_REF=aref``): the external AREF pin, measured against the
#: bandgap like AVCC, within limits.usable_aref_mv (an open pin reads about 1.1 V).
AREF_RANGE_V = (_CAT.limit("usable_aref_mv").min / 1000.0,
                _CAT.limit("usable_aref_mv").max / 1000.0)
#: Link: any loss at all on a bench lead fails (every frame carries a CRC and a sequence).
LINK_MAX_ERROR_RATE = 0.0


class Item(str, Enum):
    """What the check looks at, in the order it reports."""

    IDENTITY = "identity"
    LINK = "link"
    REFERENCE = "reference"
    DC_LEVEL = "dc_level"
    NOISE = "noise"
    CLIPPING = "clipping"
    FLOATING = "floating"
    TACH_RATE = "tach_rate"
    TACH_EDGES = "tach_edges"
    TACH_JITTER = "tach_jitter"
    TACH_CHATTER = "tach_chatter"
    TACH_DUTY = "tach_duty"


@dataclass(frozen=True)
class Finding:
    """One judged item: ``passed``, a ``code`` naming what was found, the figures."""

    item: Item
    passed: bool
    code: str
    channel: int | None = None  # 0-based pickup input, for the per-channel items
    values: dict[str, float] = field(default_factory=dict)


@dataclass
class BringupData:
    """What ``trueturn check`` heard from the board."""

    identity: dict[str, object]
    seconds: float
    rate_hz: float  # per channel
    samples: np.ndarray  # counts, shape (channels, n)
    link: dict[str, int]  # trueturn.link.codec.LinkCounters.to_json()
    board_counters: dict[str, int]  # status counters' rise over the check
    rising_ticks: Sequence[int] = ()  # 64-bit board ticks of the rising tach edges
    falling_ticks: Sequence[int] = ()  # the falling ones, heard after them
    rising_after_ticks: Sequence[int] = ()  # rising edges again, after the falling ones
    zero_g_v: Sequence[float] = ()  # per channel; default the recommended module
    sensitivity_v_per_g: Sequence[float] = ()


def _adc(data: BringupData) -> tuple[float, int]:
    bits = int(data.identity.get("adc_bits", 10))  # type: ignore[call-overload]
    ref_v = float(data.identity.get("adc_reference_mv", 5000)) / 1000.0  # type: ignore[arg-type]
    return ref_v, (1 << bits) - 1


def noise_floor_counts(x: np.ndarray, rate_hz: float) -> float:
    """Broadband noise floor (counts rms over 0..rate/2) by the median Welch spectrum."""
    nper = int(min(512, len(x)))
    f, p = signal.welch(x.astype(np.float64), fs=rate_hz, nperseg=nper, average="median")
    band = f >= 5.0
    return float(np.sqrt(np.median(p[band]) * rate_hz / 2.0))


def ghost_of(samples: np.ndarray, rate_hz: float) -> tuple[int | None, float]:
    """(the channel that copies the other, or None; the median coherence)."""
    a, b = samples[0].astype(np.float64), samples[1].astype(np.float64)
    if not (np.ptp(a) > 0 and np.ptp(b) > 0):
        return None, 0.0  # a flat input copies nothing (the level check names it)
    nper = int(min(512, len(a)))
    f, coh = signal.coherence(a, b, fs=rate_hz, nperseg=nper)
    median = float(np.median(coh[f >= 5.0]))
    if median < GHOST_COHERENCE:
        return None, median
    da, db = np.diff(a), np.diff(b)
    same_set = np.corrcoef(da, db)[0, 1]  # b_n follows a_n: b copies a
    next_set = np.corrcoef(da[1:], db[:-1])[0, 1]  # a_(n+1) follows b_n: a copies b
    return (1 if same_set >= next_set else 0), median


def _levels(data: BringupData, ch: int, x: np.ndarray, ref_v: float, adc_max: int) -> list[Finding]:
    out: list[Finding] = []
    volts_per_count = ref_v / (adc_max + 1)
    level_v = float(np.mean(x)) * volts_per_count
    zero_v = data.zero_g_v[ch] if len(data.zero_g_v) > ch else MODULE_ZERO_G_V
    sens = (data.sensitivity_v_per_g[ch] if len(data.sensitivity_v_per_g) > ch
            else MODULE_SENSITIVITY_V_PER_G)
    g = (level_v - zero_v) / sens
    values = {"level_v": level_v, "g": g, "zero_g_v": zero_v}
    if level_v < RAIL_MARGIN_V:
        out.append(Finding(Item.DC_LEVEL, False, "at_ground", ch, values))
    elif level_v > ref_v - RAIL_MARGIN_V:
        out.append(Finding(Item.DC_LEVEL, False, "at_reference", ch, values))
    elif abs(g) > 1.0 + GRAVITY_TOLERANCE_G:
        out.append(Finding(Item.DC_LEVEL, False, "unexpected_level", ch, values))
    elif abs(abs(g) - 1.0) <= GRAVITY_TOLERANCE_G:
        out.append(Finding(Item.DC_LEVEL, True, "gravity_up" if g > 0 else "gravity_down", ch,
                           values))
    elif abs(g) <= GRAVITY_TOLERANCE_G:
        out.append(Finding(Item.DC_LEVEL, True, "horizontal", ch, values))
    else:
        out.append(Finding(Item.DC_LEVEL, True, "tilted", ch, values))
    floor = noise_floor_counts(x, data.rate_hz)
    out.append(Finding(Item.NOISE, floor <= NOISE_FAIL_COUNTS, "ok" if floor <= NOISE_FAIL_COUNTS
                       else "noisy", ch, {"floor_counts": floor,
                                          "floor_mv": floor * volts_per_count * 1000.0,
                                          "limit_counts": NOISE_FAIL_COUNTS}))
    clipped = int(np.count_nonzero((x <= 0) | (x >= adc_max)))
    out.append(Finding(Item.CLIPPING, clipped == 0, "ok" if clipped == 0 else "clipped", ch,
                       {"clipped": clipped, "share": clipped / max(1, len(x))}))
    return out


def _tach(data: BringupData) -> list[Finding]:
    tick_hz = float(data.identity.get("tick_hz", 2_000_000))  # type: ignore[arg-type]
    suppressed = int(data.board_counters.get("tach_suppressed", 0))
    out: list[Finding] = []
    tracker = TachTracker()
    for tick in data.rising_ticks:
        tracker.add_edge(int(tick))
    revs = tracker.revolutions
    period = tracker.reference_period_ticks
    if not data.rising_ticks:
        out.append(Finding(Item.TACH_RATE, False, "no_edges", None, {"seconds": data.seconds}))
    elif revs < MIN_REVOLUTIONS or period is None:
        out.append(Finding(Item.TACH_RATE, False, "too_few", None,
                           {"edges": len(data.rising_ticks), "seconds": data.seconds}))
    else:
        out.append(Finding(Item.TACH_RATE, True, "ok", None,
                           {"speed_rpm": 60.0 * tick_hz / period,
                            "edges_per_s": tick_hz / period}))
    out.append(Finding(Item.TACH_CHATTER, suppressed == 0, "ok" if suppressed == 0 else "chatter",
                       None, {"suppressed": suppressed}))
    if revs < MIN_REVOLUTIONS or period is None:
        return out
    uneven_share = tracker.uneven_revolutions / revs
    if tracker.double_edges:
        code = "double"
    elif tracker.missing_edges:
        code = "missing"
    elif uneven_share > UNEVEN_FAIL_SHARE:
        code = "knocked"
    else:
        code = "ok"
    out.append(Finding(Item.TACH_EDGES, code == "ok", code, None,
                       {"double": tracker.double_edges, "missing": tracker.missing_edges,
                        "uneven": tracker.uneven_revolutions, "revolutions": revs}))
    jitter = tracker.timing_scatter_deg
    out.append(Finding(Item.TACH_JITTER, bool(jitter <= JITTER_FAIL_DEG),
                       "ok" if jitter <= JITTER_FAIL_DEG else "unsteady", None,
                       {"scatter_deg": float(jitter), "limit_deg": JITTER_FAIL_DEG}))
    duty = tach_duty([*data.rising_ticks, *data.rising_after_ticks], data.falling_ticks)
    if duty is None:
        out.append(Finding(Item.TACH_DUTY, False, "no_falling_edges", None, {}))
    else:
        ok = DUTY_RANGE[0] <= duty <= DUTY_RANGE[1]
        code = "ok" if ok else ("narrow" if duty < DUTY_RANGE[0] else "wide")
        out.append(Finding(Item.TACH_DUTY, ok, code, None,
                           {"duty": duty, "mark_deg": duty * 360.0}))
    return out


def _side_indices(ticks: np.ndarray) -> np.ndarray:
    """Turn numbers of consecutive accepted edges (a missed edge skips a number)."""
    d = np.diff(ticks)
    period = float(np.median(d))
    return np.concatenate([[0.0], np.cumsum(np.maximum(1.0, np.round(d / period)))])


def tach_duty(rising_ticks: Sequence[int], falling_ticks: Sequence[int]) -> float | None:
    """Share of a turn from a rising edge to the next falling edge (the mark seen), or None.

    The falling edges are heard between two stretches of rising edges (the board reports one
    kind at a time). Rising edges accepted by :class:`TachTracker` (double edges dropped)
    on both sides are numbered turn by turn, the turns in the gap counted from the mean of
    the periods on either side (a speed changing steadily), and a quadratic time line
    t(turn) is fitted through them; each falling edge's place on it, modulo one turn, is the
    duty. The circular median over the falling edges keeps an odd bad edge out.
    """
    if len(rising_ticks) < 2 * MIN_REVOLUTIONS or not len(falling_ticks):
        return None
    tracker = TachTracker()
    accepted: set[int] = set()
    for tick in sorted(int(t) for t in rising_ticks):
        rev = tracker.add_edge(tick)
        if rev is not None:
            accepted.update((rev.start_tick, rev.end_tick))
    r = np.array(sorted(accepted), dtype=np.float64)
    f = np.asarray(falling_ticks, dtype=np.float64)
    before, after = r[r < f.min()][-12:], r[r > f.max()][:12]
    if len(before) < 3 or len(after) < 3:
        return None
    i_before, i_after = _side_indices(before), _side_indices(after)
    p_before = (before[-1] - before[0]) / i_before[-1]
    p_after = (after[-1] - after[0]) / i_after[-1]
    gap_turns = round((after[0] - before[-1]) / (0.5 * (p_before + p_after)))
    turns = np.concatenate([i_before, i_before[-1] + gap_turns + i_after])
    times = np.concatenate([before, after])
    fit = np.polynomial.Polynomial.fit(turns, times - times[0], 2)
    # where each falling edge sits on the time line: invert t(turn) by Newton steps
    k = np.interp(f - times[0], times - times[0], turns)
    slope = fit.deriv()
    for _ in range(3):
        k = k - (fit(k) - (f - times[0])) / slope(k)
    frac = np.mod(k, 1.0)
    ref = frac[0]
    centred = np.mod(frac - ref + 0.5, 1.0) - 0.5
    return float(np.mod(ref + np.median(centred), 1.0))


def _reference(data: BringupData, ref_v: float) -> Finding:
    """The ADC reference: AVCC (or, in the AREF build, the AREF pin) measured by the board
    against its bandgap (protocol 3 ``adc_reference_kind``), or only the nominal value."""
    kind = int(data.identity.get("adc_reference_kind", REFERENCE_KINDS["nominal"]))  # type: ignore[call-overload]
    if kind == REFERENCE_KINDS["aref_vs_bandgap"]:
        values = {"reference_v": ref_v, "low_v": AREF_RANGE_V[0], "high_v": AREF_RANGE_V[1]}
        ok = AREF_RANGE_V[0] <= ref_v <= AREF_RANGE_V[1]
        return Finding(Item.REFERENCE, ok, "aref" if ok else
                       ("aref_low" if ref_v < AREF_RANGE_V[0] else "aref_high"), None, values)
    values = {"reference_v": ref_v, "low_v": AVCC_RANGE_V[0], "high_v": AVCC_RANGE_V[1]}
    if kind != REFERENCE_KINDS["avcc_vs_bandgap"]:
        return Finding(Item.REFERENCE, True, "nominal", None, values)
    ok = AVCC_RANGE_V[0] <= ref_v <= AVCC_RANGE_V[1]
    return Finding(Item.REFERENCE, ok, "measured" if ok else
                   ("low" if ref_v < AVCC_RANGE_V[0] else "high"), None, values)


def judge(data: BringupData) -> list[Finding]:
    """Every finding of the bring-up check, in report order."""
    out: list[Finding] = [Finding(Item.IDENTITY, True, "ok", None, {})]
    link = data.link
    frames = link.get("frames_ok", 0) + link.get("frames_bad", 0) + link.get("frames_lost", 0)
    bad = link.get("frames_bad", 0) + link.get("frames_lost", 0)
    board_lost = sum(int(data.board_counters.get(k, 0)) for k in
                     ("samples_dropped", "frames_dropped", "adc_overruns", "rx_bad_frames"))
    lost = bad + link.get("samples_lost", 0) + link.get("tach_edges_lost", 0) + board_lost
    rate = bad / frames if frames else 1.0
    link_ok = frames > 0 and lost == 0 and link.get("board_resets", 0) == 0
    out.append(Finding(Item.LINK, link_ok, "ok" if link_ok else
                       ("restarted" if link.get("board_resets", 0) else "losses"), None,
                       {"error_rate": rate, "frames": frames, "frames_bad": link.get("frames_bad", 0),
                        "frames_lost": link.get("frames_lost", 0),
                        "samples_lost": link.get("samples_lost", 0), "board_lost": board_lost}))
    ref_v, adc_max = _adc(data)
    out.append(_reference(data, ref_v))
    channels = data.samples.shape[0] if data.samples.size else 0
    ghost: int | None = None
    coherence = 0.0
    if channels == 2 and data.samples.shape[1] >= 1024:
        ghost, coherence = ghost_of(data.samples, data.rate_hz)
    for ch in range(channels):
        out.extend(_levels(data, ch, data.samples[ch], ref_v, adc_max))
        if channels == 2:
            out.append(Finding(Item.FLOATING, ghost != ch, "ok" if ghost != ch else "ghost", ch,
                               {"coherence": coherence, "limit": GHOST_COHERENCE}))
    out.extend(_tach(data))
    order = list(Item)
    out.sort(key=lambda f: (order.index(f.item), -1 if f.channel is None else f.channel))
    return out


def all_passed(findings: Sequence[Finding]) -> bool:
    return all(f.passed for f in findings)
