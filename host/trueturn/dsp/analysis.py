"""Whole-capture analysis: raw received bytes -> readings, spectrum peaks and warnings.

Decodes with :class:`trueturn.link.codec.StreamDecoder` and runs the same
:class:`~trueturn.dsp.meter.LiveAnalyzer` as the live app, so a capture gives exactly what
the meter showed. The JSON form is the contract of ``trueturn analyze --json``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, replace
from typing import Any

from trueturn.dsp.averaging import SteadinessLimits
from trueturn.dsp.coast import meter_sweep, sweep_findings
from trueturn.dsp.findings import Code, Finding, describe, unique
from trueturn.dsp.meter import LiveAnalyzer, PickupReading, near_mains_line
from trueturn.dsp.severity import (
    BAND_HZ,
    LOW_SPEED_BAND_HZ,
    LOW_SPEED_BELOW_RPM,
    ZONE_BOUNDARIES_MM_S,
    ZONES_SOURCE,
    Severity,
    band_for,
    band_velocity_rms,
    pickup_severity,
)
from trueturn.dsp.spectrum import Spectrum, SpectrumPeak
from trueturn.dsp.sweep import (
    BIN_FRACTION,
    MIN_SWEEP_RATIO,
    RESONANCE_MARGIN,
    SpeedSlope,
    Sweep,
    balancing_speed_rpm,
    local_slope,
    rise_below_first_resonance,
)
from trueturn.dsp.unbalance import (
    REPEAT_SPEED_TOLERANCE,
    pickup_evidence,
    repeat_evidence,
    same_speed,
    sweep_evidence,
    verdict,
)
from trueturn.dsp.units import PickupProfile
from trueturn.link.codec import LinkEvent, Message, StreamDecoder
from trueturn.model import Reading

# What each pickup's 95 % circle (confidence_radius) covers and what it does not
# (dsp/README.md, "What the 95 % circle covers"); part of the JSON contract.
CONFIDENCE_SCOPE: dict[str, Any] = {
    "level": 0.95,
    "covers": ["noise", "hum_residue", "hum_fit_error_common_to_all_revolutions",
               "tach_jitter", "tach_tick_quantisation", "tones_apart_from_orders",
               "tach_capture_bias_bound", "aperture_rounding_bound"],
    "not_covered": ["tones_within_unresolved_hz_of_an_order", "sensitivity_and_adc_reference",
                    "input_chain_beyond_profile", "tach_sensor_latency",
                    "quantisation_of_a_noise_free_signal"],
    # a mains line the fit had to drop next to the 1x is not left to the circle: the
    # reading is blocked (finding order_on_mains, blocking, with revolutions_needed)
    "refused": ["one_x_on_an_unseparated_mains_line"],
}
# The most samples one block holds (protocol/catalogue.yaml, samples: "1..120"): the fewest
# frames a run of lost samples can have taken
MAX_BLOCK_SAMPLES = 120
# Revolutions fitted together in one batch: fewer, larger numpy calls (a whole capture is
# known at once); about 7 MB of working arrays at 2 x 4 kSps and 50 rev/s
BATCH_REVS = 1024
# The most revolutions one analysis averages (about 2.7 min at 3000 rpm); longer captures
# use their last ALL_REVS and say so.
ALL_REVS = 8192


@dataclass(frozen=True)
class PickupPeaks:
    """The labelled spectrum peaks of one pickup (amplitude unit ``unit``)."""

    sensor: str
    unit: str
    resolution_hz: float
    peaks: tuple[SpectrumPeak, ...]


@dataclass(frozen=True)
class SecondStart:
    """A second start of the machine as found, compared with the first (issue #22):
    its speed and readings, and the pickups not compared with why (``no_reading``: none in
    one of the starts; ``cannot_tell``: no phase, or 95 % circles wider than the rule)."""

    speed_rpm: float
    readings: tuple[PickupReading, ...]
    not_compared: tuple[tuple[str, str], ...] = ()


@dataclass(frozen=True)
class Analysis:
    """Everything ``trueturn analyze`` reports about one capture."""

    speed_rpm: float
    readings: tuple[PickupReading, ...]
    spectra: tuple[PickupPeaks, ...]
    warnings: tuple[str, ...]
    link: dict[str, Any]
    findings: tuple[Finding, ...] = ()  # the warnings as data, in the same order
    #: overall severity per pickup (dsp/severity.py)
    severity: tuple[Severity, ...] = ()
    #: is it unbalance? the verdict first, then each pickup's evidence (dsp/unbalance.py)
    unbalance: tuple[Finding, ...] = ()
    #: ``analyze --sweep``: the 1x against speed and the resonances (dsp/sweep.py)
    sweep: Sweep | None = None
    #: the sweep's local response slope per pickup at the balancing speed
    speed_slopes: tuple[SpeedSlope, ...] = ()
    #: a second start compared with this one (:func:`compare_starts`); None: not made
    second_start: SecondStart | None = None

    def to_json(self) -> dict[str, Any]:
        """The analysis as the JSON contract of ``trueturn analyze --json``.

        Returns
        -------
        dict
            ``speed_rpm``, ``pickups`` (amplitude in its ``unit``, phase and confidence in
            degrees, confidence radius in the unit, orders, noise and hum in volts), spectrum
            peaks (Hz, amplitude), ``confidence`` (what the 95 % circle covers), ``warnings``,
            ``findings``, the link counters, ``severity`` (per pickup: broadband velocity
            RMS in mm/s, the ``band_hz`` it was measured over and its zone, or null with
            ``refused``; ``severity_scale``: the bands, boundaries and their source) and ``unbalance`` (``verdict`` and its coded
            ``evidence``, each with words) and ``second_start`` (null, or the second
            start's speed and 1x per pickup and the pickups ``not_compared``, with why;
            its ``phase_repeatable`` evidence is in ``unbalance``); non-finite numbers as
            null.

        References
        ----------
        .. [1] dsp/README.md, "What the 95 % circle covers" and "Findings" (ours; no external
           source).
        """
        def num(x: float | None, digits: int = 6) -> float | None:
            return None if x is None or not math.isfinite(x) else round(float(x), digits)

        return {
            "speed_rpm": num(self.speed_rpm, 3),
            "pickups": [{
                "name": r.sensor, "channel": r.channel,
                "amplitude": num(r.amplitude), "unit": r.unit,
                "phase_deg": num(r.phase_deg, 3), "confidence_deg": num(r.confidence_deg, 3),
                "confidence_radius": num(r.confidence_radius),
                "confidence_random": num(r.confidence_random),
                "confidence_scatter": num(r.confidence_scatter),
                "timing_bias_deg": num(r.timing_bias_deg, 5),
                "unresolved_hz": num(1.0 / r.window_s if r.window_s > 0 else math.inf, 4),
                "revolutions": r.revolutions, "steady": r.steady,
                "speed_rpm": num(r.speed_rpm, 3),
                "orders": [{"order": h.order, "amplitude": num(h.amplitude),
                            "phase_deg": num(h.phase_deg, 3)} for h in r.harmonics],
                "noise_rms_v": num(r.noise_rms_v),
                "hum_v": {f"{f:g}": num(v) for f, v in r.hum_v.items()},
            } for r in self.readings],
            "spectrum_peaks": [{"pickup": s.sensor, "hz": num(p.hz, 3),
                                "amplitude": num(p.amplitude), "unit": s.unit,
                                "label": p.label, "also": list(p.also), "fitted": p.fitted}
                               for s in self.spectra for p in s.peaks],
            "confidence": CONFIDENCE_SCOPE,
            "warnings": list(self.warnings),
            "findings": [f.to_json() for f in self.findings],
            "severity": [{"pickup": v.pickup, "velocity_rms_mm_s": num(v.velocity_rms_mm_s, 4),
                          "zone": v.zone.value if v.zone else None,
                          "band_hz": list(v.band_hz) if v.band_hz else None,
                          "refused": v.refused.value if v.refused else None}
                         for v in self.severity],
            "severity_scale": {"band_hz": list(BAND_HZ),
                               "low_speed_band_hz": list(LOW_SPEED_BAND_HZ),
                               "low_speed_below_rpm": LOW_SPEED_BELOW_RPM,
                               "zone_boundaries_mm_s": dict(zip(("A/B", "B/C", "C/D"),
                                                                ZONE_BOUNDARIES_MM_S,
                                                                strict=True)),
                               "source": ZONES_SOURCE},
            "unbalance": None if not self.unbalance else {
                "verdict": self.unbalance[0].code.value,
                "words": describe(self.unbalance[0]),
                "evidence": [{**f.to_json(), "words": describe(f)}
                             for f in self.unbalance[1:]]},
            "second_start": None if self.second_start is None else {
                "speed_rpm": num(self.second_start.speed_rpm, 3),
                "pickups": [{"name": r.sensor, "amplitude": num(r.amplitude), "unit": r.unit,
                             "phase_deg": num(r.phase_deg, 3),
                             "confidence_radius": num(r.confidence_radius)}
                            for r in self.second_start.readings],
                "not_compared": [{"pickup": name, "why": why}
                                 for name, why in self.second_start.not_compared]},
            "link": self.link,
            **(self._sweep_json(num) if self.sweep is not None else {}),
        }

    def _sweep_json(self, num: Callable[..., float | None]) -> dict[str, Any]:
        """The sweep's part of ``analyze --sweep --json`` (dsp/sweep.py)."""
        sw = self.sweep
        assert sw is not None
        return {
            "sweep": [{"speed_rpm": num(p.speed_rpm, 2), "revolutions": p.revolutions,
                       "pickups": [{"name": v.name, "amplitude": num(v.amplitude),
                                    "phase_deg": num(v.phase_deg, 2),
                                    "confidence_radius": num(v.confidence_radius),
                                    "usable": v.usable} for v in p.pickups]}
                      for p in sw.points],
            "resonances": [{"speed_rpm": num(r.speed_rpm, 1), "pickup": r.pickup,
                            "damping_ratio": num(r.damping_ratio, 4),
                            "damping_ratio_95": None if r.damping_ratio_95 is None
                            else [num(r.damping_ratio_95[0], 4),
                                  num(r.damping_ratio_95[1], 4)],
                            "half_power_damping_ratio": num(r.half_power_damping_ratio, 4),
                            "swept": r.swept,
                            "peak_rpm": num(r.peak_rpm, 1),
                            "sweep_rate_parameter": num(r.sweep_rate_parameter, 3),
                            "half_power_rpm": None if r.lower_rpm is None or r.upper_rpm is None
                            else [num(r.lower_rpm, 1), num(r.upper_rpm, 1)],
                            "points_in_band": r.points_in_band,
                            "peak_ratio": num(r.peak_ratio, 3), "method": r.method,
                            "single_mode": r.single_mode,
                            "sdof_fit": None if r.fit_speed_rpm is None else {
                                "speed_rpm": num(r.fit_speed_rpm, 1),
                                "damping_ratio": num(r.fit_damping_ratio, 4)}}
                           for r in sw.resonances],
            "sweep_info": {"unit": sw.unit, "is_sweep": sw.is_sweep,
                           "low_rpm": num(sw.low_rpm, 1), "high_rpm": num(sw.high_rpm, 1),
                           "min_ratio": MIN_SWEEP_RATIO, "bin_fraction": BIN_FRACTION,
                           "balancing_speed_rpm": num(balancing_speed_rpm(sw) or math.nan, 1),
                           "resonance_margin": RESONANCE_MARGIN,
                           "method": "peaks of the 1x per unit unbalance force "
                                     "(divided by speed^2 and the pickup's own power "
                                     "of speed), half-power bandwidth (Ewins, Modal "
                                     "Testing, sec. 4.2); speed_rpm: the SDOF fit's "
                                     "natural speed when it resolved the mode, else the "
                                     "peak (peak_rpm); damping_ratio: sdof_fit, a "
                                     "least-squares fit of one SDOF mode with residual "
                                     "terms to the complex 1x (amplitude and phase) of "
                                     "each revolution near it, averaged across the "
                                     "revolution's speed change (Ewins sec. 4.3-4.4), "
                                     "or with the sweep's build-up, lag and ringing "
                                     "(swept: true; Lewis 1932), taken when the "
                                     "sweep_rate_parameter |d omega/dt| / (zeta omega_n)^2 "
                                     "is at least 1 unless the response plainly followed "
                                     "the speed; peaks that the ringing after a mode "
                                     "explains are left out; damping_ratio_95 from the "
                                     "fit's covariance; null when not resolved"},
            "speed_slopes": [{"pickup": k.pickup, "speed_rpm": num(k.speed_rpm, 1),
                              "amplitude_exponent": num(k.amplitude_exponent, 4),
                              "amplitude_exponent_se": num(k.amplitude_exponent_se, 4),
                              "phase_deg_per_ln_speed": num(k.phase_deg_per_ln_speed, 3),
                              "phase_deg_per_ln_speed_se": num(k.phase_deg_per_ln_speed_se, 3),
                              "points": k.points} for k in self.speed_slopes],
        }


def analyze_capture(raw: bytes | Iterable[bytes], revs: int | None = None,
                    mains_hz: float | None = 50.0,
                    profiles: Sequence[PickupProfile] = (), unit: str | None = None,
                    limits: SteadinessLimits | None = None,
                    identity: dict[str, Any] | None = None,
                    observe: Callable[[Message | LinkEvent], None] | None = None,
                    sweep: bool = False,
                    again: Callable[[], Iterable[bytes]] | None = None) -> Analysis:
    """Analyse the received bytes of one capture over its last ``revs`` good revolutions.

    Decodes with :class:`trueturn.link.codec.StreamDecoder` and runs the same
    :class:`~trueturn.dsp.meter.LiveAnalyzer` as the live app. A 1x within
    :data:`~trueturn.dsp.meter.MAINS_NEAR_HZ` of a hum line is read again as the app's meter
    waits out a mains line (``wait_out_mains``: the hum as a seven-tone comb): over at most
    :data:`~trueturn.dsp.meter.MAINS_WINDOW_MAX_S` of signal, the last of the capture
    (finding ``mains_window``), and, when that window cannot tell the 1x from the line, over
    the revolutions one beat needs if the capture holds them.

    Parameters
    ----------
    raw : bytes or iterable of bytes
        The bytes as received from the board, whole or in pieces.
    revs : int or None, default None
        Revolutions averaged; None averages every revolution up to a limit (then says so).
    mains_hz : float or None, default 50.0
        Mains frequency, Hz (hum at it and twice it is fitted out); None fits no hum.
    profiles : sequence of PickupProfile, default ()
        One per channel: name, sensitivity (V/g), low-pass corners (Hz), delay (us).
    unit : str or None, default None
        A key of :data:`trueturn.dsp.units.UNITS`; None takes each profile's default.
    limits : SteadinessLimits or None, default None
        When a reading is steady; None takes the defaults.
    identity : dict or None, default None
        The board's identity fields as saved in a capture header, used when the bytes start
        after the identity message (an identity in the bytes wins).
    observe : callable or None, default None
        Called with every decoded message and link event, in order, before the meter takes
        it; None calls nothing.
    sweep : bool, default False
        Also bin every revolution's 1x against speed and look for support resonances
        (:mod:`trueturn.dsp.sweep`); finds ``no_speed_change`` when the speed hardly moved
        and ``near_resonance`` when the balancing speed is close to one.
    again : callable or None, default None
        Gives the same bytes once more (a capture file read again from its start), for a
        1x next to a mains line, read a second time; None: pieces of ``raw`` that are not
        one bytes object are kept as they come (memory: the whole capture).

    Returns
    -------
    Analysis
        Mean speed (rpm), readings per pickup, labelled spectrum peaks, findings and their
        words, and the link counters.

    References
    ----------
    .. [1] See :mod:`trueturn.dsp.order` (Kay 1993; Fyfe & Munck 1997), :mod:`trueturn.dsp.averaging`
       (Victor & Mast 1991) and :mod:`trueturn.dsp.spectrum` (Welch 1967), all from memory.
    """
    def new_meter(wait_out_mains: bool) -> LiveAnalyzer:
        made = LiveAnalyzer(profiles=profiles, unit=unit, mains_hz=mains_hz,
                            max_revs=revs or ALL_REVS, limits=limits, batch_revs=BATCH_REVS,
                            wait_out_mains=wait_out_mains)
        if identity:
            try:
                made.feed(Message("identity", 0, dict(identity)))
            except (KeyError, TypeError, ValueError):
                pass  # an incomplete header copy: rely on the bytes
        return made

    meter = new_meter(False)
    decoder = StreamDecoder()
    if identity:
        decoder.assume_identity(identity)
    found: list[Finding] = []
    board = _BoardLosses()
    chunk = 1 << 16
    feed = meter.feed
    kept: list[bytes] = []  # the pieces, for a second reading next to a mains line
    whole = b""
    if isinstance(raw, (bytes, bytearray, memoryview)):
        whole = bytes(raw)  # bytes as they are; a bytearray or a view copied once
        pieces: Iterable[bytes] = (whole[start:start + chunk]
                                   for start in range(0, len(whole), chunk))
    else:
        pieces = raw if again is not None else _keeping(raw, kept)
    for piece in pieces:
        for item in decoder.feed(piece):
            if observe is not None:
                observe(item)
            if isinstance(item, LinkEvent):
                if item.kind == "board_reset":
                    found.append(Finding(Code.BOARD_RESTART))
                elif item.kind == "stream_config_missing" and meter.config is not None:
                    found.append(Finding(Code.TIMEBASE_FROM_BLOCKS))
                continue
            if item.name == "status":
                board.status(item)
            feed(item)
    meter.end_of_stream()
    board.block_max = meter.block_max
    readings = tuple(meter.readings())
    if mains_hz and any(r.speed_rpm is not None
                        and near_mains_line(r.speed_rpm / 60.0, mains_hz) is not None
                        for r in readings):
        # a 1x next to a hum line is read again as the app's meter reads it
        # (wait_out_mains): the hum as a seven-tone comb, over at most MAINS_WINDOW_MAX_S
        # (the comb follows an off grid only that long; finding mains_window), or over the
        # revolutions one beat needs when the window cannot tell them apart and the capture
        # holds them. Elsewhere the readings stay as they were (three tones, every revolution)
        meter = new_meter(True)
        redecoder = StreamDecoder()
        if identity:
            redecoder.assume_identity(identity)
        replay: Iterable[bytes] = kept
        if whole:
            replay = (whole[start:start + chunk] for start in range(0, len(whole), chunk))
        elif again is not None:
            replay = again()
        for piece in replay:
            for item in redecoder.feed(piece):
                if isinstance(item, Message):
                    meter.feed(item)
        meter.end_of_stream()
        readings = tuple(meter.readings())
    found = unique(found)
    c = decoder.counters
    found += link_findings(c.to_json(), board)
    if revs is None and meter.tach.revolutions > ALL_REVS:
        found.append(Finding(Code.LONG_CAPTURE, count=ALL_REVS))
    if meter.streams > 1:
        found.append(Finding(Code.SEVERAL_STREAMS, count=meter.streams))
    if readings:
        for r in readings:
            found += r.findings
    else:
        found += meter.stream_findings()
        if meter.config is not None and meter.tach.revolutions:
            found.append(Finding(Code.NO_WHOLE_REVOLUTION))
    spectra = []
    full_spectra = meter.spectra()
    for ch, pickup_spectrum in enumerate(full_spectra):
        if pickup_spectrum is not None:
            spectra.append(PickupPeaks(meter.profile(ch).name, meter.spectrum_unit(ch),
                                       pickup_spectrum.resolution_hz, pickup_spectrum.peaks))
    if mains_hz in (50.0, 60.0):
        other_mains = 110.0 - mains_hz
        for spec in spectra:
            if any(p.label == "other" and abs(p.hz - other_mains) < 0.5 for p in spec.peaks[:3]):
                found.append(Finding(Code.MAINS_SETTING, spec.sensor, details={
                    "other_mains_hz": other_mains, "mains_hz": mains_hz}))
    speed = float(meter.speeds_rpm().mean()) if meter.tach.revolutions and len(
        meter.speeds_rpm()) else math.nan
    swept = meter_sweep(meter, unit) if sweep and readings else None
    slopes: list[SpeedSlope] = []
    if swept is not None:
        at, said = sweep_findings(swept)
        found += said
        if at is not None:
            for reading in readings:
                slope = local_slope(swept.points, reading.sensor, at)
                if slope is not None:
                    slopes.append(slope)
    found = unique(found)
    severity, unbalance = _judge(meter, full_spectra, readings, speed, swept)
    return Analysis(speed, readings, tuple(spectra), tuple(describe(f) for f in found),
                    c.to_json(), tuple(found), severity, unbalance, swept, tuple(slopes))


def _keeping(pieces: Iterable[bytes], kept: list[bytes]) -> Iterable[bytes]:
    """``pieces`` as they come, each also appended to ``kept``."""
    for piece in pieces:
        kept.append(bytes(piece))
        yield kept[-1]


def compare_starts(first: Analysis, second: Analysis) -> Analysis:
    """The first start's analysis with a second start of the machine compared with it.

    Each pickup's 1x in the two starts is judged by
    :func:`trueturn.dsp.unbalance.repeat_evidence`; the ``phase_repeatable`` evidence joins
    the first start's unbalance evidence and the verdict is judged again over all of it.

    Parameters
    ----------
    first : Analysis
        The (first) as-found start.
    second : Analysis
        A later start of the same machine, as found, after a stop.

    Returns
    -------
    Analysis
        ``first`` with ``second_start`` and the new unbalance verdict and evidence.

    Raises
    ------
    ValueError
        When the two starts ran at different speeds (beyond
        :data:`~trueturn.dsp.unbalance.REPEAT_SPEED_TOLERANCE`) or read a pickup in
        different units: then they cannot be compared.

    References
    ----------
    .. [1] Common practice, no source: a steady unbalance gives the same 1x after a stop and
       restart (:mod:`trueturn.dsp.unbalance`).
    """
    if not same_speed(first.speed_rpm, second.speed_rpm):
        raise ValueError(f"the two starts ran at {first.speed_rpm:.0f} and "
                         f"{second.speed_rpm:.0f} rpm: a second start is compared at the same "
                         f"speed (within {100 * REPEAT_SPEED_TOLERANCE:g} %)")
    unbalance, not_compared = judge_second_start(first.unbalance, first.readings,
                                                 second.readings)
    return replace(first, unbalance=unbalance, second_start=SecondStart(
        second.speed_rpm, second.readings, not_compared))


def judge_second_start(unbalance: Sequence[Finding], first: Sequence[Reading],
                       second: Sequence[Reading]
                       ) -> tuple[tuple[Finding, ...], tuple[tuple[str, str], ...]]:
    """The unbalance judgement of a first start with a second start's 1x compared.

    Parameters
    ----------
    unbalance : sequence of Finding
        The first start's verdict and evidence (:func:`analyze_capture`,
        :func:`machine_condition`).
    first, second : sequence of Reading
        Each pickup's 1x in the two starts (same speed: the caller checks it with
        :func:`trueturn.dsp.unbalance.same_speed`).

    Returns
    -------
    tuple
        ``(unbalance, not_compared)``: the verdict judged again over the first start's
        evidence and each pickup's ``phase_repeatable`` evidence, then that evidence; and
        the pickups not compared with why (``no_reading`` or ``cannot_tell``).

    Raises
    ------
    ValueError
        When a pickup reads in different units in the two starts.

    References
    ----------
    .. [1] Common practice, no source (:func:`trueturn.dsp.unbalance.repeat_evidence`).
    """
    others = {r.sensor: r for r in second}
    repeat: list[Finding] = []
    not_compared: list[tuple[str, str]] = []
    for r in first:
        other = others.get(r.sensor)
        found = repeat_evidence(r, other) if other is not None else None
        if found is not None:
            repeat.append(found)
        else:
            not_compared.append((r.sensor, "no_reading" if other is None else "cannot_tell"))
    names = {r.sensor for r in first}
    not_compared += [(name, "no_reading") for name in others if name not in names]
    evidence = [*unbalance[1:], *repeat]
    judged = len({f.pickup for f in evidence if f.code is Code.ONE_X_SHARE})
    judgement = (verdict(evidence, judged), *evidence) if evidence else tuple(unbalance)
    return tuple(judgement), tuple(not_compared)


def machine_condition(meter: LiveAnalyzer, speed_rpm: float | None = None
                      ) -> tuple[tuple[Severity, ...], tuple[Finding, ...]]:
    """Each pickup's overall severity and the unbalance verdict, from what ``meter`` holds.

    Parameters
    ----------
    meter : LiveAnalyzer
        The live meter of a run (its spectra and 1x readings are computed here).
    speed_rpm : float or None, default None
        The shaft speed when the tach cannot give it (the spectrum's, :mod:`.tachless`);
        None: the tach's.

    Returns
    -------
    tuple
        ``(severity, unbalance)``: per pickup a :class:`Severity`; the verdict finding
        first, then each pickup's evidence (empty when nothing could be judged).

    References
    ----------
    .. [1] ISO 10816-1:1995 Annex B / ISO 20816-1 evaluation zones and the common-practice
       rules of :mod:`trueturn.dsp.unbalance` (see there; from memory where marked).
    """
    readings = meter.readings()
    speeds = meter.speeds_rpm()
    speed = float(speeds.mean()) if meter.tach.revolutions and len(speeds) else math.nan
    if speed_rpm is not None and not meter.tach.revolutions:
        speed = speed_rpm
    return _judge(meter, meter.spectra(), readings, speed)


def _judge(meter: LiveAnalyzer, spectra: Sequence[Spectrum | None],
           readings: Sequence[PickupReading], speed_rpm: float, sweep: Sweep | None = None
           ) -> tuple[tuple[Severity, ...], tuple[Finding, ...]]:
    """Each pickup's severity and the unbalance verdict with its evidence (issue #22).

    With a sweep (``analyze --sweep`` of a coast-down or run-up) no severity is given and
    the spectrum rules are left out: both need a steady run (a coast-down's last seconds
    are at standstill); the sweep's own rule (1x rising with speed below the first
    resonance) is judged instead."""
    if sweep is not None and sweep.is_sweep:
        rises = [(r.sensor, rise_below_first_resonance(sweep, r.sensor)) for r in readings]
        found = [sweep_evidence(name, *rise) for name, rise in rises if rise is not None]
        said = verdict(found, 0)
        if said.code is Code.UNBALANCE_UNDECIDED:  # say why: a sweep, not a missing spectrum
            said = Finding(Code.UNBALANCE_UNDECIDED, details={"sweep": True})
        return (), (said, *found)
    severity: list[Severity] = []
    evidence: list[Finding] = []
    by_name = {r.sensor: r for r in readings}
    judged = 0
    for ch, spec in enumerate(spectra):
        if spec is None:
            continue
        name = meter.profile(ch).name
        calibrated = meter.profile(ch).calibrated
        severity.append(pickup_severity(name, spec.frequencies_hz,
                                        spec.asd if calibrated else None, meter.rate_hz,
                                        speed_rpm))
        band = band_for(speed_rpm, spec.resolution_hz) if math.isfinite(speed_rpm) else None
        if band is None or meter.rate_hz / 2 < band[1]:
            continue
        reading = by_name.get(name)
        if reading is None:
            continue  # no 1x reading at this pickup: nothing to judge it by
        evidence += pickup_evidence(name, spec.peaks,
                                    band_velocity_rms(spec.frequencies_hz, spec.asd, band),
                                    reading.findings, speed_rpm / 60.0)
        judged += 1
    return tuple(severity), (verdict(evidence, judged), *evidence)


class _BoardLosses:
    """What the board itself dropped (status counters, totals since its reset, SPEC 4.6),
    summed over the capture across restarts; and the largest sample block seen."""

    def __init__(self) -> None:
        self.first: dict[str, int] | None = None
        self.last: dict[str, int] | None = None
        self.total = {"samples_dropped": 0, "frames_dropped": 0}
        self.block_max = 0

    def status(self, msg: Message) -> None:
        now = {k: int(msg.values[k]) for k in self.total}
        if self.last is not None and all(now[k] >= v for k, v in self.last.items()):
            for k in self.total:
                self.total[k] += now[k] - self.last[k]
        self.last = now


def link_findings(link: dict[str, Any], board: _BoardLosses | None = None) -> list[Finding]:
    """Findings about the USB link from the decoder's counters.

    Lost frames are said with what they held (samples, tach edges, or neither: then the
    readings are unaffected). A loss of a whole number of 256 frames leaves the 8-bit sequence
    number in step; it is found when the sample indices and the tach edge count need more lost
    frames than the sequence number shows (after what the board itself said it dropped:
    ``samples_dropped`` and ``frames_dropped`` in status), and said.

    Parameters
    ----------
    link : dict
        The decoder's counters (``LinkCounters.to_json``).
    board : _BoardLosses or None, default None
        What the board itself dropped, from its status messages; None when unknown.

    Returns
    -------
    list of Finding
        ``link_damaged_frames``, ``link_unseen_loss`` and ``link_frames_lost`` as they apply.

    References
    ----------
    .. [1] protocol/SPEC.md (sequence numbers, sample indices, edge counts, status counters;
       ours).
    """
    out: list[Finding] = []
    bad = int(link.get("frames_bad", 0))
    if bad:
        refused = int(link.get("err_bad_value", 0)) + int(link.get("err_wrong_direction", 0))
        out.append(Finding(Code.LINK_DAMAGED_FRAMES, count=bad,
                           details={"bad_values": refused}))
    seen = int(link.get("frames_lost", 0))
    samples = int(link.get("samples_lost", 0))
    tach = int(link.get("tach_edges_lost", 0))
    dropped_samples = board.total["samples_dropped"] if board else 0
    dropped_frames = board.total["frames_dropped"] if board else 0
    block = board.block_max if board and board.block_max else MAX_BLOCK_SAMPLES
    # frames that must have been lost on the way to carry the gaps the board did not cause
    on_link = max(samples - dropped_samples, 0)
    needed = tach + -(-on_link // block)
    unseen = 0
    if needed > seen + dropped_frames:
        unseen = 256 * -(-(needed - seen - dropped_frames) // 256)
        out.append(Finding(Code.LINK_UNSEEN_LOSS, count=unseen, details={
            "samples": on_link, "tach_edges": tach, "frames_by_sequence": seen}))
    if seen or unseen:
        out.append(Finding(Code.LINK_FRAMES_LOST, count=seen + unseen, details={
            "samples": on_link, "tach_edges": tach, "frames_by_sequence": seen}))
    return out
