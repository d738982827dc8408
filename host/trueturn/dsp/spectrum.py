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


@dataclass(frozen=True)
class SpectrumPeak:
    """One labelled peak: frequency, amplitude (peak, input unit) and label."""

    hz: float
    amplitude: float
    label: str


@dataclass(frozen=True)
class Spectrum:
    """Frequencies (Hz), amplitude spectral density (unit/sqrt(Hz)) and the labelled peaks."""

    frequencies_hz: np.ndarray
    asd: np.ndarray
    resolution_hz: float
    segments: int
    peaks: tuple[SpectrumPeak, ...]


def label_peak(hz: float, rotation_hz: float | None, line_hz: float | None,
               tolerance_hz: float) -> str:
    """Name a peak by the nearest of 1x..3x and line, 2x line within ``tolerance_hz``.

    Orders win over line labels when both fit (the pickup cannot tell them apart then).
    """
    candidates: list[tuple[float, str]] = []
    if rotation_hz:
        candidates += [(abs(hz - h * rotation_hz), f"{h}x") for h in (1, 2, 3)]
    if line_hz:
        candidates += [(abs(hz - line_hz), "line"), (abs(hz - 2 * line_hz), "2x line")]
    inside = [c for c in candidates if c[0] <= tolerance_hz]
    if not inside:
        return "other"
    best = min(d for d, _ in inside)
    near = [lab for d, lab in inside if d <= best + 0.25 * tolerance_hz]
    return next(lab for lab in LABELS if lab in near)


def spectrum(values: np.ndarray, sample_rate_hz: float, rotation_hz: float | None = None,
             line_hz: float | None = None, resolution_hz: float = 1.0,
             max_peaks: int = 8, min_snr: float = 6.0) -> Spectrum:
    """Welch spectrum of one pickup's uniformly spaced samples and its labelled peaks.

    ``resolution_hz`` sets the segment length (rounded up to a power of two, shortened when
    the record is short). Peaks must stand ``min_snr`` times (amplitude) above the median
    level; the ``max_peaks`` largest are returned, largest first.
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
        peaks.append(SpectrumPeak(hz, amplitude,
                                  label_peak(hz, rotation_hz, line_hz, max(2.0 * df, 0.01 * hz))))
    peaks.sort(key=lambda pk: pk.amplitude, reverse=True)
    return Spectrum(freqs, np.sqrt(psd), df, segments, tuple(peaks[:max_peaks]))


def refine_peak_hz(freqs: np.ndarray, psd: np.ndarray, i: int) -> float:
    """Peak frequency by a parabola through the log power of the three top bins."""
    if i <= 0 or i >= psd.size - 1 or min(psd[i - 1: i + 2]) <= 0:
        return float(freqs[i])
    a, b, c = np.log(psd[i - 1: i + 2])
    denom = a - 2 * b + c
    shift = 0.5 * (a - c) / denom if denom != 0 else 0.0
    return float(freqs[i] + shift * (freqs[1] - freqs[0]))
