"""The supports' stiffness and damping fitted to a whole coast-down (or run-up) sweep.

A coast-down records the as-found 1x at every speed from the running speed down. With a
physical model of the machine, that curve says more than where its peaks are: how the
1x rises with speed below a resonance tells how stiff the supports are even when no
resonance lies below the running speed, and the phase's turn through a resonance ties
the model's phase to the pickups'. Here the model is the rigid rotor on two flexible,
damped supports, in both directions across the shaft, with the gyroscopic coupling of its
tilt (the classic four-degree-of-freedom rigid rotor), forced by the unknown as-found
unbalance in the correction planes. Its parameters (the supports' stiffness along and
across the pickups, a damping ratio, the transverse and polar inertias) are fitted to
every point of the sweep by weighted nonlinear least squares; the as-found unbalance,
which enters linearly, is eliminated for each trial of the parameters (variable
projection). The fitted parameters' covariance (the Gauss-Newton approximation, scaled up
by the fit's own misfit) then says how well the influence coefficients at the running
speed are known, so a sweep that cannot tell the supports' stiffness (a very stiff mount:
its 1x rises as speed^4 with no curvature) gives a wide, honest prediction, not a wrong
narrow one.

Assumptions, stated: the supports' principal directions lie along and across the first
pickup's sensing direction (pickups on a horizontal machine's bearing housings point
vertically or horizontally; our assumption), both bearings share one damping ratio, and
the rotor is rigid at these speeds.

References
----------
.. [1] Lalanne, M. and Ferraris, G., *Rotordynamics Prediction in Engineering*, 2nd ed.,
   Wiley, 1998, ch. 2-4 (rigid rotor on anisotropic bearings, gyroscopic coupling,
   unbalance response; from memory).
.. [2] Vance, J. M., *Rotordynamics of Turbomachinery*, Wiley, 1988, ch. 2 (from memory).
.. [3] Golub, G. and Pereyra, V., "The differentiation of pseudo-inverses and nonlinear
   least squares problems whose variables separate", SIAM J. Numer. Anal. 10 (1973)
   (variable projection; from memory).
.. [4] Press, W. H. et al., *Numerical Recipes*, 3rd ed., 2007, §15.4-15.5 (the
   covariance of a least-squares fit, scaled by chi^2 per degree of freedom when the
   errors are not known; from memory).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import scipy.linalg
import scipy.optimize

#: parameters, in order: ln k (bearing 0, along), ln k (bearing 0, across), ln k (bearing 1,
#: along), ln k (bearing 1, across), ln zeta, ln I_t, ln I_p
N_PARAMETERS = 7
#: the across-direction stiffness about the along one: log-normal, 1 sigma 0.5 (x/÷ 2.7
#: at 95 %; supports are seldom more different than that across; our choice, no source)
ACROSS_STIFFNESS_LOG_SIGMA = 0.5
#: the damping ratio's prior: log-normal about 3 % with 1 sigma of a factor e (mounts of
#: rubber to steel: about 1-10 % of critical; from memory, no single source)
DAMPING_PRIOR = 0.03
DAMPING_PRIOR_LOG_SIGMA = 1.0
#: each sweep point's relative 1 sigma floor: the DSP's circle says the noise; a mount's
#: mild nonlinearity and the sweep's speed changing under it add this much (our choice)
POINT_REL_FLOOR = 0.01
#: a point is used when its 1x stands this far above its own 1 sigma (our choice)
MIN_POINT_SNR = 3.0
#: at least this many usable points per pickup, over at least this span of speed (a
#: stiff mount's 1x falls as speed^4: its curve is clear of the noise only near the top)
MIN_CURVE_POINTS = 12
MIN_CURVE_SPAN = 1.25
#: the supports' natural speeds the fit starts from, as fractions of the top speed (a
#: few starts, so it does not stop in a local minimum; our choice)
START_FRACTIONS = (0.25, 0.5, 0.8, 1.3, 2.0, 3.5)
#: the fit's stopping tolerances (scipy.optimize.least_squares ``xtol``, ``ftol``): the
#: parameters are logarithms near 10-20 in size, so a step under 1e-4 of their norm moves
#: each by well under 1 %, far inside any prediction's band; scipy's 1e-8 defaults spent
#: four to six times the evaluations for the same predictions (measured 2026-12-03 on 8
#: random rotors from tests/test_balance_support_fit.py: same trust, residual bounds
#: equal to 3 digits)
FIT_XTOL = 1e-4
FIT_FTOL = 1e-5
#: a standstill mode's relative 1 sigma floor in the fit: a tap's frequency is measured to
#: a fraction of a percent (dsp.bump.FREQUENCY_REL_FLOOR), but the model is not the
#: machine (a housing that is not quite rigid, mounts whose stiffness changes a little
#: between a tap's small motion and the running 1x, the lever-rule masses), so the fit is
#: held to the tap no closer than this (our choice, no source)
STANDSTILL_REL_FLOOR = 0.03
#: a pickup within this angle (degrees) of the first pickup's direction, or of across
#: it, sees only that direction's modes; between, it sees both (our choice)
DIRECTION_TOLERANCE_DEG = 15.0
#: bounds of the natural speed k/m may imply, as fractions of the top speed
LOWEST_FRACTION, HIGHEST_FRACTION = 0.03, 30.0
#: a local minimum whose chi^2 exceeds the best's by at most this much (times the misfit
#: per degree of freedom when above 1) is a rival the sweep cannot rule out: for seven
#: parameters a chi^2 difference of 20 has a tail probability of about 0.5 % (chi-squared
#: table), and the model is not the machine, so a better chi^2 alone does not decide
#: (our choice)
RIVAL_CHI2 = 20.0
#: minima within this of each other in every log parameter are the same one
RIVAL_SAME_LOG = 0.05


@dataclass(frozen=True)
class SweepCurve:
    """The as-found 1x a coast-down or run-up measured, at every point, per pickup.

    ``speeds_rpm`` (S,), ``phasors_m_s2`` (S, pickups; acceleration, m/s^2, phase as lag
    after the tach, :mod:`trueturn.angles`) and ``sigma_m_s2`` (S, pickups; each real
    part's 1 sigma, the DSP's 95 % circle radius / 2.448; inf or nan: no value)."""

    speeds_rpm: np.ndarray
    phasors_m_s2: np.ndarray
    sigma_m_s2: np.ndarray


@dataclass(frozen=True)
class StandstillMode:
    """A natural frequency a tap (bump) test found at standstill on one pickup: frequency
    (Hz) and its standard error (Hz), as :class:`trueturn.dsp.bump.BumpMode` gives them."""

    frequency_hz: float
    frequency_se_hz: float


@dataclass(frozen=True)
class SupportGeometry:
    """What the fit knows of the rotor: mass (kg), the lever-rule masses on the two
    bearings (kg), the bearings' and planes' positions from the centre of mass (m), the
    planes' radii (mm), each pickup's bearing position from the centre of mass (m) and its
    sensing direction, degrees with rotation from the tach."""

    mass_kg: float
    bearing_masses_kg: np.ndarray
    bearings_m: np.ndarray
    planes_m: np.ndarray
    radii_mm: np.ndarray
    pickups_m: np.ndarray
    pickup_angles_deg: np.ndarray


@dataclass(frozen=True)
class InertiaPrior:
    """The transverse and polar inertias the profile gives or the model guesses (kg m^2)
    with their log-normal 1 sigma."""

    transverse_kg_m2: float
    transverse_log_sigma: float
    polar_kg_m2: float
    polar_log_sigma: float


@dataclass(frozen=True)
class SupportModelFit:
    """A fitted support model: ``theta`` (:data:`N_PARAMETERS`), its covariance (None:
    the sweep could not tell them apart, singular), the as-found unbalance the fit
    implies (grams at each plane's radius, phasors), ``misfit`` (chi^2 per degree of
    freedom of the sweep's points), the number of points used, the parameters' bounds and
    the fitted curve's RMS relative deviation from the points."""

    theta: np.ndarray
    covariance: np.ndarray | None
    unbalance_g: np.ndarray
    misfit: float
    points: int
    lower: np.ndarray
    upper: np.ndarray
    #: the fitted curve's RMS relative deviation from the points (noise included): how far
    #: the model is from the machine along its own sweep
    relative_misfit: float = 0.0
    #: other parameter sets a start ended in whose chi^2 lies within :data:`RIVAL_CHI2` of
    #: the best (scaled by the misfit, like the covariance): the curve fits them nearly as
    #: well, so a prediction must hold them too
    rivals: tuple[np.ndarray, ...] = ()
    #: the lowest and highest speed (rpm) with a point clear of its noise on some pickup
    clear_span_rpm: tuple[float, float] = (0.0, math.inf)


def support_model_coefficients(theta: np.ndarray, geometry: SupportGeometry,
                               omegas_rad_s: np.ndarray) -> np.ndarray:
    """1x acceleration per gram of the four-degree-of-freedom rigid rotor on anisotropic
    supports, at each speed, pickup and plane.

    DOFs ``[x, a, y, b]`` (translation and tilt along, then across the first pickup's
    direction): ``(K + i w (C + w G) - w^2 M) q = F``; ``M = diag(m, I_t, m, I_t)``; the
    gyroscopic coupling ``G[1, 3] = I_p``, ``G[3, 1] = -I_p`` (the forward whirl is
    stiffened); each support ``k [[1, d], [d, d^2]]`` per direction, damped by
    ``c = 2 zeta sqrt(k m_b)``; a gram at radius ``r`` in a plane at ``d`` forces
    ``r w^2 [1, d, -i, -i d]`` in the tach's frame; a pickup reads ``[cos, cos d, sin,
    sin d] . q`` in its own direction, times ``-w^2`` (acceleration), conjugated into the
    lag convention.

    Parameters
    ----------
    theta : ndarray
        The :data:`N_PARAMETERS` parameters (logarithms).
    geometry : SupportGeometry
    omegas_rad_s : ndarray
        Speeds, rad/s.

    Returns
    -------
    ndarray
        (speeds, pickups, planes) complex, m/s^2 per gram at the plane's radius, angle 0.

    References
    ----------
    .. [1] Lalanne and Ferraris, *Rotordynamics Prediction in Engineering*, 1998, ch. 2-4
       (from memory); checked against the simulator's own model in
       tests/test_balance_support_fit.py.
    """
    k = np.exp(np.asarray(theta[:4], dtype=float)).reshape(2, 2)
    zeta = math.exp(float(theta[4]))
    transverse, polar = math.exp(float(theta[5])), math.exp(float(theta[6]))
    stiff = np.zeros((4, 4))
    damp = np.zeros((4, 4))
    for b in range(2):
        d = float(geometry.bearings_m[b])
        shape = np.array([[1.0, d], [d, d * d]])
        c = 2.0 * zeta * np.sqrt(k[b] * geometry.bearing_masses_kg[b])
        stiff[0:2, 0:2] += k[b, 0] * shape
        stiff[2:4, 2:4] += k[b, 1] * shape
        damp[0:2, 0:2] += c[0] * shape
        damp[2:4, 2:4] += c[1] * shape
    gyro = np.zeros((4, 4))
    gyro[1, 3], gyro[3, 1] = polar, -polar
    mass = np.diag([geometry.mass_kg, transverse, geometry.mass_kg, transverse])
    w = np.asarray(omegas_rad_s, dtype=float)[:, None, None]
    dyn = stiff[None] + 1j * w * (damp[None] + w * gyro[None]) - w**2 * mass[None]
    per_gram = 1e-3 * geometry.radii_mm * 1e-3
    # the frame's x axis along the first pickup: the tach sits -angle_0 from it
    tach = -math.radians(float(geometry.pickup_angles_deg[0]))
    fx = per_gram * complex(math.cos(tach), math.sin(tach))
    forcing = np.vstack([fx, fx * geometry.planes_m, -1j * fx, -1j * fx * geometry.planes_m])
    disp = np.linalg.solve(dyn, (w**2) * forcing[None])
    direction = np.radians(geometry.pickup_angles_deg) + tach
    c, s = np.cos(direction), np.sin(direction)
    out = np.stack([c, c * geometry.pickups_m, s, s * geometry.pickups_m], axis=1)
    return np.conj(-(w**2) * np.einsum("pq,sqj->spj", out, disp))


def standstill_frequencies_hz(theta: np.ndarray, geometry: SupportGeometry
                               ) -> tuple[np.ndarray, np.ndarray]:
    """The support model's undamped natural frequencies at standstill, along and across the
    first pickup's direction.

    With the shaft at rest there is no gyroscopic coupling, so each direction's
    translation and tilt are the generalised eigenproblem ``K q = w^2 M q`` with
    ``M = diag(m, I_t)`` (the full transverse inertia, not the 1x whirl's ``I_t - I_p``)
    and ``K`` the two supports' ``k [[1, d], [d, d^2]]`` in that direction.

    Parameters
    ----------
    theta : ndarray
        The :data:`N_PARAMETERS` parameters (logarithms).
    geometry : SupportGeometry

    Returns
    -------
    tuple of ndarray
        Along, across: each direction's two frequencies (Hz), lowest first.

    References
    ----------
    .. [1] The undamped free vibration of a multi-degree-of-freedom system, the
       eigenvalue problem of ``K`` and ``M`` (any vibration text, e.g. Rao, *Mechanical
       Vibrations*; from memory).
    """
    k = np.exp(np.asarray(theta[:4], dtype=float)).reshape(2, 2)
    mass = np.diag([geometry.mass_kg, math.exp(float(theta[5]))])
    out = []
    for direction in (0, 1):
        stiff = np.zeros((2, 2))
        for b in range(2):
            d = float(geometry.bearings_m[b])
            stiff += k[b, direction] * np.array([[1.0, d], [d, d * d]])
        w2 = scipy.linalg.eigh(stiff, mass, eigvals_only=True)
        out.append(np.sqrt(np.clip(w2, 0.0, None)) / (2.0 * math.pi))
    return out[0], out[1]


def sensed_directions(geometry: SupportGeometry, pickup: int) -> tuple[int, ...]:
    """Which directions' modes a pickup sees: along the first pickup's (0), across it (1),
    or both when it points between (:data:`DIRECTION_TOLERANCE_DEG`).

    Parameters
    ----------
    geometry : SupportGeometry
    pickup : int
        The pickup's index in ``geometry.pickup_angles_deg``.

    Returns
    -------
    tuple of int
        ``(0,)``, ``(1,)`` or ``(0, 1)``.

    References
    ----------
    .. [1] A pickup reads the projection of the motion on its sensing direction
       (common practice, no source); the tolerance is our choice.
    """
    turn = math.radians(float(geometry.pickup_angles_deg[pickup])
                        - float(geometry.pickup_angles_deg[0]))
    near = math.cos(math.radians(DIRECTION_TOLERANCE_DEG))
    if abs(math.cos(turn)) >= near:
        return (0,)
    if abs(math.sin(turn)) >= near:
        return (1,)
    return (0, 1)


def _standstill_residuals(theta: np.ndarray, geometry: SupportGeometry,
                          modes: Sequence[Sequence[StandstillMode]]) -> list[float]:
    """Per measured mode: the log distance to the nearest of the model's standstill
    frequencies its pickup sees, in units of its relative standard error (at least
    :data:`STANDSTILL_REL_FLOOR`)."""
    if not any(modes):
        return []   # no tap test: nothing to compare (and no eigenvalues to compute)
    along, across = standstill_frequencies_hz(theta, geometry)
    blocks = (along, across)
    out = []
    for pickup, found in enumerate(modes):
        model = np.concatenate([blocks[d] for d in sensed_directions(geometry, pickup)])
        model = np.log(np.clip(model, 1e-9, None))
        for mode in found:
            gap = model - math.log(mode.frequency_hz)
            rel = max(mode.frequency_se_hz / mode.frequency_hz, STANDSTILL_REL_FLOOR)
            out.append(float(gap[np.argmin(np.abs(gap))]) / rel)
    return out


def _usable(curve: SweepCurve) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """The curve's points where a pickup's 1x is clear of its noise, and their sigmas
    (with :data:`POINT_REL_FLOOR`; a value not clear gets an infinite sigma, weight 0);
    None when a pickup has too few such points or they span too little speed."""
    speeds = np.asarray(curve.speeds_rpm, dtype=float)
    values = np.asarray(curve.phasors_m_s2, dtype=complex)
    sigma = np.asarray(curve.sigma_m_s2, dtype=float)
    if values.ndim != 2 or values.shape[0] != speeds.size or sigma.shape != values.shape:
        return None
    finite = np.isfinite(values) & np.isfinite(sigma) & (sigma > 0)
    values = np.where(finite, values, 0.0)
    sigma = np.hypot(np.where(finite, sigma, 1.0), POINT_REL_FLOOR * np.abs(values))
    # a value lost in its noise says little and its phase is wild: left out (weight 0)
    clear = finite & (np.abs(values) >= MIN_POINT_SNR * sigma)
    sigma = np.where(clear, sigma, np.inf)
    good = np.any(clear, axis=1) & np.isfinite(speeds) & (speeds > 0)
    if np.any(np.sum(clear[good], axis=0) < MIN_CURVE_POINTS):
        return None
    span = speeds[good]
    if span.max() < MIN_CURVE_SPAN * span.min():
        return None
    return speeds[good], values[good], sigma[good]


def fit_support_model(geometry: SupportGeometry, curve: SweepCurve, inertia: InertiaPrior,
                      start_natural_rpm: tuple[float, ...] = (),
                      standstill: Sequence[Sequence[StandstillMode]] = ()
                      ) -> SupportModelFit | None:
    """Fit the supports' stiffness, damping and the rotor's inertias to a sweep.

    Parameters
    ----------
    geometry : SupportGeometry
    curve : SweepCurve
        The as-found sweep; a pickup's value within :data:`MIN_POINT_SNR` sigma of zero
        is left out.
    inertia : InertiaPrior
        The inertias' prior (log-normal); the damping's is :data:`DAMPING_PRIOR`, the
        across stiffness's about the along one :data:`ACROSS_STIFFNESS_LOG_SIGMA`.
    start_natural_rpm : tuple of float, default ()
        Resonances the sweep's peak finding saw: extra starting points.
    standstill : sequence of sequences of StandstillMode, default ()
        Per pickup (the geometry's order; empty: none), the natural frequencies a tap
        test found at standstill: each is a residual, the log distance to the nearest
        standstill frequency of the model that pickup's direction sees
        (:func:`standstill_frequencies_hz`, :func:`sensed_directions`) over its relative
        standard error, floored at :data:`STANDSTILL_REL_FLOOR`; and a starting point.
        A stiff mount's coast-down cannot tell its stiffness; a tap can.

    Returns
    -------
    SupportModelFit or None
        None when the sweep has too few usable points (:data:`MIN_CURVE_POINTS`) or too
        narrow a speed span (:data:`MIN_CURVE_SPAN`).

    Notes
    -----
    Weighted least squares over the real and imaginary parts of every point, the
    unbalance eliminated by linear least squares for each parameter set (variable
    projection), the priors as extra residuals (maximum a posteriori). Several starts
    (:data:`START_FRACTIONS`); the lowest cost wins. The covariance is
    ``(J^T J)^-1``, scaled by the sweep's chi^2 per degree of freedom when that exceeds 1
    (the model does not explain the points to their noise, so its parameters are less
    certain than the noise alone says).

    References
    ----------
    .. [1] Golub and Pereyra, SIAM J. Numer. Anal. 10 (1973) (variable projection; from
       memory).
    .. [2] Press et al., *Numerical Recipes*, 3rd ed., 2007, §15.5 (from memory).
    """
    used = _usable(curve)
    if used is None:
        return None
    speeds, values, sigma = used
    # a mode with no finite positive frequency or a bad error says nothing: left out
    standstill = tuple(tuple(mode for mode in found
                             if 0 < mode.frequency_hz < math.inf
                             and 0 <= mode.frequency_se_hz < math.inf) for found in standstill)
    omegas = speeds * math.pi / 30.0
    n_planes = geometry.radii_mm.size
    top = float(omegas.max())
    m = geometry.mass_kg
    log_it, log_ip = math.log(inertia.transverse_kg_m2), math.log(inertia.polar_kg_m2)
    lower = np.array([math.log(m * (top * LOWEST_FRACTION) ** 2 / 2)] * 4
                     + [math.log(0.002), log_it - 4 * inertia.transverse_log_sigma,
                        log_ip - 4 * inertia.polar_log_sigma])
    upper = np.array([math.log(m * (top * HIGHEST_FRACTION) ** 2 / 2)] * 4
                     + [math.log(0.5), log_it + 4 * inertia.transverse_log_sigma,
                        log_ip + 4 * inertia.polar_log_sigma])
    weights = 1.0 / sigma

    def unbalance(theta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        coefficients = support_model_coefficients(theta, geometry, omegas)
        design = (coefficients * weights[..., None]).reshape(-1, n_planes)
        u = np.linalg.lstsq(design, (values * weights).reshape(-1), rcond=None)[0]
        return coefficients, u

    def residuals(theta: np.ndarray) -> np.ndarray:
        coefficients, u = unbalance(theta)
        e = ((coefficients @ u - values) * weights).reshape(-1)
        prior = [(theta[1] - theta[0]) / ACROSS_STIFFNESS_LOG_SIGMA,
                 (theta[3] - theta[2]) / ACROSS_STIFFNESS_LOG_SIGMA,
                 (theta[4] - math.log(DAMPING_PRIOR)) / DAMPING_PRIOR_LOG_SIGMA,
                 (theta[5] - log_it) / inertia.transverse_log_sigma,
                 (theta[6] - log_ip) / inertia.polar_log_sigma]
        return np.concatenate([e.real, e.imag, prior,
                               _standstill_residuals(theta, geometry, standstill)])

    starts = [top * f for f in START_FRACTIONS] + [
        r * math.pi / 30.0 for r in start_natural_rpm if r > 0] + [
        2.0 * math.pi * mode.frequency_hz for found in standstill for mode in found
        if mode.frequency_hz > 0]
    best = None
    ends: list[tuple[float, np.ndarray]] = []
    with np.errstate(all="ignore"):
        for w_n in starts:
            log_k = math.log(m * w_n**2 / 2)
            theta0 = np.array([log_k] * 4 + [math.log(DAMPING_PRIOR), log_it, log_ip])
            theta0 = np.clip(theta0, lower + 1e-6, upper - 1e-6)
            try:
                result = scipy.optimize.least_squares(residuals, theta0, bounds=(lower, upper),
                                                      method="trf", xtol=FIT_XTOL,
                                                      ftol=FIT_FTOL)
            except (np.linalg.LinAlgError, ValueError):
                continue
            if np.isfinite(result.cost):
                ends.append((float(result.cost), np.asarray(result.x, dtype=float)))
                if best is None or result.cost < best.cost:
                    best = result
    if best is None:
        return None
    theta = best.x
    coefficients, u = unbalance(theta)
    clear = np.isfinite(sigma)
    relative = float(np.sqrt(np.mean(np.abs(coefficients @ u - values)[clear] ** 2
                                     / np.abs(values[clear]) ** 2)))
    data = residuals(theta)[: 2 * values.size]
    dof = max(2 * int(clear.sum()) - N_PARAMETERS - 2 * n_planes, 1)
    misfit = float(data @ data) / dof
    jac = np.asarray(best.jac, dtype=float)
    covariance: np.ndarray | None
    try:
        covariance = np.linalg.inv(jac.T @ jac) * max(misfit, 1.0)
        if not np.all(np.isfinite(covariance)) or np.any(np.diag(covariance) < 0):
            covariance = None
    except np.linalg.LinAlgError:
        covariance = None
    # other minima the starts ended in, nearly as good: the sweep cannot rule them out
    reach = RIVAL_CHI2 / 2.0 * max(misfit, 1.0)
    rivals = tuple(x for c, x in ends if c - float(best.cost) <= reach
                   and float(np.max(np.abs(x - theta))) > RIVAL_SAME_LOG)
    heard = speeds[np.any(clear, axis=1)]
    return SupportModelFit(theta, covariance, u, misfit, int(speeds.size), lower, upper,
                           relative, rivals, (float(heard.min()), float(heard.max())))


def fit_draws(fit: SupportModelFit, draws: int, rng: np.random.Generator) -> np.ndarray:
    """Parameter sets drawn from the fit's Gaussian (Laplace) approximation, kept inside
    the fit's bounds.

    Parameters
    ----------
    fit : SupportModelFit
        A fit with a covariance.
    draws : int
    rng : numpy.random.Generator

    Returns
    -------
    ndarray
        (draws, :data:`N_PARAMETERS`).

    References
    ----------
    .. [1] The Laplace approximation of a posterior about its mode (any Bayesian data
       analysis text; from memory).
    """
    assert fit.covariance is not None
    cov = 0.5 * (fit.covariance + fit.covariance.T)
    vals, vecs = np.linalg.eigh(cov)
    root = vecs * np.sqrt(np.clip(vals, 0.0, None))
    out = fit.theta[None] + rng.normal(size=(draws, N_PARAMETERS)) @ root.T
    return np.clip(out, fit.lower, fit.upper)
