"""Whole-capture analysis: raw received bytes -> readings, spectrum peaks and warnings.

Decodes with :class:`trueturn.link.codec.StreamDecoder` and runs the same
:class:`~trueturn.dsp.meter.LiveAnalyzer` as the live app, so a capture gives exactly what
the meter showed. The JSON form is the contract of ``trueturn analyze --json``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from trueturn.dsp.averaging import SteadinessLimits
from trueturn.dsp.meter import LiveAnalyzer, Reading
from trueturn.dsp.spectrum import SpectrumPeak
from trueturn.dsp.units import PickupProfile
from trueturn.link.codec import LinkEvent, Message, StreamDecoder

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
class Analysis:
    """Everything ``trueturn analyze`` reports about one capture."""

    speed_rpm: float
    readings: tuple[Reading, ...]
    spectra: tuple[PickupPeaks, ...]
    warnings: tuple[str, ...]
    link: dict[str, Any]

    def to_json(self) -> dict[str, Any]:
        def num(x: float, digits: int = 6) -> float | None:
            return None if not math.isfinite(x) else round(float(x), digits)

        return {
            "speed_rpm": num(self.speed_rpm, 3),
            "pickups": [{
                "name": r.sensor, "channel": r.channel,
                "amplitude": num(r.amplitude), "unit": r.unit,
                "phase_deg": num(r.phase_deg, 3), "confidence_deg": num(r.confidence_deg, 3),
                "confidence_radius": num(r.confidence_radius),
                "revolutions": r.revolutions, "steady": r.steady,
                "speed_rpm": num(r.speed_rpm, 3),
                "orders": [{"order": h.order, "amplitude": num(h.amplitude),
                            "phase_deg": num(h.phase_deg, 3)} for h in r.harmonics],
                "noise_rms_v": num(r.noise_rms_v),
                "hum_v": {f"{f:g}": num(v) for f, v in r.hum_v.items()},
            } for r in self.readings],
            "spectrum_peaks": [{"pickup": s.sensor, "hz": num(p.hz, 3),
                                "amplitude": num(p.amplitude), "unit": s.unit,
                                "label": p.label}
                               for s in self.spectra for p in s.peaks],
            "warnings": list(self.warnings),
            "link": self.link,
        }


def analyze_capture(raw: bytes, revs: int | None = None, mains_hz: float | None = 50.0,
                    profiles: Sequence[PickupProfile] = (), unit: str | None = None,
                    limits: SteadinessLimits | None = None,
                    identity: dict[str, Any] | None = None) -> Analysis:
    """Analyse the received bytes of one capture over its last ``revs`` good revolutions.

    ``identity``: the board's identity fields as saved in a capture header, used when the
    bytes themselves start after the identity message (an identity in the bytes wins).
    """
    meter = LiveAnalyzer(profiles=profiles, unit=unit, mains_hz=mains_hz,
                         max_revs=revs or ALL_REVS, limits=limits)
    if identity:
        try:
            meter.feed(Message("identity", 0, dict(identity)))
        except (KeyError, TypeError, ValueError):
            pass  # an incomplete header copy: rely on the bytes
    decoder = StreamDecoder()
    if identity:
        decoder.assume_identity(identity)
    link_notes: list[str] = []
    chunk = 1 << 16
    for start in range(0, len(raw), chunk):
        for item in decoder.feed(raw[start:start + chunk]):
            if isinstance(item, LinkEvent):
                if item.kind == "board_reset":
                    link_notes.append("the board restarted during the capture; "
                                      "only the last stream is analysed")
                elif item.kind == "stream_config_missing" and meter.config is not None:
                    link_notes.append("a stream's stream_config message was lost; its "
                                      "sample times were taken from the sample blocks")
                continue
            meter.feed(item)
    meter.end_of_stream()
    readings = tuple(meter.readings())
    warnings = list(dict.fromkeys(link_notes))
    c = decoder.counters
    if c.frames_bad:
        refused = c.errors["bad_value"] + c.errors["wrong_direction"]
        warnings.append(f"{c.frames_bad} damaged frame(s) skipped (CRC or framing errors"
                        + (f"; {refused} with values no board sends" if refused else "") + ")")
    if revs is None and meter.tach.revolutions > ALL_REVS:
        warnings.append(f"long capture: the last {ALL_REVS} revolutions are averaged")
    if meter.streams > 1:
        warnings.append(f"{meter.streams} streams with samples in the capture; only the last "
                        "is analysed")
    if readings:
        for r in readings:
            warnings += [w for w in r.warnings if w not in warnings]
    else:
        warnings += [w for w in meter.stream_warnings() if w not in warnings]
        if meter.config is not None and meter.tach.revolutions:
            warnings.append("no whole revolution with samples in the capture")
    spectra = []
    for ch, spec in enumerate(meter.spectra()):
        if spec is not None:
            spectra.append(PickupPeaks(meter.profile(ch).name, meter.spectrum_unit(ch),
                                       spec.resolution_hz, spec.peaks))
    if mains_hz in (50.0, 60.0):
        other_mains = 110.0 - mains_hz
        for spec in spectra:
            if any(p.label == "other" and abs(p.hz - other_mains) < 0.5 for p in spec.peaks[:3]):
                warnings.append(f"{spec.sensor}: a strong {other_mains:g} Hz peak; is the mains "
                                f"setting ({mains_hz:g} Hz) right for this place?")
    speed = float(meter.speeds_rpm().mean()) if meter.tach.revolutions and len(
        meter.speeds_rpm()) else math.nan
    return Analysis(speed, readings, tuple(spectra), tuple(warnings), c.to_json())
