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
