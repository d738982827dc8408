"""Findings: what the measurement noticed, as data (a code, the pickup, counts, details).

The meter and the capture analysis return :class:`Finding` values; :func:`describe` is the
one place that puts them into words (the full sentence for ``trueturn analyze`` and the
app's warning list, or a few plain words with ``brief=True`` for the app's tach line).
Consumers choose by :class:`Code`, never by parsing a sentence. The codes are listed, with
what each means, in host/trueturn/dsp/README.md ("Findings").
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, field
from enum import Enum
from typing import Any


class Code(str, Enum):
    """What a finding is about (its value is the stable JSON code)."""

    # the stream as a whole
    NO_STREAM = "no_stream"                          # no stream set-up: no usable samples
    NO_IDENTITY = "no_identity"                      # defaults assumed for ADC and clock
    NO_WHOLE_REVOLUTION = "no_whole_revolution"      # tach edges but no revolution with samples
    SEVERAL_STREAMS = "several_streams"              # only the last stream is analysed
    LONG_CAPTURE = "long_capture"                    # only the last revolutions are averaged
    INCOMPLETE_CAPTURE = "incomplete_capture"        # less signal than was asked for
    MAINS_SETTING = "mains_setting"                  # a strong peak at the other mains frequency
    # the tach sensor (the mark, the sensor, its mount)
    NO_TACH = "no_tach"                              # samples but no steady tach signal
    TACH_EXTRA_EDGES = "tach_extra_edges"            # double triggers ignored
    TACH_MISSED_EDGES = "tach_missed_edges"          # the sensor did not see the mark
    TACH_UNEVEN = "tach_uneven"                      # edges knocked early or late
    # the USB link (frames lost or damaged between the board and the host)
    LINK_TACH_LOST = "link_tach_lost"                # tach edges the board saw, lost on the link
    LINK_SAMPLES_LOST = "link_samples_lost"          # revolutions left out for lost samples
    LINK_FRAMES_LOST = "link_frames_lost"            # frames lost on the link, by kind
    LINK_UNSEEN_LOSS = "link_unseen_loss"            # 256 x k frames at once (seq wrapped)
    LINK_DAMAGED_FRAMES = "link_damaged_frames"      # CRC / framing / value errors skipped
    BOARD_RESTART = "board_restart"                  # the board restarted during the capture
    TIMEBASE_FROM_BLOCKS = "timebase_from_blocks"    # stream_config lost, blocks place samples
    # the board's ADC
    ADC_LATE_REFUSED = "adc_late_refused"            # late conversions without a gap: refused
    ADC_LATE = "adc_late"                            # late conversions, dropped with their revs
    CLIPPED = "clipped"                              # samples at the ADC limits
    TACH_CHATTER_SUPPRESSED = "tach_chatter_suppressed"  # the board's hold-off ate edges
    TACH_CAPTURE_OVERWRITTEN = "tach_capture_overwritten"  # two edges inside one latency
    ADC_REFERENCE_REFUSED = "adc_reference_refused"  # reference outside the usable range
    # one pickup's reading
    UNCALIBRATED = "uncalibrated"                    # no sensitivity: shown in volts
    FEW_REVOLUTIONS = "few_revolutions"              # fewer than the minimum averaged
    SPEED_VARIES = "speed_varies"                    # speed spread above the limit
    SPEED_DRIFTING = "speed_drifting"                # mean speed moved between the halves
    VECTOR_DRIFTING = "vector_drifting"              # first and second half disagree
    PHASE_UNCERTAIN = "phase_uncertain"              # phase confidence above the aim
    NOT_ABOVE_SCATTER = "not_above_scatter"          # the 95 % circle covers the origin
    ORDER_ON_MAINS = "order_on_mains"                # an order too close to a hum frequency
    #                                                  (blocks the 1x when the line is dropped)
    HALF_ORDER = "half_order"                        # a line at 0.5x: averaged over rev pairs
    MAINS_WINDOW = "mains_window"                    # 1x near a hum line: read over its last 6 s
    NO_SPEED_LINE = "no_speed_line"                  # no tach, and no steady line in the band
    SPEED_FROM_ORDER = "speed_from_order"            # no tach, 1x lost in the noise: speed
    #                                                  from a harmonic line
    TACH_READS_1X = "tach_reads_1x"                  # amplitude only, yet a tach is seen: the
    #                                                  1x phase-locked to it, amplitude used
    # is it unbalance? (dsp/unbalance.py: evidence per pickup with ``ok``, then one verdict)
    ONE_X_SHARE = "one_x_share"                      # 1x against the broadband velocity
    PHASE_STEADINESS = "phase_steadiness"            # 1x phase steady within the run
    TWO_X_RATIO = "two_x_ratio"                      # 2x against 1x (misalignment, looseness)
    NONSYNC_PEAK = "nonsync_peak"                    # the strongest peak at no order
    PHASE_REPEATABLE = "phase_repeatable"            # 1x the same after a stop and restart
    UNBALANCE_LIKELY = "unbalance_likely"            # every rule passed: balancing should help
    BALANCING_MAY_NOT_HELP = "balancing_may_not_help"  # a rule failed: look elsewhere first
    UNBALANCE_UNDECIDED = "unbalance_undecided"      # too little evidence to judge
    SEVERITY = "severity"                            # broadband velocity and zone (severity.py)
    ONE_X_RISES_WITH_SPEED = "one_x_rises_with_speed"  # a sweep: 1x grows below resonance
    # sweeps (dsp/sweep.py: ``analyze --sweep``)
    NO_SPEED_CHANGE = "no_speed_change"              # asked for a sweep, the speed hardly moved
    NEAR_RESONANCE = "near_resonance"                # balancing speed close to a resonance
    # bump tests at standstill (dsp/bump.py: ``analyze --bump``)
    NO_TAPS = "no_taps"                              # no tap found in the recording
    TAP_CLIPPED = "tap_clipped"                      # a tap drove a pickup to an ADC rail
    SINGLE_TAP = "single_tap"                        # modes from one tap alone
    MODE_UNCONFIRMED = "mode_unconfirmed"            # a mode only one of several taps showed
    STEADY_LINE = "steady_line"                      # a line that does not decay: running?
    SPEED_NEAR_MODE = "speed_near_mode"              # running speed within 15 % of a mode


# The codes that are about the tach sensor itself.
TACH_CODES = frozenset({Code.NO_TACH, Code.TACH_EXTRA_EDGES, Code.TACH_MISSED_EDGES,
                        Code.TACH_UNEVEN})
# The app's "Tach:" line: the tach codes and tach edges lost on the link, in the order a
# person should look at them.
TACH_LINE = (Code.NO_TACH, Code.TACH_MISSED_EDGES, Code.LINK_TACH_LOST, Code.TACH_EXTRA_EDGES,
             Code.TACH_UNEVEN,
             Code.TACH_CHATTER_SUPPRESSED)
# The codes that block a reading from being steady (see averaging.steadiness).
BLOCKING_CODES = frozenset({Code.FEW_REVOLUTIONS, Code.SPEED_VARIES, Code.SPEED_DRIFTING,
                            Code.VECTOR_DRIFTING,
                            Code.PHASE_UNCERTAIN, Code.NOT_ABOVE_SCATTER})


@dataclass(frozen=True)
class Finding:
    """One thing the measurement noticed.

    ``pickup``: the pickup's name, or None for the stream as a whole; ``count``: how many
    (edges, revolutions, frames, samples...; see the code in dsp/README.md); ``details``:
    the numbers behind it (e.g. ``spread_pct`` and ``limit_pct``), JSON-ready;
    ``blocking``: the reading is not steady because of it (False: a note).
    """

    code: Code
    pickup: str | None = None
    count: int | None = None
    details: dict[str, Any] = field(default_factory=dict)
    blocking: bool = False

    def to_json(self) -> dict[str, Any]:
        """The finding as JSON-ready data (``analyze --json``, ``findings``).

        Returns
        -------
        dict
            ``code``, ``pickup`` (None for the stream), ``count`` when known, every detail (a
            non-finite number as None), and ``blocking: true`` when it blocks.

        References
        ----------
        .. [1] The finding codes and their JSON form: dsp/README.md, "Findings" (ours; no external
           source).
        """
        out: dict[str, Any] = {"code": self.code.value, "pickup": self.pickup}
        if self.count is not None:
            out["count"] = self.count
        for key, value in self.details.items():
            out[key] = (None if isinstance(value, float) and not math.isfinite(value)
                        else value)
        if self.blocking:
            out["blocking"] = True
        return out


def _n(f: Finding, key: str, default: Any = 0) -> Any:
    return f.details.get(key, default)


def _sentence(f: Finding) -> str:
    """The full sentence for one finding (without the pickup prefix)."""
    c, n = f.code, f.count
    if c is Code.NO_STREAM:
        return "no stream_config message: the capture holds no usable samples"
    if c is Code.NO_IDENTITY:
        return (f"no identity message: assumed a {_n(f, 'adc_bits')}-bit ADC, "
                f"{_n(f, 'reference_mv') / 1000:.3f} V reference, {_n(f, 'tick_hz')} Hz "
                "clock and no aperture delay")
    if c is Code.NO_WHOLE_REVOLUTION:
        return "no whole revolution with samples in the capture"
    if c is Code.SEVERAL_STREAMS:
        return f"{n} streams with samples in the capture; only the last is analysed"
    if c is Code.LONG_CAPTURE:
        return f"long capture: the last {n} revolutions are averaged"
    if c is Code.INCOMPLETE_CAPTURE:
        return (f"incomplete capture: {_n(f, 'recorded_s'):.2f} of the "
                f"{_n(f, 'requested_s'):g} s asked for were recorded (the link was lost, the "
                "board restarted or the recording was stopped)")
    if c is Code.MAINS_SETTING:
        return (f"a strong {_n(f, 'other_mains_hz'):g} Hz peak; is the mains setting "
                f"({_n(f, 'mains_hz'):g} Hz) right for this place?")
    if c is Code.NO_TACH:
        return ("no steady tach signal: check the tach sensor, its aim and the reflective "
                "mark")
    if c is Code.TACH_EXTRA_EDGES:
        return f"{n} extra tach edge(s) ignored (second mark, scratch or flicker?)"
    if c is Code.TACH_MISSED_EDGES:
        return f"{n} tach edge(s) missed; those revolutions were left out"
    if c is Code.TACH_UNEVEN:
        return (f"tach timing is uneven (edges scatter by {_n(f, 'scatter_deg'):.1f} deg rms, "
                f"{n} revolution(s) left out): clean or renew the reflective mark, check the "
                "sensor's distance and that its mount is tight; speed and phase readings "
                "wander with it")
    if c is Code.LINK_TACH_LOST:
        return (f"{n} tach edge(s) the board saw were lost on the USB link (frames dropped); "
                "those revolutions were left out")
    if c is Code.LINK_SAMPLES_LOST:
        return f"{n} revolution(s) left out for lost samples (USB link dropped data)"
    if c is Code.LINK_FRAMES_LOST:
        parts = []
        if _n(f, "samples"):
            parts.append(f"{_n(f, 'samples')} sample(s)")
        if _n(f, "tach_edges"):
            parts.append(f"{_n(f, 'tach_edges')} tach edge(s)")
        held = ("they held " + " and ".join(parts)) if parts else \
            "they held no samples and no tach edges: the readings are unaffected"
        return f"{n} frame(s) lost on the USB link; {held}"
    if c is Code.LINK_UNSEEN_LOSS:
        return (f"at least {n} frames lost at once on the USB link, a whole number of 256 "
                "that the frame sequence number cannot show; found by the "
                + " and ".join(w for w, k in (("sample index", "samples"),
                                             ("tach edge count", "tach_edges"))
                               if _n(f, k)) + "; the revolutions across it were left out")
    if c is Code.LINK_DAMAGED_FRAMES:
        refused = _n(f, "bad_values")
        return (f"{n} damaged frame(s) skipped (CRC or framing errors"
                + (f"; {refused} with values no board sends" if refused else "") + ")")
    if c is Code.BOARD_RESTART:
        return "the board restarted during the capture; only the last stream is analysed"
    if c is Code.TIMEBASE_FROM_BLOCKS:
        return ("a stream's stream_config message was lost; its sample times were taken "
                "from the sample blocks")
    if c is Code.ADC_LATE_REFUSED:
        return (f"refused: the board counted {n} late ADC conversion(s) (adc_late) in this "
                "stream but no gap in the sample indices: sample times may be shifted; update "
                "the firmware")
    if c is Code.ADC_LATE:
        return (f"{n} late ADC conversion(s) on the board (adc_late): the samples around "
                "them were dropped and their revolutions left out")
    if c is Code.ADC_REFERENCE_REFUSED:
        head = (f"refused: the ADC reference {_n(f, 'field')} is {_n(f, 'reference_mv')} mV, "
                f"outside {_n(f, 'min_mv')}..{_n(f, 'max_mv')} mV: ")
        if f.details.get("aref"):
            return head + ("the firmware's AREF build reads its AREF pin: wire AREF to the "
                           "pickups' 3.3 V rail (hardware/WIRING.md), or flash the standard "
                           "image for a board without it")
        return head + ("the board's USB supply is out of range (try another USB port, cable "
                       "or a powered hub)")
    if c is Code.TACH_CHATTER_SUPPRESSED:
        return (f"the tach chattered: the board's hold-off ignored {n} extra edge(s) "
                "(status.tach_suppressed); the readings are kept, but a tach module with "
                "hysteresis (or a Schmitt buffer) and a short shielded cable make it clean")
    if c is Code.TACH_CAPTURE_OVERWRITTEN:
        return (f"{n} tach edge time(s) were overwritten by a second edge within the "
                "board's interrupt latency (status.capture_overwrites): those revolutions' "
                "start may be late by a few microseconds; fix the tach chatter")
    if c is Code.CLIPPED:
        return (f"{n} sample(s) at the ADC limits: the pickup signal clips; reduce its gain "
                "or move it")
    if c is Code.UNCALIBRATED:
        return "no sensitivity known, shown in volts"
    if c is Code.FEW_REVOLUTIONS:
        return f"only {n} revolutions averaged (need {_n(f, 'minimum')})"
    if c is Code.SPEED_VARIES:
        return (f"speed varies by {_n(f, 'spread_pct'):.1f} % "
                f"(limit {_n(f, 'limit_pct'):g} %)")
    if c is Code.SPEED_DRIFTING:
        drift = _n(f, "drift_pct")
        return (f"speed still {'rising' if drift > 0 else 'falling'}: the second half ran "
                f"{abs(drift):.2f} % {'faster' if drift > 0 else 'slower'} than the first "
                f"(limit {_n(f, 'limit_pct'):g} %); wait for a steady speed")
    if c is Code.VECTOR_DRIFTING:
        return "1x vector still changing (first and second half disagree)"
    if c in (Code.PHASE_UNCERTAIN, Code.NOT_ABOVE_SCATTER):
        text = ("1x is not above the scatter (noise, or a very small 1x)"
                if c is Code.NOT_ABOVE_SCATTER else
                f"phase uncertain by +/-{_n(f, 'confidence_deg'):.1f} deg "
                f"(aim {_n(f, 'limit_deg'):g} deg)")
        if not f.blocking:
            text += (f"; settled after {n} revolutions, so the 1x is small compared with the "
                     "scatter")
        return text
    if c is Code.ORDER_ON_MAINS:
        state = _mains_state(f)
        if state == "beyond":
            seconds = _n(f, "seconds_needed", None)
            takes = (f"one beat takes {seconds:.0f} s of signal" if seconds is not None
                     else "they do not beat at all")
            return (f"{_mains_apart(f)} cannot be told from the hum at this speed: {takes}, "
                    f"more than the {_n(f, 'window_max_s'):g} s over which the hum's fit and the "
                    f"motor's speed hold steady enough. {_MAINS_WAY_OUT}")
        if state == "waiting":
            return (f"{_mains_apart(f)}: the reading waits for one beat - averaging "
                    f"{_n(f, 'revolutions_needed')} revolutions, {_n(f, 'revolutions_held')} "
                    "so far; keep the machine running steadily")
        order = _n(f, "order", 0)
        what = f"{order}x" if order else "an order"
        text = (f"{what} is too close to {_n(f, 'hum_hz'):g} Hz, a mains hum frequency: any "
                "hum there adds to it (a slightly different speed separates them)")
        needed = _n(f, "revolutions_needed", None)
        if needed and f.blocking:
            seconds = _n(f, "seconds_needed", None)
            record = f", {seconds:g} s of signal" if seconds is not None else ""
            text += (f"; the reading waits: this window cannot tell the 1x from the hum - average "
                     f"at least {needed} revolutions (one {_n(f, 'beat_hz'):.2g} Hz beat{record})")
        return text
    if c is Code.MAINS_WINDOW:
        return (f"{_mains_apart(f)}: read over the last {_n(f, 'revolutions_read')} of "
                f"{_n(f, 'revolutions_offered')} revolutions ({_n(f, 'window_max_s'):g} s of "
                "signal), as long as the hum's fit follows the mains grid; the rest is left "
                "out (a speed at least "
                f"{_n(f, 'near_hz'):g} Hz from the line averages all of it)")
    if c is Code.NO_SPEED_CHANGE:
        return (f"no usable speed change for a sweep: the speed stayed within "
                f"{_n(f, 'low_rpm'):.0f}-{_n(f, 'high_rpm'):.0f} rpm (a sweep needs the "
                f"fastest revolution {_n(f, 'ratio_needed'):g} x the slowest); record while "
                "the machine coasts down (switch the motor off once recording at speed) or "
                "runs up")
    if c is Code.NEAR_RESONANCE:
        zeta = _n(f, "damping_ratio", None)
        damping = f", damping {100 * zeta:.1f} %" if zeta is not None else ""
        return (f"the balancing speed {_n(f, 'speed_rpm'):.0f} rpm is within "
                f"{100 * _n(f, 'margin'):.0f} % of a support resonance at "
                f"{_n(f, 'resonance_rpm'):.0f} rpm{damping}: near it the 1x changes fast "
                "with speed, so readings taken a little apart in speed disagree and the "
                "correction is touchy; balance at a speed further away if the machine "
                "allows, keep every run at the same speed, and expect trim runs")
    if c is Code.NO_TAPS:
        return ("no tap found: strike the bearing housing (never the rotor) with a soft "
                "mallet a few times, about 2 s apart, while recording the stopped machine")
    if c is Code.TAP_CLIPPED:
        return (f"tap {_n(f, 'tap')} at {_n(f, 'time_s'):.2f} s drove the pickup to the ADC "
                f"limit ({n} samples); its decay is fitted after the last one - strike softer")
    if c is Code.SINGLE_TAP:
        return ("the modes come from one tap alone: their uncertainty holds the noise and a "
                "floor, not how taps differ; tap a few more times for a check")
    if c is Code.MODE_UNCONFIRMED:
        return (f"a ringing at {_n(f, 'frequency_hz'):.1f} Hz was seen in one of "
                f"{_n(f, 'taps_usable')} taps only; not reported as a mode")
    if c is Code.STEADY_LINE:
        return (f"a steady line at {_n(f, 'frequency_hz'):.1f} Hz "
                f"({_n(f, 'speed_rpm'):.0f} rpm) that does not decay after the taps: is the "
                "machine running? A bump test needs it stopped and locked out")
    if c is Code.SPEED_NEAR_MODE:
        return (f"the running speed {_n(f, 'speed_rpm'):.0f} rpm is within "
                f"{100 * _n(f, 'margin'):.0f} % of a natural frequency at "
                f"{_n(f, 'frequency_hz'):.1f} Hz ({_n(f, 'mode_rpm'):.0f} rpm, damping "
                f"{100 * _n(f, 'damping_ratio'):.1f} %): running there rings the structure; "
                "keep the speed further away if the machine allows, or ask the manufacturer")
    if c is Code.NO_SPEED_LINE:
        said = (f"no steady line between {_n(f, 'low_rpm'):.0f} and {_n(f, 'high_rpm'):.0f} rpm "
                "in the last 4 s: without a tach the speed comes from the spectrum, so run the "
                "machine steadily at its planned speed (a speed still changing, or on the "
                "mains line, gives no reading)")
        if _n(f, "reference_rpm", None) is not None:
            said += (f"; nor a harmonic of the as-found {_n(f, 'reference_rpm'):.0f} rpm. If "
                     "the machine does run steadily there, its 1x is lost in the noise (a "
                     "rotor balanced very well) and cannot be measured without a tach: stop "
                     "the run (a), fit a tach and run again; this job then reads the 1x "
                     "locked to it")
        return said
    if c is Code.TACH_READS_1X:
        return (f"a tach is seen ({_n(f, 'speed_rpm'):.0f} rpm): the 1x is read locked to it, "
                "which finds a 1x too small for the spectrum; this method uses its "
                "amplitude only")
    if c is Code.SPEED_FROM_ORDER:
        return (f"the 1x is lost in the noise: the speed ({_n(f, 'speed_rpm'):.0f} rpm) comes "
                f"from the {_n(f, 'order')}x line, and the 1x is read there (a rotor balanced "
                "close to what the pickups can see without a tach)")
    if c is Code.HALF_ORDER:
        return (f"a line at half the running speed ({_n(f, 'level'):.3g} {f.details.get('unit', '')}"
                " in the 1x fit; a 2:1 belt or gear, a rub?): the 1x is averaged over whole "
                "pairs of revolutions, which cancels it")
    if c in _UNBALANCE_CODES:
        return _unbalance_sentence(f)
    raise ValueError(f"no words for finding {c!r}")  # pragma: no cover - every code has words


_UNBALANCE_CODES = frozenset({Code.ONE_X_SHARE, Code.PHASE_STEADINESS, Code.TWO_X_RATIO,
                              Code.NONSYNC_PEAK, Code.PHASE_REPEATABLE, Code.UNBALANCE_LIKELY,
                              Code.BALANCING_MAY_NOT_HELP, Code.UNBALANCE_UNDECIDED,
                              Code.SEVERITY, Code.ONE_X_RISES_WITH_SPEED})

# What each evidence code means when its rule fails, for the verdict's sentence.
_FAILED_RULE = {"one_x_share": "1x not dominant", "phase_steadiness": "1x phase not steady",
                "two_x_ratio": "strong 2x", "nonsync_peak": "a strong peak at no shaft order",
                "one_x_rises_with_speed": "1x not rising with speed",
                "phase_repeatable": "1x not the same after a restart"}
# The meaning of each evaluation zone (ISO 20816-1 / ISO 10816-1, dsp/severity.py).
_ZONE_MEANING = {"A": "as newly commissioned machines",
                 "B": "acceptable for unrestricted long-term operation",
                 "C": "unsatisfactory for long-term continuous operation",
                 "D": "severe enough to cause damage"}
# The zones in a few words, for the app's guide (``describe(..., brief=True)``).
_ZONE_BRIEF = {"A": "as new", "B": "fine for long-term use", "C": "not for long-term use",
               "D": "may cause damage"}
_REFUSED = {"uncalibrated": "no sensitivity known, so no velocity from volts",
            "band_not_sampled": "the sample rate does not reach 1000 Hz",
            "speed_too_low": "the 1x is too slow even for the 2-1000 Hz band used below "
                             "600 rpm"}


def _pct(x: Any) -> str:
    return "?" if x is None else f"{100.0 * x:.0f} %"


def _unbalance_sentence(f: Finding) -> str:
    """Words for the unbalance evidence and verdict (rules: dsp/unbalance.py)."""
    c, ok = f.code, bool(_n(f, "ok", True))
    if c is Code.ONE_X_SHARE:
        head = f"1x is {_pct(_n(f, 'share', None))} of the overall vibration velocity"
        if ok:
            return f"{head} (unbalance-like: at least {_pct(_n(f, 'limit'))})"
        return (f"{head} (below {_pct(_n(f, 'limit'))}): most of the vibration is not at 1x; "
                "balancing alone may not help")
    if c is Code.PHASE_STEADINESS:
        if ok:
            return "1x phase steady within the run (unbalance-like)"
        return ("1x phase not steady within the run: a loose part, a rub or a beat with a "
                "nearby speed; tighten and check first, balancing may not help")
    if c is Code.TWO_X_RATIO:
        head = f"2x is {_pct(_n(f, 'ratio'))} of 1x"
        if ok:
            return f"{head} (no strong 2x)"
        return f"{head}: check alignment and mounting bolts first; balancing may not help"
    if c is Code.NONSYNC_PEAK:
        order = _n(f, "order", None)
        where = f"{_n(f, 'hz'):.1f} Hz" + (f" ({order:.2f}x, no order)" if order else "")
        head = f"the strongest peak at no shaft order, {where}, is {_pct(_n(f, 'ratio'))} of 1x"
        if ok:
            return head
        return (f"{head}: bearings, belts or another machine shake it too; balancing may not "
                "help with that")
    if c is Code.ONE_X_RISES_WITH_SPEED:
        head = (f"below the first resonance the 1x displacement grows as speed^"
                f"{_n(f, 'exponent'):.1f} over {_n(f, 'points')} sweep points")
        if ok:
            return f"{head} (unbalance-like: at least speed^{_n(f, 'limit'):g})"
        return (f"{head}, less than speed^{_n(f, 'limit'):g}: an unbalance force grows as "
                "speed^2; a bent shaft, runout at the pickup, an electrical or another "
                "machine's vibration may be at work; balancing may not help")
    if c is Code.PHASE_REPEATABLE:
        first, second = _n(f, "phases_deg", None) or (math.nan, math.nan)
        ratio = _n(f, "amplitude_ratio", None)
        size = f", amplitude x{ratio:.2f}" if ratio is not None else ""
        head = (f"1x at {first:.0f}° then {second:.0f}° after a restart "
                f"({abs(_n(f, 'phase_change_deg', 0.0)):.0f}° apart{size})")
        if ok:
            return f"{head}: repeatable, as an unbalance is"
        return (f"{head}: it moved between starts - a part that shifts (loose pulley, key, "
                "hub or set screw), a rub or a thermal bow; fix that first, balancing may not "
                "help")
    if c is Code.UNBALANCE_LIKELY:
        return ("looks like unbalance: 1x dominant and steady, no strong 2x or other peaks "
                "(rules of the trade); balancing should help")
    if c is Code.BALANCING_MAY_NOT_HELP:
        return ("not only unbalance (" + ", ".join(
            _FAILED_RULE.get(w, w) for w in _n(f, "because", [])) + "): find and fix that "
            "cause first; balancing may not help")
    if c is Code.SEVERITY:
        zone = _n(f, "zone", None)
        if zone is None:
            return ("overall severity not given: "
                    + _REFUSED.get(_n(f, "refused", ""), "cannot be measured"))
        low, high = _n(f, "band_hz", None) or (10.0, 1000.0)  # kept before bands were said
        return (f"overall {_n(f, 'velocity_rms_mm_s'):.2f} mm/s rms ({low:g}-{high:g} Hz): "
                f"zone {zone}, {_ZONE_MEANING.get(zone, '')}")
    if _n(f, "sweep", False):
        return ("cannot judge whether this is unbalance from a sweep: the spectrum rules need "
                "a steady run (analyze one without --sweep), and the 1x was not measured far "
                "enough below the first resonance to see it rise with speed")
    return "cannot judge whether this is unbalance (no spectrum or no 1x reading)"


# A few plain words for the app's tach line (``describe(..., brief=True)``).
_BRIEF = {
    Code.NO_TACH: "no tach edges: rotor at rest, or the tach does not see its mark",
    Code.TACH_MISSED_EDGES: "missed tach edges{n}: the mark was not seen every turn",
    Code.TACH_EXTRA_EDGES: "extra tach edges{n}: a second mark, scratch or flicker",
    Code.TACH_UNEVEN: "uneven tach edges: clean the mark, tighten the sensor",
    Code.LINK_TACH_LOST: "tach edges lost on the USB link{n}: check the cable and the port",
    Code.TACH_CHATTER_SUPPRESSED: "tach chatter ignored by the board{n}: readings kept; "
                                  "a tach module with hysteresis would be cleaner",
    Code.UNBALANCE_LIKELY: "looks like unbalance (rules of the trade): balancing should help",
}


def describe(finding: Finding, brief: bool = False) -> str:
    """The words for one finding: the one place findings become sentences.

    A finding about one pickup starts with its name.

    Parameters
    ----------
    finding : Finding
        The finding.
    brief : bool, default False
        A few plain words where the app has them (the tach codes; a severity with a zone,
        without its band; the unbalance verdict; a repeated 1x; a resonance near the
        balancing speed; a 1x waiting out, or too near, a mains line), else the sentence.

    Returns
    -------
    str
        The sentence (or the brief words).

    References
    ----------
    .. [1] The finding codes and their JSON form: dsp/README.md, "Findings" (ours; no external
       source).
    """
    if brief and finding.code is Code.SEVERITY and _n(finding, "zone", None) is not None:
        zone = _n(finding, "zone")
        text = (f"overall {_n(finding, 'velocity_rms_mm_s'):.2f} mm/s rms, zone {zone} "
                f"({_ZONE_BRIEF.get(zone, '')})")
        return f"{finding.pickup}: {text}" if finding.pickup else text
    if brief and finding.code is Code.PHASE_REPEATABLE and _n(finding, "ok", False):
        ratio = _n(finding, "amplitude_ratio", None)
        size = f", x{ratio:.2f}" if ratio is not None else ""
        text = (f"1x repeats after a restart "
                f"({abs(_n(finding, 'phase_change_deg', 0.0)):.0f}° apart{size})")
        return f"{finding.pickup}: {text}" if finding.pickup else text
    if brief and finding.code is Code.NEAR_RESONANCE:
        text = (f"balancing speed {_n(finding, 'speed_rpm'):.0f} rpm within "
                f"{100 * _n(finding, 'margin'):.0f} % of a resonance at "
                f"{_n(finding, 'resonance_rpm'):.0f} rpm")
        return f"{finding.pickup}: {text}" if finding.pickup else text
    if brief and finding.code is Code.ORDER_ON_MAINS and _mains_state(finding):
        if _mains_state(finding) == "waiting":
            text = (f"{_mains_apart(finding)}: needs "
                    f"{_n(finding, 'revolutions_needed')} revolutions, "
                    f"{_n(finding, 'revolutions_held')} so far")
        else:
            text = (f"{_mains_apart(finding)}: cannot be told apart at this speed. "
                    f"{_MAINS_WAY_OUT_BRIEF}")
        return f"{finding.pickup}: {text}" if finding.pickup else text
    if brief and finding.code in _BRIEF:
        count = f" ({finding.count})" if finding.count else ""
        return _BRIEF[finding.code].format(n=count)
    text = _sentence(finding)
    return f"{finding.pickup}: {text}" if finding.pickup else text


# What a person can do when the 1x cannot be told from a mains hum line (common practice,
# no source): move the 1x away from the line, or take the hum off the pickup signals (it is
# picked up on the leads, or comes in through a ground loop with the mains-powered laptop).
_MAINS_WAY_OUT = ("Run it at another speed if the machine allows (another pulley, a variable "
                  "drive), or cut the hum: shorter, shielded pickup leads away from the motor's "
                  "power cables, and the laptop on its battery (common practice)")
_MAINS_WAY_OUT_BRIEF = ("Run at another speed if the machine allows, or cut the hum: short "
                        "shielded leads, laptop on battery")


def _mains_state(f: Finding) -> str:
    """A blocking ``order_on_mains`` on the 1x: "beyond" when the beat is too slow to wait
    out (``revolutions_needed`` over ``revolutions_max``), "waiting" while the live meter
    gathers the revolutions (``revolutions_held``); else ""."""
    needed = f.details.get("revolutions_needed")
    most = f.details.get("revolutions_max")
    if not f.blocking or most is None:
        return ""
    if needed is None or needed > most:  # (None: no beat at all)
        return "beyond"
    return "waiting" if "revolutions_held" in f.details else ""


def _mains_apart(f: Finding) -> str:
    """"1x 0.4 Hz from the 60 Hz hum" (the 1x from the line itself)."""
    return f"1x {_n(f, 'offset_hz'):.2g} Hz from the {_n(f, 'hum_hz'):g} Hz hum"


def unique(findings: Iterable[Finding]) -> list[Finding]:
    """Findings without repeats, in order (a stream finding shared by every pickup is listed once).

    Parameters
    ----------
    findings : iterable of Finding
        The findings, possibly repeated.

    Returns
    -------
    list of Finding
        The first of each equal finding, in order.

    References
    ----------
    .. [1] The finding codes and their JSON form: dsp/README.md, "Findings" (ours; no external
       source).
    """
    seen: list[Finding] = []
    for f in findings:
        if f not in seen:
            seen.append(f)
    return seen
