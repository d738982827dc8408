"""Per-revolution vectors -> mean, scatter, 95 % confidence radius and a steadiness verdict.

Confidence circle: with per-revolution vectors z_k = mu + e_k, e_k independent circular
complex Gaussian, ``n |mean - mu|^2 / s^2`` follows F(2, 2n - 2) where
``s^2 = sum |z_k - mean|^2 / (n - 1)`` (the "circular T^2" statistic; from memory: Victor &
Mast, Electroencephalogr. Clin. Neurophysiol. 78 (1991) 378-388). The radius is the
95 % quantile of that distribution (scipy.stats.f) scaled back, and the phase confidence
is the half-angle that circle subtends seen from the origin.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import stats

from trueturn.constants import SPEED_MATCH_FRACTION
from trueturn.dsp.findings import Code, Finding


@dataclass(frozen=True)
class VectorStats:
    """Summary of n per-revolution phasors (amplitudes in the phasors' unit)."""

    mean: complex
    revolutions: int
    scatter_rms: float
    confidence_radius: float
    confidence_deg: float
    drift: float
    drift_radius: float

    @property
    def amplitude(self) -> float:
        return abs(self.mean)

    @property
    def phase_deg(self) -> float:
        return math.degrees(math.atan2(self.mean.imag, self.mean.real)) % 360.0

    @property
    def drifting(self) -> bool:
        """The second half differs from the first half by more than chance and 3 % allow."""
        return self.drift > self.drift_radius and self.drift > 0.03 * abs(self.mean)


@lru_cache(maxsize=512)
def f_quantile(level: float, dfn: int, dfd: int) -> float:
    """Quantile of the F distribution, cached: the meter asks every revolution.

    Parameters
    ----------
    level : float
        Probability, e.g. 0.95.
    dfn : int
        Degrees of freedom of the numerator.
    dfd : int
        Degrees of freedom of the denominator.

    Returns
    -------
    float
        The ``level`` quantile of F(dfn, dfd).

    References
    ----------
    .. [1] ``scipy.stats.f.ppf`` (the F distribution's percent point function).
    """
    return float(stats.f.ppf(level, dfn, dfd))


def confidence_radius(scatter_var: float, n: int, level: float = 0.95) -> float:
    """Radius of the ``level`` confidence circle of a mean of n circular-Gaussian vectors.

    ``sqrt(F_level(2, 2n - 2) s^2 / n)``.

    Parameters
    ----------
    scatter_var : float
        ``s^2 = sum |z_k - mean|^2 / (n - 1)``, in the vectors' unit squared.
    n : int
        Number of vectors averaged.
    level : float, default 0.95
        Coverage of the circle.

    Returns
    -------
    float
        The radius, in the vectors' unit; infinite below two vectors.

    References
    ----------
    .. [1] Circular T^2 statistic: J. D. Victor, J. Mast, "A new statistic for steady-state
       evoked potentials", Electroencephalogr. Clin. Neurophysiol. 78 (1991) 378-388 (from
       memory).
    """
    if n < 2:
        return math.inf
    return math.sqrt(f_quantile(level, 2, 2 * n - 2) * scatter_var / n)


def combined_radius(vector: VectorStats, extra_variance: float, level: float = 0.95) -> float:
    """The confidence radius of a mean whose error also holds a part the scatter cannot show.

    The scatter gives ``s^2 / n``, the mean's complex variance (:func:`confidence_radius`); a
    part common to all the vectors (the hum fit's error, :mod:`trueturn.dsp.order`) with a
    largest variance ``v`` along any direction adds at most ``2 v`` to it. The radius is
    ``sqrt(F_level(2, 2n - 2) (s^2 / n + 2 v))``: for circular Gaussian parts it is exact
    but for the F quantile, which the scatter's degrees of freedom make a little wider than
    needed for the other part (conservative).

    Parameters
    ----------
    vector : VectorStats
        The statistics of the vectors (:func:`vector_stats`).
    extra_variance : float
        ``v``, in the vectors' unit squared (0: the scatter's radius as it is).
    level : float, default 0.95
        Coverage of the circle.

    Returns
    -------
    float
        The radius, in the vectors' unit; infinite below two vectors.

    References
    ----------
    .. [1] Circular T^2 statistic: J. D. Victor, J. Mast, Electroencephalogr. Clin.
       Neurophysiol. 78 (1991) 378-388 (from memory); variances of independent parts add.
    .. [2] S. M. Kay, "Fundamentals of Statistical Signal Processing: Estimation Theory",
       Prentice Hall, 1993, ch. 4 and 8 (the fit's covariance; from memory).
    """
    n = vector.revolutions
    if n < 2 or not math.isfinite(vector.confidence_radius):
        return math.inf
    if not extra_variance > 0:
        return vector.confidence_radius
    quantile = f_quantile(level, 2, 2 * n - 2)
    return math.sqrt(vector.confidence_radius ** 2 + quantile * 2.0 * extra_variance)


def subtended_deg(radius: float, amplitude: float) -> float:
    """Half-angle that a circle of ``radius`` around a point ``amplitude`` from 0 subtends.

    Parameters
    ----------
    radius : float
        Circle radius (e.g. a 95 % confidence radius), any unit.
    amplitude : float
        Distance of the circle's centre from the origin, same unit.

    Returns
    -------
    float
        ``asin(radius / amplitude)``, degrees; 180 when the circle covers the origin.

    References
    ----------
    .. [1] Tangent lines from a point to a circle (elementary geometry; common practice, no
       source).
    """
    if not math.isfinite(radius) or radius >= amplitude:
        return 180.0
    return math.degrees(math.asin(radius / amplitude))


def vector_stats(vectors: np.ndarray, level: float = 0.95) -> VectorStats:
    """Mean, scatter, confidence and drift of per-revolution phasors.

    Parameters
    ----------
    vectors : numpy.ndarray
        One complex phasor per revolution, any unit.
    level : float, default 0.95
        Coverage of the confidence circles.

    Returns
    -------
    VectorStats
        The mean (phasor), revolutions, RMS scatter, confidence radius (same unit) and its
        half-angle (degrees), and the difference between the second and first halves' means
        with the radius chance allows for it.

    References
    ----------
    .. [1] Circular T^2 statistic: J. D. Victor, J. Mast, "A new statistic for steady-state
       evoked potentials", Electroencephalogr. Clin. Neurophysiol. 78 (1991) 378-388 (from
       memory).
    """
    z = np.asarray(vectors, dtype=complex)
    n = int(z.size)
    if n == 0:
        return VectorStats(0j, 0, math.nan, math.inf, 180.0, 0.0, math.inf)
    mean = complex(z.mean())
    dev2 = np.abs(z - mean) ** 2
    var = float(dev2.sum() / (n - 1)) if n > 1 else math.inf
    radius = confidence_radius(var, n, level)
    half = n // 2
    drift, drift_radius = 0.0, math.inf
    if half >= 2:
        first, second = z[:half], z[n - half:]
        drift = abs(complex(second.mean() - first.mean()))
        pooled = float((np.abs(first - first.mean()) ** 2).sum()
                       + (np.abs(second - second.mean()) ** 2).sum()) / (2 * half - 2)
        drift_radius = math.sqrt(f_quantile(level, 2, 4 * half - 4) * pooled * 2.0 / half)
    return VectorStats(mean, n, math.sqrt(float(dev2.mean())), radius,
                       subtended_deg(radius, abs(mean)), drift, drift_radius)


#: the alternating part of the per-revolution 1x vectors counts as a half-order line only
#: beyond this level of the circular T^2 test: a reading without one is paired by chance
#: once in a thousand (and is then still right, only its circle a little wider)
HALF_ORDER_LEVEL = 0.999
MIN_PAIRS = 4


@dataclass(frozen=True)
class PairedVectors:
    """Per-revolution vectors, or their means over consecutive pairs when a half-order line
    was found (``paired``); ``alternating``: the mean alternating part (the line's leak into
    one revolution's 1x), 0 when not tested."""

    vectors: np.ndarray
    paired: bool
    alternating: complex = 0j


def pair_half_order(vectors: np.ndarray) -> PairedVectors:
    """Average over whole pairs of revolutions when a line at 0.5x leaks into the 1x.

    A tone at exactly half the running speed (a 2:1 belt or gear, a half-speed rub) is
    ``cos(theta/2 + phi)``: over one revolution it is no sine of the shaft angle, and its
    least-squares projection onto the 1x columns changes sign from one revolution to the
    next (``cos`` of ``theta/2 + pi`` is ``-cos``). The per-revolution 1x vectors are then
    ``z_k = mu + (-1)^k e + noise``: the mean over an even number of revolutions is unbiased,
    but the scatter (and so the 95 % circle) carries ``|e|`` and the reading may never be
    steady. Choice (issue #22): rather than a joint least-squares fit of a 0.5x column
    (which needs the parity of every revolution across gaps and fails when a belt slips a
    little, so the line is not exactly at 0.5x), the 1x is averaged over whole pairs of
    consecutive revolutions, where the leak cancels exactly for a locked line and nearly
    for one within a few percent of 0.5x; the statistics then run on the pair means.
    Pairing is chosen only when the alternating part ``d_k = (z_2k - z_2k+1)/2`` has a mean
    the circular T^2 test puts beyond chance (``HALF_ORDER_LEVEL``), so an ordinary reading
    keeps its revolution-by-revolution circle.

    Parameters
    ----------
    vectors : numpy.ndarray
        One complex 1x phasor per revolution, oldest first.

    Returns
    -------
    PairedVectors
        The newest even number of revolutions as pair means (the oldest one dropped when
        odd) when a half-order line was found, else the vectors as given.

    References
    ----------
    .. [1] Circular T^2 statistic: J. D. Victor, J. Mast, Electroencephalogr. Clin.
       Neurophysiol. 78 (1991) 378-388 (from memory).
    .. [2] Projection of ``cos(theta/2)`` on one period of ``cos theta, sin theta``: the
       integrals over [0, 2 pi) (elementary calculus; common practice, no source).
    """
    z = np.asarray(vectors, dtype=complex)
    pairs = z.size // 2
    if pairs < MIN_PAIRS:
        return PairedVectors(z, False)
    even = z[z.size - 2 * pairs:].reshape(pairs, 2)
    d = 0.5 * (even[:, 0] - even[:, 1])
    d_mean = complex(d.mean())
    var = float((np.abs(d - d_mean) ** 2).sum() / (pairs - 1))
    t2 = pairs * abs(d_mean) ** 2 / var if var > 0 else (math.inf if d_mean else 0.0)
    if t2 <= f_quantile(HALF_ORDER_LEVEL, 2, 2 * pairs - 2):
        return PairedVectors(z, False, d_mean)
    return PairedVectors(even.mean(axis=1), True, d_mean)


@dataclass(frozen=True)
class SteadinessLimits:
    """When a reading is ready: enough revolutions, steady speed, tight or settled vector.

    Defaults are common practice, no source: a 5 degree phase confidence is well inside
    what a trial-weight run can resolve. Speed, two checks: the mean speed of the second
    half of the averaged revolutions may differ from the first half's by at most
    ``max_speed_drift_pct`` (0.3 %, :data:`trueturn.constants.SPEED_MATCH_FRACTION`, the same
    ground as between runs: the 1x goes as speed^2...4, so a machine still speeding up or
    slowing down gives a reading that belongs to no one speed); and the spread of single
    revolutions (max - min) at most ``max_speed_spread_pct`` (2 %), a gross check on an
    unstable drive or tach - revolution-to-revolution scatter around a steady mean biases
    the averaged 1x only to second order (p (p - 1) / 2 times the squared relative spread,
    under 0.1 % at 2 %), so it is not a bound on the reading's accuracy. A small 1x (a rotor already
    well balanced, at the check run) may never reach 5 degrees: after
    ``settled_revolutions`` without drift the reading is ready anyway, with its confidence
    radius saying how uncertain it is (the balance layer judges it against the tolerance).
    """

    min_revolutions: int = 8
    max_speed_spread_pct: float = 2.0
    max_speed_drift_pct: float = 100.0 * SPEED_MATCH_FRACTION
    max_confidence_deg: float = 5.0
    settled_revolutions: int = 64


def steadiness(vector: VectorStats, speeds_rpm: np.ndarray,
               limits: SteadinessLimits | None = None,
               pickup: str | None = None) -> tuple[bool, tuple[Finding, ...]]:
    """Whether one pickup's reading is steady, and the findings that say why not.

    When not steady the blocking findings say why; when steady a note may still say what to
    keep in mind (a small 1x whose phase stays uncertain: ``blocking`` False).

    Parameters
    ----------
    vector : VectorStats
        The pickup's statistics (:func:`vector_stats`).
    speeds_rpm : numpy.ndarray
        The speed of each averaged revolution, rpm.
    limits : SteadinessLimits or None, default None
        The limits; None takes the defaults.
    pickup : str or None, default None
        The pickup's name for the findings.

    Returns
    -------
    steady : bool
        True when no blocking finding applies.
    findings : tuple of Finding
        Blocking findings first, then notes.

    References
    ----------
    .. [1] The limits (8 revolutions, 2 % spread, 0.3 % drift, 5 deg): common practice, no
       source.
    .. [2] 1x ~ speed^2...4 (from memory: W. T. Thomson, "Theory of Vibration with
       Applications"), the ground for the 0.3 % drift limit.
    """
    lim = limits or SteadinessLimits()
    blocking: list[Finding] = []
    notes: list[Finding] = []
    if vector.revolutions < lim.min_revolutions:
        blocking.append(Finding(Code.FEW_REVOLUTIONS, pickup, vector.revolutions,
                                {"minimum": lim.min_revolutions}, blocking=True))
    speeds = np.asarray(speeds_rpm, dtype=float)
    if speeds.size:
        spread = 100.0 * float(speeds.max() - speeds.min()) / float(speeds.mean())
        if spread > lim.max_speed_spread_pct:
            blocking.append(Finding(Code.SPEED_VARIES, pickup, int(speeds.size),
                                    {"spread_pct": round(spread, 3),
                                     "limit_pct": lim.max_speed_spread_pct}, blocking=True))
    half = speeds.size // 2
    if half >= 2:
        first, second = float(speeds[:half].mean()), float(speeds[speeds.size - half:].mean())
        drift = 100.0 * (second - first) / first
        if abs(drift) > lim.max_speed_drift_pct:
            blocking.append(Finding(Code.SPEED_DRIFTING, pickup, int(speeds.size),
                                    {"drift_pct": round(drift, 3),
                                     "limit_pct": lim.max_speed_drift_pct}, blocking=True))
    if vector.drifting:
        blocking.append(Finding(Code.VECTOR_DRIFTING, pickup, vector.revolutions,
                                {"drift": vector.drift, "drift_radius": vector.drift_radius},
                                blocking=True))
    if vector.confidence_deg > lim.max_confidence_deg:
        code = Code.NOT_ABOVE_SCATTER if vector.confidence_deg >= 180.0 else \
            Code.PHASE_UNCERTAIN
        details = {"confidence_deg": round(vector.confidence_deg, 3),
                   "limit_deg": lim.max_confidence_deg}
        settled = vector.revolutions >= lim.settled_revolutions and not blocking
        finding = Finding(code, pickup, vector.revolutions, details, blocking=not settled)
        (notes if settled else blocking).append(finding)
    return not blocking, tuple(blocking + notes)
