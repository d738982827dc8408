"""Balance tolerance after ISO 21940-11:2016 (rigid rotors), formerly ISO 1940-1.

* Permissible specific unbalance (eccentricity): ``e_per = G / omega``; with G in mm/s and
  omega in rad/s, ``e_per_um = 1000 * G / omega``.
* Permissible residual unbalance: ``U_per = e_per * m``; ``U_per_gmm = e_per_um * m_kg``.
* Allocation to two tolerance planes (ISO 21940-11:2016, clause 7, "allocation of U_per to
  tolerance planes", from memory — check against the standard): for a rotor whose centre of
  mass lies between the planes, the lever rule ``U_per,A = U_per * L_B / L`` and
  ``U_per,B = U_per * L_A / L``, each kept within 0.3...0.7 of ``U_per``. Overhung rotors
  (centre of mass outside the planes) need the standard's other rules and are refused here.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from trueturn.errors import UserError

#: lower and upper share of U_per per plane for the lever-rule allocation (clause 7, from memory)
MIN_SHARE, MAX_SHARE = 0.3, 0.7


@dataclass(frozen=True)
class Grade:
    """A balance quality grade: G in mm/s and typical rotor types."""

    grade_mm_s: float
    examples: str


#: Grades G 0.4 ... G 4000 (ratio 2.5). Examples paraphrased from memory of the table in
#: ISO 21940-11:2016 / ISO 1940-1:2003 ("guidance for balance quality grades"); the
#: machine's manufacturer or contract has the final word.
GRADES: tuple[Grade, ...] = (
    Grade(4000, "crankshaft drives of rigidly mounted slow marine diesel engines with an "
                "uneven number of cylinders"),
    Grade(1600, "crankshaft drives of rigidly mounted large two-stroke engines"),
    Grade(630, "crankshaft drives of rigidly mounted large four-stroke engines; elastically "
               "mounted marine diesel engines"),
    Grade(250, "crankshaft drives of rigidly mounted fast four-cylinder diesel engines"),
    Grade(100, "complete fast diesel engines with six or more cylinders; car, truck and "
               "locomotive engines"),
    Grade(40, "car wheels and rims, wheel sets, drive shafts; crankshaft drives of "
              "elastically mounted fast four-stroke engines"),
    Grade(16, "drive shafts with special requirements; crushing and agricultural machinery "
              "parts; car, truck and locomotive engine crankshaft drives"),
    Grade(6.3, "fans, flywheels, pump impellers, centrifuge drums, paper machine rolls, "
               "machine-tool and general machinery parts, standard electric motor rotors"),
    Grade(2.5, "gas and steam turbines, turbo-compressors, turbine-driven pumps, "
               "machine-tool drives, small electric armatures, computer drives"),
    Grade(1, "grinding machine drives, small electric armatures with special requirements, "
             "tape and record player drives"),
    Grade(0.4, "spindles, discs and armatures of precision grinding machines, gyroscopes"),
)


def angular_speed_rad_s(speed_rpm: float) -> float:
    """omega = 2 pi n / 60."""
    return 2.0 * math.pi * speed_rpm / 60.0


def permissible_eccentricity_um(grade_mm_s: float, speed_rpm: float) -> float:
    """e_per = G / omega (ISO 21940-11:2016), in micrometres."""
    if not (0 < grade_mm_s < math.inf and 0 < speed_rpm < math.inf):
        raise UserError("grade and speed must be greater than 0")
    return 1000.0 * grade_mm_s / angular_speed_rad_s(speed_rpm)


def permissible_unbalance_gmm(grade_mm_s: float, speed_rpm: float, rotor_mass_kg: float) -> float:
    """U_per = e_per * m (ISO 21940-11:2016), in g·mm (µm · kg = g · mm)."""
    if not 0 < rotor_mass_kg < math.inf:
        raise UserError("rotor mass must be greater than 0")
    return permissible_eccentricity_um(grade_mm_s, speed_rpm) * rotor_mass_kg


def allocate_two_planes(u_per_gmm: float, plane_distance_mm: float | None = None,
                        cg_from_first_plane_mm: float | None = None) -> tuple[float, float]:
    """U_per shared between two planes by the lever rule, each share within 0.3...0.7.

    Without geometry the centre of mass is taken midway: half each.
    """
    if plane_distance_mm is None or cg_from_first_plane_mm is None:
        if (plane_distance_mm is None) != (cg_from_first_plane_mm is None):
            raise UserError("give both the plane distance and the centre-of-mass position, "
                            "or neither")
        return u_per_gmm / 2.0, u_per_gmm / 2.0
    if not 0 < plane_distance_mm < math.inf or not math.isfinite(cg_from_first_plane_mm):
        raise UserError("plane distance must be greater than 0")
    a = cg_from_first_plane_mm
    if not 0.0 <= a <= plane_distance_mm:
        raise UserError("centre of mass outside the two planes (overhung rotor): this "
                        "allocation rule does not apply; see ISO 21940-11 clause 7")
    share_first = min(max((plane_distance_mm - a) / plane_distance_mm, MIN_SHARE), MAX_SHARE)
    share_second = min(max(a / plane_distance_mm, MIN_SHARE), MAX_SHARE)
    return u_per_gmm * share_first, u_per_gmm * share_second


@dataclass(frozen=True)
class Verdict:
    """Pass/fail of residual unbalances (g·mm per plane) against their permissible values."""

    passed: bool
    residual_gmm: tuple[float, ...]
    permissible_gmm: tuple[float, ...]

    @property
    def worst_ratio(self) -> float:
        return max(r / p for r, p in zip(self.residual_gmm, self.permissible_gmm, strict=True))


def verdict(residual_gmm: Sequence[float], permissible_gmm: Sequence[float]) -> Verdict:
    """Pass when every plane's residual is within its share of U_per."""
    if len(residual_gmm) != len(permissible_gmm):
        raise ValueError("one permissible value per plane")
    ok = all(r <= p for r, p in zip(residual_gmm, permissible_gmm, strict=True))
    return Verdict(ok, tuple(residual_gmm), tuple(permissible_gmm))


def per_plane_permissible(u_per_gmm: float, n_planes: int, plane_distance_mm: float | None = None,
                          cg_from_first_plane_mm: float | None = None) -> list[float]:
    """U_per for one plane (all of it) or two planes (allocated); N > 2: equal shares."""
    if n_planes == 1:
        return [u_per_gmm]
    if n_planes == 2:
        return list(allocate_two_planes(u_per_gmm, plane_distance_mm, cg_from_first_plane_mm))
    return [u_per_gmm / n_planes] * n_planes
