"""Balance tolerance after ISO 21940-11:2016 (rigid rotors), formerly ISO 1940-1.

* Permissible specific unbalance (eccentricity): ``e_per = G / omega``; with G in mm/s and
  omega in rad/s, ``e_per_um = 1000 * G / omega``; omega is the **maximum service speed**.
* Permissible residual unbalance: ``U_per = e_per * m``; ``U_per_gmm = e_per_um * m_kg``.
* Tolerance planes are the bearing planes (ISO 21940-11:2016, clause 4, "reference planes
  for unbalance tolerances": "the reference planes for unbalance tolerances are taken to be
  the bearing planes"; this sentence checked against a public excerpt, the clause number
  from memory). Residual unbalances left in correction planes elsewhere are referred to the
  bearing planes by rigid-rotor statics (:func:`refer_to_bearings`): the bearing reactions
  to the rotating centrifugal forces, force and moment balance, for correction planes
  inboard, outboard or overhung. A couple left in planes wider apart than the bearings
  loads them by the ratio of the spans.
* Allocation of ``U_per`` to the two bearing planes (ISO 21940-11:2016, clause 7,
  "allocation of U_per to tolerance planes", from memory — check against the standard):
  the lever rule ``U_per,A = U_per * L_B / L`` and ``U_per,B = U_per * L_A / L`` (L_A, L_B:
  distances of the centre of mass from bearings A and B, L = L_A + L_B), each share kept
  within 0.3...0.7 of ``U_per``. Centre of mass not given: midway, half each. Centre of
  mass outside the bearings: the 0.3/0.7 limits (from memory the standard treats such
  rotors separately; the verdict carries :attr:`VerdictFlag.CG_OUTSIDE_BEARINGS`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from trueturn.angles import amplitude_phase
from trueturn.errors import UserError
from trueturn.model import PlaneArrangement, TolerancePlanes, Verdict, VerdictFlag

#: lower and upper share of U_per per plane for the lever-rule allocation (clause 7, from memory)
MIN_SHARE, MAX_SHARE = 0.3, 0.7


@dataclass(frozen=True)
class Grade:
    """A balance quality grade: G in mm/s and the machinery types the standard lists for it."""

    grade_mm_s: float
    rotor_types: tuple[str, ...]

    @property
    def examples(self) -> str:
        """The machinery types as one line."""
        return "; ".join(self.rotor_types)


#: Where :data:`GRADES` comes from (shown with the table).
GRADES_SOURCE = ("ISO 21940-11:2016, Table 1 (guidance for balance quality grades for rotors "
                 "in a constant (rigid) state), from memory: the grades are certain, the "
                 "machinery types recalled (the same as ISO 1940-1:2003 Table 1) — check the "
                 "standard; the machine's manufacturer or contract has the final word")

#: Grades G 0.4 ... G 4000 (neighbours a factor 2.5 apart) with the machinery types of
#: ISO 21940-11:2016 Table 1, from memory (see :data:`GRADES_SOURCE`).
GRADES: tuple[Grade, ...] = (
    Grade(4000, ("crankshaft drives for large slow marine diesel engines (piston speed below "
                 "9 m/s), inherently unbalanced",)),
    Grade(1600, ("crankshaft drives for large slow marine diesel engines (piston speed below "
                 "9 m/s), inherently balanced",)),
    Grade(630, ("crankshaft drives, inherently unbalanced, elastically mounted",)),
    Grade(250, ("crankshaft drives, inherently unbalanced, rigidly mounted",)),
    Grade(100, ("complete reciprocating engines for cars, trucks and locomotives",)),
    Grade(40, ("cars: wheels, wheel rims, wheel sets, drive shafts",
               "crankshaft drives, inherently balanced, elastically mounted")),
    Grade(16, ("agricultural machinery", "crankshaft drives, inherently balanced, rigidly "
               "mounted", "crushing machines", "drive shafts (cardan shafts, propeller shafts)")),
    Grade(6.3, ("aircraft gas turbines", "centrifuges (separators, decanters)",
                "electric motors and generators (shaft height at least 80 mm) of maximum rated "
                "speeds up to 950 r/min", "electric motors of shaft heights smaller than 80 mm",
                "fans", "gears", "machinery, general", "machine-tools", "paper machines",
                "process plant machines", "pumps", "turbo chargers", "water turbines")),
    Grade(2.5, ("compressors", "computer drives", "electric motors and generators (shaft "
                "height at least 80 mm) of maximum rated speeds above 950 r/min",
                "gas turbines and steam turbines", "machine-tool drives", "textile machines")),
    Grade(1, ("audio and video drives", "grinding machine drives")),
    Grade(0.4, ("gyroscopes", "spindles and drives of high-precision systems")),
)


def angular_speed_rad_s(speed_rpm: float) -> float:
    """Angular speed ``omega = 2 pi n / 60``.

    Parameters
    ----------
    speed_rpm : float
        Rotational speed ``n``, rpm.

    Returns
    -------
    float
        Angular speed, rad/s.

    References
    ----------
    .. [1] Definition of the radian per second and the revolution per minute (SI units;
       common practice, no source).
    """
    return 2.0 * math.pi * speed_rpm / 60.0


def permissible_eccentricity_um(grade_mm_s: float, speed_rpm: float) -> float:
    """Permissible specific unbalance ``e_per = G / omega`` at the maximum service speed.

    Parameters
    ----------
    grade_mm_s : float
        Balance quality grade G, mm/s (e.g. 6.3 for G 6.3).
    speed_rpm : float
        Maximum service speed, rpm.

    Returns
    -------
    float
        ``e_per``, micrometres (g·mm per kg of rotor).

    Raises
    ------
    UserError
        When the grade or the speed is not a finite number above 0.

    References
    ----------
    .. [1] ISO 21940-11:2016, Mechanical vibration -- Rotor balancing -- Part 11: Procedures
       and tolerances for rotors with rigid behaviour (formerly ISO 1940-1).
    """
    if not (0 < grade_mm_s < math.inf and 0 < speed_rpm < math.inf):
        raise UserError("grade and speed must be greater than 0")
    return 1000.0 * grade_mm_s / angular_speed_rad_s(speed_rpm)


def permissible_unbalance_gmm(grade_mm_s: float, speed_rpm: float, rotor_mass_kg: float) -> float:
    """Permissible residual unbalance ``U_per = e_per m`` of the whole rotor.

    Parameters
    ----------
    grade_mm_s : float
        Balance quality grade G, mm/s.
    speed_rpm : float
        Maximum service speed, rpm.
    rotor_mass_kg : float
        Mass of the rotor, kg.

    Returns
    -------
    float
        ``U_per``, g·mm (um times kg).

    Raises
    ------
    UserError
        When the rotor mass, the grade or the speed is not a finite number above 0.

    References
    ----------
    .. [1] ISO 21940-11:2016, Mechanical vibration -- Rotor balancing -- Part 11: Procedures
       and tolerances for rotors with rigid behaviour (formerly ISO 1940-1).
    """
    if not 0 < rotor_mass_kg < math.inf:
        raise UserError("rotor mass must be greater than 0")
    return permissible_eccentricity_um(grade_mm_s, speed_rpm) * rotor_mass_kg


def allocate_two_planes(u_per_gmm: float, plane_distance_mm: float | None = None,
                        cg_from_first_plane_mm: float | None = None) -> tuple[float, float]:
    """``U_per`` shared between two correction planes by the lever rule, each share 0.3...0.7.

    Without geometry the centre of mass is taken midway: half each. Used when the bearings are
    not known (the verdict is then flagged ``not_at_bearings``).

    Parameters
    ----------
    u_per_gmm : float
        Permissible residual unbalance of the rotor, g·mm.
    plane_distance_mm : float or None, default None
        Distance between the two planes, mm.
    cg_from_first_plane_mm : float or None, default None
        Centre of mass measured from the first plane towards the second, mm.

    Returns
    -------
    tuple of (float, float)
        Permissible residual unbalance of the first and the second plane, g·mm.

    Raises
    ------
    UserError
        When only one of the distances is given, the plane distance is not above 0, or the
        centre of mass lies outside the two planes.

    References
    ----------
    .. [1] ISO 21940-11:2016, Mechanical vibration -- Rotor balancing -- Part 11: Procedures
       and tolerances for rotors with rigid behaviour (formerly ISO 1940-1).
       Clause 7, allocation of ``U_per`` to the tolerance planes (from memory -- check
       against the standard).
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


def verdict(residual_gmm: Sequence[float], permissible_gmm: Sequence[float]) -> Verdict:
    """Pass when every plane's residual is within its share of ``U_per`` (correction planes).

    Parameters
    ----------
    residual_gmm : sequence of float
        Residual unbalance per plane, g·mm.
    permissible_gmm : sequence of float
        Permissible residual unbalance per plane, g·mm (same order).

    Returns
    -------
    Verdict
        Pass or fail with the residuals and shares, flagged ``not_at_bearings`` (the standard's
        tolerance planes are the bearing planes).

    Raises
    ------
    ValueError
        When the two sequences differ in length (a programming error, not a user's).

    References
    ----------
    .. [1] ISO 21940-11:2016, Mechanical vibration -- Rotor balancing -- Part 11: Procedures
       and tolerances for rotors with rigid behaviour (formerly ISO 1940-1).
    """
    if len(residual_gmm) != len(permissible_gmm):
        raise ValueError("one permissible value per plane")
    ok = all(r <= p for r, p in zip(residual_gmm, permissible_gmm, strict=True))
    return Verdict(ok, tuple(residual_gmm), tuple(permissible_gmm),
                   flags=(VerdictFlag.NOT_AT_BEARINGS,))


def _bearing_span(bearing_axial_mm: Sequence[float]) -> tuple[float, float, float]:
    if len(bearing_axial_mm) != 2:
        raise UserError(f"two bearing positions are needed, got {len(bearing_axial_mm)}")
    z_a, z_b = (float(z) for z in bearing_axial_mm)
    if not (math.isfinite(z_a) and math.isfinite(z_b)):
        raise UserError("bearing positions must be finite numbers (mm)")
    span = z_b - z_a
    if abs(span) < 1e-9:
        raise UserError("the two bearings must be at different axial positions")
    return z_a, z_b, span


def bearing_lever_arms(plane_axial_mm: Sequence[float], bearing_axial_mm: Sequence[float]
                       ) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """Share of a plane's unbalance carried by bearing A and by bearing B (rigid rotor).

    For an unbalance U at axial position z and bearings at z_A, z_B (L = z_B - z_A), force and
    moment balance of the rotating centrifugal forces (all scale with omega^2, so unbalance
    units carry through) give the bearing reactions

        R_A = U (z_B - z) / L,   R_B = U (z - z_A) / L.

    Both arms lie in 0...1 for a plane between the bearings; outside, one exceeds 1 and the
    other is negative (the far bearing is pulled the other way).

    Parameters
    ----------
    plane_axial_mm : sequence of float
        Axial position of each correction plane, mm (any common origin).
    bearing_axial_mm : sequence of float
        Axial positions of bearing A and bearing B, mm (same origin; exactly two).

    Returns
    -------
    tuple of (tuple of float, tuple of float)
        The arms to bearing A and to bearing B, one per plane (dimensionless).

    Raises
    ------
    UserError
        When there are not two bearings, they coincide, or a position is not finite.

    References
    ----------
    .. [1] Rigid-body statics: equilibrium of forces and moments on a beam on two supports
       (any statics textbook; common practice, no single source).
    """
    z_a, z_b, span = _bearing_span(bearing_axial_mm)
    zs = [float(z) for z in plane_axial_mm]
    if not all(math.isfinite(z) for z in zs):
        raise UserError("plane positions must be finite numbers (mm)")
    return (tuple((z_b - z) / span for z in zs), tuple((z - z_a) / span for z in zs))


def refer_to_bearings(residual_gmm: Sequence[complex], plane_axial_mm: Sequence[float],
                      bearing_axial_mm: Sequence[float]) -> tuple[complex, complex]:
    """Residual unbalance vectors in the correction planes referred to the two bearing planes.

    ``(U_A, U_B)`` with ``U_A + U_B = sum U_j`` (force balance) and ``z_A U_A + z_B U_B =
    sum z_j U_j`` (moment balance).

    Parameters
    ----------
    residual_gmm : sequence of complex
        Residual unbalance per correction plane as a phasor (magnitude and angle), g·mm.
    plane_axial_mm : sequence of float
        Axial position of each correction plane, mm (any common origin).
    bearing_axial_mm : sequence of float
        Axial positions of bearing A and bearing B, mm (same origin).

    Returns
    -------
    tuple of (complex, complex)
        The residual unbalance referred to bearing A and to bearing B, g·mm phasors.

    Raises
    ------
    UserError
        When the planes and their positions differ in number, or the bearings are unusable
        (:func:`bearing_lever_arms`).

    References
    ----------
    .. [1] ISO 21940-11:2016, clause 4: the bearing planes are the reference planes for
       unbalance tolerances (sentence checked against a public excerpt, clause number from
       memory).
    .. [2] Rigid-body statics (force and moment balance; common practice, no single source).
    """
    if len(residual_gmm) != len(plane_axial_mm):
        raise UserError("one axial position per correction plane is needed")
    arm_a, arm_b = bearing_lever_arms(plane_axial_mm, bearing_axial_mm)
    u = [complex(x) for x in residual_gmm]
    return (sum((a * x for a, x in zip(arm_a, u, strict=True)), 0j),
            sum((b * x for b, x in zip(arm_b, u, strict=True)), 0j))


def worst_case_at_bearings(residual_gmm: Sequence[float], plane_axial_mm: Sequence[float],
                           bearing_axial_mm: Sequence[float]) -> tuple[float, float]:
    """Bearing-plane residuals when only magnitudes are known: every plane's share in phase.

    ``sum |arm_j| |U_j|`` per bearing: the largest value the unknown angles could give
    (triangle inequality on :func:`refer_to_bearings`).

    Parameters
    ----------
    residual_gmm : sequence of float
        Residual unbalance magnitude per correction plane, g·mm.
    plane_axial_mm : sequence of float
        Axial position of each correction plane, mm.
    bearing_axial_mm : sequence of float
        Axial positions of bearing A and bearing B, mm.

    Returns
    -------
    tuple of (float, float)
        Worst-case residual at bearing A and at bearing B, g·mm.

    Raises
    ------
    UserError
        When the planes and their positions differ in number.

    References
    ----------
    .. [1] Triangle inequality ``|sum a_j U_j| <= sum |a_j| |U_j|`` applied to the rigid-body
       referral (common practice, no source).
    """
    if len(residual_gmm) != len(plane_axial_mm):
        raise UserError("one axial position per correction plane is needed")
    arm_a, arm_b = bearing_lever_arms(plane_axial_mm, bearing_axial_mm)
    mags = [abs(float(x)) for x in residual_gmm]
    return (sum(abs(a) * m for a, m in zip(arm_a, mags, strict=True)),
            sum(abs(b) * m for b, m in zip(arm_b, mags, strict=True)))


def plane_arrangement(plane_axial_mm: Sequence[float], bearing_axial_mm: Sequence[float]
                      ) -> PlaneArrangement:
    """Inboard, outboard, overhung or mixed: where the correction planes are against the bearings.

    Parameters
    ----------
    plane_axial_mm : sequence of float
        Axial position of each correction plane, mm.
    bearing_axial_mm : sequence of float
        Axial positions of the two bearings, mm (same origin).

    Returns
    -------
    PlaneArrangement
        ``INBOARD`` (all between the bearings), ``OUTBOARD`` (outside, on both sides),
        ``OVERHUNG`` (outside, on one side) or ``MIXED``.

    References
    ----------
    .. [1] Geometry only (axial positions compared); the usual names of the arrangements
       (common practice, no source).
    """
    z_a, z_b, _ = _bearing_span(bearing_axial_mm)
    low, high = min(z_a, z_b), max(z_a, z_b)
    tol = 1e-9 * max(1.0, abs(high - low))
    inside = [low - tol <= z <= high + tol for z in plane_axial_mm]
    if all(inside):
        return PlaneArrangement.INBOARD
    if any(inside):
        return PlaneArrangement.MIXED
    if all(z < low for z in plane_axial_mm) or all(z > high for z in plane_axial_mm):
        return PlaneArrangement.OVERHUNG
    return PlaneArrangement.OUTBOARD


def allocate_to_bearings(u_per_gmm: float, bearing_axial_mm: Sequence[float],
                         cg_axial_mm: float | None = None
                         ) -> tuple[tuple[float, float], tuple[VerdictFlag, ...]]:
    """``U_per`` shared between bearing A and bearing B by the lever rule, each share 0.3...0.7.

    Parameters
    ----------
    u_per_gmm : float
        Permissible residual unbalance of the rotor, g·mm.
    bearing_axial_mm : sequence of float
        Axial positions of bearing A and bearing B, mm.
    cg_axial_mm : float or None, default None
        Axial position of the centre of mass, mm (same origin); None takes it midway.

    Returns
    -------
    tuple of ((float, float), tuple of VerdictFlag)
        The permissible residual unbalance at bearing A and at bearing B, g·mm, and the flags
        that apply (``cg_assumed_midway``, ``cg_outside_bearings``).

    Raises
    ------
    UserError
        When the bearings are unusable or the centre of mass is not a finite number.

    References
    ----------
    .. [1] ISO 21940-11:2016, Mechanical vibration -- Rotor balancing -- Part 11: Procedures
       and tolerances for rotors with rigid behaviour (formerly ISO 1940-1).
       Clause 7, lever rule with each share within 0.3...0.7 of ``U_per`` (from memory --
       check against the standard).
    """
    z_a, z_b, span = _bearing_span(bearing_axial_mm)
    if cg_axial_mm is None:
        return (u_per_gmm / 2.0, u_per_gmm / 2.0), (VerdictFlag.CG_ASSUMED_MIDWAY,)
    if not math.isfinite(cg_axial_mm):
        raise UserError("the centre-of-mass position must be a finite number (mm)")
    share_a = (z_b - cg_axial_mm) / span   # L_B / L
    share_b = (cg_axial_mm - z_a) / span   # L_A / L
    flags: tuple[VerdictFlag, ...] = ()
    if share_a < 0 or share_b < 0:
        flags = (VerdictFlag.CG_OUTSIDE_BEARINGS,)
    share_a = min(max(share_a, MIN_SHARE), MAX_SHARE)
    share_b = min(max(share_b, MIN_SHARE), MAX_SHARE)
    return (u_per_gmm * share_a, u_per_gmm * share_b), flags


def bearing_verdict(residual_gmm: Sequence[complex | float], plane_axial_mm: Sequence[float],
                    bearing_axial_mm: Sequence[float], u_per_gmm: float,
                    cg_axial_mm: float | None = None, *, angles_known: bool = True,
                    bearing_names: Sequence[str] = ("bearing A", "bearing B"),
                    speed_rpm: float | None = None) -> Verdict:
    """ISO 21940-11 verdict at the bearing planes.

    The correction-plane residuals are referred to the bearings by :func:`refer_to_bearings`
    (or :func:`worst_case_at_bearings` when ``angles_known`` is False and only magnitudes are
    given) and compared with the lever-rule shares of ``u_per_gmm``
    (:func:`allocate_to_bearings`). Pass when both bearings are within.

    Parameters
    ----------
    residual_gmm : sequence of complex or float
        Residual unbalance per correction plane, g·mm (phasors; magnitudes when
        ``angles_known`` is False).
    plane_axial_mm : sequence of float
        Axial position of each correction plane, mm.
    bearing_axial_mm : sequence of float
        Axial positions of bearing A and bearing B, mm.
    u_per_gmm : float
        Permissible residual unbalance of the rotor, g·mm.
    cg_axial_mm : float or None, default None
        Axial position of the centre of mass, mm; None takes it midway.
    angles_known : bool, default True
        False when only magnitudes are known: the worst case is judged (flag
        ``worst_case_phasing``).
    bearing_names : sequence of str, default ("bearing A", "bearing B")
        Labels of the two tolerance planes.
    speed_rpm : float or None, default None
        The speed the grade was judged at (the maximum service speed), rpm; carried in the
        verdict.

    Returns
    -------
    Verdict
        Pass or fail with the residual and permissible unbalance per bearing (g·mm), the
        residual angles (degrees, None in the worst case), the plane arrangement and flags.

    Raises
    ------
    UserError
        When ``u_per_gmm`` is not a finite number above 0 (and as the functions it calls).

    References
    ----------
    .. [1] ISO 21940-11:2016, Mechanical vibration -- Rotor balancing -- Part 11: Procedures
       and tolerances for rotors with rigid behaviour (formerly ISO 1940-1).
       Clause 4 (bearing planes as tolerance planes) and clause 7 (allocation to
       tolerance planes, from memory).
    .. [2] Rigid-body statics for the referral (common practice, no single source).
    """
    if not 0 < u_per_gmm < math.inf:
        raise UserError("permissible unbalance must be greater than 0")
    flags: list[VerdictFlag] = []
    if angles_known:
        at = refer_to_bearings([complex(x) for x in residual_gmm], plane_axial_mm,
                               bearing_axial_mm)
        mags = (abs(at[0]), abs(at[1]))
        angles: tuple[float | None, ...] = tuple(amplitude_phase(x)[1] for x in at)
    else:
        mags = worst_case_at_bearings([abs(complex(x)) for x in residual_gmm], plane_axial_mm,
                                      bearing_axial_mm)
        angles = (None, None)
        flags.append(VerdictFlag.WORST_CASE_PHASING)
    shares, share_flags = allocate_to_bearings(u_per_gmm, bearing_axial_mm, cg_axial_mm)
    flags += share_flags
    ok = all(r <= p for r, p in zip(mags, shares, strict=True))
    return Verdict(ok, tuple(float(m) for m in mags), tuple(shares), tuple(bearing_names),
                   TolerancePlanes.BEARINGS, angles,
                   plane_arrangement(plane_axial_mm, bearing_axial_mm), u_per_gmm, speed_rpm,
                   tuple(flags))


def per_plane_permissible(u_per_gmm: float, n_planes: int, plane_distance_mm: float | None = None,
                          cg_from_first_plane_mm: float | None = None) -> list[float]:
    """``U_per`` for one plane (all of it) or two planes (allocated); more planes: equal shares.

    Parameters
    ----------
    u_per_gmm : float
        Permissible residual unbalance of the rotor, g·mm.
    n_planes : int
        Number of correction planes.
    plane_distance_mm : float or None, default None
        Distance between two planes, mm (two planes only).
    cg_from_first_plane_mm : float or None, default None
        Centre of mass from the first plane, mm (two planes only).

    Returns
    -------
    list of float
        Permissible residual unbalance per plane, g·mm.

    References
    ----------
    .. [1] ISO 21940-11:2016, Mechanical vibration -- Rotor balancing -- Part 11: Procedures
       and tolerances for rotors with rigid behaviour (formerly ISO 1940-1).
       Clause 7 for two planes (from memory); equal shares for more than two planes are
       common practice, no source.
    """
    if n_planes == 1:
        return [u_per_gmm]
    if n_planes == 2:
        return list(allocate_two_planes(u_per_gmm, plane_distance_mm, cg_from_first_plane_mm))
    return [u_per_gmm / n_planes] * n_planes
