"""Trial-mass sizing.

Before any run (no reading yet), :func:`size_trial_mass`: the rule of thumb (common
practice, no source) that the trial's centrifugal force ``F = m_t * r * omega^2`` be about
10 % of the rotor's weight ``M * g``, capped (by default at 1 % of the rotor mass, common
practice, no source).

After the as-found run, :func:`size_trial_for_effect`: sized to be *seen*. A trial is
judged big enough when it changes the 1x by at least 25 % on some pickup and by three
confidence radii (common practice asks for about 25-30 % in amplitude or 30 deg in phase;
no single source). The trial is aimed at three times that (:data:`TARGET_CHANGE`, 75 %),
so a predicted sensitivity off by up to a factor three still gives a trial that is seen, and
capped by force: never more than :data:`MAX_FORCE_RATIO` of the rotor's weight (our
choice, see the constant).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

from trueturn.balance.iso21940 import angular_speed_rad_s
from trueturn.balance.model_first import Distrust, PredictedInfluence
from trueturn.constants import STANDARD_GRAVITY_M_S2
from trueturn.errors import UserError
from trueturn.model.units import MassUnit, mass_text

DEFAULT_FORCE_RATIO = 0.10
DEFAULT_CAP_FRACTION = 0.01
#: the change of the 1x a trial sized to be seen aims at: three times the 25 % minimum that
#: trueturn.balance.influence checks after the run (our choice, measured by
#: bench/bench_balance.py's [default] rows on 200 rotors: 50 % gave a median of 5 runs and
#: 9 % of trials too small; 75 % gives 4 runs and 4.5 %; 100 % also 4 runs, 2 % too small,
#: for a worst case, the trial adding to the 1x, of twice the as-found 1x)
TARGET_CHANGE = 0.75
#: the force cap of a trial sized to be seen, as a share of the rotor's weight. Our choice,
#: no source: the 10 % rule kept as the cap would make every trial smaller than the rule's
#: own and could not reach 25 % on the demo machines (the grinder and the lathe need about
#: 25 % of their weight); half the weight is below the force of the as-found unbalance of
#: any rotor worse than about 8 times its G 6.3 allowance at 3000 rpm.
MAX_FORCE_RATIO = 0.50
#: the effect must also clear the readings' scatter: this many confidence radii, times two
#: for the same margin as the target (trueturn.balance.influence.MIN_TRIAL_CONFIDENCES = 3)
RESOLVE_RADII = 6.0


@dataclass(frozen=True)
class TrialMass:
    """A trial mass and what it does at speed."""

    mass_g: float
    force_n: float               # centrifugal force at the speed
    force_ratio: float           # force / rotor weight
    force_over_own_weight: float  # force / the trial mass's own weight (r omega^2 / g)
    capped: bool
    warnings: list[str] = field(default_factory=list)


def centrifugal_force_n(mass_g: float, radius_mm: float, speed_rpm: float) -> float:
    """Centrifugal force ``F = m r omega^2`` of a mass at a radius.

    Parameters
    ----------
    mass_g : float
        The mass, g.
    radius_mm : float
        Its distance from the axis, mm.
    speed_rpm : float
        Rotational speed, rpm.

    Returns
    -------
    float
        The force, N.

    References
    ----------
    .. [1] Centripetal force of a point mass in uniform circular motion, ``F = m omega^2 r``
       (any mechanics textbook; common practice, no single source).
    """
    return mass_g / 1000.0 * radius_mm / 1000.0 * angular_speed_rad_s(speed_rpm) ** 2


def size_trial_mass(rotor_mass_kg: float, radius_mm: float, speed_rpm: float,
                    force_ratio: float = DEFAULT_FORCE_RATIO,
                    max_mass_g: float | None = None, mass_unit: MassUnit = "g") -> TrialMass:
    """Trial mass whose centrifugal force is ``force_ratio`` of the rotor's weight, capped.

    Parameters
    ----------
    rotor_mass_kg : float
        Mass of the rotor, kg (greater than 0).
    radius_mm : float
        Radius at which the trial mass sits, mm (greater than 0).
    speed_rpm : float
        Speed of the trial run, rpm (greater than 0).
    force_ratio : float, default 0.10
        Wanted centrifugal force of the trial mass over the rotor's weight ``M g``.
    max_mass_g : float or None, default None
        Cap on the trial mass, g; None caps at 1 % of the rotor mass.
    mass_unit : {"g", "oz"}, default "g"
        The unit the warnings name masses in (the person's); the result stays in grams.

    Returns
    -------
    TrialMass
        The mass (g), its force (N), the force over the rotor weight and over the mass's own
        weight (``r omega^2 / g``), whether it was capped, and a warning when it was.

    Raises
    ------
    UserError
        When a mass, radius, speed, ratio or cap is not a finite number above 0.

    References
    ----------
    .. [1] The 10 % rule (trial force about a tenth of the rotor weight) and the 1 % cap:
       common practice, no source.
    """
    for name, value in (("rotor mass", rotor_mass_kg), ("radius", radius_mm),
                        ("speed", speed_rpm), ("force ratio", force_ratio)):
        if not 0 < value < math.inf:
            raise UserError(f"{name} must be a finite number greater than 0, got {value:g}")
    if max_mass_g is not None and not 0 < max_mass_g < math.inf:
        raise UserError(f"maximum mass must be greater than 0, got {max_mass_g:g}")
    accel = radius_mm / 1000.0 * angular_speed_rad_s(speed_rpm) ** 2   # r omega^2, m/s^2
    wanted_g = 1000.0 * force_ratio * rotor_mass_kg * STANDARD_GRAVITY_M_S2 / accel
    cap_g = max_mass_g if max_mass_g is not None else DEFAULT_CAP_FRACTION * rotor_mass_kg * 1000
    warnings = []
    capped = wanted_g > cap_g
    mass_g = min(wanted_g, cap_g)
    if capped:
        why = "the limit you gave" if max_mass_g is not None else "1 % of the rotor mass"
        warnings.append(f"the rule asks for {mass_text(wanted_g, mass_unit)}, capped at "
                        f"{mass_text(cap_g, mass_unit)} ({why}); its effect may be small: "
                        "check the trial-effect warning after the run")
    force_n = centrifugal_force_n(mass_g, radius_mm, speed_rpm)
    return TrialMass(mass_g, force_n, force_n / (rotor_mass_kg * STANDARD_GRAVITY_M_S2),
                     accel / STANDARD_GRAVITY_M_S2, capped, warnings)


def size_trial_for_effect(as_found_amplitudes: Sequence[float], sensitivities_per_g: Sequence[float],
                          rotor_mass_kg: float, radius_mm: float, speed_rpm: float,
                          confidences_95: Sequence[float | None] | None = None,
                          target_change: float = TARGET_CHANGE,
                          max_force_ratio: float = MAX_FORCE_RATIO,
                          max_mass_g: float | None = None,
                          min_mass_g: float = 0.0) -> TrialMass:
    """Trial mass that changes the 1x by ``target_change`` on the pickup it moves most.

    Parameters
    ----------
    as_found_amplitudes : sequence of float
        The as-found 1x per pickup (reading units).
    sensitivities_per_g : sequence of float
        Predicted (or saved) 1x change per gram at this plane's radius, per pickup, same
        order (reading units per gram); from :mod:`trueturn.balance.model_first` or saved
        influence coefficients.
    rotor_mass_kg, radius_mm, speed_rpm : float
        The rotor's mass (kg), the trial's radius (mm) and the run's speed (rpm), all > 0.
    confidences_95 : sequence of float or None, default None
        Each as-found reading's 95 % circle radius: the effect must also be
        :data:`RESOLVE_RADII` of them.
    target_change : float, default 0.5
        Wanted change over the as-found 1x.
    max_force_ratio : float, default 0.5
        Cap: the trial's centrifugal force over the rotor's weight.
    max_mass_g : float or None, default None
        A further cap (the plane's limit), g.
    min_mass_g : float, default 0
        A floor (e.g. what a scale can weigh), g.

    Returns
    -------
    TrialMass
        ``capped`` with a warning when a cap cut the mass short of the target.

    Raises
    ------
    UserError
        When a mass, radius, speed, ratio or sensitivity is not a finite number above 0,
        or the lists differ in length.

    References
    ----------
    .. [1] The 25-30 % change a trial should make: common practice, no source; the target
       of twice the minimum and the force cap: our choice (module docstring).
    """
    for name, value in (("rotor mass", rotor_mass_kg), ("radius", radius_mm),
                        ("speed", speed_rpm), ("target change", target_change),
                        ("force ratio", max_force_ratio)):
        if not 0 < value < math.inf:
            raise UserError(f"{name} must be a finite number greater than 0, got {value:g}")
    if len(as_found_amplitudes) != len(sensitivities_per_g) or not as_found_amplitudes:
        raise UserError("give one as-found amplitude and one sensitivity per pickup")
    if any(not 0 < s < math.inf for s in sensitivities_per_g):
        raise UserError("every sensitivity must be a finite number greater than 0")
    conf = list(confidences_95) if confidences_95 is not None else [None] * len(sensitivities_per_g)
    wanted_g = min(max(target_change * abs(a), RESOLVE_RADII * (c or 0.0)) / s
                   for a, s, c in zip(as_found_amplitudes, sensitivities_per_g, conf, strict=True))
    wanted_g = max(wanted_g, min_mass_g)
    accel = radius_mm / 1000.0 * angular_speed_rad_s(speed_rpm) ** 2   # r omega^2, m/s^2
    cap_force_g = 1000.0 * max_force_ratio * rotor_mass_kg * STANDARD_GRAVITY_M_S2 / accel
    cap_g = min(cap_force_g, max_mass_g) if max_mass_g is not None else cap_force_g
    warnings = []
    capped = wanted_g > cap_g
    mass_g = min(wanted_g, cap_g)
    if capped:
        why = ("the plane's limit" if max_mass_g is not None and max_mass_g <= cap_force_g
               else f"a force of {100 * max_force_ratio:.0f} % of the rotor's weight")
        warnings.append(f"a trial seen clearly needs about {wanted_g:.3g} g, capped at "
                        f"{cap_g:.3g} g ({why}); its effect may be small")
    force_n = centrifugal_force_n(mass_g, radius_mm, speed_rpm)
    return TrialMass(mass_g, force_n, force_n / (rotor_mass_kg * STANDARD_GRAVITY_M_S2),
                     accel / STANDARD_GRAVITY_M_S2, capped, warnings)


#: the force rule's ratio used as a floor when only the free rotor's sensitivity is known: a
#: stiff mounting (no support resonance below the running speed) responds 5-50 times less
#: than the free rotor (bench/bench_balance.py's rotors), so the trial is then sized by
#: force. Our choice, measured by bench/bench_balance.py (the 30 % rule's row).
STIFF_FLOOR_FORCE_RATIO = 0.30
#: with no sweep at all the floor stays within this many times the free-rotor size
FREE_ROTOR_BOUND = 3.0


def suggest_trial(as_found_amplitudes: Sequence[float], confidences_95: Sequence[float | None],
                  prediction: PredictedInfluence, plane_index: int, rotor_mass_kg: float,
                  radius_mm: float, speed_rpm: float, measured_scale: float | None = None,
                  saved_sensitivities_per_g: Sequence[float] | None = None,
                  max_mass_g: float | None = None,
                  seen_unbalance_gmm: float | None = None) -> TrialMass:
    """The trial for one plane after the as-found run, from the best sensitivity known.

    In order: saved influence coefficients of this machine (exact); the predicted
    sensitivity (:func:`trueturn.balance.model_first.predict_influence`: with a sweep's
    resonances, or the free rotor's) times ``measured_scale`` (what an earlier trial of
    this job showed against its prediction). Sized by :func:`size_trial_for_effect`. When
    only the free rotor is known, the force rule at :data:`STIFF_FLOOR_FORCE_RATIO` is a
    floor (the free rotor overstates a stiff mounting's sensitivity); with no sweep at all
    that floor is held within :data:`FREE_ROTOR_BOUND` times the free-rotor size (the
    mounting may be soft, where the free rotor understates it). On a magnitude-only
    prediction an earlier trial of the job that was seen (``seen_unbalance_gmm``) is a
    floor too: the prediction's pattern across the planes is not known, and its scaled
    size for this plane may fall short where the earlier trial's unbalance was seen.

    Parameters
    ----------
    as_found_amplitudes, confidences_95 : sequences of float
        The as-found 1x and its 95 % radius per pickup (prediction order).
    prediction : PredictedInfluence
    plane_index : int
    rotor_mass_kg, radius_mm, speed_rpm : float
    measured_scale : float or None
    saved_sensitivities_per_g : sequence of float or None
        |H| per pickup for this plane from saved coefficients.
    max_mass_g : float or None
        The plane's limit.
    seen_unbalance_gmm : float or None
        The unbalance (mass x radius, g mm) of an earlier trial of this job on another
        plane whose effect was seen (its run kept); used only with a magnitude-only
        prediction and no saved coefficients.

    Returns
    -------
    TrialMass

    References
    ----------
    .. [1] Trial effect 25-30 %: common practice, no source; the rest our choice (module
       docstring), measured by bench/bench_balance.py.
    .. [2] The same trial unbalance in each plane when nothing better is known: common
       practice (from memory). bench/bench_balance.py measured the floor, paired on 300
       stiff mounts (600 trials): too-small trials 39 -> 24, runs stopped by the alarm
       10 -> 13, within 5 runs 87.7 % -> 90.7 %.
    """
    floor_g = 0.0
    if saved_sensitivities_per_g is not None:
        sens = list(saved_sensitivities_per_g)
    else:
        sens = [float(v) * (measured_scale or 1.0) for v in prediction.magnitude[:, plane_index]]
        if measured_scale is None and prediction.magnitude_only:
            accel = radius_mm / 1000.0 * angular_speed_rad_s(speed_rpm) ** 2
            floor_g = (1000.0 * STIFF_FLOOR_FORCE_RATIO * rotor_mass_kg * STANDARD_GRAVITY_M_S2
                       / accel)
            if Distrust.STIFFNESS_UNKNOWN not in prediction.distrust:
                # no sweep: the mounting may be soft, where the free rotor's sensitivity is
                # a lower bound; the floor then stays within FREE_ROTOR_BOUND times the
                # free-rotor size (a predicted change of at most three times TARGET_CHANGE)
                free_g = size_trial_for_effect(as_found_amplitudes, sens, rotor_mass_kg,
                                               radius_mm, speed_rpm, confidences_95,
                                               max_force_ratio=1e12).mass_g
                floor_g = min(floor_g, FREE_ROTOR_BOUND * free_g)
        if prediction.magnitude_only and seen_unbalance_gmm is not None:
            floor_g = max(floor_g, seen_unbalance_gmm / radius_mm)
    return size_trial_for_effect(as_found_amplitudes, sens, rotor_mass_kg, radius_mm, speed_rpm,
                                 confidences_95, max_mass_g=max_mass_g, min_mass_g=floor_g)


def redo_below_stopped(trial_g: float, suggested_g: float, stopped_g: float | None) -> float:
    """The redo of a trial too small (``trial_g``, with ``suggested_g`` asked for) on a plane
    where a larger trial, ``stopped_g``, stopped the run (the runaway alarm): the suggestion
    while it stays under the stopped one, else the geometric mean of the two, so the redos
    close in on a trial that is seen and runs (a bisection in the logarithm of the mass)
    instead of swinging between too small and too big.

    Parameters
    ----------
    trial_g : float
        The trial too small, g.
    suggested_g : float
        The mass the effect check asks for, g.
    stopped_g : float or None
        The smallest trial the alarm stopped on that plane, g (None: none was).

    Returns
    -------
    float
        The redo's mass, g.

    References
    ----------
    .. [1] Bisection on a bracketed interval (any numerical-analysis text; here in the
       logarithm of the mass, our choice).
    """
    if stopped_g is None or suggested_g < stopped_g:
        return suggested_g
    return math.sqrt(trial_g * stopped_g)


def trial_after_runaway(trial_g: float, level_ratio: float,
                        target_change: float = TARGET_CHANGE) -> float:
    """A smaller trial after a trial run was stopped because its 1x passed a multiple of
    the as-found level.

    With the as-found 1x ``R0`` and the trial's own effect ``dR`` on a pickup, the run read
    ``|R0 + dR| = level_ratio |R0|``; by the triangle inequality the effect lies between
    ``(level_ratio - 1) |R0|`` and ``(level_ratio + 1) |R0|``, whatever the phases. The
    effect is linear in the mass, so a trial of ``trial_g * target_change /
    sqrt(level_ratio**2 - 1)`` puts ``target_change`` at the geometric middle of the changes
    it can make: at ``level_ratio`` 3 and the 75 % target, between 53 % and 106 % of the
    as-found 1x, seen (the 25 % minimum) and, added in phase, at most 2.06 times the as-found
    level.

    Parameters
    ----------
    trial_g : float
        The trial that was stopped, g (> 0).
    level_ratio : float
        The largest 1x over its as-found level the stopped run read (> 1).
    target_change : float, default :data:`TARGET_CHANGE`
        The wanted change over the as-found 1x.

    Returns
    -------
    float
        The smaller trial, g.

    Raises
    ------
    UserError
        When the mass is not above 0, or the ratio is not a finite number above 1 (a run
        at or under its as-found level tells nothing about the trial's size).

    References
    ----------
    .. [1] The triangle inequality ``||a| - |b|| <= |a + b| <= |a| + |b|`` for complex
       numbers (any complex-analysis text; from memory); the 1x linear in the unbalance is
       the influence-coefficient method's own assumption (E. L. Thearle, "Dynamic Balancing
       of Rotating Machinery in the Field", Trans. ASME (1934); from memory). The geometric
       middle: our choice.
    """
    if not 0 < trial_g < math.inf:
        raise UserError(f"trial mass must be a finite number greater than 0, got {trial_g:g}")
    if not 1 < level_ratio < math.inf:
        raise UserError(f"the level over the as-found must be a finite number above 1, got "
                        f"{level_ratio:g}")
    return trial_g * target_change / math.sqrt(level_ratio**2 - 1.0)
