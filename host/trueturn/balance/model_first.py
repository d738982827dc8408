"""Influence coefficients predicted from the machine profile, refined by every run.

Two questions are answered here, both pure math:

1. **What will a gram in a plane do?** (:func:`predict_influence`) The rotor is taken as
   rigid on two flexible supports and replaced by two masses at the bearings that keep its
   mass and centre of mass (the dynamically equivalent two-mass rotor, exact when the
   transverse inertia is ``M d_A d_B``). Each bearing is then a single-degree-of-freedom
   system forced by its lever-rule share of the rotating unbalance force
   ``m r omega^2``; its acceleration per newton is
   ``(1/m_b) r^2 / (r^2 - 1 - 2 i zeta r)``, ``r = omega / omega_n`` (rotating-unbalance
   forced response; from memory: Den Hartog, *Mechanical Vibrations*, 4th ed., 1956,
   §3.3; the rigid rotor on flexible supports as in Vance, *Rotordynamics of
   Turbomachinery*, 1988, ch. 2). The response lags the force by the support's lag
   (about 180 deg for acceleration well below the resonance, about 0 well above) and the
   force passes the pickup ``beta`` degrees after the mark passes the tach.

   What can honestly be predicted: the **magnitude** from the rotor's mass alone (above the
   resonance the supports stop mattering: ``a = F / m_b``); the **phase** only when the
   support's resonance and damping are known from a coast-down or run-up sweep *and* the
   pickup's angle from the tach was measured. Without both, or close to a resonance (where
   the phase turns fastest), the prediction is flagged with the reasons it cannot be
   trusted and the procedure falls back to trial runs. The uncertainty is a Monte Carlo
   over the inputs' own uncertainties plus a model error for the two-mass simplification.

2. **What do the runs say?** (:class:`CoefficientEstimate`) Recursive least squares over
   every run, each reading weighted by its own 95 % circle, starting from the prediction as
   the prior (or from nothing, when the prediction is not trusted): the correction run
   itself refines the coefficients, so it also serves as the trial (Ljung, *System
   Identification: Theory for the User*, 2nd ed., 1999, §11.2, RLS as the Kalman filter of
   a constant parameter vector; from memory). The influence-coefficient model itself:
   Thearle, "Dynamic balancing of rotating machinery in the field", Trans. ASME 56 (1934);
   Goodman, "A least-squares method for computing balance corrections", J. Eng. Ind. 86
   (1964).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from enum import Enum

import numpy as np
import scipy.linalg

from trueturn.balance.iso21940 import angular_speed_rad_s
from trueturn.balance.support_fit import (
    STANDSTILL_REL_FLOOR,
    InertiaPrior,
    StandstillMode,
    SupportGeometry,
    SupportModelFit,
    SweepCurve,
    fit_draws,
    fit_support_model,
    sensed_directions,
    standstill_frequencies_hz,
    support_model_coefficients,
)

#: 95 % circle of a circular complex Gaussian: radius = sqrt(-2 ln 0.05) sigma (2.448 sigma)
CIRCLE95 = math.sqrt(-2.0 * math.log(0.05))
#: relative model error of the two-mass simplification, 1 sigma, per coefficient: the
#: real transverse inertia differs from ``M d_A d_B``, supports are not isotropic, the
#: lever shares couple the bearings. Our choice, calibrated on random rigid rotors
#: (tests/test_balance_model_first.py checks the coverage against the full 4-DOF model).
MODEL_REL_SIGMA = 0.12
#: 1 sigma of a pickup angle measured by eye with a protractor, degrees (our choice)
PICKUP_ANGLE_SIGMA_DEG = 4.0
#: 1 sigma of the damping ratio a sweep gives, as a log factor (about x/÷ 1.6 at 95 %)
DAMPING_LOG_SIGMA = 0.25
#: running within this fraction of a resonance speed is "near" (a separation margin of
#: about 15 %: common practice for critical speeds, from memory; no single source)
NEAR_RESONANCE_FRACTION = 0.15
#: the model's first correction is offered only when, in 95 % of its draws, it leaves at
#: most this share of the as-found 1x. Our choice, measured by bench/bench_balance.py: the
#: correction run is also the trial (every run refines the coefficients), so an uncertain
#: correction costs no run over a trial and saves one whenever it lands; it is held within
#: what a trial sized to be seen may do (balance.trial_mass.TARGET_CHANGE: aimed at a 75 %
#: change, which leaves 175 % of the 1x when the trial's angle happens to add to it)
MAX_RESIDUAL_FRACTION_95 = 1.5
#: ... and only when, in 95 % of its draws, it changes the as-found 1x by at least this
#: share: the check run must also measure the coefficients, as a trial would
#: (trueturn.balance.influence.MIN_TRIAL_CHANGE, 25 %: common practice, no source). A
#: model that may overstate the machine's response many times over offers a correction
#: too small to be seen (our rule)
MIN_EFFECT_FRACTION_05 = 0.25
#: a run whose 1x is this improbable under the model's own prediction (its normalised
#: innovation's tail probability; a circular complex Gaussian's |e|^2 / var is
#: exponential) refutes the prior: the model is dropped and the runs speak alone (our
#: choice: one in a thousand)
REFUTE_TAIL_PROBABILITY = 1e-3
#: readings taken runs apart differ by more than their scatter (speed wander of +/-0.5 %
#: moves the 1x by ~1-2 %, mounts are mildly nonlinear: the as-found run and a check run
#: drive a soft mount at very different amplitudes): a floor on each reading's relative 1
#: sigma (our choice, measured by bench/bench_balance.py [model first], 200 rotors each,
#: seeds 2026 (one plane) and 2027 (two planes), 2026-12-04, with the runs weighed by their
#: complex variance and the placement's own error: the check verdict's 95 % bound missed the
#: true residual in 13 of 172 one-plane and 17 of 392 two-plane plane-checks with 0.02, in
#: 11 of 172 and 14 of 392 with 0.03 (mostly soft mounts, driven at very different
#: amplitudes as found and at the check); medians and said-within-wrongly (0) the same)
READING_REL_FLOOR = 0.03
#: a mass as placed differs from the mass asked for: weighed on a kitchen scale to about 2 %
#: of a few grams, set at its angle within about 2 degrees of a mark at the radius
#: (common practice, from memory; the bench draws the same errors, bench/bench_balance.py
#: MASS_ERR, ANGLE_ERR_DEG). A run's reading then differs from what the masses asked for
#: would give by the masses' own effect times that error: with the correction run serving
#: as the trial, a correction placed 2 % heavy makes the coefficient 2 % large and the
#: residual 2 % small, which no reading's circle shows. 1 sigma, relative, and degrees
PLACED_MASS_REL_SIGMA = 0.02
PLACED_ANGLE_SIGMA_DEG = 2.0
#: relative model error of the support model fitted to a whole sweep
#: (:mod:`trueturn.balance.support_fit`), 1 sigma per coefficient: what the fit's own
#: covariance does not hold (a mount's nonlinearity, supports not along the pickups).
#: Our choice, calibrated on random rigid rotors of the simulator's four-degree-of-freedom
#: model with nonlinear mounts (tests/test_balance_support_fit.py checks the coverage)
FIT_MODEL_REL_SIGMA = 0.05
#: with a fitted support model, running within this fraction of one of its critical
#: speeds is "near" and refused outright: the fit knows the mode from the curve and its
#: draws carry the run-to-run speed wander and the mode's own uncertainty, so the
#: residual bound (:data:`MAX_RESIDUAL_FRACTION_95`) already holds how fast the phase
#: turns there; on the mode itself the 1x also moves with how hard a nonlinear mount is
#: driven, which no draw holds (our choice: four times :data:`SPEED_WANDER_FRACTION`;
#: the person is warned of a resonance within 15 % by the coast-down itself,
#: dsp.coast)
FIT_NEAR_RESONANCE_FRACTION = 0.02
#: the run-to-run speed wander a first correction must survive (an induction motor's slip
#: with load and supply: about +/-0.5 %; from memory, no single source): each draw of a
#: fitted prediction is taken at a speed within it
SPEED_WANDER_FRACTION = 0.005
#: 1 sigma (log) of the mass on the mounts when the profile gives it: a weighing on a
#: household scale, and what else moves with the mounts (cables, a guard, the bench top)
#: (our choice)
MOUNTED_MASS_LOG_SIGMA = 0.1
#: without it, the mounts may carry anything from the rotor alone (a rotor in bearings on a
#: heavy base) to this many times its mass (a motor's housing, a fan's frame, a grinder's
#: body; our choice, no source): drawn log-uniform, the prediction's magnitude that much
#: in doubt
MOUNTED_MASS_MAX_FACTOR = 4.0
#: a fitted standstill frequency within this many of a tap's relative errors (floored at
#: support_fit.STANDSTILL_REL_FLOOR) of a mode the tap found is that mode (about 3 sigma:
#: our choice)
TAP_MATCH_SIGMA = 3.0


class Distrust(str, Enum):
    """Why a predicted coefficient set cannot carry a first correction (then: trials)."""

    NO_SWEEP = "no-sweep"                # the support's resonance/damping is not known
    STIFFNESS_UNKNOWN = "stiffness-unknown"  # the sweep found no resonance below the speed
    NO_PICKUP_ANGLE = "no-pickup-angle"  # the pickup's angle from the tach is not known
    NO_BEARINGS = "no-bearings"          # bearing and plane positions are not all known
    NEAR_RESONANCE = "near-resonance"    # the speed is close to a support resonance
    SWEEP_MISFIT = "sweep-misfit"        # the sweep's resonance fit does not fit its data
    TOO_UNCERTAIN = "too-uncertain"      # the correction might raise the 1x more than a trial
    UNSEEN_EFFECT = "unseen-effect"      # the correction might change the 1x too little to see
    REFUTED = "refuted"                  # a run's 1x fell far outside the model's prediction
    REFUTED_BY_ALARM = "refuted-by-alarm"  # a check run of its masses tripped the runaway alarm
    UNCALIBRATED = "uncalibrated"        # a pickup reads volts: no unit to predict in
    NO_MOUNTED_MASS = "no-mounted-mass"  # what the mounts carry is not known: no magnitude
    CLIPPED = "clipped"                  # an as-found reading clipped: its 1x reads low
    UNSEEN_RESONANCE = "unseen-resonance"  # the fit puts a resonance the sweep did not show


#: each :class:`Distrust` reason worded for a person (the app's line and the report)
DISTRUST_WORDS: dict[str, str] = {
    Distrust.NO_SWEEP.value: "no coast-down was recorded",
    Distrust.STIFFNESS_UNKNOWN.value: "the coast-down found no resonance of the supports",
    Distrust.NO_PICKUP_ANGLE.value: "a pickup's angle from the tach is not in the machine "
                                    "profile",
    Distrust.NO_BEARINGS.value: "the bearings' or planes' positions are not in the machine "
                                "profile",
    Distrust.NEAR_RESONANCE.value: "the balancing speed is near a resonance of the supports",
    Distrust.SWEEP_MISFIT.value: "the coast-down's resonance does not fit one mode",
    Distrust.TOO_UNCERTAIN.value: "its correction might raise the 1x more than a trial run "
                                  "would",
    Distrust.UNSEEN_EFFECT.value: "its correction might change the 1x too little to measure "
                                  "what a gram does (the model may overstate the machine's "
                                  "response)",
    Distrust.REFUTED.value: "the check run's 1x fell far outside its prediction, so its "
                            "masses come off",
    Distrust.REFUTED_BY_ALARM.value: "a check run of its masses shook the machine over the "
                                     "runaway alarm's limit, so they come off",
    Distrust.UNCALIBRATED.value: "a pickup reads volts (no sensitivity in the profile)",
    Distrust.NO_MOUNTED_MASS.value: "the machine profile does not say what the mounts carry "
                                    "(the weight of everything that shakes with the rotor)",
    Distrust.UNSEEN_RESONANCE.value: "the model fitted to the coast-down puts a resonance "
                                     "where the coast-down showed none",
    Distrust.CLIPPED.value: "a pickup's as-found signal reached the end of the ADC's range "
                            "(its 1x reads low)",
}


@dataclass(frozen=True)
class SupportResonance:
    """A support resonance seen by one pickup, from a coast-down or run-up sweep.

    ``speed_rpm`` the resonance, ``damping_ratio`` its damping (half-power or circle fit),
    ``speed_rel_95`` the 95 % relative uncertainty of the resonance speed, ``fits`` False
    when the sweep's fit did not match its own data."""

    speed_rpm: float
    damping_ratio: float
    speed_rel_95: float = 0.05
    fits: bool = True


@dataclass(frozen=True)
class PickupPlacement:
    """Where a pickup sits: on bearing ``bearing`` (0 or 1), sensing along a direction
    ``angle_from_tach_deg`` degrees *with* rotation from the tach's direction (None: not
    measured, so no phase can be predicted)."""

    name: str
    bearing: int
    angle_from_tach_deg: float | None = None

    @classmethod
    def from_profile(cls, name: str, bearing: int,
                     angle_against_rotation_deg: float | None) -> PickupPlacement:
        """From a machine profile's ``Pickup.angle_from_tach_deg``, which is counted
        against rotation (the house convention, trueturn/angles.py).

        Parameters
        ----------
        name : str
            The pickup's name.
        bearing : int
            The bearing it sits on (0 or 1).
        angle_against_rotation_deg : float or None
            The profile's angle from the tach to the pickup, degrees against rotation;
            None when not measured.

        Returns
        -------
        PickupPlacement
            The same direction counted with rotation (``360 - angle``, modulo a turn).

        References
        ----------
        .. [1] Angle convention: trueturn/angles.py (our own; common practice, no source).
        """
        angle = (None if angle_against_rotation_deg is None
                 else (-angle_against_rotation_deg) % 360.0)
        return cls(name, bearing, angle)


@dataclass(frozen=True)
class RotorLayout:
    """What the machine profile says about the rotor: mass, the two bearings' and each
    plane's axial positions (one origin, mm), plane radii, centre of mass (None: midway),
    the inertias when known, and ``mounted_mass_kg``: everything that shakes with the rotor
    on its mounts (the rotor with its housing, frame or pedestals; None: not known)."""

    rotor_mass_kg: float
    bearings_axial_mm: tuple[float, float]
    planes_axial_mm: tuple[float, ...]
    planes_radius_mm: tuple[float, ...]
    cg_axial_mm: float | None = None
    transverse_inertia_kg_m2: float | None = None
    polar_inertia_kg_m2: float | None = None
    mounted_mass_kg: float | None = None


def mounted_body(layout: RotorLayout) -> RotorLayout:
    """What the supports carry, as a layout: the rotor's, with the mass on the mounts.

    A rotor turns inside a housing, frame or pedestals that shake with it on the mounts;
    the unbalance force ``m r omega^2`` moves all of it, so the 1x per gram is set by the
    mass on the mounts, not the rotor's (Newton's second law; the rigid machine on
    flexible mounts as in Den Hartog, *Mechanical Vibrations*, 4th ed., 1956, §3.3, from
    memory). Assumed, stated: the housing's centre of mass is the rotor's and its mass is
    spread like the rotor's, so the rocking inertia grows in the same ratio; the polar
    inertia (the gyroscopic coupling) stays the rotor's. Without ``mounted_mass_kg`` the
    rotor alone (the largest response any machine with this rotor can have). The same
    body as the simulator's rotor with a housing (``RigidRotor.housing_mass_kg``), checked
    against Newton's second law in tests/test_balance_mounted_mass.py.

    Parameters
    ----------
    layout : RotorLayout

    Returns
    -------
    RotorLayout
        ``rotor_mass_kg`` the mass on the mounts, ``transverse_inertia_kg_m2`` scaled
        with it (when given), ``polar_inertia_kg_m2`` the rotor's (given or
        :func:`estimated_polar_inertia_kg_m2`), ``mounted_mass_kg`` as given.

    References
    ----------
    .. [1] Den Hartog, J. P., *Mechanical Vibrations*, 4th ed., 1956, §3.3 (rotating
       unbalance on a sprung mass; from memory).
    """
    polar = layout.polar_inertia_kg_m2 or estimated_polar_inertia_kg_m2(layout)
    if layout.mounted_mass_kg is None or layout.mounted_mass_kg <= layout.rotor_mass_kg:
        return replace(layout, polar_inertia_kg_m2=polar)
    scale = layout.mounted_mass_kg / layout.rotor_mass_kg
    transverse = layout.transverse_inertia_kg_m2
    return replace(layout, rotor_mass_kg=layout.mounted_mass_kg,
                   transverse_inertia_kg_m2=transverse * scale if transverse else None,
                   polar_inertia_kg_m2=polar)


def mounted_mass_factors(layout: RotorLayout, draws: int,
                         rng: np.random.Generator) -> np.ndarray:
    """Per Monte Carlo draw, the 1x per gram relative to the nominal body's.

    The mass on the mounts is ``mounted_mass_kg`` within :data:`MOUNTED_MASS_LOG_SIGMA`
    (log-normal), or, not given, anywhere from the rotor's to
    :data:`MOUNTED_MASS_MAX_FACTOR` times it (log-uniform). A sweep cannot tell it: the
    unbalance, the mass, the stiffness and the damping scaled together draw the same
    curve, and the 1x per gram scales as one over the mass.

    Parameters
    ----------
    layout : RotorLayout
        Its ``mounted_mass_kg`` (None: not known).
    draws : int
        How many draws.
    rng : numpy.random.Generator

    Returns
    -------
    numpy.ndarray
        (draws,) factors on the nominal body's coefficients (:func:`mounted_body`).

    References
    ----------
    .. [1] Similarity of the equations of motion: ``M q'' + C q' + K q = F`` is unchanged
       when ``M``, ``C``, ``K`` and ``F`` are scaled alike (any vibration text; from
       memory). Sigma and range: our choice.
    """
    if layout.mounted_mass_kg is not None:
        return np.exp(-MOUNTED_MASS_LOG_SIGMA * rng.normal(size=draws))
    return np.exp(-rng.uniform(0.0, math.log(MOUNTED_MASS_MAX_FACTOR), size=draws))


@dataclass(frozen=True)
class PredictedInfluence:
    """Predicted influence coefficients (pickups x planes, reading units per gram at the
    plane's radius, angle 0) with their uncertainty.

    ``magnitude_only`` True: only ``magnitude`` means anything (no phase could be
    predicted). ``covariance[i]`` is the complex covariance (planes x planes) of pickup
    i's row; ``phase_95_deg`` and ``magnitude_rel_95`` are per-entry 95 % spreads;
    ``residual_fraction_95`` the share of the as-found 1x the model's own correction
    would leave in 95 % of the draws (None without an as-found reading or a phase);
    ``distrust`` the reasons the prediction must not carry a correction (empty: trusted).
    """

    sensors: tuple[str, ...]
    matrix: np.ndarray
    magnitude: np.ndarray
    covariance: tuple[np.ndarray, ...]
    phase_95_deg: np.ndarray
    magnitude_rel_95: np.ndarray
    magnitude_only: bool
    residual_fraction_95: float | None
    distrust: tuple[Distrust, ...] = ()

    @property
    def trusted(self) -> bool:
        """True when a first correction may be computed from this prediction alone."""
        return not self.distrust


def circle95_radius(variance: float) -> float:
    """The 95 % circle radius of a circular complex Gaussian with ``E|z - mean|^2`` equal
    to ``variance`` (each part's sigma is ``sqrt(variance / 2)``).

    Parameters
    ----------
    variance : float
        The diagonal entry of a complex covariance (>= 0; inf: nothing known).

    Returns
    -------
    float
        ``CIRCLE95 * sqrt(variance / 2)`` (inf for an infinite variance).

    References
    ----------
    .. [1] The circular complex normal distribution: ``|z|^2 / sigma^2`` is chi-squared with
       2 degrees of freedom, so ``P(|z| <= r) = 1 - exp(-r^2 / (2 sigma^2))`` (any
       probability text; from memory).
    """
    return CIRCLE95 * math.sqrt(max(float(variance), 0.0) / 2.0)


def free_rotor_prediction(sensors: Sequence[str], rotor_mass_kg: float,
                          planes_radius_mm: Sequence[float], speed_rpm: float
                          ) -> PredictedInfluence:
    """Magnitude only, when bearing and plane positions are not known.

    A free rigid rotor pushed through its centre of mass: ``a = m r omega^2 / M`` per
    pickup (the mass-controlled limit; tilting is left out).

    Parameters
    ----------
    sensors : sequence of str
        Pickup names.
    rotor_mass_kg : float
        Rotor mass, kg (> 0).
    planes_radius_mm : sequence of float
        Each plane's radius, mm.
    speed_rpm : float
        Speed, rpm (> 0).

    Returns
    -------
    PredictedInfluence
        ``magnitude_only`` True, distrusted for ``no-bearings`` and ``no-sweep``.

    Raises
    ------
    ValueError
        When the mass or the speed is not a finite number above 0.

    References
    ----------
    .. [1] Newton's second law for a rigid body, ``F = M a`` (any mechanics text).
    """
    if not 0 < rotor_mass_kg < math.inf or not 0 < speed_rpm < math.inf:
        raise ValueError("rotor_mass_kg and speed_rpm must be > 0")
    omega = angular_speed_rad_s(speed_rpm)
    row = np.array([1e-6 * r * omega**2 / rotor_mass_kg for r in planes_radius_mm])
    n_s, n_p = len(sensors), len(row)
    return PredictedInfluence(tuple(sensors), np.full((n_s, n_p), np.nan + 0j),
                              np.tile(row, (n_s, 1)),
                              tuple(np.diag(np.full(n_p, np.inf + 0j)) for _ in sensors),
                              np.full((n_s, n_p), 180.0), np.full((n_s, n_p), np.inf), True,
                              None, (Distrust.NO_BEARINGS, Distrust.NO_SWEEP))


def _lever_masses(layout: RotorLayout) -> np.ndarray:
    """The rotor's mass shared between the two bearings by rigid-rotor statics (kg)."""
    z_a, z_b = layout.bearings_axial_mm
    span = z_b - z_a
    z_cg = _cg(layout)
    return layout.rotor_mass_kg * np.array([(z_b - z_cg) / span, (z_cg - z_a) / span])


def _cg(layout: RotorLayout) -> float:
    z_a, z_b = layout.bearings_axial_mm
    return layout.cg_axial_mm if layout.cg_axial_mm is not None else 0.5 * (z_a + z_b)


def estimated_transverse_inertia_kg_m2(layout: RotorLayout) -> float:
    """The rotor's transverse moment of inertia about its centre of mass, guessed.

    Used when the profile does not give it: a uniform slender rod as long as the bearings
    and planes reach, ``M L^2 / 12`` (with a wide uncertainty band).

    Parameters
    ----------
    layout : RotorLayout
        Mass, bearing and plane positions.

    Returns
    -------
    float
        kg m^2.

    References
    ----------
    .. [1] Moment of inertia of a slender rod about its centre, ``m L^2 / 12`` (from
       memory: any statics text).
    """
    reach = [*layout.bearings_axial_mm, *layout.planes_axial_mm]
    length_m = (max(reach) - min(reach)) * 1e-3
    return layout.rotor_mass_kg * length_m**2 / 12.0


def estimated_polar_inertia_kg_m2(layout: RotorLayout) -> float:
    """The rotor's polar moment of inertia (about the shaft), guessed.

    Used when the profile does not give it: a solid disc as wide as the largest
    correction radius, ``M r^2 / 2`` (with a wide uncertainty band: a rotor whose mass sits
    nearer the shaft has less, a rim-heavy one up to ``M r^2``).

    Parameters
    ----------
    layout : RotorLayout
        Mass and plane radii.

    Returns
    -------
    float
        kg m^2.

    References
    ----------
    .. [1] Moment of inertia of a solid disc about its axis, ``m r^2 / 2``; of a thin ring,
       ``m r^2`` (from memory: any statics text).
    """
    radius_m = max(layout.planes_radius_mm) * 1e-3
    return 0.5 * layout.rotor_mass_kg * radius_m**2


def synchronous_tilt_inertia_kg_m2(transverse_kg_m2: float, polar_kg_m2: float) -> float:
    """The tilt inertia a 1x (synchronous, forward) whirl meets: ``I_t - I_p``.

    A spinning rotor whirling at its own speed feels the gyroscopic moment
    ``I_p Omega omega`` with ``omega = Omega``, which stiffens the forward tilt mode as if
    the transverse inertia were ``I_t - I_p`` (exact for isotropic supports). A disc
    (``I_p >= I_t``) has no forward tilt critical speed at all: its effective inertia is
    zero or negative.

    Parameters
    ----------
    transverse_kg_m2, polar_kg_m2 : float
        Transverse (about a line across the shaft through the centre of mass) and polar
        moments of inertia, kg m^2.

    Returns
    -------
    float
        kg m^2; may be 0 or negative.

    References
    ----------
    .. [1] Vance, *Rotordynamics of Turbomachinery*, 1988, ch. 2 (synchronous critical
       speeds of a rigid rotor on flexible supports, gyroscopic stiffening; from memory).
    """
    return transverse_kg_m2 - polar_kg_m2


def stiffness_from_resonances(mass_kg: float, inertia_kg_m2: float, d_a_m: float, d_b_m: float,
                              resonances_rad_s: Sequence[float],
                              mass_ratio: float) -> tuple[float, float]:
    """Bearing stiffnesses of a rigid rotor whose rigid-body modes sit at the resonances.

    The undamped modes of ``diag(M, I) q'' + K q = 0`` (translation and tilt, one
    direction) with ``K = sum_b k_b [[1, d_b], [d_b, d_b^2]]`` satisfy
    ``det(M^-1 K) = l1 l2`` and ``tr(M^-1 K) = l1 + l2`` (``l = omega_n^2``):
    ``k_A k_B = l1 l2 M I / L^2`` and ``alpha_A k_A + alpha_B k_B = l1 + l2`` with
    ``alpha_b = 1/M + d_b^2/I``, a quadratic in ``k_A``; of its two roots the one closer
    to ``k_A/k_B = mass_ratio`` is kept. With one resonance the ratio is taken as
    ``mass_ratio`` and the measured one is the lower mode (a coast-down from the running
    speed sees only the modes below it).

    Parameters
    ----------
    mass_kg : float
        Rotor mass, kg.
    inertia_kg_m2 : float
        The tilt inertia the 1x whirl meets, kg m^2: the transverse moment of inertia
        about the centre of mass less the polar one
        (:func:`synchronous_tilt_inertia_kg_m2`; zero or less for a disc, whose tilt has
        no 1x critical speed).
    d_a_m, d_b_m : float
        Bearing positions from the centre of mass, m (``d_a_m < d_b_m``).
    resonances_rad_s : sequence of float
        Measured resonances, rad/s (one or two are used: the lowest).
    mass_ratio : float
        ``k_A / k_B`` to prefer (the lever-rule mass shares' ratio).

    Returns
    -------
    (float, float)
        ``k_A, k_B`` in N/m.

    References
    ----------
    .. [1] Vance, *Rotordynamics of Turbomachinery*, 1988, ch. 2 (rigid rotor on flexible
       supports, its two rigid-body modes; from memory).
    """
    span = d_b_m - d_a_m
    lam = sorted(w**2 for w in resonances_rad_s)
    if len(lam) >= 2 and inertia_kg_m2 > 0.0:
        alpha_a = 1.0 / mass_kg + d_a_m**2 / inertia_kg_m2
        alpha_b = 1.0 / mass_kg + d_b_m**2 / inertia_kg_m2
        total, product = lam[0] + lam[1], lam[0] * lam[1] * mass_kg * inertia_kg_m2 / span**2
        disc = max(total**2 - 4.0 * alpha_a * alpha_b * product, 0.0)
        roots = [(total + s * math.sqrt(disc)) / (2.0 * alpha_a) for s in (1.0, -1.0)]
        pairs = [(k_a, product / k_a) for k_a in roots if k_a > 0]
        if pairs:
            return min(pairs, key=lambda kk: abs(math.log(kk[0] / kk[1] / mass_ratio)))
    # one resonance (or a disc, whose tilt has no 1x critical: an inertia of zero or less):
    # k_A = mass_ratio k_B, scaled so that the lowest positive mode is the measured one
    k_a, k_b = mass_ratio, 1.0
    stiff = np.array([[k_a + k_b, k_a * d_a_m + k_b * d_b_m],
                      [k_a * d_a_m + k_b * d_b_m, k_a * d_a_m**2 + k_b * d_b_m**2]])
    eig = scipy.linalg.eigvals(stiff, np.diag([mass_kg, inertia_kg_m2]))
    low = min(float(e.real) for e in eig if np.isfinite(e) and e.real > 0)
    scale = lam[0] / low
    return k_a * scale, k_b * scale


def rigid_rotor_coefficients(mass_kg: float, inertia_kg_m2: float, d_bearings_m: np.ndarray,
                             k_n_per_m: np.ndarray, c_ns_per_m: np.ndarray, d_planes_m: np.ndarray,
                             radius_mm: np.ndarray, d_pickup_m: float, omega_rad_s: float
                             ) -> np.ndarray:
    """1x acceleration per gram of a rigid rotor on two spring-damper supports.

    One direction: translation and tilt about the centre of mass,
    ``(K + i omega C - omega^2 diag(M, I)) q = F``, output ``[1, d] q``, acceleration
    ``-omega^2`` times it, conjugated into the lag convention (before the pickup's angle
    from the tach). Gyroscopic stiffening enters through ``inertia_kg_m2``: pass the tilt
    inertia the 1x whirl meets, ``I_t - I_p`` (:func:`synchronous_tilt_inertia_kg_m2`).

    Parameters
    ----------
    mass_kg, inertia_kg_m2 : float
        Rotor mass (kg) and the tilt inertia about the centre of mass the 1x whirl meets
        (kg m^2; the transverse inertia less the polar one, may be 0 or negative).
    d_bearings_m : ndarray
        The two bearings' positions from the centre of mass, m.
    k_n_per_m, c_ns_per_m : ndarray
        Each bearing's stiffness (N/m) and damping (N s/m).
    d_planes_m : ndarray
        Each plane's position from the centre of mass, m.
    radius_mm : ndarray
        Each plane's radius, mm.
    d_pickup_m : float
        The pickup's bearing position from the centre of mass, m.
    omega_rad_s : float
        Speed, rad/s.

    Returns
    -------
    ndarray
        Per plane, the complex coefficient (m/s^2 per gram at the plane's radius, angle 0).

    References
    ----------
    .. [1] Vance, *Rotordynamics of Turbomachinery*, 1988, ch. 2 (from memory).
    .. [2] Den Hartog, *Mechanical Vibrations*, 1956, §3.3 (the symmetric case; checked in
       tests/test_balance_model_first.py).
    """
    stiff = np.zeros((2, 2))
    damp = np.zeros((2, 2))
    for d, k, c in zip(d_bearings_m, k_n_per_m, c_ns_per_m, strict=True):
        shape = np.array([[1.0, d], [d, d * d]])
        stiff += k * shape
        damp += c * shape
    dyn = stiff + 1j * omega_rad_s * damp - omega_rad_s**2 * np.diag([mass_kg, inertia_kg_m2])
    force = 1e-3 * radius_mm * 1e-3 * omega_rad_s**2
    forcing = np.vstack([force, force * d_planes_m])
    disp = np.array([1.0, d_pickup_m]) @ np.linalg.solve(dyn, forcing)
    return np.conj(-(omega_rad_s**2) * disp)


def predict_influence(layout: RotorLayout, pickups: Sequence[PickupPlacement], speed_rpm: float,
                      resonances: Mapping[str, Sequence[SupportResonance]] | None = None,
                      as_found: Mapping[str, complex] | None = None,
                      draws: int = 300, seed: int = 0,
                      curve: SweepCurve | None = None,
                      standstill: Mapping[str, Sequence[StandstillMode]] | None = None
                      ) -> PredictedInfluence:
    """Influence coefficients of a rigid rotor on two flexible supports, with uncertainty.

    Parameters
    ----------
    layout : RotorLayout
        Rotor mass, bearing and plane positions, radii, centre of mass, and the transverse
        and polar inertias when known (else :func:`estimated_transverse_inertia_kg_m2` and
        :func:`estimated_polar_inertia_kg_m2`, wide bands). The 1x whirl meets the tilt
        inertia ``I_t - I_p`` (:func:`synchronous_tilt_inertia_kg_m2`).
    pickups : sequence of PickupPlacement
        Each pickup's bearing and its angle from the tach (None: not measured).
    speed_rpm : float
        The balancing speed, rpm (> 0).
    resonances : mapping of str to sequence of SupportResonance, or None
        Per pickup, the support resonances a coast-down sweep found below the running
        speed (a pickup missing: no sweep; an empty list: a sweep that found none, so the
        supports are stiffer than the running speed needs and their stiffness is unknown).
    as_found : mapping of str to complex or None, default None
        The as-found 1x per pickup (phasors, reading units): with it, the share of the 1x
        the model's own correction would leave is estimated (``residual_fraction_95``).
    draws : int, default 300
        Monte Carlo draws for the uncertainty (fixed ``seed``: the same answer every time).
    seed : int, default 0
    curve : SweepCurve or None, default None
        The as-found sweep's every point (pickups in the order of ``pickups``, m/s^2):
        with it, the supports are fitted to the whole curve
        (:func:`trueturn.balance.support_fit.fit_support_model`: stiffness along and
        across, damping, the inertias) and the prediction's uncertainty is the fit's own
        covariance; a curve too short to fit leaves the ``resonances`` route.
    standstill : mapping of str to sequence of StandstillMode, or None, default None
        Per pickup, the natural frequencies a tap (bump) test found at standstill
        (:class:`trueturn.balance.support_fit.StandstillMode`): with a ``curve``, the fit
        is held to them (a stiff mount's coast-down cannot tell its stiffness, a tap
        can), and a fitted resonance a tap found is not "unseen"
        (:data:`Distrust.UNSEEN_RESONANCE`). Without a curve they are not used.

    Returns
    -------
    PredictedInfluence

    Raises
    ------
    ValueError
        When a mass, speed, radius or bearing span is not positive, a pickup names a
        bearing other than 0 or 1, or the planes' positions and radii differ in number.

    Notes
    -----
    Magnitude without the support stiffness: the free rigid body (mass-controlled limit,
    well above both rigid-body modes), ``a = F (1/M + d_j d_i / I)``; below the modes the
    true response is smaller. Uncertainty: draws of each resonance speed (its 95 % band),
    the damping (log-normal), the transverse and polar inertias (log-normal, wide when
    estimated), the pickup angle, and a relative model error (:data:`MODEL_REL_SIGMA`:
    anisotropic supports, whose two directions the 1x whirl couples, a mount that is not a
    spring).

    References
    ----------
    .. [1] Vance, J. M., *Rotordynamics of Turbomachinery*, Wiley, 1988, ch. 2 (rigid rotor
       on flexible supports; from memory).
    .. [2] Den Hartog, *Mechanical Vibrations*, 4th ed., 1956, §3.3 (rotating unbalance;
       from memory).
    """
    if not 0 < layout.rotor_mass_kg < math.inf:
        raise ValueError(f"rotor_mass_kg must be > 0, got {layout.rotor_mass_kg!r}")
    if not 0 < speed_rpm < math.inf:
        raise ValueError(f"speed_rpm must be > 0, got {speed_rpm!r}")
    if len(layout.planes_axial_mm) != len(layout.planes_radius_mm):
        raise ValueError("planes_axial_mm and planes_radius_mm differ in length")
    if any(not 0 < r < math.inf for r in layout.planes_radius_mm):
        raise ValueError("planes_radius_mm must all be > 0")
    if layout.bearings_axial_mm[1] == layout.bearings_axial_mm[0]:
        raise ValueError("the two bearings must be at different positions")
    for p in pickups:
        if p.bearing not in (0, 1):
            raise ValueError(f"pickup {p.name!r}: bearing must be 0 or 1, got {p.bearing!r}")
    resonances = {k: tuple(v) for k, v in (resonances or {}).items()}
    omega = angular_speed_rad_s(speed_rpm)
    # what the mounts carry and the unbalance force shakes (mounted_body)
    body = mounted_body(layout)
    masses = _lever_masses(body)
    distrust: list[Distrust] = []
    if np.any(masses <= 0):
        distrust.append(Distrust.NO_BEARINGS)   # centre of mass outside the bearings
        masses = np.maximum(masses, 0.05 * body.rotor_mass_kg)
    z_cg = _cg(layout)
    d_bear = (np.array(layout.bearings_axial_mm) - z_cg) * 1e-3
    d_pl = (np.array(layout.planes_axial_mm) - z_cg) * 1e-3
    radius = np.array(layout.planes_radius_mm, dtype=float)
    inertia = body.transverse_inertia_kg_m2 or estimated_transverse_inertia_kg_m2(body)
    inertia_sigma = 0.05 if layout.transverse_inertia_kg_m2 else 0.35
    # the 1x whirl meets I_t - I_p (gyroscopic stiffening); I_p guessed from the largest
    # radius when not given (a solid disc), with a wide band (log sigma 0.4: x/÷ 2.2 at 95 %)
    polar = body.polar_inertia_kg_m2   # mounted_body: the layout's, else the estimate
    assert polar is not None
    polar_sigma = 0.05 if layout.polar_inertia_kg_m2 else 0.4
    force = 1e-3 * radius * 1e-3 * omega**2
    n_p, n_s = len(radius), len(pickups)
    free = np.array([np.abs(force * (1.0 / body.rotor_mass_kg
                                     + d_pl * d_bear[p.bearing] / inertia)) for p in pickups])
    if any(p.name not in resonances for p in pickups):
        distrust.append(Distrust.NO_SWEEP)
    elif any(not resonances[p.name] for p in pickups):
        distrust.append(Distrust.STIFFNESS_UNKNOWN)
    if any(p.angle_from_tach_deg is None for p in pickups):
        distrust.append(Distrust.NO_PICKUP_ANGLE)
    if any(not r.fits for rs in resonances.values() for r in rs):
        distrust.append(Distrust.SWEEP_MISFIT)
    if layout.mounted_mass_kg is None:
        distrust.append(Distrust.NO_MOUNTED_MASS)
    rng = np.random.default_rng(seed)
    mass_factor = mounted_mass_factors(layout, draws, rng)
    if curve is not None and Distrust.NO_PICKUP_ANGLE not in distrust \
            and Distrust.NO_BEARINGS not in distrust:
        geometry = SupportGeometry(
            body.rotor_mass_kg, masses, d_bear, d_pl, radius,
            np.array([d_bear[p.bearing] for p in pickups]),
            np.array([float(p.angle_from_tach_deg or 0.0) for p in pickups]))
        tapped = tuple(tuple((standstill or {}).get(p.name, ())) for p in pickups)
        fit = fit_support_model(
            geometry, curve, InertiaPrior(inertia, inertia_sigma, polar, polar_sigma),
            tuple(r.speed_rpm for rs in resonances.values() for r in rs), tapped)
        if fit is not None:
            kept: list[Distrust] = [d for d in distrust if d not in (
                Distrust.NO_SWEEP, Distrust.STIFFNESS_UNKNOWN, Distrust.SWEEP_MISFIT)]
            if all(p.name in resonances for p in pickups) and _unseen_resonances(
                    fit, geometry, resonances, tapped):
                kept.append(Distrust.UNSEEN_RESONANCE)
            return _prediction_from_fit(fit, geometry, pickups, speed_rpm, as_found, draws,
                                        rng, kept, mass_factor)
    have_phase = not ({Distrust.NO_SWEEP, Distrust.STIFFNESS_UNKNOWN, Distrust.NO_PICKUP_ANGLE}
                      & set(distrust))
    model_err = 1.0 + MODEL_REL_SIGMA * (rng.normal(size=(draws, n_s, n_p))
                                         + 1j * rng.normal(size=(draws, n_s, n_p))) / math.sqrt(2)
    if not have_phase:
        inertia_draws = inertia * np.exp(inertia_sigma * rng.normal(size=draws))
        samples = np.array([[np.abs(force * (1.0 / body.rotor_mass_kg
                                             + d_pl * d_bear[p.bearing] / i_t)) for p in pickups]
                            for i_t in inertia_draws]) * np.abs(model_err) \
            * mass_factor[:, None, None]
        mag_rel = np.percentile(np.abs(samples / free[None] - 1.0), 95, axis=0)
        cov = tuple(np.diag(np.full(n_p, np.inf + 0j)) for _ in range(n_s))
        return PredictedInfluence(tuple(p.name for p in pickups), np.full((n_s, n_p), np.nan + 0j),
                                  free, cov, np.full((n_s, n_p), 180.0), mag_rel, True, None,
                                  tuple(dict.fromkeys(distrust)))
    mass_ratio = float(masses[0] / masses[1])

    def one(i: int, p: PickupPlacement, res_scale: float, zeta_scale: float, i_t: float,
            angle_err_deg: float) -> tuple[np.ndarray, list[float]]:
        rs = resonances[p.name]
        k_a, k_b = stiffness_from_resonances(
            body.rotor_mass_kg, i_t, float(d_bear[0]), float(d_bear[1]),
            [angular_speed_rad_s(r.speed_rpm) * res_scale for r in rs], mass_ratio)
        zeta = min(r.damping_ratio for r in rs) * zeta_scale
        k = np.array([k_a, k_b])
        c = 2.0 * zeta * np.sqrt(k * masses)
        h = rigid_rotor_coefficients(body.rotor_mass_kg, i_t, d_bear, k, c, d_pl, radius,
                                     float(d_bear[p.bearing]), omega)
        assert p.angle_from_tach_deg is not None
        modes = scipy.linalg.eigvals(
            sum(kb * np.array([[1.0, d], [d, d * d]]) for kb, d in zip(k, d_bear, strict=True)),
            np.diag([body.rotor_mass_kg, i_t]))
        # the 1x critical speeds: positive modes only (a disc's tilt has none)
        speeds = [float(math.sqrt(m.real)) * 30.0 / math.pi for m in modes
                  if np.isfinite(m) and m.real > 0]
        return h * np.exp(1j * math.radians(p.angle_from_tach_deg + angle_err_deg)), speeds

    nominal = np.empty((n_s, n_p), dtype=complex)
    for i, p in enumerate(pickups):
        nominal[i], mode_rpm = one(i, p, 1.0, 1.0,
                                   synchronous_tilt_inertia_kg_m2(inertia, polar), 0.0)
        zeta = min(r.damping_ratio for r in resonances[p.name])
        if any(abs(speed_rpm / m - 1.0) < max(NEAR_RESONANCE_FRACTION, 2.0 * zeta)
               for m in mode_rpm if m > 0):
            distrust.append(Distrust.NEAR_RESONANCE)
    drawn = np.empty((draws, n_s, n_p), dtype=complex)
    for d in range(draws):
        i_t = synchronous_tilt_inertia_kg_m2(
            inertia * math.exp(inertia_sigma * rng.normal()),
            polar * math.exp(polar_sigma * rng.normal()))
        for i, p in enumerate(pickups):
            rel95 = max(r.speed_rel_95 for r in resonances[p.name])
            drawn[d, i] = one(i, p, 1.0 + rel95 / 1.96 * rng.normal(),
                              math.exp(DAMPING_LOG_SIGMA * rng.normal()), i_t,
                              PICKUP_ANGLE_SIGMA_DEG * rng.normal())[0]
    drawn *= model_err * mass_factor[:, None, None]
    return _from_draws(pickups, nominal, drawn, as_found, distrust)


def fitted_criticals_rpm(fit: SupportModelFit, geometry: SupportGeometry,
                         directions: Sequence[int] = (0, 1)) -> list[float]:
    """The undamped synchronous critical speeds of a fitted support model, both directions.

    Per direction, the modes of ``diag(m, I_t - I_p) q'' + K q = 0`` (the tilt meets
    ``I_t - I_p``, :func:`synchronous_tilt_inertia_kg_m2`; a disc's tilt has none).

    Parameters
    ----------
    fit : SupportModelFit
    geometry : SupportGeometry
    directions : sequence of int, default (0, 1)
        Along (0) and across (1) the first pickup: which directions' modes to list.

    Returns
    -------
    list of float
        rpm, positive modes only.

    References
    ----------
    .. [1] Vance, *Rotordynamics of Turbomachinery*, 1988, ch. 2 (from memory).
    """
    k = np.exp(fit.theta[:4]).reshape(2, 2)
    tilt = synchronous_tilt_inertia_kg_m2(math.exp(fit.theta[5]), math.exp(fit.theta[6]))
    out = []
    for direction in directions:
        stiff = sum(k[b, direction] * np.array([[1.0, d], [d, d * d]])
                    for b, d in enumerate(geometry.bearings_m))
        modes = scipy.linalg.eigvals(stiff, np.diag([geometry.mass_kg, tilt]))
        out += [float(math.sqrt(m.real)) * 30.0 / math.pi for m in modes
                if np.isfinite(m) and m.real > 0]
    return sorted(out)


def _unseen_resonances(fit: SupportModelFit, geometry: SupportGeometry,
                       seen: Mapping[str, Sequence[SupportResonance]],
                       tapped: Sequence[Sequence[StandstillMode]] = ()) -> list[float]:
    """When the sweep's peak finding saw no resonance at all below the speed (a stiff
    mount), the fit's critical speeds (rpm) in a direction some pickup senses that lie
    within the sweep's clear span. Two analyses of one curve disagree: the fit has put a
    mode where the points show no peak, trading it against what the model lacks (a
    mount's nonlinearity, say); its prediction is then an extrapolation, not a
    measurement (our rule). A sweep that did show a resonance may well hide a weaker one
    (a rocking mode the unbalance hardly excites) that the fit finds by the curve's
    shape, so then nothing is said. A critical whose direction a tap test measured is
    seen too: the tap found each of that direction's standstill modes (within
    :data:`TAP_MATCH_SIGMA` of its error, floored at
    :data:`~trueturn.balance.support_fit.STANDSTILL_REL_FLOOR`), so the fit's mode there
    is a measurement, not a guess."""
    if any(seen.values()):
        return []
    first = math.radians(float(geometry.pickup_angles_deg[0]))
    sensed = sorted({0 if abs(math.cos(math.radians(float(a)) - first)) >= 0.5 else 1
                     for a in geometry.pickup_angles_deg})
    low, high = fit.clear_span_rpm
    at_rest = standstill_frequencies_hz(fit.theta, geometry)
    out = []
    for direction in sensed:
        if _tap_found_all(at_rest[direction], direction, geometry, tapped):
            continue
        out += [c for c in fitted_criticals_rpm(fit, geometry, (direction,)) if low <= c <= high]
    return sorted(out)


def _tap_found_all(model_hz: np.ndarray, direction: int, geometry: SupportGeometry,
                   tapped: Sequence[Sequence[StandstillMode]]) -> bool:
    """Whether a tap on pickups that see ``direction`` found every one of the fitted
    model's standstill frequencies there (``model_hz``), each within
    :data:`TAP_MATCH_SIGMA` of a found mode's relative error (floored at
    :data:`~trueturn.balance.support_fit.STANDSTILL_REL_FLOOR`)."""
    found = [mode for i, modes in enumerate(tapped) if i < geometry.pickup_angles_deg.size
             and direction in sensed_directions(geometry, i) for mode in modes
             if 0 < mode.frequency_hz < math.inf and 0 <= mode.frequency_se_hz < math.inf]
    if not found or model_hz.size == 0:
        return False
    return all(any(abs(math.log(f / m.frequency_hz)) <= TAP_MATCH_SIGMA * max(
        m.frequency_se_hz / m.frequency_hz, STANDSTILL_REL_FLOOR) for m in found)
        for f in model_hz if f > 0)


def _prediction_from_fit(fit: SupportModelFit, geometry: SupportGeometry,
                         pickups: Sequence[PickupPlacement], speed_rpm: float,
                         as_found: Mapping[str, complex] | None, draws: int,
                         rng: np.random.Generator, distrust: list[Distrust],
                         mass_factor: np.ndarray) -> PredictedInfluence:
    """:func:`predict_influence` from a support model fitted to the whole sweep: the
    coefficients at ``speed_rpm`` with the fit's uncertainty (draws of its parameters, the
    pickups' angles, :data:`FIT_MODEL_REL_SIGMA` and the mass on the mounts,
    ``mass_factor``: :func:`mounted_mass_factors`)."""
    omega = np.array([angular_speed_rad_s(speed_rpm)])
    nominal = support_model_coefficients(fit.theta, geometry, omega)[0]
    n_s, n_p = nominal.shape
    if any(abs(speed_rpm / m - 1.0) < FIT_NEAR_RESONANCE_FRACTION
           for m in fitted_criticals_rpm(fit, geometry)):
        distrust.append(Distrust.NEAR_RESONANCE)
    if fit.covariance is None:
        # the sweep cannot tell the parameters apart: no spread to give, so no trust
        distrust.append(Distrust.TOO_UNCERTAIN)
        cov = tuple(np.diag(np.full(n_p, np.inf + 0j)) for _ in range(n_s))
        return PredictedInfluence(tuple(p.name for p in pickups), nominal, np.abs(nominal),
                                  cov, np.full((n_s, n_p), 180.0), np.full((n_s, n_p), np.inf),
                                  False, None, tuple(dict.fromkeys(distrust)))
    wander = 1.0 + SPEED_WANDER_FRACTION * rng.uniform(-1.0, 1.0, size=draws)
    drawn = np.array([support_model_coefficients(t, geometry, omega * w)[0]
                      for t, w in zip(fit_draws(fit, draws, rng), wander, strict=True)])
    angle_err = np.exp(1j * np.radians(PICKUP_ANGLE_SIGMA_DEG * rng.normal(size=(draws, n_s))))
    # the model's error: at least FIT_MODEL_REL_SIGMA, else what it missed by on its sweep
    rel_sigma = max(FIT_MODEL_REL_SIGMA, fit.relative_misfit)
    model_err = 1.0 + rel_sigma * (
        rng.normal(size=(draws, n_s, n_p)) + 1j * rng.normal(size=(draws, n_s, n_p))) / math.sqrt(2)
    drawn = drawn * angle_err[..., None] * model_err * mass_factor[:, None, None]
    rivals = [support_model_coefficients(t, geometry, omega)[0] for t in fit.rivals]
    return _with_rivals(_from_draws(pickups, nominal, drawn, as_found, distrust), rivals,
                        as_found)


def _with_rivals(prediction: PredictedInfluence, rivals: Sequence[np.ndarray],
                 as_found: Mapping[str, complex] | None) -> PredictedInfluence:
    """The prediction made to hold the fits the sweep cannot rule out
    (:attr:`SupportModelFit.rivals`, each a coefficient matrix at the speed): its 95 %
    spreads and covariance widened to reach each, and not trusted
    (:data:`Distrust.TOO_UNCERTAIN`) when the correction it offers would leave more than
    :data:`MAX_RESIDUAL_FRACTION_95` of the as-found 1x were a rival the machine, and
    :data:`Distrust.UNSEEN_EFFECT` when it would change it by less than
    :data:`MIN_EFFECT_FRACTION_05` (without an as-found reading: when a rival lies outside
    its spreads). A multimodal posterior's
    modes, each taken as possible (our rule; the Laplace approximation at one mode alone
    misses the others)."""
    if not rivals:
        return prediction
    nominal = prediction.matrix
    h = np.array(rivals)
    ratio = h / nominal[None]
    off_mag = np.abs(np.abs(ratio) - 1.0).max(axis=0)
    off_phase = np.abs(np.degrees(np.angle(ratio))).max(axis=0)
    residual95 = prediction.residual_fraction_95
    outcomes = _correction_outcomes(prediction.sensors, nominal, h, as_found)
    unseen = False
    if outcomes is None:
        doubt = bool(np.any(off_mag > prediction.magnitude_rel_95)
                     or np.any(off_phase > prediction.phase_95_deg))
    else:
        left, effect = outcomes
        residual95 = max(residual95 or 0.0, float(left.max()))
        doubt = bool(left.max() > MAX_RESIDUAL_FRACTION_95)
        unseen = bool(effect.min() < MIN_EFFECT_FRACTION_05)
    dev = h - nominal[None]
    cov = tuple(c + np.einsum("rj,rk->jk", dev[:, i, :], dev[:, i, :].conj())
                for i, c in enumerate(prediction.covariance))
    distrust = (prediction.distrust + ((Distrust.TOO_UNCERTAIN,) if doubt else ())
                + ((Distrust.UNSEEN_EFFECT,) if unseen else ()))
    return replace(prediction, covariance=cov,
                   magnitude_rel_95=np.maximum(prediction.magnitude_rel_95, off_mag),
                   phase_95_deg=np.maximum(prediction.phase_95_deg, off_phase),
                   residual_fraction_95=residual95, distrust=tuple(dict.fromkeys(distrust)))


def _correction_outcomes(sensors: Sequence[str], nominal: np.ndarray, coefficients: np.ndarray,
                         as_found: Mapping[str, complex] | None
                         ) -> tuple[np.ndarray, np.ndarray] | None:
    """Were each of ``coefficients`` (sets x pickups x planes) the machine's, the share of
    the as-found 1x the nominal coefficients' correction would leave, and the share by
    which it would change it (norms over the pickups); None without an as-found reading on
    every pickup."""
    if as_found is None or not all(n in as_found for n in sensors):
        return None
    r0 = np.array([as_found[n] for n in sensors])
    c_nom, *_ = np.linalg.lstsq(nominal, -r0, rcond=None)
    scale = max(float(np.linalg.norm(r0)), 1e-30)
    effect = coefficients @ c_nom
    return (np.linalg.norm(r0[None] + effect, axis=1) / scale,
            np.linalg.norm(effect, axis=1) / scale)


def _from_draws(pickups: Sequence[PickupPlacement], nominal: np.ndarray, drawn: np.ndarray,
                as_found: Mapping[str, complex] | None,
                distrust: list[Distrust]) -> PredictedInfluence:
    """The prediction's spread from Monte Carlo draws of its coefficients: each pickup's
    complex covariance, the 95 % phase and magnitude spreads, and the share of the
    as-found 1x the nominal correction would leave in 95 % of the draws (over
    :data:`MAX_RESIDUAL_FRACTION_95`: not trusted) and the share it would change it by in
    95 % of them (under :data:`MIN_EFFECT_FRACTION_05`: not trusted)."""
    draws = drawn.shape[0]
    n_s = nominal.shape[0]
    dev = drawn - nominal[None]
    cov = tuple(np.einsum("dj,dk->jk", dev[:, i, :], dev[:, i, :].conj()) / draws
                for i in range(n_s))
    ratio = drawn / nominal[None]
    phase95 = np.percentile(np.abs(np.degrees(np.angle(ratio))), 95, axis=0)
    mag95 = np.percentile(np.abs(np.abs(ratio) - 1.0), 95, axis=0)
    residual95 = None
    outcomes = _correction_outcomes([p.name for p in pickups], nominal, drawn, as_found)
    if outcomes is not None:
        left, effect = outcomes
        residual95 = float(np.percentile(left, 95))
        if residual95 > MAX_RESIDUAL_FRACTION_95:
            distrust.append(Distrust.TOO_UNCERTAIN)
        if float(np.percentile(effect, 5)) < MIN_EFFECT_FRACTION_05:
            distrust.append(Distrust.UNSEEN_EFFECT)
    return PredictedInfluence(tuple(p.name for p in pickups), nominal, np.abs(nominal), cov,
                              phase95, mag95, False, residual95, tuple(dict.fromkeys(distrust)))


def _reading_sigma(radius_95: float | None, reading: complex) -> float:
    """A reading's 1 sigma per axis: its 95 % circle's radius over :data:`CIRCLE95`, at
    least :data:`READING_REL_FLOOR` of the reading (None: the floor alone)."""
    return max((radius_95 or 0.0) / CIRCLE95, READING_REL_FLOOR * abs(complex(reading)))


@dataclass
class CoefficientEstimate:
    """Influence coefficients and the as-found 1x, refined run by run (recursive least
    squares, each reading weighted by its 95 % circle).

    Per pickup i the unknowns are ``theta_i = [b_i, H_i1 .. H_in]``: the 1x of the
    as-found rotor and the pickup's influence coefficients; a run with the mass vector
    ``u`` (grams at each plane's radius as phasors, relative to the as-found rotor) reads
    ``y_i = b_i + H_i . u + e``. The prior is the prediction (its mean and covariance) when
    one is given, else flat; each run updates every pickup's ``theta`` and covariance ``P``
    (the Kalman filter of a constant parameter vector, kept in information form:
    ``P^-1 += phi* phi^T / s2``, ``P^-1 theta += phi* y / s2``; the same estimate as the
    gain form ``K = P phi* / (phi^T P phi* + s2)`` without its round-off when the prior is
    flat). ``s2`` is the reading's complex variance ``E|e|^2``, twice its per-axis sigma
    squared, so ``P`` is a complex covariance ``E[d d^H]`` as the prior's is and as the
    Monte Carlo draws (:meth:`residual_draws_g`) take it.

    References
    ----------
    .. [1] Ljung, L., *System Identification: Theory for the User*, 2nd ed., Prentice Hall,
       1999, §11.2 (recursive least squares; from memory).
    .. [2] Goodman, T. P., "A least-squares method for computing balance corrections",
       *J. Eng. Ind.* 86(3), 1964 (influence coefficients by least squares; from memory).
    """

    sensors: tuple[str, ...]
    n_planes: int
    #: how far a placed mass may differ from the one asked for, 1 sigma (relative, and
    #: degrees): :data:`PLACED_MASS_REL_SIGMA`, :data:`PLACED_ANGLE_SIGMA_DEG`; 0 for a rig
    #: that places its masses exactly
    placed_mass_rel_sigma: float = PLACED_MASS_REL_SIGMA
    placed_angle_sigma_deg: float = PLACED_ANGLE_SIGMA_DEG
    theta: np.ndarray = field(init=False)             # pickups x (1 + planes)
    covariance: np.ndarray = field(init=False)        # pickups x (1+n) x (1+n)
    runs_used: int = field(init=False, default=0)
    #: a run's reading fell outside what the prior predicted (the normalised innovation
    #: test): the prior is dropped, the runs alone speak
    prior_refuted: bool = field(init=False, default=False)
    #: the pickup and the run (0-based) that refuted it, and the innovation's surprise
    #: ``|e|^2 / var`` (exponentially distributed when the model holds)
    refuted_by: tuple[str, int, float] | None = field(init=False, default=None)
    _information: np.ndarray = field(init=False, repr=False)   # P^-1 per pickup (runs)
    _moment: np.ndarray = field(init=False, repr=False)        # P^-1 theta per pickup (runs)
    _prior_information: np.ndarray = field(init=False, repr=False)
    _prior_moment: np.ndarray = field(init=False, repr=False)
    _has_prior: bool = field(init=False, default=False, repr=False)

    def __post_init__(self) -> None:
        n = 1 + self.n_planes
        self.theta = np.zeros((len(self.sensors), n), dtype=complex)
        self.covariance = np.array([np.diag(np.full(n, np.inf + 0j)) for _ in self.sensors])
        self._information = np.zeros((len(self.sensors), n, n), dtype=complex)
        self._moment = np.zeros((len(self.sensors), n), dtype=complex)
        self._prior_information = np.zeros((len(self.sensors), n, n), dtype=complex)
        self._prior_moment = np.zeros((len(self.sensors), n), dtype=complex)

    @classmethod
    def from_prediction(cls, prediction: PredictedInfluence) -> CoefficientEstimate:
        """Start from a predicted set: its mean and covariance as the prior.

        Parameters
        ----------
        prediction : PredictedInfluence
            A prediction with no phase (``magnitude_only``) gives a flat prior.

        Returns
        -------
        CoefficientEstimate

        References
        ----------
        .. [1] Ljung, *System Identification*, 2nd ed., 1999, §11.2 (the prior as the
           initial ``theta`` and ``P``; from memory).
        """
        est = cls(prediction.sensors, prediction.matrix.shape[1])
        if not prediction.magnitude_only:
            for i, cov in enumerate(prediction.covariance):
                scale = float(np.real(np.trace(cov))) / cov.shape[0] or 1.0
                info = np.linalg.inv(cov + 1e-9 * scale * np.eye(cov.shape[0]))
                est._prior_information[i, 1:, 1:] = info
                est._prior_moment[i, 1:] = info @ prediction.matrix[i]
            est._has_prior = True
            est._solve()
        return est

    def _solve(self) -> None:
        """theta = P m, P = (information)^+ (the recursion in information form: the same
        estimate as the covariance form, without its round-off under a flat prior)."""
        use_prior = self._has_prior and not self.prior_refuted
        for i in range(len(self.sensors)):
            total = self._information[i] + (self._prior_information[i] if use_prior else 0.0)
            moment = self._moment[i] + (self._prior_moment[i] if use_prior else 0.0)
            info = 0.5 * (total + total.conj().T)
            self.theta[i] = np.linalg.lstsq(info, moment, rcond=1e-12)[0]
            self.covariance[i] = np.linalg.pinv(info, rcond=1e-12, hermitian=True)

    def update(self, masses_g: Sequence[complex], readings: Mapping[str, complex],
               confidence_95: Mapping[str, float | None]) -> None:
        """Take one run into the estimate.

        Parameters
        ----------
        masses_g : sequence of complex
            Per plane, the masses on the rotor in this run relative to as found (phasors,
            grams at the plane's radius).
        readings : mapping of str to complex
            The 1x per pickup (phasors, reading units).
        confidence_95 : mapping of str to float or None
            Each reading's 95 % circle radius (None: :data:`READING_REL_FLOOR` of the
            reading alone). The masses' placement adds its own variance
            (:meth:`_placement_variance`).

        Raises
        ------
        ValueError
            When ``masses_g`` does not have one entry per plane.

        References
        ----------
        .. [1] Ljung, *System Identification*, 2nd ed., 1999, §11.2 (weighted RLS; from
           memory).
        """
        u = np.asarray(masses_g, dtype=complex)
        if u.shape != (self.n_planes,):
            raise ValueError(f"masses_g needs {self.n_planes} entries, got {u.shape}")
        phi = np.concatenate([[1.0 + 0j], u])
        placed = self._placement_variance(u, readings)
        # each reading's complex variance E|e|^2: twice its per-axis sigma squared (the
        # prior's covariance is a complex covariance too, E[d d^H], so both weigh alike)
        variances = {
            name: max(2.0 * _reading_sigma(confidence_95.get(name), readings[name]) ** 2
                      + placed[i], 1e-300)
            for i, name in enumerate(self.sensors)}
        if self._has_prior and not self.prior_refuted and self.runs_used >= 1:
            self._test_innovation(phi, readings, variances)
        for i, name in enumerate(self.sensors):
            y = complex(readings[name])
            s2 = variances[name]
            # y = phi^T theta + e: information += conj(phi) phi^T / s2, moment += conj(phi) y / s2
            self._information[i] += np.outer(phi.conj(), phi) / s2
            self._moment[i] += phi.conj() * y / s2
        self._solve()
        self.runs_used += 1

    def _placement_variance(self, u: np.ndarray, readings: Mapping[str, complex]) -> np.ndarray:
        """Per pickup, the complex variance a run's reading carries from the masses being
        placed as a person places them (:attr:`placed_mass_rel_sigma`,
        :attr:`placed_angle_sigma_deg`): each plane's effect ``H_ij u_j`` times its relative
        error, the errors of the planes independent (the effective-variance treatment of
        errors in the inputs). The effects come from the estimate so far; while the runs
        alone do not yet tell them and no prior does, from the reading's change from the
        as-found 1x.

        References
        ----------
        .. [1] Orear, J., "Least squares when both variables have uncertainties",
           *Am. J. Phys.* 50(10), 1982 (the effective variance method; from memory).
        """
        rel2 = self.placed_mass_rel_sigma**2 + math.radians(self.placed_angle_sigma_deg) ** 2
        if not np.any(u):
            return np.zeros(len(self.sensors))
        known = (self._has_prior and not self.prior_refuted) or self.determined_by_runs
        out = np.empty(len(self.sensors))
        for i, name in enumerate(self.sensors):
            if known:
                effect2 = float(np.sum(np.abs(self.theta[i, 1:] * u) ** 2))
            else:
                effect2 = abs(complex(readings[name]) - complex(self.theta[i, 0])) ** 2
            # a circular complex error of mean square rel2 |effect|^2
            out[i] = rel2 * effect2
        return out

    def _test_innovation(self, phi: np.ndarray, readings: Mapping[str, complex],
                         variances: Mapping[str, float]) -> None:
        """Does this run's reading fit what the estimate so far predicts? Normalised
        innovation squared ``|y - phi^T theta|^2 / (s2 + phi^H P phi)`` (``s2`` the
        reading's complex variance ``E|e|^2``, ``P`` the estimate's complex covariance):
        for a circular complex Gaussian it is exponentially distributed, so a value beyond
        ``ln(1 / REFUTE_TAIL_PROBABILITY)`` refutes the prior (Bar-Shalom, Li and
        Kirubarajan, *Estimation with Applications to Tracking and Navigation*, 2001,
        §5.4, filter consistency by the normalised innovation; from memory)."""
        limit = math.log(1.0 / REFUTE_TAIL_PROBABILITY)
        for i, name in enumerate(self.sensors):
            predicted = complex(phi @ self.theta[i])
            spread = float(np.real(phi.conj() @ self.covariance[i] @ phi))
            var = variances[name] + max(spread, 0.0)
            surprise = abs(complex(readings[name]) - predicted) ** 2 / var
            if surprise > limit:
                self.prior_refuted = True
                self.refuted_by = (name, self.runs_used, surprise)
                return

    @property
    def determined_by_runs(self) -> bool:
        """True when the runs alone pin every coefficient and the as-found 1x down (the
        mass vectors span every plane): an estimate with no prior is then meaningful."""
        n = 1 + self.n_planes
        return all(np.linalg.matrix_rank(0.5 * (info + info.conj().T), tol=None) == n
                   for info in self._information)

    @property
    def matrix(self) -> np.ndarray:
        """The influence coefficients now (pickups x planes)."""
        return self.theta[:, 1:]

    @property
    def as_found(self) -> np.ndarray:
        """The as-found 1x per pickup now (its estimate from every run)."""
        return self.theta[:, 0]

    def correction_g(self) -> np.ndarray:
        """Masses that cancel the as-found 1x in the least-squares sense.

        Returns
        -------
        ndarray
            ``c = -H^+ b`` per plane (phasors, grams at each plane's radius), relative to
            the as-found rotor.

        References
        ----------
        .. [1] Goodman, "A least-squares method for computing balance corrections", 1964
           (from memory).
        """
        c, *_ = np.linalg.lstsq(self.matrix, -self.as_found, rcond=None)
        return c

    def residual_draws_g(self, last_reading: Mapping[str, complex],
                         confidence_95: Mapping[str, float | None], draws: int = 400,
                         seed: int = 1) -> tuple[np.ndarray, np.ndarray]:
        """The correction still needed after the last run, nominal and drawn.

        Parameters
        ----------
        last_reading : mapping of str to complex
            The last run's 1x per pickup.
        confidence_95 : mapping of str to float or None
            Its 95 % circle radii.
        draws : int, default 400
            Monte Carlo draws: the coefficients and as-found 1x from the estimate's
            covariance ``P`` (the prior's and every run's uncertainty), the reading within
            its circle (with :data:`READING_REL_FLOOR` as a floor).
        seed : int, default 1
            Fixed: the same answer every time.

        Returns
        -------
        (ndarray, ndarray)
            The nominal correction still needed per plane (complex, grams at each plane's
            radius) and its draws (draws x planes).

        References
        ----------
        .. [1] Monte Carlo propagation of distributions, JCGM 101:2008 (GUM Supplement 1).
        """
        y = np.array([complex(last_reading[s]) for s in self.sensors])
        nominal, *_ = np.linalg.lstsq(self.matrix, -y, rcond=None)
        rng = np.random.default_rng(seed)
        n = 1 + self.n_planes
        n_s = len(self.sensors)
        # circular complex Gaussian draws with each pickup's covariance: V sqrt(W) z
        roots = []
        for i in range(n_s):
            w, v = np.linalg.eigh(self.covariance[i])
            if not np.all(np.isfinite(w)):
                return nominal, np.full((draws, self.n_planes), np.inf + 0j)
            roots.append(v * np.sqrt(np.maximum(w, 0.0))[None, :])
        z = (rng.normal(size=(draws, n_s, n)) + 1j * rng.normal(size=(draws, n_s, n))) / math.sqrt(2)
        theta = self.theta[None] + np.einsum("ijk,dik->dij", np.array(roots), z)
        sigma = np.array([_reading_sigma(confidence_95.get(s), y[i])
                          for i, s in enumerate(self.sensors)])
        yd = y[None] + sigma[None] * (rng.normal(size=(draws, n_s)) + 1j * rng.normal(size=(draws, n_s)))
        drawn = np.array([np.linalg.lstsq(theta[d, :, 1:], -yd[d], rcond=None)[0]
                          for d in range(draws)])
        return nominal, drawn

    def residual_g(self, last_reading: Mapping[str, complex], confidence_95: Mapping[str, float | None],
                   draws: int = 400, seed: int = 1) -> tuple[np.ndarray, np.ndarray]:
        """The unbalance still on the rotor after the last run, with a 95 % upper bound.

        Parameters
        ----------
        last_reading : mapping of str to complex
            The last run's 1x per pickup.
        confidence_95 : mapping of str to float or None
            Its 95 % circle radii.
        draws : int, default 400
            Monte Carlo draws (over ``P`` and the reading's circle).
        seed : int, default 1
            Fixed: the same answer every time.

        Returns
        -------
        (ndarray, ndarray)
            The nominal residual per plane (complex, grams at each plane's radius; the
            correction still needed) and the 95th percentile of its magnitude per plane.

        References
        ----------
        .. [1] Monte Carlo propagation of distributions, JCGM 101:2008 (GUM Supplement 1).
        """
        nominal, drawn = self.residual_draws_g(last_reading, confidence_95, draws, seed)
        return nominal, np.percentile(np.abs(drawn), 95, axis=0)


def correction_spread(estimate: CoefficientEstimate, draws: int = 400, seed: int = 2
                      ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The correction an estimate gives, with its 95 % spread in mass and angle.

    Draws ``theta`` (as-found 1x and coefficients, per pickup) from the estimate's
    covariance (circular complex Gaussian), solves each draw's correction ``-H^+ b`` and
    reports, per plane, the 95th percentile of the mass's and the angle's departure from
    the nominal correction.

    Parameters
    ----------
    estimate : CoefficientEstimate
        An estimate with a finite covariance (a prior, or enough runs).
    draws : int, default 400
        Monte Carlo draws.
    seed : int, default 2
        Fixed: the same answer every time.

    Returns
    -------
    (ndarray, ndarray, ndarray)
        The nominal correction per plane (complex, g at each plane's radius), the 95 %
        +/- of its mass (g) and of its angle (degrees, at most 180).

    References
    ----------
    .. [1] Monte Carlo propagation of distributions, JCGM 101:2008 (GUM Supplement 1).
    """
    nominal = estimate.correction_g()
    rng = np.random.default_rng(seed)
    n_s, n = len(estimate.sensors), 1 + estimate.n_planes
    roots = []
    for i in range(n_s):
        w, v = np.linalg.eigh(estimate.covariance[i])
        if not np.all(np.isfinite(w)):
            inf = np.full(estimate.n_planes, np.inf)
            return nominal, inf, np.full(estimate.n_planes, 180.0)
        roots.append(v * np.sqrt(np.maximum(w, 0.0))[None, :])
    z = (rng.normal(size=(draws, n_s, n)) + 1j * rng.normal(size=(draws, n_s, n))) / math.sqrt(2)
    theta = estimate.theta[None] + np.einsum("ijk,dik->dij", np.array(roots), z)
    drawn = np.array([np.linalg.lstsq(theta[d, :, 1:], -theta[d, :, 0], rcond=None)[0]
                      for d in range(draws)])
    mass95 = np.percentile(np.abs(np.abs(drawn) - np.abs(nominal)[None]), 95, axis=0)
    angle95 = np.percentile(np.abs(np.degrees(np.angle(drawn / nominal[None]))), 95, axis=0)
    return nominal, mass95, angle95
