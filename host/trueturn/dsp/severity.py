"""Overall vibration severity: broadband velocity RMS and its evaluation zone.

How bad is the machine overall, whatever the cause? The measure of ISO 20816-1 (formerly
ISO 10816-1) for machines measured on non-rotating parts: the RMS vibration velocity over
**10-1000 Hz** on the bearing housings (**2-1000 Hz** for machines running below 600 rpm:
the standard asks the instrument's flat response to reach down to at most 2 Hz there; from
memory), judged against evaluation zones:

* zone A: vibration of newly commissioned machines;
* zone B: acceptable for unrestricted long-term operation;
* zone C: unsatisfactory for long-term continuous operation (run until a chance to fix it);
* zone D: severe enough to cause damage to the machine.

The zone boundaries used are those of **ISO 10816-1:1995, Annex B, Table B.1, Class I**
(small machines: individual parts of engines and machines integrally connected to the
complete machine, production electric motors up to 15 kW being typical): A/B 0.71, B/C 1.8,
C/D 4.5 mm/s RMS. **From memory**, not checked against the standard; ISO 20816-1:2016 keeps
the zone definitions and gives boundary values as general guidance (its Annex B), again from
memory. A garage machine (bench grinder, jointer, shop fan, lathe) is Class I. The machine's
manufacturer or a machine-specific part of ISO 20816 has the final word.

The velocity comes from the Welch acceleration spectrum of the pickup
(:func:`trueturn.dsp.spectrum.spectrum`): ``v_rms^2 = sum over 10...1000 Hz of
(a(f) g0 / (2 pi f))^2 df`` with the acceleration density ``a(f)`` in g/sqrt(Hz) and
``g0 = 9806.65 mm/s^2`` (frequency-domain integration, Parseval). The band used is said
with every number (:attr:`Severity.band_hz`, :func:`band_for`): 10-1000 Hz from 600 rpm up,
2-1000 Hz below. The Welch bins cut a tone whose Hann main lobe (+/- 2 bins) reaches below
the band's lower edge, so a 1x closer than that to 10 Hz (600 rpm up to about 720 rpm with
1 Hz bins) is measured in 2-1000 Hz as well -- the standards ask for *at least* the band, so
a wider band at the low end stays within them. The number is refused (None, with the reason
as a code) when it would be wrong: a pickup without a sensitivity (no velocity from volts), a
sample rate whose Nyquist frequency is below 1000 Hz (the band is not all there), or a 1x
too slow even for 2-1000 Hz (below about 4 Hz, 240 rpm, with 1 Hz bins). The 1/f^2
weight across a slow tone's main lobe reads it a little high (computed for a pure tone with
1 Hz bins: +3.2 % at 4 Hz, +2.0 % at 5 Hz, +0.4 % at 11 Hz): on the safe side of a zone
boundary.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import Enum

import numpy as np

from trueturn.constants import STANDARD_GRAVITY_M_S2
from trueturn.dsp.findings import Code, Finding

#: The measurement band, Hz (ISO 10816-1 / ISO 20816-1 broadband velocity, machines running
#: at 600 rpm and above; from memory).
BAND_HZ = (10.0, 1000.0)
#: The band for machines running below :data:`LOW_SPEED_BELOW_RPM` (the same standards:
#: flat response down to at most 2 Hz; from memory).
LOW_SPEED_BAND_HZ = (2.0, 1000.0)
#: Below this speed the low-speed band is used (the 1x is below 10 Hz, outside
#: :data:`BAND_HZ`).
LOW_SPEED_BELOW_RPM = 600.0
#: A tone's Hann-window main lobe reaches this many bins either side of it (Harris 1978):
#: a 1x closer than this to the band's lower edge would be cut and read low.
MAIN_LOBE_BINS = 2.0
#: Zone boundaries A/B, B/C, C/D in mm/s RMS: ISO 10816-1:1995 Annex B Table B.1, Class I
#: (small machines), from memory.
ZONE_BOUNDARIES_MM_S = (0.71, 1.8, 4.5)
#: Where the boundaries come from, shown with them.
ZONES_SOURCE = ("ISO 10816-1:1995 Annex B Table B.1, Class I (small machines, e.g. motors up "
                "to 15 kW), zone definitions as in ISO 20816-1:2016; boundaries from memory - "
                "check the standard; the manufacturer has the final word")
MM_S2_PER_G = STANDARD_GRAVITY_M_S2 * 1000.0


class Zone(str, Enum):
    """Evaluation zone of ISO 20816-1 / ISO 10816-1 (value: the JSON code)."""

    A = "A"   # newly commissioned machines
    B = "B"   # unrestricted long-term operation
    C = "C"   # unsatisfactory for long-term continuous operation
    D = "D"   # severe enough to cause damage


class NoSeverity(str, Enum):
    """Why a pickup has no severity (value: the JSON code)."""

    UNCALIBRATED = "uncalibrated"            # volts cannot be turned into mm/s
    BAND_NOT_SAMPLED = "band_not_sampled"    # Nyquist below the band's upper edge
    SPEED_TOO_LOW = "speed_too_low"          # 1x too slow even for the 2-1000 Hz band


@dataclass(frozen=True)
class Severity:
    """One pickup's overall severity: velocity RMS (mm/s) over ``band_hz`` and its zone.

    ``velocity_rms_mm_s`` and ``zone`` are None when refused, ``refused`` saying why.
    """

    pickup: str
    velocity_rms_mm_s: float | None
    zone: Zone | None
    #: the band the velocity was measured over (None when refused before a band was chosen)
    band_hz: tuple[float, float] | None = BAND_HZ
    refused: NoSeverity | None = None

    def as_finding(self) -> Finding:
        """The severity as a finding, to be put into words by :func:`~trueturn.dsp.findings.describe`.

        Returns
        -------
        Finding
            Code ``severity`` with ``velocity_rms_mm_s``, ``zone``, ``band_hz`` and
            ``refused``.

        References
        ----------
        .. [1] ISO 20816-1:2016 / ISO 10816-1:1995 zones (from memory; module notes).
        """
        return Finding(Code.SEVERITY, self.pickup, details={
            "velocity_rms_mm_s": self.velocity_rms_mm_s,
            "zone": self.zone.value if self.zone else None,
            "band_hz": list(self.band_hz) if self.band_hz else None,
            "refused": self.refused.value if self.refused else None})


def zone_of(velocity_rms_mm_s: float,
            boundaries_mm_s: tuple[float, float, float] = ZONE_BOUNDARIES_MM_S) -> Zone:
    """The evaluation zone of a broadband velocity RMS.

    Parameters
    ----------
    velocity_rms_mm_s : float
        Broadband velocity RMS, mm/s (not below 0).
    boundaries_mm_s : tuple of 3 float, default ZONE_BOUNDARIES_MM_S
        Boundaries A/B, B/C and C/D, mm/s RMS, increasing.

    Returns
    -------
    Zone
        A below the A/B boundary, B up to B/C, C up to C/D, D at or above C/D (a value on a
        boundary counts in the worse zone).

    Raises
    ------
    ValueError
        When the velocity is negative or not finite.

    References
    ----------
    .. [1] ISO 10816-1:1995, Mechanical vibration -- Evaluation of machine vibration by
       measurements on non-rotating parts -- Part 1: General guidelines, Annex B (Class I
       boundaries 0.71 / 1.8 / 4.5 mm/s); ISO 20816-1:2016, clause 6 (zones A-D). From
       memory.
    """
    if not 0 <= velocity_rms_mm_s < math.inf:
        raise ValueError(f"velocity must be a finite number not below 0, got {velocity_rms_mm_s}")
    for zone, boundary in zip((Zone.A, Zone.B, Zone.C), boundaries_mm_s, strict=True):
        if velocity_rms_mm_s < boundary:
            return zone
    return Zone.D


def band_for(speed_rpm: float, resolution_hz: float) -> tuple[float, float] | None:
    """The broadband band for a machine's running speed, or None when the 1x is too slow.

    Parameters
    ----------
    speed_rpm : float
        Running speed, rpm.
    resolution_hz : float
        Bin spacing of the spectrum the band is integrated from, Hz (positive).

    Returns
    -------
    tuple of 2 float or None
        :data:`BAND_HZ` (10-1000 Hz) from :data:`LOW_SPEED_BELOW_RPM` up and when the 1x's
        main lobe (:data:`MAIN_LOBE_BINS` bins) clears 10 Hz; else :data:`LOW_SPEED_BAND_HZ`
        (2-1000 Hz) when it clears 2 Hz; else None (not a finite positive speed, or too
        slow to measure).

    Raises
    ------
    ValueError
        When ``resolution_hz`` is not a finite positive number.

    References
    ----------
    .. [1] ISO 20816-1:2016 / ISO 10816-1:1995: broadband velocity over 10-1000 Hz, and down
       to 2 Hz for machines below 600 r/min (from memory).
    .. [2] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
       Fourier transform", Proc. IEEE 66(1), 1978 (Hann main lobe +/- 2 bins).
    """
    if not 0 < resolution_hz < math.inf:
        raise ValueError(f"resolution_hz must be a finite positive number, got {resolution_hz}")
    if not 0 < speed_rpm < math.inf:
        return None
    lowest_hz = speed_rpm / 60.0 - MAIN_LOBE_BINS * resolution_hz
    if speed_rpm >= LOW_SPEED_BELOW_RPM and lowest_hz >= BAND_HZ[0]:
        return BAND_HZ
    return LOW_SPEED_BAND_HZ if lowest_hz >= LOW_SPEED_BAND_HZ[0] else None


def band_velocity_rms(frequencies_hz: np.ndarray, asd: np.ndarray,
                      band_hz: tuple[float, float] = BAND_HZ) -> float:
    """Velocity RMS over a band from an acceleration amplitude spectral density.

    Parameters
    ----------
    frequencies_hz : numpy.ndarray
        Equally spaced bin frequencies, Hz.
    asd : numpy.ndarray
        Acceleration amplitude spectral density at those frequencies (unit/sqrt(Hz), one
        sided, as :func:`trueturn.dsp.spectrum.spectrum` gives).
    band_hz : tuple of 2 float, default BAND_HZ
        Lower and upper edge, Hz (bins within the edges, both included).

    Returns
    -------
    float
        ``sqrt(sum((asd / (2 pi f))^2) df)`` over the band, in the acceleration unit times
        seconds (g·s for g; multiply by :data:`MM_S2_PER_G` for mm/s).

    Raises
    ------
    ValueError
        When the arrays differ in length, have fewer than 2 bins or the band is empty.

    References
    ----------
    .. [1] Parseval's theorem for the one-sided power spectral density; integration to
       velocity by division by ``2 pi f`` in the frequency domain (e.g. C. M. Harris,
       A. G. Piersol, "Harris' Shock and Vibration Handbook", 5th ed., ch. 1; from memory).
    """
    f = np.asarray(frequencies_hz, dtype=float)
    a = np.asarray(asd, dtype=float)
    if f.shape != a.shape or f.size < 2:
        raise ValueError("frequencies and density must be arrays of the same length, 2 or more")
    lo, hi = band_hz
    inside = (f >= lo) & (f <= hi) & (f > 0)
    if not inside.any():
        raise ValueError(f"no bin within {lo:g}...{hi:g} Hz")
    df = float(f[1] - f[0])
    velocity_density = a[inside] / (2.0 * math.pi * f[inside])
    return math.sqrt(float(np.sum(velocity_density ** 2)) * df)


def pickup_severity(pickup: str, frequencies_hz: np.ndarray, asd_g: np.ndarray | None,
                    sample_rate_hz: float, speed_rpm: float) -> Severity:
    """A pickup's broadband velocity RMS and zone, or the reason there is none.

    Parameters
    ----------
    pickup : str
        The pickup's name.
    frequencies_hz : numpy.ndarray
        Bin frequencies of its spectrum, Hz.
    asd_g : numpy.ndarray or None
        Its acceleration density in g/sqrt(Hz); None for a pickup without a sensitivity.
    sample_rate_hz : float
        Sample rate of the pickup, Hz.
    speed_rpm : float
        Shaft speed, rpm.

    Returns
    -------
    Severity
        Velocity RMS (mm/s) over the band :func:`band_for` chooses (10-1000 Hz, or 2-1000 Hz
        below 600 rpm), the band, and the zone; or None for both with the reason.

    References
    ----------
    .. [1] ISO 20816-1:2016 / ISO 10816-1:1995: broadband RMS velocity, 10-1000 Hz (2-1000 Hz
       below 600 r/min), on the bearing housings (from memory); :func:`band_for`,
       :func:`band_velocity_rms`, :func:`zone_of`.
    """
    if asd_g is None:
        return Severity(pickup, None, None, None, refused=NoSeverity.UNCALIBRATED)
    if sample_rate_hz / 2.0 < BAND_HZ[1]:
        return Severity(pickup, None, None, None, refused=NoSeverity.BAND_NOT_SAMPLED)
    f = np.asarray(frequencies_hz, dtype=float)
    band = band_for(speed_rpm, float(f[1] - f[0])) if f.size >= 2 else None
    if band is None:
        return Severity(pickup, None, None, None, refused=NoSeverity.SPEED_TOO_LOW)
    v = band_velocity_rms(f, asd_g, band) * MM_S2_PER_G
    return Severity(pickup, v, zone_of(v), band)
