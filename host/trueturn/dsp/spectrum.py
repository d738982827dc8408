"""Averaged amplitude spectrum (Welch) with the peaks labelled 1x, 2x, 3x, line, 2x line, other.

Welch's method (scipy.signal.welch; Welch, IEEE Trans. Audio Electroacoust. 15(2), 1967)
with a Hann window and 50 % overlap. A peak's amplitude (peak, 0-pk) is taken from the power
summed over its main lobe, ``sqrt(2 * sum(PSD) * df)``, which does not depend on where the
tone falls between bins (no scalloping loss).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import signal

LABELS = ("1x", "2x", "3x", "line", "2x line", "other")
HANN_ENBW_BINS = 1.5  # equivalent noise bandwidth of the Hann window, in bins
# How far from a strong peak a mains line is hidden in its main lobe and listed with the
# level the order fit measured (the Hann main lobe is +/- 2 bins of about 1 Hz)
LINE_IN_LOBE_HZ = 2.5


@dataclass(frozen=True)
class SpectrumPeak:
    """One labelled peak: frequency, amplitude (peak, input unit) and label.

    ``also``: the other names that fit the same frequency (a 2x on the mains line: both are
    in it; ``label`` is the stronger where the order fit measured both, else the nearest).
    ``fitted``: the amplitude is the level the order fit measured (a mains line inside the
    main lobe of a strong neighbour, which the spectrum cannot show as a peak of its own).
    """

    hz: float
    amplitude: float
    label: str
    also: tuple[str, ...] = ()
    fitted: bool = False


@dataclass(frozen=True)
class Spectrum:
    """Frequencies (Hz), amplitude spectral density (unit/sqrt(Hz)) and the labelled peaks."""

    frequencies_hz: np.ndarray
    asd: np.ndarray
    resolution_hz: float
    segments: int
    peaks: tuple[SpectrumPeak, ...]
    detect_amplitude: float = 0.0  # the smallest tone amplitude listed as a peak


def peak_names(hz: float, rotation_hz: float | None, line_hz: float | None,
               tolerance_hz: float) -> tuple[str, ...]:
    """Every name of 1x...3x, line and 2x line within ``tolerance_hz`` of a frequency.

    Nearest first (orders first where two are about as near: ``LABELS`` order within a quarter
    of the tolerance).

    Parameters
    ----------
    hz : float
        The peak's frequency, Hz.
    rotation_hz : float or None
        Rotation frequency (1x), Hz; None or 0 when unknown.
    line_hz : float or None
        Mains frequency, Hz; None or 0 when unknown.
    tolerance_hz : float
        Largest distance for a name to fit, Hz.

    Returns
    -------
    tuple of str
        The names that fit, best first; empty when none fits.

    References
    ----------
    .. [1] Naming peaks by the nearest order of the rotation frequency and of the mains
       frequency (1x, 2x, 3x, line, twice line): common practice, no source.
    """
    candidates: list[tuple[float, str]] = []
    if rotation_hz:
        candidates += [(abs(hz - h * rotation_hz), f"{h}x") for h in (1, 2, 3)]
    if line_hz:
        candidates += [(abs(hz - line_hz), "line"), (abs(hz - 2 * line_hz), "2x line")]
    inside = sorted((d, LABELS.index(lab), lab) for d, lab in candidates if d <= tolerance_hz)
    if not inside:
        return ()
    best = inside[0][0]
    near = sorted((i, lab) for d, i, lab in inside if d <= best + 0.25 * tolerance_hz)
    rest = [lab for d, i, lab in inside if d > best + 0.25 * tolerance_hz]
    return tuple(lab for _, lab in near) + tuple(rest)


def label_peak(hz: float, rotation_hz: float | None, line_hz: float | None,
               tolerance_hz: float) -> str:
    """Name a peak by the nearest of 1x...3x and line, 2x line within ``tolerance_hz``.

    Orders win over line labels when both fit (the spectrum cannot tell them apart; the meter
    names the stronger from the order fit, see :func:`name_by_levels`).

    Parameters
    ----------
    hz : float
        The peak's frequency, Hz.
    rotation_hz : float or None
        Rotation frequency (1x), Hz.
    line_hz : float or None
        Mains frequency, Hz.
    tolerance_hz : float
        Largest distance for a name to fit, Hz.

    Returns
    -------
    str
        The best name, or ``"other"``.

    References
    ----------
    .. [1] Naming peaks by the nearest order of the rotation frequency and of the mains
       frequency (1x, 2x, 3x, line, twice line): common practice, no source.
    """
    names = peak_names(hz, rotation_hz, line_hz, tolerance_hz)
    return names[0] if names else "other"


def name_by_levels(peaks: tuple[SpectrumPeak, ...], levels: dict[str, float],
                   line_hz: float | None, rotation_hz: float | None, resolution_hz: float,
                   detect_amplitude: float) -> tuple[SpectrumPeak, ...]:
    """Peaks named with the levels an order fit measured.

    Names whose frequencies lie within ``resolution_hz`` of each other coincide: the spectrum
    sees one peak, and the name with the higher fitted level comes first (both are listed). A
    fitted mains line further from the peak than that (inside its main lobe, so not a peak of
    its own: the 60 Hz line beside a 1x at 58.9 Hz) is listed at its own frequency with its
    fitted level (``fitted``) when it reaches ``detect_amplitude``.

    Parameters
    ----------
    peaks : tuple of SpectrumPeak
        The spectrum's peaks (:func:`spectrum`).
    levels : dict of str to float
        Name (``"1x"``, ``"line"``...) -> amplitude the order fit measured, in the spectrum's
        unit (peak).
    line_hz : float or None
        Mains frequency, Hz.
    rotation_hz : float or None
        Rotation frequency (1x), Hz.
    resolution_hz : float
        The spectrum's bin width, Hz.
    detect_amplitude : float
        The smallest tone amplitude the spectrum lists as a peak, spectrum's unit.

    Returns
    -------
    tuple of SpectrumPeak
        The peaks renamed and completed, largest first.

    References
    ----------
    .. [1] Naming peaks by the nearest order of the rotation frequency and of the mains
       frequency (1x, 2x, 3x, line, twice line): common practice, no source.
    .. [2] Hann main lobe of +/- 2 bins: F. J. Harris, "On the use of windows for harmonic
       analysis with the discrete Fourier transform", Proc. IEEE 66(1), 1978.
    """
    nominal = {"line": line_hz, "2x line": 2 * line_hz if line_hz else None}
    if rotation_hz:
        nominal.update({f"{h}x": h * rotation_hz for h in (1, 2, 3)})
    out = []
    apart: list[str] = []
    for p in peaks:
        names = [p.label, *p.also]
        if p.label == "other":
            out.append(p)
            continue
        here = nominal.get(p.label) or p.hz
        for name in list(names[1:]):
            f = nominal.get(name)
            if name in levels and f is not None and abs(f - here) > resolution_hz:
                names.remove(name)  # in the lobe but not the same frequency
                apart.append(name)
        if len(names) > 1 and all(n in levels for n in names):
            names.sort(key=lambda n: -levels[n])
        out.append(SpectrumPeak(p.hz, p.amplitude, names[0], tuple(names[1:]), p.fitted))
    named = {n for p in out for n in (p.label, *p.also)}
    for name in ("line", "2x line"):
        hz, level = nominal[name], levels.get(name)
        if hz is None or level is None or name in named or level < detect_amplitude:
            continue
        if name in apart or any(abs(p.hz - hz) <= LINE_IN_LOBE_HZ for p in out):
            out.append(SpectrumPeak(hz, level, name, (), fitted=True))
    out.sort(key=lambda pk: pk.amplitude, reverse=True)
    return tuple(out)


def spectrum(values: np.ndarray, sample_rate_hz: float, rotation_hz: float | None = None,
             line_hz: float | None = None, resolution_hz: float = 1.0,
             max_peaks: int = 8, min_snr: float = 6.0) -> Spectrum:
    """Welch spectrum of one pickup's uniformly spaced samples and its labelled peaks.

    ``resolution_hz`` sets the segment length (rounded up to a power of two, shortened when
    the record is short). Peaks must stand ``min_snr`` times (amplitude) above the median
    level; the ``max_peaks`` largest are returned, largest first. A peak's amplitude is
    ``sqrt(2 sum(PSD) df)`` over its main lobe (Parseval; no scalloping loss).

    Parameters
    ----------
    values : numpy.ndarray
        The samples, any unit (volts, g...).
    sample_rate_hz : float
        Sample rate, Hz.
    rotation_hz : float or None, default None
        Rotation frequency (1x), Hz, for the labels.
    line_hz : float or None, default None
        Mains frequency, Hz, for the labels.
    resolution_hz : float, default 1.0
        Wanted bin width, Hz.
    max_peaks : int, default 8
        Most peaks returned.
    min_snr : float, default 6.0
        Amplitude ratio a peak needs over the median level.

    Returns
    -------
    Spectrum
        Frequencies (Hz), amplitude spectral density (unit/sqrt(Hz)), bin width (Hz), number
        of segments, the labelled peaks (peak amplitude, input unit) and the smallest
        amplitude that would be listed.

    Raises
    ------
    ValueError
        When fewer than 16 samples are given.

    References
    ----------
    .. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of power
       spectra", IEEE Trans. Audio Electroacoust. 15(2), 1967; ``scipy.signal.welch``.
    .. [2] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
       Fourier transform", Proc. IEEE 66(1), 1978 (Hann window, ENBW 1.5 bins).
    """
    x = np.asarray(values, dtype=float)
    n = x.size
    if n < 16:
        raise ValueError(f"{n} samples are too few for a spectrum")
    nperseg = 1 << max(4, math.ceil(math.log2(sample_rate_hz / resolution_hz)))
    nperseg = min(nperseg, 1 << int(math.log2(n)))
    freqs, psd = signal.welch(x, fs=sample_rate_hz, window="hann", nperseg=nperseg,
                              noverlap=nperseg // 2, detrend="constant", scaling="density")
    df = float(freqs[1] - freqs[0])
    segments = 1 + (n - nperseg) // (nperseg - nperseg // 2)
    floor = float(np.median(psd[1:])) if psd.size > 2 else 0.0
    found, _ = signal.find_peaks(psd, height=floor * min_snr * min_snr, distance=3)
    found = found[found > 1]  # the DC lobe is not a peak
    peaks = []
    for i in found:
        lobe = psd[max(i - 2, 0): i + 3]  # Hann main lobe: +/- 2 bins
        amplitude = math.sqrt(2.0 * float(lobe.sum()) * df)  # Parseval over the main lobe
        hz = refine_peak_hz(freqs, psd, int(i))
        names = peak_names(hz, rotation_hz, line_hz, max(2.0 * df, 0.01 * hz)) or ("other",)
        peaks.append(SpectrumPeak(hz, amplitude, names[0], names[1:]))
    peaks.sort(key=lambda pk: pk.amplitude, reverse=True)
    # a tone of amplitude A has a Hann-window peak density of about A^2 / (2 ENBW df),
    # ENBW = 1.5 bins (Harris, Proc. IEEE 66(1), 1978): the smallest A that passes min_snr
    detect = min_snr * math.sqrt(2.0 * HANN_ENBW_BINS * df * floor)
    return Spectrum(freqs, np.sqrt(psd), df, segments, tuple(peaks[:max_peaks]), detect)


def refine_peak_hz(freqs: np.ndarray, psd: np.ndarray, i: int) -> float:
    """Peak frequency by a parabola through the log power of the three top bins.

    Parameters
    ----------
    freqs : numpy.ndarray
        Bin frequencies, Hz (evenly spaced).
    psd : numpy.ndarray
        Power spectral density per bin, unit^2/Hz.
    i : int
        Index of the highest bin of the peak.

    Returns
    -------
    float
        The interpolated frequency, Hz (the bin's own at the ends or with a zero bin).

    References
    ----------
    .. [1] Quadratic interpolation of the log spectrum around a peak: common practice, no
       source.
    """
    if i <= 0 or i >= psd.size - 1 or min(psd[i - 1: i + 2]) <= 0:
        return float(freqs[i])
    a, b, c = np.log(psd[i - 1: i + 2])
    denom = a - 2 * b + c
    shift = 0.5 * (a - c) / denom if denom != 0 else 0.0
    return float(freqs[i] + shift * (freqs[1] - freqs[0]))
