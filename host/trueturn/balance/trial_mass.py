"""Trial-mass sizing.

Rule (common practice, no source): choose the trial mass so that its centrifugal force
``F = m_t * r * omega^2`` is about 10 % of the rotor's weight ``M * g``. The mass is capped
(by default at 1 % of the rotor mass, common practice, no source) and the cap is reported.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from trueturn.balance.iso21940 import angular_speed_rad_s
from trueturn.constants import STANDARD_GRAVITY_M_S2
from trueturn.errors import UserError

DEFAULT_FORCE_RATIO = 0.10
DEFAULT_CAP_FRACTION = 0.01


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
                    max_mass_g: float | None = None) -> TrialMass:
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
        warnings.append(f"the rule asks for {wanted_g:.3g} g, capped at {cap_g:.3g} g ({why}); "
                        "its effect may be small: check the trial-effect warning after the run")
    force_n = centrifugal_force_n(mass_g, radius_mm, speed_rpm)
    return TrialMass(mass_g, force_n, force_n / (rotor_mass_kg * STANDARD_GRAVITY_M_S2),
                     accel / STANDARD_GRAVITY_M_S2, capped, warnings)
