"""Tach-less 1x: running speed and 1x amplitude from the spectrum (amplitude-only balancing).

Without a once-per-rev reference there is no shaft angle and no phase; the four-run method
(:mod:`trueturn.balance.amplitude_only`) needs only the 1x amplitude at a steady speed. The
samples of each pickup are cut into back-to-back segments of ``SEGMENT_S`` seconds; in each:

* **speed**: the strongest line of the Hann-windowed periodogram (summed over the pickups)
  inside the expected running-speed band of the machine profile (the planned speed
  ``±BAND_FRACTION``, at most the machine's maximum), the mains line and its double left out
  (``MAINS_GUARD_HZ``); the top bin is refined by a parabola through the log power of its
  neighbours and then by a local fit: the frequency that maximises the windowed DTFT power
  within half a bin of it (the periodogram maximum, the maximum-likelihood frequency of one
  tone in white noise [1]_). The segment counts only when its two halves give the same
  speed within ``SPEED_AGREE`` (no spin-up or coast-down inside it).
* **1x amplitude**: the windowed DTFT at that frequency, corrected for the window's coherent
  gain, ``A = 2 |sum w x e^{-i w n}| / sum w`` [2]_ (exact at the fitted frequency: no
  scalloping loss). Its noise has, per real and imaginary part, the variance
  ``v = 2 S / (sum w)^2`` with ``S`` the periodogram's noise level beside the line (median of
  the bins within ``NOISE_SPAN_HZ``, the line's lobe and the mains lines left out, divided
  by ln 2: the median of an exponential variable) — the window's equivalent noise bandwidth
  at work [2]_; ``A^2 - 2 v`` removes the noise's upward bias of the squared amplitude
  (Rice [3]_).

The reading averages the newest run of consecutive good segments whose speeds agree with the
newest within ``SPEED_AGREE`` (at most ``MAX_SEGMENTS``); it is steady from ``MIN_SEGMENTS``
on. Its 95 % uncertainty: the standard error of the mean amplitude, from the segments'
scatter (Student-t inflated for few segments) but never below the estimator's own noise
variance ``v / K``; it travels as ``confidence_radius``, a circle of ``CIRCLE95_SIGMAS``
standard errors, as the influence-coefficient readings' circles do (the amplitude alone is
inside ``±1.96/2.45`` of it with 95 %).

A segment counts only when its line stands ``LINE_SNR_POWER`` (power) above the noise beside
it at one pickup at least.

**A 1x lost in the noise** (a rotor already very well balanced: a check run after a good
correction): when the band holds no line above the noise and a *reference speed* is known
(the speed of the job's as-found run: the runs of one job are at one speed within
``REFERENCE_BAND_FRACTION``), the speed is taken from a harmonic instead. For each order
``h`` of ``2..MAX_SPEED_ORDER`` the strongest line within ``h`` times the reference band is
fitted as above; the clearest one (highest power over the noise beside it, at least
``LINE_SNR_POWER``, both halves agreeing) gives the speed ``f_h / h``, and the 1x amplitude is
read at that speed by the same windowed DTFT, with its noise and bias correction. It is then
a measurement at a known frequency, however small (a harmonic fitted to a fraction of a
bin gives the 1x's frequency ``h`` times better still). The segment carries the order its
speed came from, and the finding ``speed_from_order`` says so.

Limits, said plainly: a running speed within ``MAINS_GUARD_HZ`` of the mains line (or its
double) cannot be told from hum without a tach and gives no reading; neither does a 1x lost
in the noise at every pickup with no reference speed or no harmonic line near its multiples
(the finding ``no_speed_line`` says so; a machine that is not running gives none either); a
line at a multiple of the reference that is not the machine's harmonic (another machine's
line) would be taken for one, but only while the 1x band holds nothing above the noise, so
the 1x read there is then at most the detection threshold (``LINE_SNR_POWER``) too low; a
line stronger than
the 1x inside the band (a belt, a neighbour machine) would be taken for it — the band is the
profile's, so keep the planned speed right; speed wander within a segment widens the line a
little and reads a little low, the same in every run at that speed.

References
----------
.. [1] D. C. Rife, R. R. Boorstyn, "Single-tone parameter estimation from discrete-time
   observations", IEEE Trans. Inf. Theory 20(5), 1974 (the periodogram maximum is the ML
   frequency; from memory).
.. [2] F. J. Harris, "On the use of windows for harmonic analysis with the discrete Fourier
   transform", Proc. IEEE 66(1), 1978 (coherent gain, equivalent noise bandwidth; from
   memory).
.. [3] S. O. Rice, "Mathematical analysis of random noise", Bell Syst. Tech. J. 23, 1944
   (the amplitude of a sine in Gaussian noise; from memory).
"""

from __future__ import annotations

import math
from collections import deque
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import signal, stats
from scipy.optimize import minimize_scalar

from trueturn.dsp.findings import Code, Finding
from trueturn.dsp.spectrum import refine_peak_hz
from trueturn.dsp.units import PickupProfile, conversion_factors, default_unit
from trueturn.model import Reading

SEGMENT_S = 4.0  # 0.25 Hz bins: a 1x 1 Hz from the mains line is 4 bins from it
MIN_SEGMENTS = 4
MAX_SEGMENTS = 8
BAND_FRACTION = 0.10  # the 1x is searched within +/-10 % of the planned speed
MAINS_GUARD_HZ = 0.5  # two bins of SEGMENT_S each side of the mains line and its double
SPEED_AGREE = 0.01  # halves of a segment, and segments averaged, agree within 1 %
#: a harmonic line stands for the speed when the 1x is lost in the noise: orders 2..this
MAX_SPEED_ORDER = 6
#: the runs of one job are at one speed within 3 % (balance.influence.SPEED_MATCH): the
#: harmonic is searched within this fraction of the reference speed times its order
REFERENCE_BAND_FRACTION = 0.03
NOISE_SPAN_HZ = 10.0  # the noise level is read within this much of the line
LOBE_GUARD_BINS = 4  # the Hann main lobe is +/-2 bins; twice that is left out
PAD = 8  # zero padding of the coarse search
#: a line stands this far (power) above the noise beside it at one pickup at least: noise
#: alone reaches it in a bin with probability exp(-16), about 1e-7 (an exponential variable)
LINE_SNR_POWER = 16.0
#: a 95 % circle holds a 2-D normal within this many per-axis sigmas (sqrt(-2 ln 0.05))
CIRCLE95_SIGMAS = math.sqrt(-2.0 * math.log(0.05))
NORMAL95 = 1.959963984540054  # two-sided 95 % quantile of the normal distribution


def speed_band_hz(planned_rpm: float, max_rpm: float | None = None) -> tuple[float, float]:
    """The band the 1x is searched in: the planned speed +/- ``BAND_FRACTION``, at most the
    machine's maximum speed.

    Parameters
    ----------
    planned_rpm : float
        The speed the machine is run at (machine profile), rpm.
    max_rpm : float or None, default None
        The machine's maximum speed, rpm.

    Returns
    -------
    (float, float)
        Lowest and highest frequency, Hz.

    References
    ----------
    .. [1] Common practice, no source (an induction motor runs a few percent below
       synchronous speed; a variable drive is set to the planned speed).
    """
    if not (planned_rpm > 0 and math.isfinite(planned_rpm)):
        raise ValueError(f"planned_rpm must be positive, got {planned_rpm!r}")
    high = planned_rpm * (1.0 + BAND_FRACTION)
    if max_rpm is not None and max_rpm > 0:
        high = min(high, max(max_rpm, planned_rpm))
    return planned_rpm * (1.0 - BAND_FRACTION) / 60.0, high / 60.0


def _dtft(x: np.ndarray, rate_hz: float, f_hz: float) -> np.ndarray:
    """``sum_n x[..., n] exp(-i 2 pi f n / fs)`` along the last axis."""
    n = np.arange(x.shape[-1])
    return np.asarray(x @ np.exp(-2j * math.pi * f_hz / rate_hz * n))


def _excluded(freqs: np.ndarray, mains_hz: float | None) -> np.ndarray:
    out = np.zeros(freqs.shape, dtype=bool)
    if mains_hz:
        for line in (mains_hz, 2.0 * mains_hz):
            out |= np.abs(freqs - line) < MAINS_GUARD_HZ
    return out


def strongest_line_hz(windowed: np.ndarray, rate_hz: float, band_hz: tuple[float, float],
                      mains_hz: float | None = None) -> float | None:
    """The strongest line in a band of windowed segments, refined by a local fit.

    Parameters
    ----------
    windowed : numpy.ndarray
        Windowed samples (DC removed before windowing), shape (channels, n).
    rate_hz : float
        Per-channel sample rate, Hz.
    band_hz : (float, float)
        The band searched, Hz.
    mains_hz : float or None, default None
        The mains frequency; it and its double are left out (+/- ``MAINS_GUARD_HZ``).

    Returns
    -------
    float or None
        The frequency maximising the summed windowed periodogram, Hz; None when the band
        holds no bin (outside the sampled band, or all of it on the mains line).

    References
    ----------
    .. [1] D. C. Rife, R. R. Boorstyn, "Single-tone parameter estimation from discrete-time
       observations", IEEE Trans. Inf. Theory 20(5), 1974 (periodogram maximum = ML
       frequency; from memory).
    """
    power, freqs = _padded_power(windowed, rate_hz)
    return _fitted_hz(windowed, rate_hz, power, freqs, band_hz, mains_hz)


def _padded_power(windowed: np.ndarray, rate_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """The zero-padded (``PAD`` times) periodogram summed over the channels, and its
    frequencies (Hz): the coarse search's grid, a sixteenth of a Hann bin apart."""
    n = windowed.shape[-1]
    power = (np.abs(np.fft.rfft(windowed, n=PAD * n, axis=-1)) ** 2).sum(axis=0)
    return power, np.fft.rfftfreq(PAD * n, 1.0 / rate_hz)


def _peak_index(power: np.ndarray, freqs: np.ndarray, band_hz: tuple[float, float],
                mains_hz: float | None) -> int | None:
    """The strongest bin of ``power`` inside the band, the mains lines left out (None: the
    band holds no bin)."""
    usable = (freqs >= band_hz[0]) & (freqs <= band_hz[1]) & ~_excluded(freqs, mains_hz)
    if not usable.any():
        return None
    return int(np.flatnonzero(usable)[np.argmax(power[usable])])


def _fitted_hz(windowed: np.ndarray, rate_hz: float, power: np.ndarray, freqs: np.ndarray,
               band_hz: tuple[float, float], mains_hz: float | None) -> float | None:
    """:func:`strongest_line_hz` on its padded periodogram ``power`` (``freqs``), computed
    once per segment by the caller."""
    i = _peak_index(power, freqs, band_hz, mains_hz)
    if i is None:
        return None
    n = windowed.shape[-1]
    coarse = refine_peak_hz(freqs, power, i)
    half_bin = 0.5 * rate_hz / n

    def minus_power(f: float) -> float:
        return -float((np.abs(_dtft(windowed, rate_hz, f)) ** 2).sum())

    fit = minimize_scalar(minus_power, bounds=(coarse - half_bin, coarse + half_bin),
                          method="bounded", options={"xatol": 1e-6 * rate_hz / n})
    best = float(fit.x) if fit.success else coarse
    return best if band_hz[0] <= best <= band_hz[1] else None


@dataclass(frozen=True)
class SegmentLine:
    """One segment's line: frequency (Hz), per pickup the bias-corrected amplitude (peak,
    volts) and the per-part noise variance ``v`` of the complex amplitude (V^2); ``order``:
    the order of the line the speed came from (1: the 1x itself; 2 and up: a harmonic, the
    1x being lost in the noise)."""

    frequency_hz: float
    amplitudes_v: tuple[float, ...]
    noise_var_v2: tuple[float, ...]
    order: int = 1


@dataclass(frozen=True)
class _Spectra:
    """One segment (DC removed, ``x``), Hann-windowed, with what every line search and
    reading in it needs, computed once: the window's coherent gain (its sum), the padded
    periodogram summed over the channels (:func:`_padded_power`) and each channel's plain
    periodogram (the noise level beside a line)."""

    x: np.ndarray
    windowed: np.ndarray
    gain: float
    rate_hz: float
    padded: np.ndarray
    padded_freqs: np.ndarray
    plain: np.ndarray

    @classmethod
    def of(cls, x: np.ndarray, rate_hz: float) -> _Spectra:
        window = signal.get_window("hann", x.shape[-1])
        windowed = x * window
        padded, padded_freqs = _padded_power(windowed, rate_hz)
        plain = np.abs(np.fft.rfft(windowed, axis=-1)) ** 2
        return cls(x, windowed, float(window.sum()), rate_hz, padded, padded_freqs, plain)

    def fitted_hz(self, band_hz: tuple[float, float], mains_hz: float | None) -> float | None:
        """The strongest line in the band, refined (:func:`strongest_line_hz`)."""
        return _fitted_hz(self.windowed, self.rate_hz, self.padded, self.padded_freqs,
                          band_hz, mains_hz)

    def line_at(self, f_hz: float, mains_hz: float | None) -> tuple[np.ndarray, np.ndarray]:
        """Per pickup the squared coherent amplitude ``|z|^2`` of the windowed DTFT at
        ``f_hz`` and the per-part noise variance ``v`` beside it (module docstring; Harris
        1978)."""
        n = self.x.shape[-1]
        z = 2.0 * _dtft(self.windowed, self.rate_hz, f_hz) / self.gain
        # the noise level beside the line: median of the plain periodogram's bins / ln 2
        freqs = np.fft.rfftfreq(n, 1.0 / self.rate_hz)
        bin_hz = self.rate_hz / n
        near = ((np.abs(freqs - f_hz) <= NOISE_SPAN_HZ)
                & (np.abs(freqs - f_hz) > LOBE_GUARD_BINS * bin_hz))
        near &= ~_excluded(freqs, mains_hz)
        noise = (np.median(self.plain[:, near], axis=-1) / math.log(2.0) if near.any()
                 else np.zeros(self.x.shape[0]))
        return np.abs(z) ** 2, 2.0 * noise / self.gain ** 2

    def halves_agree(self, band_hz: tuple[float, float], mains_hz: float | None,
                     f_hz: float) -> bool:
        """The segment's two halves find their strongest line in the band within
        ``SPEED_AGREE`` of ``f_hz`` (the speed did not change inside the segment)."""
        n = self.x.shape[-1]
        for part in (self.x[:, : n // 2], self.x[:, n // 2:]):
            w_half = signal.get_window("hann", part.shape[-1])
            centred = part - part.mean(axis=-1, keepdims=True)
            half = strongest_line_hz(centred * w_half, self.rate_hz, band_hz, mains_hz)
            if half is None or abs(half - f_hz) > SPEED_AGREE * f_hz:
                return False
        return True


def _above_noise(power: np.ndarray, var: np.ndarray) -> float:
    """The line's power over the noise at its clearest pickup (0 when it stands at none
    ``LINE_SNR_POWER`` above)."""
    ratio = power / np.maximum(2.0 * var, 1e-300)
    best = float(np.max(ratio))
    return best if best >= LINE_SNR_POWER else 0.0


def _speed_from_harmonic(seg: _Spectra, reference_hz: float, mains_hz: float | None
                         ) -> tuple[float, int] | None:
    """The speed (Hz) from the clearest harmonic line near ``h`` times the reference, and its
    order ``h``; None when no harmonic stands above the noise (module docstring).

    The orders are ranked at their padded periodogram's peak (within a sixteenth of a
    bin); the clearest is then fitted and must keep its speed over the segment's halves,
    else the next one is tried."""
    ranked: list[tuple[float, int, tuple[float, float]]] = []
    for order in range(2, MAX_SPEED_ORDER + 1):
        band = (order * reference_hz * (1.0 - REFERENCE_BAND_FRACTION),
                order * reference_hz * (1.0 + REFERENCE_BAND_FRACTION))
        i = _peak_index(seg.padded, seg.padded_freqs, band, mains_hz)
        if i is None:
            continue
        clear = _above_noise(*seg.line_at(float(seg.padded_freqs[i]), mains_hz))
        if clear:
            ranked.append((clear, order, band))
    for _, order, band in sorted(ranked, reverse=True):
        f_hz = seg.fitted_hz(band, mains_hz)
        if f_hz is not None and seg.halves_agree(band, mains_hz, f_hz):
            return f_hz / order, order
    return None


def segment_line(volts: np.ndarray, rate_hz: float, band_hz: tuple[float, float],
                 mains_hz: float | None = None, reference_hz: float | None = None
                 ) -> SegmentLine | None:
    """The 1x line of one segment: speed from the spectrum, amplitude from its peak.

    Parameters
    ----------
    volts : numpy.ndarray
        Samples, shape (channels, n), volts.
    rate_hz : float
        Per-channel sample rate, Hz.
    band_hz : (float, float)
        Where the 1x is searched, Hz (:func:`speed_band_hz`).
    mains_hz : float or None, default None
        Mains frequency (left out of the search).
    reference_hz : float or None, default None
        The speed the job's runs are at (its as-found run), Hz: when the band holds no line
        above the noise, a harmonic near a multiple of it gives the speed (module
        docstring); None: no such fallback.

    Returns
    -------
    SegmentLine or None
        None when no line is found in the band (nor a harmonic of the reference), or the
        segment's two halves disagree on the speed by more than ``SPEED_AGREE`` (the speed
        changed inside it).

    References
    ----------
    .. [1] F. J. Harris, "On the use of windows for harmonic analysis with the discrete
       Fourier transform", Proc. IEEE 66(1), 1978 (Hann window, coherent gain, equivalent
       noise bandwidth; from memory).
    .. [2] S. O. Rice, "Mathematical analysis of random noise", Bell Syst. Tech. J. 23, 1944
       (from memory).
    .. [3] A harmonic at exactly h times the running speed (a periodic signal's Fourier
       series); taking the speed from it when the 1x is weak: common practice, no source.
    """
    x = np.atleast_2d(np.asarray(volts, dtype=float))
    if x.shape[-1] < 64:
        return None
    seg = _Spectra.of(x - x.mean(axis=-1, keepdims=True), rate_hz)
    order = 1
    f_hz = seg.fitted_hz(band_hz, mains_hz)
    if f_hz is not None:
        power, var = seg.line_at(f_hz, mains_hz)
        if not (_above_noise(power, var) and seg.halves_agree(band_hz, mains_hz, f_hz)):
            # the strongest bin of noise, or a line whose speed changed inside the segment
            # (then a harmonic's does too: no reading)
            f_hz = None
    if f_hz is None:
        if reference_hz is None:
            return None
        found = _speed_from_harmonic(seg, reference_hz, mains_hz)
        if found is None:
            return None
        f_hz, order = found
        power, var = seg.line_at(f_hz, mains_hz)
    amp2 = power - 2.0 * var
    return SegmentLine(f_hz, tuple(float(math.sqrt(max(a, 0.0))) for a in amp2),
                       tuple(float(v) for v in var), order)


def amplitude_uncertainty(amplitudes: np.ndarray, noise_var: np.ndarray) -> float:
    """Standard error of the mean of the segments' amplitudes, for a 95 % statement.

    Parameters
    ----------
    amplitudes : numpy.ndarray
        One amplitude per segment (K of them).
    noise_var : numpy.ndarray
        Each segment's per-part noise variance of the complex amplitude (same unit, squared).

    Returns
    -------
    float
        ``max(t_{0.975, K-1} / 1.96 * s / sqrt(K), sqrt(mean(v) / K))``: the scatter's
        standard error, Student-t inflated for few segments, never below the estimator's own
        noise (inf for one segment).

    References
    ----------
    .. [1] Student's t interval of a mean (any statistics text; from memory).
    .. [2] F. J. Harris, Proc. IEEE 66(1), 1978 (the noise variance of a windowed DFT
       amplitude; from memory).
    """
    k = len(amplitudes)
    if k < 2:
        return math.inf
    scatter = float(np.std(amplitudes, ddof=1)) / math.sqrt(k)
    inflate = float(stats.t.ppf(0.975, k - 1)) / NORMAL95
    floor = math.sqrt(float(np.mean(noise_var)) / k)
    return max(inflate * scatter, floor)


class TachlessMeter:
    """Streaming tach-less meter: sample messages in, one :class:`Reading` per pickup out.

    Memory is bounded: the samples of the segment being filled and the last
    ``MAX_SEGMENTS`` segment results.

    Parameters
    ----------
    profiles : sequence of PickupProfile
        One per channel (sensitivity, RC low-pass corners: the readings are corrected for
        them as the order-tracked ones are).
    band_hz : (float, float)
        Where the 1x is searched (:func:`speed_band_hz`).
    mains_hz : float or None, default None
        Mains frequency.
    unit : str or None, default None
        Reading unit (a key of :data:`trueturn.dsp.units.UNITS`); None: each profile's default.
    segment_s : float, default SEGMENT_S
        Segment length, s.
    reference_hz : float or None, default None
        The speed of the job's as-found run, Hz: a 1x lost in the noise is then read at the
        speed a harmonic gives (:func:`segment_line`); settable later as ``reference_hz``.
    """

    def __init__(self, profiles: Sequence[PickupProfile], band_hz: tuple[float, float],
                 mains_hz: float | None = None, unit: str | None = None,
                 segment_s: float = SEGMENT_S, reference_hz: float | None = None) -> None:
        if not (0 < band_hz[0] < band_hz[1]):
            raise ValueError(f"band_hz must be (low, high) with 0 < low < high, got {band_hz!r}")
        if not segment_s > 0:
            raise ValueError(f"segment_s must be positive, got {segment_s!r}")
        self.profiles = tuple(profiles)
        self.band_hz = band_hz
        self.mains_hz = mains_hz
        self.unit = unit
        self.segment_s = segment_s
        if reference_hz is not None and not (reference_hz > 0 and math.isfinite(reference_hz)):
            raise ValueError(f"reference_hz must be positive, got {reference_hz!r}")
        self.reference_hz = reference_hz
        self.adc_bits = 10
        self.reference_mv = 5000.0
        self._stream_reference_mv = 0.0
        self.rate_hz = 0.0
        self.channels = 0
        self._parts: list[np.ndarray] = []
        self._held = 0
        self._next_index: int | None = None
        self.segments: deque[SegmentLine | None] = deque(maxlen=MAX_SEGMENTS)

    def reset(self) -> None:
        """Forget everything measured (a new run).

        References
        ----------
        .. [1] Bookkeeping only; common practice, no source.
        """
        self._parts = []
        self._held = 0
        self._next_index = None
        self.segments.clear()

    def feed(self, msg: Any) -> None:
        """Take one decoded message (identity, stream_config, samples; others ignored).

        Parameters
        ----------
        msg : Message
            A decoded message (``name`` and values by key, :mod:`trueturn.link.codec`).

        References
        ----------
        .. [1] protocol/SPEC.md (the messages and the ADC transfer; ours).
        """
        name = getattr(msg, "name", "")
        if name == "identity":
            self.adc_bits = int(msg["adc_bits"])
            self.reference_mv = float(msg["adc_reference_mv"])
        elif name == "stream_config":
            self.rate_hz = float(msg["rate_hz"])
            self.channels = int(msg["channels"])
            try:
                self._stream_reference_mv = float(msg["adc_reference_mv"] or 0)
            except (KeyError, TypeError, ValueError):
                self._stream_reference_mv = 0.0
            self.reset()
        elif name == "samples" and self.channels and self.rate_hz > 0:
            self._samples(int(msg["first_index"]), msg["samples"])

    @property
    def volts_per_count(self) -> float:
        mv = self._stream_reference_mv or self.reference_mv
        return mv / 1000.0 / (1 << self.adc_bits)

    def _samples(self, first_index: int, samples: Sequence[int]) -> None:
        if self._next_index is not None and first_index != self._next_index:
            self._parts, self._held = [], 0  # a gap: the segment starts afresh
        values = np.asarray(samples, dtype=float)
        self._next_index = first_index + len(values)
        self._parts.append(values)
        self._held += len(values)
        need = int(round(self.segment_s * self.rate_hz)) * self.channels
        while self._held >= need:
            joined = np.concatenate(self._parts)
            block, rest = joined[:need], joined[need:]
            self._parts, self._held = ([rest], len(rest)) if len(rest) else ([], 0)
            volts = block.reshape(-1, self.channels).T * self.volts_per_count
            self.segments.append(segment_line(volts, self.rate_hz, self.band_hz,
                                              self.mains_hz, self.reference_hz))

    def _run(self) -> list[SegmentLine]:
        """The newest consecutive good segments whose speeds agree with the newest."""
        out: list[SegmentLine] = []
        for seg in reversed(self.segments):
            if seg is None or (out and abs(seg.frequency_hz - out[0].frequency_hz)
                               > SPEED_AGREE * out[0].frequency_hz):
                break
            out.append(seg)
        return out[::-1]

    def stream_findings(self) -> list[Finding]:
        """``no_speed_line`` when the newest segment held no steady line in the band (nor a
        harmonic of the reference); ``speed_from_order`` when its speed came from a harmonic
        (the 1x lost in the noise).

        Returns
        -------
        list of Finding
            Empty, or one finding (pickup None): the band in rpm (and the reference speed
            when one is known), or the order and the speed in rpm.

        References
        ----------
        .. [1] See the module docstring (the segment's rules; ours).
        """
        if not self.segments:
            return []
        newest = self.segments[-1]
        if newest is None:
            details = {"low_rpm": 60.0 * self.band_hz[0], "high_rpm": 60.0 * self.band_hz[1]}
            if self.reference_hz is not None:
                details["reference_rpm"] = 60.0 * self.reference_hz
            return [Finding(Code.NO_SPEED_LINE, details=details)]
        if newest.order > 1:
            return [Finding(Code.SPEED_FROM_ORDER, details={
                "order": newest.order, "speed_rpm": 60.0 * newest.frequency_hz})]
        return []

    @property
    def speed_rpm(self) -> float:
        """The speed of the newest good segment, rpm (NaN before one)."""
        newest = self.segments[-1] if self.segments else None
        return 60.0 * newest.frequency_hz if newest is not None else math.nan

    def readings(self) -> list[Reading]:
        """One reading per pickup over the newest agreeing segments (none before one).

        Returns
        -------
        list of Reading
            Amplitude in the unit (chain-corrected at each segment's speed), no phase,
            ``confidence_radius`` = ``CIRCLE95_SIGMAS`` standard errors
            (:func:`amplitude_uncertainty`), revolutions turned over the segments averaged,
            steady from ``MIN_SEGMENTS`` agreeing segments, ``no_tach`` True.

        References
        ----------
        .. [1] See the module docstring (Rife & Boorstyn 1974, Harris 1978, Rice 1944; from
           memory).
        """
        run = self._run()
        if not run:
            return []
        freqs = np.array([s.frequency_hz for s in run])
        out = []
        for c in range(min(self.channels, len(run[0].amplitudes_v))):
            profile = self.profiles[c] if c < len(self.profiles) else \
                PickupProfile(f"pickup {c + 1}")
            unit = self.unit or default_unit(profile)
            factors, used = conversion_factors(profile, freqs, unit)
            scale = np.abs(np.asarray(factors))
            amps = np.array([s.amplitudes_v[c] for s in run]) * scale
            var = np.array([s.noise_var_v2[c] for s in run]) * scale ** 2
            amplitude = float(amps.mean())
            sigma = amplitude_uncertainty(amps, var)
            out.append(Reading(
                profile.name, amplitude, used, None, 180.0,
                revolutions=int(freqs.sum() * self.segment_s),
                steady=len(run) >= MIN_SEGMENTS,
                speed_rpm=float(60.0 * freqs.mean()),
                confidence_radius=CIRCLE95_SIGMAS * sigma if math.isfinite(sigma) else None,
                no_tach=True))
        return out
