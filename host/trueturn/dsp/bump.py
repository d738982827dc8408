"""Bump (impact) test at standstill: natural frequencies and damping from free decays.

A coast-down sweep (:mod:`trueturn.dsp.sweep`) shows the support resonances below the
running speed only. A machine on stiff mounts has its rigid-body modes above it; struck on
a bearing housing with a soft mallet while it stands still, it rings at them. From one
recording of several such taps this module finds each tap, fits its free decay as a sum
of damped sinusoids and keeps the modes the taps agree on.

Method
------
* **Taps.** A tap is a sudden rise far above the pickup's background: the sample's distance
  from the recording's median exceeds ``TAP_FACTOR`` times the background RMS (the 20th
  percentile of 0.1 s block RMS values, never below the pickup's own noise floor from
  :func:`trueturn.dsp.motion.noise_floor_g_rms`), and the largest excursion of the
  ``RISE_S`` from it on is twice that of the ``RISE_S`` before it (a tap on top of a
  ringing decay counts, the ringing does not). Taps
  closer than ``TAP_MIN_GAP_S`` are one (a mallet bouncing). The taps of every pickup are
  merged in time.
* **Free decay.** After a tap the fit starts ``CONTACT_GUARD_S`` past the tap's peak (the
  mallet's contact; a soft mallet touches for a few milliseconds) and past the last sample
  at an ADC rail (finding ``tap_clipped``), and ends before the next tap (or a gap in the
  samples), at most ``MAX_DECAY_S`` after the tap: a lightly damped mode rings on long
  after a strong, well damped one has gone.
* **Modes of one decay.** The window is low-passed and decimated (``scipy.signal.decimate``,
  a zero-phase FIR: a linear filter keeps the poles of a sum of exponentials; its edge
  transient is cut off) to at most ``FIT_SAMPLES`` samples while the highest line that
  stands out stays below 0.35 of the new rate. The poles come from the **matrix pencil
  method** (Hua & Sarkar, IEEE Trans. ASSP 38(5), 1990; Sarkar & Pereira, IEEE Antennas
  Propag. Mag. 37(1), 1995; from memory): pencil parameter ``L = N/3``, the model order the
  number of singular values of the Hankel matrix above the largest one white noise would
  give (``sigma (sqrt(N-L) + sqrt(L+1))``, the Marchenko-Pastur edge; from memory), times
  ``ORDER_MARGIN``. The poles then seed a **nonlinear least-squares** fit of the damped
  sinusoids (variable projection: the amplitudes solved linearly for every trial of the
  decays and frequencies; Golub & Pereyra, SIAM J. Numer. Anal. 10(2), 1973, from memory;
  ``scipy.optimize.least_squares``), the maximum-likelihood estimate in white noise, whose
  covariance ``s^2 (J^T J)^-1`` (``s^2`` the residual variance: a misfit widens it) gives
  each pole's standard errors. A pole ``s = -sigma + i omega_d`` is a mode of natural
  frequency ``omega_n = |s|`` and damping ratio ``zeta = sigma / |s|`` (Rao, *Mechanical
  Vibrations*, sec. 2.6: ``x = A e^{-zeta omega_n t} cos(omega_d t + phi)``,
  ``omega_d = omega_n sqrt(1 - zeta^2)``; from memory).
* **What is a mode.** Between ``MIN_FREQUENCY_HZ`` and ``MAX_FREQUENCY_FRACTION`` of the
  sample rate; ``0 < zeta < MAX_DAMPING``; an amplitude at the fit's start of at least
  ``MODE_SNR`` times the pickup's noise; and it decays: its envelope falls to at most
  :data:`trueturn.dsp.motion.RING_FADE` over the window and its decay rate is
  ``DECAY_SIGNIFICANCE`` standard errors above zero. Mains hum (50/60 Hz and twice) and a
  running machine's lines do not decay and are never modes; the ADC's quantisation is
  white noise, below the singular-value edge.
* **Taps combined.** Per pickup the estimates of all taps are grouped by frequency (within
  ``MATCH_FRACTION``, one per tap). With two taps or more a mode needs two agreeing taps
  (else finding ``mode_unconfirmed``); its frequency and damping are the means, their
  standard errors the larger of the tap-to-tap scatter's (``s / sqrt(n)``) and the fits' own
  (``sqrt(sum se_i^2) / n``), never below ``FREQUENCY_REL_FLOOR`` (0.2 %) and
  ``DAMPING_REL_FLOOR`` (5 %) of the value: repeated taps say how well they repeat, not
  how far the mode moves with how hard it rings. A recording with one usable tap gives
  that tap's fit alone (finding ``single_tap``: the standard error then holds the noise
  and the floors only, not how taps differ).

Limits (said plainly): the structure must be linear and still (a rotor turning behind a
dark tach puts a line that does not decay: finding ``steady_line``); modes closer than
about the inverse of the fitted window in hertz are not told apart; a mode the pickup's
direction does not see (a vertical mode under a horizontal pickup) is not found; heavily
damped modes (``zeta`` near 0.5) die within a few cycles and get wide errors.

Safety: a bump test is a hands-on step on a stopped machine. The rotor proven at
standstill, the power locked out, strike the bearing housing, never the rotor; the
manufacturer's instructions come first (see the README).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import linalg, optimize, signal

from trueturn.dsp.findings import Code, Finding
from trueturn.dsp.meter import DEFAULT_ADC_BITS, DEFAULT_REFERENCE_MV, DEFAULT_TICK_HZ
from trueturn.dsp.motion import RING_FADE, free_vibration, motion_spectrum, noise_floor_g_rms
from trueturn.dsp.units import PickupProfile
from trueturn.link.codec import Message, StreamDecoder

#: a tap rises above TAP_FACTOR x the background RMS ...
TAP_FACTOR = 10.0
#: ... and the RISE_S from it on holds twice the largest excursion of the RISE_S before it
RISE_S = 0.05
RISE_FACTOR = 2.0
#: taps closer than this are one (a mallet bouncing); common practice, no source
TAP_MIN_GAP_S = 0.5
#: the background: this percentile of the RMS of BLOCK_S blocks (taps and their decays are
#: the loud blocks; the quiet ones between them are the pickup's own noise and hum)
BACKGROUND_PERCENTILE = 20.0
BLOCK_S = 0.1
#: the tap's peak is looked for this long after its onset; the fit starts CONTACT_GUARD_S
#: after it (a soft mallet's contact lasts a few milliseconds; common practice, no source)
PEAK_SEARCH_S = 0.05
CONTACT_GUARD_S = 0.005
#: the longest and shortest decay fitted, seconds
MAX_DECAY_S = 2.0
MIN_DECAY_S = 0.1
#: at most this many samples per fit (after decimation); the matrix pencil's SVD is
#: O(N^3) and the extra samples of a long window add little once the decay is gone
FIT_SAMPLES = 600
#: the matrix pencil looks at the first PENCIL_SAMPLES of them: its poles only start the
#: least-squares fit, which uses all (the SVD costs O(N^3), and a multithreaded BLAS on a
#: busy laptop turns a 200 x 101 SVD from milliseconds into a second; 100 x 51 stays fast)
PENCIL_SAMPLES = 150
#: the least-squares fit stops after this many evaluations per parameter
FIT_EVALUATIONS = 20
#: the short window's poles add a frequency only this far from every long window's pole
MERGE_FRACTION = 0.1
#: a starting pole whose amplitude is under KEEP_SNR x the noise is left out of the fit
KEEP_SNR = 2.0
#: the decimating low-pass FIR's order per step of decimation (see _fit_window)
FIR_ORDER_PER_STEP = 8
#: a decimated window keeps the highest line that stands out below this share of its rate
DECIMATED_BAND = 0.35
#: a line "stands out" of a window's periodogram at this power over its median
STANDOUT_POWER = 100.0
#: the matrix pencil's model order: singular values above ORDER_MARGIN x the white-noise
#: edge, at most MAX_ORDER
ORDER_MARGIN = 1.5
MAX_ORDER = 24
#: a mode: frequency from MIN_FREQUENCY_HZ to MAX_FREQUENCY_FRACTION x the sample rate ...
MIN_FREQUENCY_HZ = 3.0
MAX_FREQUENCY_FRACTION = 0.4
#: ... damping ratio in (0, MAX_DAMPING) ...
MAX_DAMPING = 0.5
#: ... an amplitude at the fit's start of MODE_SNR x the pickup's noise RMS ...
MODE_SNR = 5.0
#: ... and a decay rate this many standard errors above zero
DECAY_SIGNIFICANCE = 3.0
#: taps agree on a mode within this share of its frequency (common practice, no source)
MATCH_FRACTION = 0.03
#: a line that does not decay within HUM_TOLERANCE_HZ of the mains frequency or twice it is
#: hum (the grid is never exactly at 50/60 Hz)
HUM_TOLERANCE_HZ = 1.0
MAINS_FREQUENCIES_HZ = (50.0, 60.0)
#: the running speed is near a mode within this share of it: the usual 15 % separation
#: (common practice, no source; as balance.model_first.NEAR_RESONANCE_FRACTION)
RUNNING_SPEED_MARGIN = 0.15
#: floors on a mode's standard errors, relative: the taps' own scatter says how well they
#: repeat, not how far the machine's mode is from that number on another day; a mount's
#: stiffness moves with how hard it rings and with temperature (our choice; common
#: practice, no source)
FREQUENCY_REL_FLOOR = 0.002
DAMPING_REL_FLOOR = 0.05


@dataclass(frozen=True)
class PoleFit:
    """One damped sinusoid fitted to one free decay (one tap, one pickup).

    ``frequency_hz`` is the natural frequency ``|s| / 2 pi``; ``damping_ratio`` is
    ``sigma / |s|``; ``decay_per_s`` is ``sigma`` (its standard error ``decay_se``);
    ``amplitude`` the envelope at the fit's start (g, or volts); ``fade`` the envelope at
    the window's end over its start.
    """

    frequency_hz: float
    frequency_se_hz: float
    damping_ratio: float
    damping_se: float
    decay_per_s: float
    decay_se: float
    amplitude: float
    fade: float


@dataclass(frozen=True)
class BumpMode:
    """A mode the taps agree on, at one pickup.

    ``frequency_hz`` natural frequency, ``damping_ratio`` viscous damping ratio, each with a
    standard error (from the tap-to-tap scatter and the fits; one tap: the fit alone);
    ``taps`` how many taps showed it; ``amplitude`` the mean envelope at the fits' starts.
    """

    pickup: str
    frequency_hz: float
    frequency_se_hz: float
    damping_ratio: float
    damping_se: float
    taps: int
    amplitude: float

    @property
    def speed_rpm(self) -> float:
        """The shaft speed whose 1x lies on this mode, rpm."""
        return 60.0 * self.frequency_hz

    def to_json(self) -> dict[str, Any]:
        """The mode as ``analyze --bump --json`` lists it.

        Returns
        -------
        dict
            ``pickup``, ``frequency_hz``, ``frequency_se_hz``, ``speed_rpm``,
            ``damping_ratio``, ``damping_se``, ``taps``, ``amplitude``.

        References
        ----------
        .. [1] dsp/README.md, "Bump test" (ours; no external source).
        """
        return {"pickup": self.pickup, "frequency_hz": round(self.frequency_hz, 4),
                "frequency_se_hz": round(self.frequency_se_hz, 4),
                "speed_rpm": round(self.speed_rpm, 1),
                "damping_ratio": round(self.damping_ratio, 5),
                "damping_se": round(self.damping_se, 5), "taps": self.taps,
                "amplitude": round(self.amplitude, 5)}


@dataclass(frozen=True)
class Tap:
    """One tap: its onset (seconds from the recording's start) and the pickups whose
    samples reached an ADC rail in it."""

    time_s: float
    clipped: tuple[str, ...] = ()


@dataclass(frozen=True)
class BumpResult:
    """A bump test's outcome: the taps found, the modes per pickup, findings as codes."""

    taps: tuple[Tap, ...]
    modes: tuple[BumpMode, ...]
    findings: tuple[Finding, ...] = field(default_factory=tuple)

    def to_json(self) -> dict[str, Any]:
        """``{"taps", "tap_times_s", "modes", "findings"}`` (``analyze --bump --json``).

        Returns
        -------
        dict
            JSON-ready data; ``findings`` as :meth:`Finding.to_json`.

        References
        ----------
        .. [1] dsp/README.md, "Bump test" (ours; no external source).
        """
        return {"taps": len(self.taps),
                "tap_times_s": [round(t.time_s, 4) for t in self.taps],
                "modes": [m.to_json() for m in self.modes],
                "findings": [f.to_json() for f in self.findings]}


def noise_sigma(values: np.ndarray) -> float:
    """A pickup's white-noise RMS, robust to taps, decays and hum.

    The second difference ``x[n+1] - 2x[n] + x[n-1]`` takes slow lines nearly out (a line at
    ``f`` keeps ``4 sin^2(pi f / fs)`` of its power: 0.1 % for 60 Hz hum at 4 kHz) and
    multiplies white noise's variance by 6; its median absolute value, divided by 0.6745,
    is its standard deviation whatever a minority of loud samples does.

    Parameters
    ----------
    values : numpy.ndarray
        One pickup's samples.

    Returns
    -------
    float
        The noise RMS, in the samples' unit (0 for fewer than 3 samples).

    References
    ----------
    .. [1] F. R. Hampel, "The influence curve and its role in robust estimation", JASA 69,
       1974: the median absolute deviation, 1/0.6745 for a normal law (from memory).
    """
    x = np.asarray(values, dtype=float)
    if x.size < 3:
        return 0.0
    second = np.diff(x, 2)
    return float(np.median(np.abs(second - np.median(second)))) / 0.6745 / math.sqrt(6.0)


def _block_rms(x: np.ndarray, block: int) -> np.ndarray:
    usable = x.size - x.size % block
    if usable == 0:
        return np.array([float(np.std(x))]) if x.size else np.zeros(1)
    return np.sqrt(np.mean(x[:usable].reshape(-1, block) ** 2, axis=1))


def find_taps(values: np.ndarray, rate_hz: float, floor: float = 0.0) -> list[int]:
    """Onsets of the taps in one pickup's samples (see the module's Method).

    Parameters
    ----------
    values : numpy.ndarray
        One pickup's samples, g (or volts).
    rate_hz : float
        Sample rate, Hz.
    floor : float, default 0.0
        The pickup's own noise floor (RMS, :func:`trueturn.dsp.motion.noise_floor_g_rms`):
        the background is never taken below it.

    Returns
    -------
    list of int
        Sample index of each tap's onset, in order, at least ``TAP_MIN_GAP_S`` apart.

    References
    ----------
    .. [1] The thresholds (10 x background, twice the last 50 ms, 0.5 s apart): common
       practice, no source.
    """
    x = np.asarray(values, dtype=float)
    if x.size < 16:
        return []
    dev = np.abs(x - float(np.median(x)))
    block = max(4, int(round(BLOCK_S * rate_hz)))
    background = max(float(np.percentile(_block_rms(x - np.median(x), block),
                                         BACKGROUND_PERCENTILE)), floor)
    threshold = TAP_FACTOR * background
    rise = max(1, int(round(RISE_S * rate_hz)))
    gap = int(round(TAP_MIN_GAP_S * rate_hz))
    # the largest excursion over the RISE_S before each sample and from it on (running maxima)
    padded = np.concatenate([np.zeros(rise), dev, np.zeros(rise)])
    running = np.lib.stride_tricks.sliding_window_view(padded, rise).max(axis=1)
    before, ahead = running[:x.size], running[rise:rise + x.size]
    candidates = np.flatnonzero((dev > threshold) & (ahead > RISE_FACTOR * before))
    onsets: list[int] = []
    for i in candidates.tolist():
        if not onsets or i - onsets[-1] >= gap:
            onsets.append(i)
    return onsets


def _decimation(window: np.ndarray, rate_hz: float) -> int:
    """The decimation factor for one window (see the module's Method)."""
    wanted = math.ceil(window.size / FIT_SAMPLES)
    if wanted <= 1:
        return 1
    freqs, power = signal.periodogram(window, fs=rate_hz, window="hann", detrend="constant")
    floor = float(np.median(power[1:])) if power.size > 1 else 0.0
    loud = np.flatnonzero(power > STANDOUT_POWER * floor) if floor > 0 else np.zeros(0, int)
    highest_hz = float(freqs[loud[-1]]) if loud.size else MIN_FREQUENCY_HZ
    allowed = int(DECIMATED_BAND * rate_hz / max(highest_hz, MIN_FREQUENCY_HZ))
    return max(1, min(wanted, allowed))


def matrix_pencil(y: np.ndarray, noise_rms: float, max_order: int = MAX_ORDER) -> np.ndarray:
    """The poles ``z_k`` of ``y[n] = sum_k c_k z_k^n + noise`` by the matrix pencil method.

    Parameters
    ----------
    y : numpy.ndarray
        Real samples, evenly spaced.
    noise_rms : float
        The white noise's RMS in ``y``: singular values above ``ORDER_MARGIN`` times its
        Marchenko-Pastur edge ``sigma (sqrt(N-L) + sqrt(L+1))`` count as signal.
    max_order : int, default MAX_ORDER
        The most poles returned.

    Returns
    -------
    numpy.ndarray
        Complex poles (conjugate pairs for real oscillations), possibly empty.

    References
    ----------
    .. [1] Y. Hua, T. K. Sarkar, "Matrix pencil method for estimating parameters of
       exponentially damped/undamped sinusoids in noise", IEEE Trans. ASSP 38(5), 1990
       (from memory).
    .. [2] T. K. Sarkar, O. Pereira, "Using the matrix pencil method to estimate the
       parameters of a sum of complex exponentials", IEEE Antennas Propag. Mag. 37(1), 1995:
       ``L = N/3``, the order from the singular values (from memory).
    .. [3] V. A. Marchenko, L. A. Pastur, 1967: the largest singular value of an m x n
       white-noise matrix near ``sigma (sqrt(m) + sqrt(n))`` (from memory).
    """
    y = np.asarray(y, dtype=float)
    n = y.size
    pencil = n // 3
    if pencil < 2:
        return np.zeros(0, dtype=complex)
    hankel = linalg.hankel(y[: n - pencil], y[n - pencil - 1:])
    _, values, vh = linalg.svd(hankel, full_matrices=False, lapack_driver="gesvd")
    edge = ORDER_MARGIN * noise_rms * (math.sqrt(n - pencil) + math.sqrt(pencil + 1))
    order = min(int(np.count_nonzero(values > edge)), max_order, pencil - 1)
    if order == 0:
        return np.zeros(0, dtype=complex)
    basis = vh[:order].T  # (L+1) x M: the row space of the Hankel matrix
    return np.asarray(linalg.eigvals(np.linalg.pinv(basis[:-1]) @ basis[1:]), dtype=complex)


def _basis(params: np.ndarray, kinds: Sequence[bool], t: np.ndarray) -> np.ndarray:
    """Columns of the damped-sinusoid model: per oscillation (sigma, omega) two columns,
    per real pole (sigma) one."""
    cols = []
    i = 0
    for oscillating in kinds:
        decay = np.exp(np.clip(-params[i] * t, -700.0, 50.0))  # a wandering trial stays finite
        if oscillating:
            cols += [decay * np.cos(params[i + 1] * t), decay * np.sin(params[i + 1] * t)]
            i += 2
        else:
            cols.append(decay)
            i += 1
    return np.column_stack(cols)


def _amplitudes(phi: np.ndarray, y: np.ndarray) -> np.ndarray:
    """The linear least-squares amplitudes of the basis ``phi`` (columns scaled to unit
    length, then the small normal equations; einsum and a P x P solve keep the many small
    solves of the fit cheap)."""
    norms = np.sqrt(np.einsum("ij,ij->j", phi, phi))
    norms[norms == 0] = 1.0
    scaled = phi / norms
    gram = np.einsum("ij,ik->jk", scaled, scaled)
    rhs = np.einsum("ij,i->j", scaled, y)
    try:
        coef = np.linalg.solve(gram, rhs)
    except np.linalg.LinAlgError:
        coef = np.linalg.pinv(gram) @ rhs
    return np.asarray(coef / norms)


def fit_decay(y: np.ndarray, dt_s: float, poles_s: Sequence[complex]) -> list[PoleFit]:
    """Every oscillating pole of one free decay, with standard errors (see Method).

    Parameters
    ----------
    y : numpy.ndarray
        The decay's samples, evenly spaced, its baseline taken off.
    dt_s : float
        Sample spacing, seconds.
    poles_s : sequence of complex
        Starting poles ``s = -sigma + i omega`` (1/s), one of each conjugate pair; a real
        ``s`` is a non-oscillating exponential (an offset, a drift).

    Returns
    -------
    list of PoleFit
        One per oscillating pole (decaying or not; the caller judges), by frequency.

    References
    ----------
    .. [1] G. H. Golub, V. Pereyra, "The differentiation of pseudo-inverses and nonlinear
       least squares problems whose variables separate", SIAM J. Numer. Anal. 10(2), 1973
       (variable projection; from memory); ``scipy.optimize.least_squares``; covariance
       ``s^2 (J^T J)^-1`` (S. M. Kay, *Fundamentals of Statistical Signal Processing:
       Estimation Theory*, 1993, ch. 8; from memory).
    """
    y = np.asarray(y, dtype=float)
    n = y.size
    t = np.arange(n) * dt_s
    nyquist = math.pi / dt_s
    params: list[float] = []
    kinds: list[bool] = []
    span = max(n * dt_s, dt_s)
    for s in poles_s:
        if s.imag <= 0:  # a real, non-oscillating exponential (offset, drift)
            kinds.append(False)
            params.append(float(np.clip(-s.real, -5.0 / span, 0.5 / dt_s)))
            continue
        if s.imag >= 0.999 * nyquist:
            continue
        kinds.append(True)
        params += [float(np.clip(-s.real, -5.0 / span, 0.5 / dt_s)), float(s.imag)]
    if not any(kinds):
        return []

    def residual(p: np.ndarray) -> np.ndarray:
        phi = _basis(p, kinds, t)
        return y - np.einsum("ij,j->i", phi, _amplitudes(phi, y))

    # Levenberg-Marquardt (MINPACK): unbounded, a pole that wanders off is dropped below
    try:
        fit = optimize.least_squares(residual, np.array(params), method="lm", jac="2-point",
                                     x_scale="jac", max_nfev=FIT_EVALUATIONS * (len(params) + 1))
        best = fit.x
        jac = fit.jac
    except (ValueError, np.linalg.LinAlgError):
        return []
    if not (np.all(np.isfinite(best)) and np.all(np.isfinite(jac))):
        return []
    phi = _basis(best, kinds, t)
    coef = _amplitudes(phi, y)
    resid = y - np.einsum("ij,j->i", phi, coef)
    dof = max(n - phi.shape[1] - best.size, 1)
    variance = float(resid @ resid) / dof
    try:
        cov = variance * np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError:
        cov = variance * np.linalg.pinv(jac.T @ jac)
    out = []
    i = j = 0
    for oscillating in kinds:
        if not oscillating:
            i += 1
            j += 1
            continue
        sigma, omega_d = float(best[i]), abs(float(best[i + 1]))
        if not 0.0 < omega_d < nyquist:  # wandered off: nothing is said about it
            i += 2
            j += 2
            continue
        c = cov[i:i + 2, i:i + 2]
        omega_n = math.hypot(sigma, omega_d)
        grad_f = np.array([sigma, omega_d]) / (omega_n * 2.0 * math.pi)
        grad_z = np.array([omega_d ** 2, -sigma * omega_d]) / omega_n ** 3
        var_f = float(grad_f @ c @ grad_f)
        var_z = float(grad_z @ c @ grad_z)
        out.append(PoleFit(
            frequency_hz=omega_n / (2.0 * math.pi),
            frequency_se_hz=math.sqrt(max(var_f, 0.0)),
            damping_ratio=sigma / omega_n,
            damping_se=math.sqrt(max(var_z, 0.0)),
            decay_per_s=sigma, decay_se=math.sqrt(max(float(c[0, 0]), 0.0)),
            amplitude=float(math.hypot(coef[j], coef[j + 1])),
            fade=math.exp(-sigma * span)))
        i += 2
        j += 2
    return sorted(out, key=lambda p: p.frequency_hz)


def _is_mode(p: PoleFit, rate_hz: float, noise_rms: float) -> bool:
    return (MIN_FREQUENCY_HZ <= p.frequency_hz <= MAX_FREQUENCY_FRACTION * rate_hz
            and 0.0 < p.damping_ratio < MAX_DAMPING and p.amplitude >= MODE_SNR * noise_rms
            and p.fade <= RING_FADE and p.decay_per_s > DECAY_SIGNIFICANCE * p.decay_se)


def _is_hum(frequency_hz: float, mains_hz: float | None) -> bool:
    lines = (mains_hz,) if mains_hz else MAINS_FREQUENCIES_HZ
    return any(abs(frequency_hz - k * line) <= HUM_TOLERANCE_HZ for line in lines
               for k in (1, 2))


def _is_steady_line(p: PoleFit, rate_hz: float, noise_rms: float,
                    mains_hz: float | None) -> bool:
    """A clear line that does not decay and is not hum: a machine running? (A very lightly
    damped mode whose window is too short to halve it decays significantly: it is neither
    this nor a mode.)"""
    return (MIN_FREQUENCY_HZ <= p.frequency_hz <= MAX_FREQUENCY_FRACTION * rate_hz
            and p.amplitude >= MODE_SNR * noise_rms and p.fade > RING_FADE
            and p.decay_per_s <= DECAY_SIGNIFICANCE * p.decay_se
            and not _is_hum(p.frequency_hz, mains_hz))


def _group(estimates: list[tuple[int, PoleFit]]) -> list[list[tuple[int, PoleFit]]]:
    """Estimates from several taps grouped by frequency: within MATCH_FRACTION of the
    group's mean, at most one per tap (the nearest)."""
    groups: list[list[tuple[int, PoleFit]]] = []
    for tap, est in sorted(estimates, key=lambda e: e[1].frequency_hz):
        best = None
        for g in groups:
            mean = float(np.mean([e.frequency_hz for _, e in g]))
            if abs(est.frequency_hz / mean - 1.0) <= MATCH_FRACTION \
                    and tap not in {k for k, _ in g}:
                if best is None or abs(est.frequency_hz - mean) < best[0]:
                    best = (abs(est.frequency_hz - mean), g)
        if best is None:
            groups.append([(tap, est)])
        else:
            best[1].append((tap, est))
    return groups


def _combine(pickup: str, group: list[tuple[int, PoleFit]]) -> BumpMode:
    """Mean frequency and damping of one group, standard errors as in the Method."""
    f = np.array([e.frequency_hz for _, e in group])
    z = np.array([e.damping_ratio for _, e in group])
    f_se = np.array([e.frequency_se_hz for _, e in group])
    z_se = np.array([e.damping_se for _, e in group])
    n = len(group)
    fit_f = math.sqrt(float(np.sum(f_se ** 2))) / n
    fit_z = math.sqrt(float(np.sum(z_se ** 2))) / n
    if n >= 2:
        fit_f = max(fit_f, float(np.std(f, ddof=1)) / math.sqrt(n))
        fit_z = max(fit_z, float(np.std(z, ddof=1)) / math.sqrt(n))
    fit_f = max(fit_f, FREQUENCY_REL_FLOOR * float(f.mean()))
    fit_z = max(fit_z, DAMPING_REL_FLOOR * float(z.mean()))
    return BumpMode(pickup=pickup, frequency_hz=float(f.mean()), frequency_se_hz=fit_f,
                    damping_ratio=float(z.mean()), damping_se=fit_z, taps=n,
                    amplitude=float(np.mean([e.amplitude for _, e in group])))


def _windows(onsets: list[int], x: np.ndarray, rail: np.ndarray | None, rate_hz: float,
             lost: np.ndarray | None = None) -> list[tuple[int, int, int]]:
    """(start, end, clipped samples) of each tap's free decay in one pickup."""
    out = []
    guard = int(round(CONTACT_GUARD_S * rate_hz))
    search = max(1, int(round(PEAK_SEARCH_S * rate_hz)))
    longest = int(round(MAX_DECAY_S * rate_hz))
    dev = np.abs(x)
    for k, onset in enumerate(onsets):
        stop = min(onsets[k + 1] if k + 1 < len(onsets) else x.size, onset + longest, x.size)
        peak = onset + int(np.argmax(dev[onset: min(onset + search, stop)]))
        start = peak + guard
        clipped = 0
        if rail is not None:
            hits = np.flatnonzero(rail[onset:stop])
            clipped = int(hits.size)
            if clipped:
                start = max(start, onset + int(hits[-1]) + 1 + guard)
        if lost is not None:
            gaps = np.flatnonzero(lost[start:stop])
            if gaps.size:
                stop = start + int(gaps[0])
        out.append((start, stop, clipped))
    return out


def bump_test(values: Sequence[np.ndarray], rate_hz: float, names: Sequence[str],
              mains_hz: float | None = None, units_per_count: Sequence[float] | None = None,
              at_rail: Sequence[np.ndarray] | None = None,
              lost: np.ndarray | None = None) -> BumpResult:
    """Natural frequencies and damping ratios from a recording of taps at standstill.

    Parameters
    ----------
    values : sequence of numpy.ndarray
        Each pickup's samples, g (or volts for an uncalibrated pickup), evenly spaced.
    rate_hz : float
        Per-pickup sample rate, Hz.
    names : sequence of str
        The pickups' names.
    mains_hz : float or None, default None
        Mains frequency (its hum and twice it are never reported as lines); None: 50 and 60.
    units_per_count : sequence of float or None, default None
        One ADC count in the samples' unit, per pickup: the noise floor is never taken below
        its quantisation and the sensor's noise (:func:`noise_floor_g_rms`).
    at_rail : sequence of numpy.ndarray or None, default None
        Per pickup, True where a sample sits at an ADC limit (finding ``tap_clipped``).
    lost : numpy.ndarray or None, default None
        True where the samples were lost on the link (filled in by the caller): a decay
        window stops before the first.

    Returns
    -------
    BumpResult
        Taps, modes per pickup (by frequency) and findings: ``no_taps``, ``tap_clipped``,
        ``single_tap``, ``mode_unconfirmed``, ``steady_line``.

    References
    ----------
    .. [1] See the module's docstring: Hua & Sarkar 1990 (matrix pencil), Golub & Pereyra
       1973 (variable projection), Rao sec. 2.6 (free damped vibration); all from memory.
    """
    xs = [np.asarray(v, dtype=float) for v in values]
    rails = [np.asarray(r, dtype=bool) for r in at_rail] if at_rail is not None else None
    findings: list[Finding] = []
    centred = [x - float(np.median(x)) if x.size else x for x in xs]
    sigmas = []
    floors = []
    for c, x in enumerate(centred):
        floor = (noise_floor_g_rms(units_per_count[c], rate_hz)
                 if units_per_count is not None and c < len(units_per_count) else 0.0)
        floors.append(floor)
        q = units_per_count[c] / math.sqrt(12.0) \
            if units_per_count is not None and c < len(units_per_count) else 0.0
        sigmas.append(max(noise_sigma(x), q))
    # the taps of every pickup, merged in time
    gap = int(round(TAP_MIN_GAP_S * rate_hz))
    all_onsets = sorted(i for x, floor in zip(centred, floors, strict=True)
                        for i in find_taps(x, rate_hz, floor))
    onsets: list[int] = []
    for i in all_onsets:
        if not onsets or i - onsets[-1] >= gap:
            onsets.append(i)
    if not onsets:
        # no tap: is a line standing in the spectrum (a machine running hides small taps)?
        for name, x in zip(names, centred, strict=False):
            _, line = motion_spectrum(x, rate_hz, mains_hz)
            if line is not None and not _is_hum(line[0], mains_hz):
                ring = free_vibration(x, rate_hz, line[0])
                if ring is None or not ring.rings_down:
                    findings.append(Finding(Code.STEADY_LINE, pickup=name, details={
                        "frequency_hz": round(line[0], 3),
                        "speed_rpm": round(60.0 * line[0], 1)}, blocking=True))
        return BumpResult(taps=(), modes=(),
                          findings=(Finding(Code.NO_TAPS), *findings))
    clipped_by_tap: list[list[str]] = [[] for _ in onsets]
    modes: list[BumpMode] = []
    single = False
    for c, (name, x) in enumerate(zip(names, centred, strict=False)):
        estimates: list[tuple[int, PoleFit]] = []
        lines: list[tuple[int, PoleFit]] = []
        usable = 0
        for k, (start, stop, clipped) in enumerate(
                _windows(onsets, x, rails[c] if rails else None, rate_hz, lost)):
            if clipped:
                clipped_by_tap[k].append(name)
                findings.append(Finding(Code.TAP_CLIPPED, pickup=name, count=clipped,
                                        details={"tap": k + 1,
                                                 "time_s": round(onsets[k] / rate_hz, 3)}))
            if stop - start < MIN_DECAY_S * rate_hz:
                continue
            poles = _fit_window(x[start:stop], rate_hz, sigmas[c])
            usable += 1
            estimates += [(k, p) for p in poles if _is_mode(p, rate_hz, sigmas[c])]
            lines += [(k, p) for p in poles
                      if _is_steady_line(p, rate_hz, sigmas[c], mains_hz)]
        for g in _group(estimates):
            if usable >= 2 and len(g) < 2:
                findings.append(Finding(Code.MODE_UNCONFIRMED, pickup=name, count=1,
                                        details={"frequency_hz": round(g[0][1].frequency_hz,
                                                                       3),
                                                 "taps_usable": usable}))
                continue
            single = single or usable == 1
            modes.append(_combine(name, g))
        for g in _group(lines):
            if len(g) >= max(1, (usable + 1) // 2):
                freq = float(np.mean([p.frequency_hz for _, p in g]))
                findings.append(Finding(Code.STEADY_LINE, pickup=name, count=len(g),
                                        details={"frequency_hz": round(freq, 3),
                                                 "speed_rpm": round(60.0 * freq, 1)},
                                        blocking=True))
    if single:
        findings.append(Finding(Code.SINGLE_TAP, count=1))
    taps = tuple(Tap(time_s=i / rate_hz, clipped=tuple(cl))
                 for i, cl in zip(onsets, clipped_by_tap, strict=True))
    return BumpResult(taps=taps, modes=tuple(modes), findings=tuple(findings))


def _continuous_poles(z: np.ndarray, dt_s: float) -> list[complex]:
    """``s = ln(z) / dt`` for each pole, one of each conjugate pair (a real ``s`` for a
    positive real ``z``; negative real ``z``, at Nyquist, left out)."""
    out = []
    for pole in z:
        if pole == 0 or not np.isfinite(pole):
            continue
        if abs(pole.imag) <= 1e-9 * abs(pole):
            if pole.real > 0:
                out.append(complex(math.log(pole.real) / dt_s, 0.0))
            continue
        if pole.imag > 0:
            out.append(complex(np.log(complex(pole))) / dt_s)
    return out


def _merge_poles(first: list[complex], more: list[complex]) -> list[complex]:
    """``first`` and every oscillating pole of ``more`` with no pole of ``first`` within
    MERGE_FRACTION of its frequency (a short window's poles are coarse: they only add
    what the long window missed)."""
    out = list(first)
    for s in more:
        if s.imag > 0 and all(abs(s.imag - r.imag) > MERGE_FRACTION * s.imag for r in out):
            out.append(s)
    return out


def _clear_poles(y: np.ndarray, dt_s: float, poles: list[complex], noise_rms: float
                 ) -> list[complex]:
    """The poles whose linear least-squares amplitude at the start reaches KEEP_SNR x the
    noise (the rest fit noise, and slow the nonlinear fit down)."""
    if not poles:
        return poles
    t = np.arange(y.size) * dt_s
    params: list[float] = []
    kinds: list[bool] = []
    for s in poles:
        kinds.append(s.imag > 0)
        params += [-s.real, s.imag] if s.imag > 0 else [-s.real]
    coef = _amplitudes(_basis(np.array(params), kinds, t), y)
    kept = []
    j = 0
    for s, oscillating in zip(poles, kinds, strict=True):
        size = math.hypot(coef[j], coef[j + 1]) if oscillating else abs(coef[j])
        j += 2 if oscillating else 1
        if size >= KEEP_SNR * noise_rms:
            kept.append(s)
    return kept


def _decimated(window: np.ndarray, q: int, noise_rms: float) -> tuple[np.ndarray, float]:
    """``window`` low-passed and decimated by ``q``, its filter's edge transients cut off,
    and the white noise's RMS in it.

    A short windowed-sinc low-pass (order FIR_ORDER_PER_STEP x q; as scipy.signal.decimate's
    FIR, shorter): it only has to take noise out, since every line kept lies below
    DECIMATED_BAND of the new rate, far from where the filter's wide transition lets noise
    alias; its edge transient (half its length) is cut off, the less the shorter it is.
    White noise through the filter keeps ``sum(h^2)`` of its variance."""
    if q == 1:
        return window, noise_rms
    order = FIR_ORDER_PER_STEP * q
    taps = signal.firwin(order + 1, 1.0 / q, window="hamming")
    y = signal.resample_poly(window, 1, q, window=taps)
    cut = order // (2 * q) + 1
    return y[cut: y.size - cut], noise_rms * math.sqrt(float(np.sum(taps ** 2)))


def _fit_window(window: np.ndarray, rate_hz: float, noise_rms: float) -> list[PoleFit]:
    """One decay window, decimated as the Method says, then fitted (:func:`fit_decay`).

    The starting poles come from the matrix pencil over the first PENCIL_SAMPLES of the
    decimated window, over their first quarter (a mode that dies within a few tens of
    milliseconds is lost among the noise of a longer span's singular values), and over the
    first PENCIL_SAMPLES of the window decimated 2, 4, ... times more (each adding the poles
    below its own band the others missed: a lightly damped low mode rings on long after a
    hum line forced a high rate)."""
    q = _decimation(window, rate_hz)
    y, sigma = _decimated(window, q, noise_rms)
    y = y[:FIT_SAMPLES]
    if y.size < 16:
        return []
    dt = q / rate_hz
    pencil = y[:PENCIL_SAMPLES]
    poles = _continuous_poles(matrix_pencil(pencil, sigma), dt)
    if pencil.size >= 64:
        poles = _merge_poles(poles, _continuous_poles(
            matrix_pencil(pencil[: pencil.size // 4], sigma), dt))
    step = q
    while window.size // step > PENCIL_SAMPLES + 2 * FIR_ORDER_PER_STEP:
        step *= 2
        band_rad_s = 2.0 * math.pi * DECIMATED_BAND * rate_hz / step
        if band_rad_s < 2.0 * math.pi * MIN_FREQUENCY_HZ:
            break
        coarse, coarse_sigma = _decimated(window, step, noise_rms)
        found = _continuous_poles(matrix_pencil(coarse[:PENCIL_SAMPLES], coarse_sigma),
                                  step / rate_hz)
        poles = _merge_poles(poles, [s for s in found if s.imag <= band_rad_s])
    return fit_decay(y, dt, _clear_poles(y, dt, poles, sigma))


def running_speed_findings(result: BumpResult, speed_rpm: float,
                           margin: float = RUNNING_SPEED_MARGIN) -> list[Finding]:
    """``speed_near_mode`` for each mode within ``margin`` of the running speed's 1x.

    Parameters
    ----------
    result : BumpResult
        A bump test's outcome.
    speed_rpm : float
        The machine's running speed, rpm.
    margin : float, default RUNNING_SPEED_MARGIN
        The share of the mode's frequency that counts as near (the usual 15 %).

    Returns
    -------
    list of Finding
        One per mode near the speed (``speed_rpm``, ``mode_rpm``, ``frequency_hz``,
        ``damping_ratio``, ``margin``, ``separation``).

    References
    ----------
    .. [1] Keeping a running speed 15-20 % from a structural natural frequency: common
       practice, no source (the repo's ``balance.model_first.NEAR_RESONANCE_FRACTION``).
    """
    out = []
    for m in result.modes:
        separation = speed_rpm / m.speed_rpm - 1.0
        if abs(separation) < margin:
            out.append(Finding(Code.SPEED_NEAR_MODE, pickup=m.pickup, details={
                "speed_rpm": round(speed_rpm, 1), "mode_rpm": round(m.speed_rpm, 1),
                "frequency_hz": round(m.frequency_hz, 3),
                "damping_ratio": round(m.damping_ratio, 4), "margin": margin,
                "separation": round(separation, 4)}))
    return out


@dataclass(frozen=True)
class BumpCapture:
    """A recording analysed as a bump test (:func:`analyze_bump_capture`).

    ``result`` the bump test (None when the capture holds no usable samples);
    ``tach_edges`` the tach edges in the last stream (a bump test needs none: a rotor at
    standstill); ``rate_hz`` per-pickup sample rate; ``seconds`` of samples; ``lost`` samples
    missing from the stream (windows stop before a gap); ``units`` per pickup (``g`` or
    ``V`` for an uncalibrated one).
    """

    result: BumpResult | None
    tach_edges: int
    rate_hz: float
    seconds: float
    lost: int
    units: tuple[str, ...]


def analyze_bump_capture(raw: Iterable[bytes], profiles: Sequence[PickupProfile] = (),
                         mains_hz: float | None = None,
                         identity: dict[str, Any] | None = None) -> BumpCapture:
    """Decode a capture's bytes and run :func:`bump_test` on its last stream.

    Parameters
    ----------
    raw : iterable of bytes
        The bytes as received from the board, in pieces.
    profiles : sequence of PickupProfile, default ()
        Per channel: name, sensitivity (V/g; None keeps volts), zero-g output.
    mains_hz : float or None, default None
        Mains frequency (hum); None: 50 and 60 Hz are both taken as hum.
    identity : dict or None, default None
        The board's identity from the capture header, when the bytes start after it.

    Returns
    -------
    BumpCapture
        The bump test and what the capture says besides (tach edges, rate, lost samples).

    References
    ----------
    .. [1] protocol/catalogue.yaml, the samples and identity messages (ours).
    """
    decoder = StreamDecoder()
    if identity:
        decoder.assume_identity(identity)
    messages = (item for piece in raw for item in decoder.feed(piece)
                if isinstance(item, Message))
    return analyze_bump_messages(messages, profiles, mains_hz, identity)


def analyze_bump_messages(messages: Iterable[Message], profiles: Sequence[PickupProfile] = (),
                          mains_hz: float | None = None,
                          identity: dict[str, Any] | None = None) -> BumpCapture:
    """Run :func:`bump_test` on the last stream of decoded messages (a capture's, or the
    app's recording of a tap test).

    Parameters
    ----------
    messages : iterable of Message
        Decoded board messages in order (identity, stream_config, samples, tach).
    profiles : sequence of PickupProfile, default ()
        Per channel: name, sensitivity (V/g; None keeps volts), zero-g output.
    mains_hz : float or None, default None
        Mains frequency (hum); None: 50 and 60 Hz are both taken as hum.
    identity : dict or None, default None
        The board's identity, when the messages start after it.

    Returns
    -------
    BumpCapture
        The bump test and what the messages say besides (tach edges, rate, lost samples).

    References
    ----------
    .. [1] protocol/catalogue.yaml, the samples and identity messages (ours).
    """
    bits, reference_mv = DEFAULT_ADC_BITS, float(DEFAULT_REFERENCE_MV)
    tick_hz = float(DEFAULT_TICK_HZ)

    def take_identity(values: dict[str, Any]) -> tuple[int, float, float]:
        return (int(values.get("adc_bits", bits)),
                float(values.get("adc_reference_mv", reference_mv)),
                float(values.get("tick_hz", tick_hz)))

    if identity:
        try:
            bits, reference_mv, tick_hz = take_identity(identity)
        except (TypeError, ValueError):
            pass
    blocks: list[tuple[int, list[int]]] = []
    stream: tuple[int, int, int] | None = None  # start_tick, period_ticks, channels
    edges = 0
    for item in messages:
        if item.name == "identity":
            bits, reference_mv, tick_hz = take_identity(item.values)
        elif item.name == "stream_config" and item.values.get("adc_reference_mv"):
            reference_mv = float(item.values["adc_reference_mv"])
        elif item.name == "tach":
            edges += 1
        elif item.name == "samples":
            v = item.values
            key = (int(v["start_tick"]), int(v["period_ticks"]), int(v["channels"]))
            if key != stream:  # a new stream: only the last is analysed
                stream, blocks, edges = key, [], 0
            blocks.append((int(v["first_index"]), list(v["samples"])))
    if stream is None or not blocks:
        return BumpCapture(None, edges, math.nan, 0.0, 0, ())
    _, period, channels = stream
    first = blocks[0][0]
    last = max(i + len(s) for i, s in blocks)
    flat = np.full(last - first, -1, dtype=np.int64)
    for i, s in blocks:
        flat[i - first: i - first + len(s)] = s
    counts = flat[: flat.size - flat.size % channels].reshape(-1, channels)
    rate_hz = tick_hz / (period * channels)
    full_scale = (1 << bits) - 1
    volts_per_count = reference_mv / 1000.0 / (1 << bits)
    values, rails, units, per_count, names = [], [], [], [], []
    lost_mask: np.ndarray = np.asarray((counts < 0).any(axis=1))
    for c in range(channels):
        profile = profiles[c] if c < len(profiles) else PickupProfile(f"ch{c + 1}")
        raw_counts = counts[:, c].astype(float)
        sensitivity = profile.sensitivity_v_per_g
        scale = volts_per_count / sensitivity if sensitivity else volts_per_count
        assert scale > 0
        kept = raw_counts[~lost_mask]
        fill = float(np.median(kept)) if kept.size else 0.0
        values.append(np.where(lost_mask, fill, raw_counts) * scale)
        rails.append((~lost_mask) & ((raw_counts <= 0) | (raw_counts >= full_scale)))
        units.append("g" if profile.calibrated else "V")
        per_count.append(scale)
        names.append(profile.name)
    result = bump_test(values, rate_hz, names, mains_hz=mains_hz, units_per_count=per_count,
                       at_rail=rails, lost=lost_mask)
    return BumpCapture(result, edges, rate_hz, counts.shape[0] / rate_hz,
                       int(lost_mask.sum()) * channels, tuple(units))
