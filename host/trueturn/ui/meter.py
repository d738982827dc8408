"""Adapter: the DSP layer's streaming meter (``trueturn.dsp.meter.LiveAnalyzer``) for the app.

The app needs plain numbers per pickup (:class:`~trueturn.model.Reading`), the
speed, and a spectrum with labelled peaks; this module converts, and restarts the averaging
when a new run begins. No signal processing of its own.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

from trueturn.balance.influence import SPEED_MATCH
from trueturn.dsp.analysis import machine_condition
from trueturn.dsp.averaging import SteadinessLimits
from trueturn.dsp.coast import SweepRecorder
from trueturn.dsp.findings import TACH_LINE, Code, Finding, describe
from trueturn.dsp.meter import LiveAnalyzer
from trueturn.dsp.severity import Severity
from trueturn.dsp.tachless import TachlessMeter
from trueturn.dsp.units import pickup_profile
from trueturn.model import Reading

SPECTRUM_BINS = 76  # one sparkline column each, fits 80 columns
# The DSP's "steady" here covers revolutions, speed spread and drift; the phase limit is
# applied by the procedure, which also accepts a tight circle around a small vector (a
# well-balanced rotor has no meaningful phase).
METER_LIMITS = SteadinessLimits(max_confidence_deg=180.0)
PHASE_LIMIT_DEG = SteadinessLimits().max_confidence_deg

def tach_faults(findings: Sequence[Finding]) -> tuple[Finding, ...]:
    """The findings for the app's tach line, in the order a person should look at them
    (empty: tach fine); chosen by code (trueturn.dsp.findings.TACH_LINE)."""
    return tuple(f for code in TACH_LINE for f in findings if f.code is code)


@dataclass
class MeterView:
    """What the screens draw: readings by pickup name, speed, spectrum strip, peaks."""

    sensors: tuple[str, ...]
    readings: dict[str, Reading] = field(default_factory=dict)
    speed_rpm: float | None = None
    unit: str = ""
    spectrum_amplitude: list[float] = field(default_factory=list)
    spectrum_max_hz: float = 0.0
    peaks: list[tuple[float, float, str]] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)  # the findings in words
    tach_faults: tuple[str, ...] = ()  # plain words, see :func:`tach_faults`
    findings: list[Finding] = field(default_factory=list)
    #: the revolutions the readings average at most (the meter's window), every revolution
    #: fitted since the run's meter was reset (how long it has been averaging), and the
    #: longest window the meter can hold
    window_revs: int = 0
    revolutions_fitted: int = 0
    hold_revs: int = 0

    def pickup_warnings(self, sensor: str) -> list[str]:
        """The words of the findings about one pickup (by the finding's pickup, not by
        reading the sentence)."""
        return [describe(f) for f in self.findings if f.pickup == sensor]


class _Msg:
    """A stored message replayed into a fresh analyzer (duck-typed like codec.Message)."""

    def __init__(self, name: str, values: dict[str, Any]) -> None:
        self.name = name
        self.values = dict(values)

    def __getitem__(self, key: str) -> Any:
        return self.values[key]


#: the revolutions a reading averages at most (the meter's window) unless a run wants more
#: (``procedure.guide.Procedure.revolutions_wanted``: a check run)
METER_WINDOW_REVS = 60


class MeterAdapter:
    """One :class:`LiveAnalyzer` per run; identity and stream set-up kept for restarts."""

    def __init__(self, sensor_names: Sequence[str], mains_hz: float = 50.0,
                 pickups: Sequence[Any] = (), max_revs: int = METER_WINDOW_REVS) -> None:
        self.sensors = tuple(sensor_names)
        self.mains_hz = mains_hz
        self.max_revs = max_revs
        profiles = []
        for i, name in enumerate(self.sensors):
            p = pickups[i] if i < len(pickups) else None
            profiles.append(pickup_profile(name, p))
        self.profiles = tuple(profiles)
        self._identity: _Msg | None = None
        self._config: _Msg | None = None
        self.spectrum_wanted = False
        self.analyzer = self._new()
        #: without a tach (amplitude-only procedure): speed and 1x from the spectrum
        self.tachless: TachlessMeter | None = None
        #: each revolution's 1x kept across a coast-down or run-up (issue #20), or None
        self.sweep: SweepRecorder | None = None

    def for_machine(self, sensor_names: Sequence[str], mains_hz: float,
                    pickups: Sequence[Any]) -> MeterAdapter:
        """A fresh adapter for another machine on the same stream (same board set-up)."""
        other = MeterAdapter(sensor_names, mains_hz, pickups, self.max_revs)
        other._identity, other._config = self._identity, self._config
        other.analyzer = other._new()
        if self.tachless is not None:
            reference = self.tachless.reference_hz
            other.use_tachless(self.tachless.band_hz, 60.0 * reference if reference else None)
        return other

    def use_tachless(self, band_hz: tuple[float, float] | None,
                     reference_rpm: float | None = None) -> None:
        """Read speed and 1x amplitude from the spectrum in ``band_hz`` (no tach: the
        amplitude-only procedure), or from the tach again (None); ``reference_rpm``: the
        speed of the job's as-found run (a 1x lost in the noise is then read at the speed a
        harmonic gives, :func:`trueturn.dsp.tachless.segment_line`), None before it."""
        if band_hz is None:
            self.tachless = None
            return
        reference_hz = reference_rpm / 60.0 if reference_rpm else None
        if self.tachless is not None and self.tachless.band_hz == band_hz:
            self.tachless.reference_hz = reference_hz  # keep what is measured
            return
        self.tachless = TachlessMeter(self.profiles, band_hz, self.mains_hz,
                                      reference_hz=reference_hz)
        for msg in (self._identity, self._config):
            if msg is not None:
                self.tachless.feed(msg)

    def _new(self) -> LiveAnalyzer:
        # a 1x next to a mains line waits for the revolutions that tell them apart (up to
        # dsp.meter.MAINS_WINDOW_MAX_S), not for ever
        a = LiveAnalyzer(self.profiles, mains_hz=self.mains_hz, max_revs=self.max_revs,
                         limits=METER_LIMITS, wait_out_mains=True)
        for msg in (self._identity, self._config):
            if msg is not None:
                a.feed(msg)
        return a

    def identity(self, values: dict[str, Any]) -> None:
        self._identity = _Msg("identity", values)
        self.analyzer.feed(self._identity)
        if self.tachless is not None:
            self.tachless.feed(self._identity)

    def stream_config(self, values: dict[str, Any]) -> None:
        self._config = _Msg("stream_config", values)
        self.analyzer.feed(self._config)
        if self.tachless is not None:
            self.tachless.feed(self._config)

    def feed(self, msg: Any) -> None:
        if msg.name == "stream_config":
            self._config = _Msg("stream_config", msg.values)
        elif msg.name == "identity":
            self._identity = _Msg("identity", msg.values)
        self.analyzer.feed(msg)
        if self.tachless is not None:
            self.tachless.feed(msg)
        if self.sweep is not None:
            self.sweep.feed(msg)

    def start_sweep(self) -> SweepRecorder | None:
        """Keep every revolution's 1x from now on (a coast-down or run-up may follow);
        returns the recorder of the recording going on till now (finish it), or None."""
        done = self.sweep
        self.sweep = SweepRecorder(self.profiles, self.mains_hz,
                                   [m for m in (self._identity, self._config) if m is not None])
        return done

    def stop_sweep(self) -> SweepRecorder | None:
        """Stop keeping revolutions; the recorder (finish it), or None."""
        done, self.sweep = self.sweep, None
        return done

    def condition(self) -> tuple[tuple[Severity, ...], tuple[Finding, ...]]:
        """The machine's overall severity and the unbalance verdict from this run so far."""
        tachless = self.tachless.speed_rpm if self.tachless is not None else math.nan
        return machine_condition(self.analyzer, tachless if math.isfinite(tachless) else None)

    def reset(self, max_revs: int | None = None) -> None:
        """Forget the averaged revolutions (a new run starts); ``max_revs``: the window the
        new run's readings average (None: as before), at least what the run wants
        (``procedure.guide.Procedure.revolutions_wanted``)."""
        if max_revs is not None:
            self.max_revs = max_revs
        self.analyzer = self._new()
        if self.tachless is not None:
            self.tachless.reset()

    def set_window(self, max_revs: int) -> int:
        """Average the last ``max_revs`` revolutions from now on, keeping those already
        fitted (a run whose readings want a longer average,
        ``procedure.guide.Procedure.widen_to``, and back after it); at most what the
        analyser holds. Returns the window now averaged."""
        n = max(1, min(int(max_revs), self.analyzer.hold_revs))
        self.max_revs = n
        self.analyzer.max_revs = n
        return n

    def view(self) -> MeterView:
        a = self.analyzer
        out = MeterView(self.sensors)
        readings = a.readings()  # processes pending revolutions first
        out.window_revs, out.revolutions_fitted = self.max_revs, a.revolutions_fitted
        out.hold_revs = a.hold_revs
        speed = a.speed_rpm
        out.speed_rpm = speed if math.isfinite(speed) else None
        for r in readings:
            out.readings[r.sensor] = r.as_reading()
            out.unit = r.unit
            out.findings += [f for f in r.findings if f not in out.findings]
        if not readings:  # no revolution yet: the stream's own findings (no tach, ...)
            out.findings += [f for f in a.stream_findings() if f.code is not Code.NO_STREAM]
        if self.tachless is not None and self._tach_reads(out):
            # amplitude only, yet a tach is seen: the synchronous 1x (the procedure takes
            # its amplitude), which a 1x too small for the spectrum does not escape
            out.findings.append(Finding(Code.TACH_READS_1X,
                                        details={"speed_rpm": round(float(speed), 1)}))
        elif self.tachless is not None:
            # no tach by design: the spectrum's readings, and no tach finding to fix
            out.readings = {r.sensor: r for r in self.tachless.readings()}
            speed = self.tachless.speed_rpm
            out.speed_rpm = speed if math.isfinite(speed) else None
            out.unit = next((r.unit for r in out.readings.values()), out.unit)
            out.findings = [f for f in out.findings if f.code is not Code.NO_TACH]
            out.findings += self.tachless.stream_findings()
        out.warnings = [describe(f) for f in out.findings]
        out.tach_faults = tuple(describe(f, brief=True) for f in tach_faults(out.findings))
        if self.spectrum_wanted:
            self._spectrum(out)
        return out

    def _tach_reads(self, out: MeterView) -> bool:
        """With the spectrum's meter on (amplitude only): whether the tach's readings in
        ``out`` may stand instead. They do when every pickup has one, no tach fault is
        found, and the tach's speed lies in the speed band and within
        :data:`~trueturn.balance.influence.SPEED_MATCH` of the spectrum's speed (when the
        spectrum has one): a tach miscounting its marks, or on another shaft, is not
        used."""
        assert self.tachless is not None
        speed = out.speed_rpm
        if speed is None or set(out.readings) != set(self.sensors) or tach_faults(out.findings):
            return False
        low_hz, high_hz = self.tachless.band_hz
        if not 60.0 * low_hz <= speed <= 60.0 * high_hz:
            return False
        spectrum = self.tachless.speed_rpm
        return not math.isfinite(spectrum) or abs(speed - spectrum) <= SPEED_MATCH * spectrum

    def _spectrum(self, out: MeterView) -> None:
        spectra = self.analyzer.spectra()
        spec = next((s for s in spectra if s is not None), None)
        if spec is None:
            return
        freqs = list(spec.frequencies_hz)
        asd = list(spec.asd)
        rot_hz = (out.speed_rpm or 0.0) / 60.0
        top = max(5.0 * rot_hz, 2.5 * self.mains_hz, 50.0)
        top = min(top, freqs[-1] if freqs else top)
        width = top / SPECTRUM_BINS
        bins = [0.0] * SPECTRUM_BINS
        for f, v in zip(freqs, asd, strict=False):
            k = int(f / width)
            if 0 <= k < SPECTRUM_BINS:
                bins[k] = max(bins[k], float(v))
        out.spectrum_amplitude = bins
        out.spectrum_max_hz = top
        out.peaks = [(p.hz, p.amplitude, " + ".join((p.label, *p.also))) for p in
                     sorted(spec.peaks, key=lambda p: -p.amplitude)]
