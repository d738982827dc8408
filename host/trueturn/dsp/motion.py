"""Is the machine moving? What the pickups alone say, for the standstill evidence.

The tach says whether the mark passes the sensor; it says nothing when its tape flew off or
the sensor was knocked aside. The pickups are independent evidence: a turning rotor shakes
its bearings at 1x (and 2x, blade pass, ...), a rotor at rest leaves the pickups at their own
noise floor. Two tests, both on the last few seconds of each pickup:

* **periodic**: a spectral line standing well above the spectrum's median level (Welch,
  scipy.signal.welch; Welch 1967), away from the mains line and its double (electrical hum on
  the leads is there whether the rotor turns or not);
* **broadband**: the RMS level (hum bands left out) against a limit set from the pickup's own noise floor
  (ADC quantisation plus the sensor's noise density over the sampled band), tightened to a
  quarter of the running level when that is known (never below the floor).

A line is also told apart as **free vibration** (:func:`free_vibration`): after a rotor stops,
its lightly damped supports ring on at their own frequency, the envelope falling as
``e^{-zeta omega_n t}`` (the bench grinder's rubber feet: 13.8 Hz, 3 %, down by e every
0.38 s). That is motion (the pickup is not quiet) but not a turning rotor, so the standstill
judgement does not take it for a machine running behind a silent tach.

Limits of the method, said plainly (common practice, no source): a rotor turning so slowly
that its 1x is below the noise floor (a few hundred rpm on a well-balanced rotor, since the
1x force grows with the square of speed) looks still to the pickups; a rotor turning at
exactly the mains frequency hides its 1x under the hum exclusion (the broadband test and the
harmonics still see a rough one). That is why the pickups are one piece of evidence beside
the tach, and why the person still looks and locks out.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass

import numpy as np
from scipy import signal

from trueturn.dsp.spectrum import refine_peak_hz

# ADXL335-class analog accelerometer noise density, 150 ug/sqrt(Hz) typical (from memory:
# ADXL335 datasheet, "Noise density"). Used only to place the floor, not as a measurement.
SENSOR_NOISE_DENSITY_G = 150e-6
FLOOR_FACTOR = 2.0  # a still pickup sits at its floor; twice the floor is "near" it
ABSOLUTE_LIMIT_G_RMS = 0.02  # above 20 mg rms broadband a pickup is never called quiet
#: a pickup with more than 1 % of its samples at an ADC limit is stuck, clipped or unwired:
#: a still, working accelerometer sits near its zero-g output, mid-range (common practice,
#: no source); such a signal says nothing about motion, so it can never vouch for standstill
RAIL_FRACTION_LIMIT = 0.01
RUNNING_FRACTION = 0.25  # with a known running level: quiet means below a quarter of it
PERIODIC_SNR = 6.0  # a line 6x (amplitude) above the median level, as dsp.spectrum's peaks
PERIODIC_MIN_G = 0.003  # and at least 3 mg peak: smaller lines are not taken for motion
HUM_GUARD_BINS = 2  # the Hann main lobe around the mains line and its double is hum
GRID_TOLERANCE_HZ = 0.1  # the grid is never exactly at 50/60 Hz
LOWEST_HZ = 2.0  # below this the window cannot resolve a line from the DC lobe
WINDOW_S = 4.0  # the samples judged
RESOLUTION_HZ = 0.5  # Welch segment length: 1 / resolution seconds


@dataclass(frozen=True)
class PickupMotion:
    """What one pickup says about motion over the last window.

    ``level_g_rms``: broadband AC RMS; ``limit_g_rms``: the level below which it is quiet;
    ``periodic_hz``/``periodic_g``: the strongest line that is not hum (None: no line);
    ``seconds``: how much signal was judged. Levels are in g for a calibrated pickup, else
    volts (then ``unit`` says so).
    """

    name: str
    level_g_rms: float
    limit_g_rms: float
    periodic_hz: float | None
    periodic_g: float | None
    seconds: float
    unit: str = "g"
    #: share of the samples at the ADC's limits (0 or full scale); None: not known
    at_rail_fraction: float | None = None
    #: the line is a free vibration dying out (:func:`free_vibration`): a structure ringing
    #: after its rotor stopped, not a turning rotor. Still motion: the pickup is not quiet.
    ringing: bool = False
    #: the line's envelope falls well below its peak within the window (:func:`lulls`):
    #: bursts of free vibration, as a tap test's strikes make, not the level a turning
    #: rotor keeps. False when it keeps its level or cannot be told (the safe side).
    lulls: bool = False

    @property
    def live(self) -> bool:
        """The signal can show motion: not stuck at, or clipped against, an ADC limit."""
        return self.at_rail_fraction is None or self.at_rail_fraction <= RAIL_FRACTION_LIMIT

    @property
    def quiet(self) -> bool:
        """Evidence of standstill: a live signal with no line but hum, near its floor."""
        return self.live and self.periodic_hz is None and self.level_g_rms <= self.limit_g_rms


def noise_floor_g_rms(g_per_count: float, rate_hz: float,
                      density_g: float = SENSOR_NOISE_DENSITY_G) -> float:
    """Expected RMS of a still pickup: quantisation and sensor noise up to Nyquist, in power.

    Parameters
    ----------
    g_per_count : float
        One ADC count in g (or volts for an uncalibrated pickup).
    rate_hz : float
        Per-channel sample rate, Hz.
    density_g : float, default 150e-6
        Sensor noise density, g/sqrt(Hz) (ADXL335-class typical).

    Returns
    -------
    float
        The floor, g RMS (or volts).

    References
    ----------
    .. [1] B. Widrow, I. Kollar, "Quantization Noise", Cambridge University Press, 2008: the
       ``q / sqrt(12)`` model (from memory).
    .. [2] ADXL335 datasheet, "Noise density", 150 ug/sqrt(Hz) typical (from memory).
    """
    quantisation = g_per_count / math.sqrt(12.0)
    sensor = density_g * math.sqrt(rate_hz / 2.0)
    return math.hypot(quantisation, sensor)


def quiet_limit_g_rms(floor_g_rms: float, running_g_rms: float | None = None) -> float:
    """The broadband level below which a pickup is quiet.

    Twice the floor, at most 20 mg RMS; with a known running level, at most a quarter of it,
    but never below twice the floor.

    Parameters
    ----------
    floor_g_rms : float
        The pickup's noise floor, g RMS (:func:`noise_floor_g_rms`).
    running_g_rms : float or None, default None
        The level of the machine running, g RMS, when known.

    Returns
    -------
    float
        The limit, g RMS.

    References
    ----------
    .. [1] Common practice, no source (the limits are this module's choices; see its
       docstring for what the method cannot see).
    """
    near_floor = FLOOR_FACTOR * floor_g_rms
    limit = max(near_floor, ABSOLUTE_LIMIT_G_RMS)
    if running_g_rms is not None and running_g_rms > 0:
        limit = min(limit, RUNNING_FRACTION * running_g_rms)
    return max(limit, near_floor)


def motion_spectrum(values: np.ndarray, rate_hz: float, mains_hz: float | None,
                    resolution_hz: float = RESOLUTION_HZ
                    ) -> tuple[float, tuple[float, float] | None]:
    """Broadband level and the strongest line that is not mains hum, from one Welch spectrum.

    The RMS over the band from ``LOWEST_HZ`` up with the hum bands left out (Parseval: the sum
    of the density times the bin width); a line must stand ``PERIODIC_SNR`` times (amplitude)
    above the median level and reach ``PERIODIC_MIN_G``; its amplitude is the power over the
    Hann main lobe, as in :mod:`trueturn.dsp.spectrum`.

    Parameters
    ----------
    values : numpy.ndarray
        One pickup's samples, g (or volts).
    rate_hz : float
        Sample rate, Hz.
    mains_hz : float or None
        Mains frequency, Hz; None leaves no band out.
    resolution_hz : float, default 0.5
        Wanted bin width, Hz.

    Returns
    -------
    level_rms : float
        Broadband RMS, g (or volts); the plain standard deviation below 64 samples.
    line : tuple of (float, float) or None
        The strongest line as (Hz, g peak), or None.

    References
    ----------
    .. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of power
       spectra", IEEE Trans. Audio Electroacoust. 15(2), 1967; ``scipy.signal.welch``.
    .. [2] PSD peak thresholds as in :func:`trueturn.dsp.spectrum.spectrum`: common practice,
       no source.
    """
    x = np.asarray(values, dtype=float)
    if x.size < 64:
        return (float(np.std(x)) if x.size else math.nan), None
    nperseg = 1 << max(6, math.ceil(math.log2(rate_hz / resolution_hz)))
    nperseg = min(nperseg, 1 << int(math.log2(x.size)))
    freqs, psd = signal.welch(x, fs=rate_hz, window="hann", nperseg=nperseg,
                              noverlap=nperseg // 2, detrend="constant", scaling="density")
    df = float(freqs[1] - freqs[0])
    band = freqs >= max(LOWEST_HZ, 3 * df)
    if mains_hz:
        for k in (1, 2):
            band &= np.abs(freqs - k * mains_hz) > HUM_GUARD_BINS * df + GRID_TOLERANCE_HZ
    level = math.sqrt(float(psd[band].sum()) * df)
    usable = band & (freqs <= 0.45 * rate_hz)
    if not usable.any():
        return level, None
    floor = float(np.median(psd[1:]))
    candidates = np.flatnonzero(usable)
    best = int(candidates[np.argmax(psd[candidates])])
    lobe = psd[max(best - 2, 0): best + 3]
    amplitude = math.sqrt(2.0 * float(lobe.sum()) * df)
    if psd[best] < floor * PERIODIC_SNR ** 2 or amplitude < PERIODIC_MIN_G:
        return level, None
    return level, (refine_peak_hz(freqs, psd, best), amplitude)


#: free vibration (:func:`free_vibration`): the band kept around the line, Hz either side:
#: 15 % of the line's frequency, at least 1.5 Hz, at most half of it. A mode damped by 5 %
#: rings over a half-power band of +-5 % of its frequency (Rao 2.6); narrow enough to
#: leave out a neighbouring mode (the shop fan's 10.2 and 14.2 Hz ring together: in one
#: band their mix would seem to drift), wide enough that the filter's own transient dies
#: out fast: it is left out of the fits, from each end, until it has fallen by
#: RING_SETTLE_E_FOLDS e-folds at its slowest pole's rate (0.4 s at 14 Hz).
RING_BAND_MIN_HZ = 1.5
RING_BAND_FRACTION = 0.15
RING_SETTLE_E_FOLDS = 4.0
#: the envelope of a ring-down falls to at most half over the span fitted ...
RING_FADE = 0.5
#: ... as an exponential (log-envelope straight line, coefficient of determination) ...
RING_MIN_R2 = 0.95
#: ... at one frequency: over the span it changes by at most 2 %. A turning rotor's 1x moves
#: with its speed: a rotor still coasting after a trusted tach's last edge slows by 5 % or
#: more per turn (trueturn.procedure.standstill.STEADY_RATIO), so over the five turns or
#: more fitted its line moves by a quarter or more (common practice, no source).
RING_MAX_DRIFT = 0.02
#: the span fitted holds at least this many cycles of the line and this many seconds
RING_MIN_CYCLES = 5.0
RING_MIN_SPAN_S = 0.25


@dataclass(frozen=True)
class FreeVibration:
    """A line's envelope and frequency fitted over the span where it stands out.

    ``decay_per_s``: ``sigma`` in ``A e^{-sigma t}`` (a damped mode: ``zeta omega_n``);
    ``frequency_hz``: its mean frequency; ``drift``: the share by which the frequency moved
    over ``span_s``; ``fade``: the envelope at the span's end over its start, from the fit;
    ``r2``: how well ``ln A`` follows a straight line.
    """

    decay_per_s: float
    frequency_hz: float
    drift: float
    fade: float
    r2: float
    span_s: float

    @property
    def rings_down(self) -> bool:
        """A free vibration dying out: an exponential envelope that falls by more than half
        at a frequency that stays put. A turning rotor cannot make this: at a steady speed
        its lines keep their level, and a rotor that slows moves them down in frequency."""
        return (self.fade <= RING_FADE and self.r2 >= RING_MIN_R2
                and abs(self.drift) <= RING_MAX_DRIFT)


def free_vibration(values: np.ndarray, rate_hz: float, line_hz: float,
                   min_amplitude: float = PERIODIC_MIN_G) -> FreeVibration | None:
    """Fit a line's envelope and phase in time: is it a ring-down (free vibration)?

    After the forcing stops, a viscously damped mode vibrates freely as
    ``X e^{-zeta omega_n t} cos(omega_d t - phi)``: at one frequency, its envelope falling
    exponentially (the logarithmic decrement). The band around ``line_hz`` is kept
    (Butterworth, forward and backward: no phase shift), its analytic signal (Hilbert
    transform) gives the envelope and the phase at every sample; over the samples whose
    envelope reaches ``min_amplitude`` (a filter's settling time in from each end left out)
    ``ln(envelope)`` is fitted by a straight line (``-sigma``) and the phase by a parabola
    (frequency and its drift).

    Parameters
    ----------
    values : numpy.ndarray
        One pickup's samples, g (or volts).
    rate_hz : float
        Sample rate, Hz.
    line_hz : float
        The line's frequency (:func:`motion_spectrum`), Hz.
    min_amplitude : float, default PERIODIC_MIN_G
        The envelope (peak) below which samples are left out of the fits.

    Returns
    -------
    FreeVibration or None
        None when the line stands out over too short a span (fewer than
        ``RING_MIN_CYCLES`` cycles or ``RING_MIN_SPAN_S``) or its band does not fit below
        Nyquist: nothing is then said about it.

    References
    ----------
    .. [1] S. S. Rao, "Mechanical Vibrations", 2.6 (free vibration with viscous damping,
       logarithmic decrement) (from memory).
    .. [2] M. Feldman, "Hilbert Transform Applications in Mechanical Vibration", Wiley,
       2011: envelope and instantaneous frequency of a free vibration from its analytic
       signal (from memory); ``scipy.signal.hilbert``, ``scipy.signal.sosfiltfilt``.
    """
    x = np.asarray(values, dtype=float)
    band = _line_band(x, rate_hz, line_hz)
    if band is None:
        return None
    analytic, settle = band
    envelope = np.abs(analytic)
    time_s = np.arange(x.size) / rate_hz
    use = np.zeros(x.size, dtype=bool)
    use[settle: x.size - settle] = True
    use &= envelope >= min_amplitude
    if not use.any():
        return None
    t = time_s[use]
    span_s = float(t[-1] - t[0])
    if span_s < max(RING_MIN_SPAN_S, RING_MIN_CYCLES / line_hz):
        return None
    log_env = np.log(envelope[use])
    slope, intercept = np.polyfit(t, log_env, 1)
    spread = float(np.sum((log_env - log_env.mean()) ** 2))
    r2 = 1.0 - float(np.sum((log_env - (slope * t + intercept)) ** 2)) / spread \
        if spread > 0 else 0.0
    centred = t - t.mean()
    curve, rate, _ = np.polyfit(centred, np.unwrap(np.angle(analytic))[use], 2)
    frequency_hz = float(rate) / (2.0 * math.pi)
    if frequency_hz <= 0:
        return None
    drift = float(2.0 * curve * span_s / (2.0 * math.pi)) / frequency_hz
    return FreeVibration(decay_per_s=-float(slope), frequency_hz=frequency_hz, drift=drift,
                         fade=math.exp(float(slope) * span_s), r2=r2, span_s=span_s)


def _line_band(x: np.ndarray, rate_hz: float, line_hz: float
               ) -> tuple[np.ndarray, int] | None:
    """The analytic signal of the band kept around a line (Butterworth forward and
    backward, Hilbert transform) and how many samples its filter's own transient lasts at
    each end (its slowest pole's ``RING_SETTLE_E_FOLDS`` e-folds); None when the band does
    not fit below Nyquist or there are too few samples."""
    half_hz = min(max(RING_BAND_MIN_HZ, RING_BAND_FRACTION * line_hz), 0.5 * line_hz)
    low_hz, high_hz = line_hz - half_hz, line_hz + half_hz
    if x.size < 64 or low_hz <= 0 or high_hz >= 0.45 * rate_hz:
        return None
    zeros, poles, gain = signal.butter(2, [low_hz, high_hz], btype="bandpass", fs=rate_hz,
                                       output="zpk")
    sos = signal.zpk2sos(zeros, poles, gain)
    analytic = signal.hilbert(signal.sosfiltfilt(sos, x - float(np.mean(x))))
    slowest = float(-np.log(np.abs(poles)).min())
    return analytic, int(math.ceil(RING_SETTLE_E_FOLDS / slowest))


#: :func:`lulls`: the line's envelope, low decile against high decile over the window
LULL_PERCENTILES = (10.0, 90.0)


def lulls(values: np.ndarray, rate_hz: float, line_hz: float) -> bool:
    """Does a line fall well below its peak within the window (lulls between bursts)?

    A turning rotor forces its lines at a level that holds from turn to turn (it changes
    with the speed, slowly); free vibration started by strikes (a tap test: one strike
    every second or two) dies out between them, each burst falling as
    ``e^{-zeta omega_n t}``. The band around the line is kept as in
    :func:`free_vibration`; over the window (the filter's settling left out at each end)
    the envelope's low decile under :data:`RING_FADE` of its high decile is a lull.

    Parameters
    ----------
    values : numpy.ndarray
        One pickup's samples, g (or volts).
    rate_hz : float
        Sample rate, Hz.
    line_hz : float
        The line's frequency (:func:`motion_spectrum`), Hz.

    Returns
    -------
    bool
        True: the line lulls (bursts of free vibration). False: it keeps its level, or the
        window is too short or the band does not fit below Nyquist (nothing is said: the
        safe side, a line that may be a turning rotor's).

    References
    ----------
    .. [1] S. S. Rao, "Mechanical Vibrations", 2.6 (free vibration with viscous damping)
       (from memory); steady forced response at the forcing frequency, ch. 3 (from memory).
    .. [2] M. Feldman, "Hilbert Transform Applications in Mechanical Vibration", Wiley,
       2011: the envelope from the analytic signal (from memory).
    """
    x = np.asarray(values, dtype=float)
    band = _line_band(x, rate_hz, line_hz)
    if band is None:
        return False
    analytic, settle = band
    envelope = np.abs(analytic)[settle: x.size - settle]
    if envelope.size < max(RING_MIN_SPAN_S, RING_MIN_CYCLES / line_hz) * rate_hz:
        return False
    low, high = np.percentile(envelope, LULL_PERCENTILES)
    return bool(high > 0.0 and low < RING_FADE * high)


class MotionMonitor:
    """The last ``window_s`` of each pickup's samples, judged on demand.

    Feed it interleaved ADC counts as they arrive (:meth:`feed`); a gap (lost samples)
    starts the window afresh. ``g_per_count`` per channel converts counts to g (or volts
    for an uncalibrated pickup, named by ``units``).
    """

    def __init__(self, names: tuple[str, ...], g_per_count: tuple[float, ...], rate_hz: float,
                 mains_hz: float | None, units: tuple[str, ...] | None = None,
                 window_s: float = WINDOW_S, adc_max_count: int | None = None) -> None:
        self.names = names
        self.adc_max_count = adc_max_count  # full scale; None: the rails are not checked
        self.g_per_count = g_per_count
        self.rate_hz = float(rate_hz)
        self.mains_hz = mains_hz
        self.units = units or tuple("g" for _ in names)
        self.size = max(64, int(window_s * self.rate_hz))
        self._rings: list[deque[np.ndarray]] = [deque() for _ in names]
        self._counts = [0] * len(names)
        self.running_g_rms: list[float | None] = [None] * len(names)

    def clear(self) -> None:
        """Forget every held sample (a gap: the window starts afresh); the running level is kept.

        References
        ----------
        .. [2] The floor factor 2, the 20 mg ceiling and the quarter of the running level:
           common practice, no source.
        """
        for ring in self._rings:
            ring.clear()
        self._counts = [0] * len(self.names)

    def feed(self, interleaved_counts: np.ndarray, channels: int) -> None:
        """Hold one block of samples, channel-interleaved as in the protocol's samples message.

        Parameters
        ----------
        interleaved_counts : numpy.ndarray
            ADC counts, channel 0 first in each conversion.
        channels : int
            Number of interleaved channels.

        References
        ----------
        .. [1] protocol/SPEC.md, the samples message (ours).
        """
        values = np.asarray(interleaved_counts)
        n = values.size - values.size % channels
        for c in range(min(channels, len(self.names))):
            block = values[c:n:channels]
            ring = self._rings[c]
            ring.append(block)
            self._counts[c] += block.size
            while ring and self._counts[c] - ring[0].size >= self.size:
                self._counts[c] -= ring.popleft().size

    def seconds(self) -> float:
        """Signal held for the pickup with the least.

        Returns
        -------
        float
            Seconds of samples held.

        References
        ----------
        .. [2] The floor factor 2, the 20 mg ceiling and the quarter of the running level:
           common practice, no source.
        """
        return min(self._counts, default=0) / self.rate_hz if self.rate_hz else 0.0

    def levels(self) -> list[float]:
        """Broadband level of each pickup over what is held (hum left out).

        Returns
        -------
        list of float
            Level per pickup, g RMS (or volts).

        References
        ----------
        .. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of power
           spectra", IEEE Trans. Audio Electroacoust. 15(2), 1967; ``scipy.signal.welch``.
        """
        return [motion_spectrum(self._values(c), self.rate_hz, self.mains_hz)[0]
                for c in range(len(self.names))]

    def remember_running_level(self) -> None:
        """Take the present levels as a running machine's (call at the end of a recorded run).

        References
        ----------
        .. [2] The floor factor 2, the 20 mg ceiling and the quarter of the running level:
           common practice, no source.
        """
        self.running_g_rms = [v if math.isfinite(v) else None for v in self.levels()]

    def _counts_held(self, c: int) -> np.ndarray:
        ring = self._rings[c]
        if not ring:
            return np.zeros(0)
        return np.concatenate(list(ring))[-self.size:]

    def _values(self, c: int) -> np.ndarray:
        return self._counts_held(c).astype(float) * self.g_per_count[c]

    def _at_rail(self, counts: np.ndarray) -> float | None:
        """Share of ``counts`` at 0 or full scale (None when the scale is unknown)."""
        if self.adc_max_count is None or counts.size == 0:
            return None
        return float(np.mean((counts <= 0) | (counts >= self.adc_max_count)))

    def judge(self) -> tuple[PickupMotion, ...]:
        """Each pickup's evidence of motion over what is held (possibly less than the full window).

        Returns
        -------
        tuple of PickupMotion
            Per pickup: broadband level and its quiet limit (g RMS or volts), the strongest line
            that is not hum (Hz, g peak) or None, and the seconds judged.

        References
        ----------
        .. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of power
           spectra", IEEE Trans. Audio Electroacoust. 15(2), 1967; ``scipy.signal.welch``.
        .. [2] The floor factor 2, the 20 mg ceiling and the quarter of the running level:
           common practice, no source.
        """
        out = []
        for c, name in enumerate(self.names):
            counts = self._counts_held(c)
            x = counts.astype(float) * self.g_per_count[c]
            floor = noise_floor_g_rms(self.g_per_count[c], self.rate_hz)
            limit = quiet_limit_g_rms(floor, self.running_g_rms[c])
            level, line = motion_spectrum(x, self.rate_hz, self.mains_hz)
            ring = None if line is None else free_vibration(x, self.rate_hz, line[0])
            out.append(PickupMotion(
                name, level, limit, None if line is None else line[0],
                None if line is None else line[1], x.size / self.rate_hz, self.units[c],
                self._at_rail(counts), ringing=ring is not None and ring.rings_down,
                lulls=line is not None and lulls(x, self.rate_hz, line[0])))
        return tuple(out)
