"""Placing a correction where masses can go: splitting, combining, removing by drilling.

* Splitting a mass m at angle theta onto two positions phi_a < theta < phi_b: the two parts
  must sum to the correction as vectors (resolution of a vector into components along two
  given directions), which the law of sines gives:
  ``m_a = m sin(phi_b - theta) / sin(phi_b - phi_a)``, ``m_b = m sin(theta - phi_a) / sin(...)``.
* Positions are given as a plane's list of angles; the parts name them by index and by the
  number a person sees (host/trueturn/positions.py: numbered from 1).
* Combining several masses: their vector sum.
* Removal instead of addition: the same mass at the opposite angle; the drill depth follows
  from the hole volume (cylinder plus the cone of the drill point).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from trueturn.angles import amplitude_phase, phasor, wrap_deg
from trueturn.errors import UserError
from trueturn.positions import number_of

DEFAULT_POINT_ANGLE_DEG = 118.0  # common twist-drill point angle


@dataclass(frozen=True)
class Part:
    """A share of a correction at one position of the list given to :func:`split`."""

    index: int        # into the list of position angles (inside the code)
    angle_deg: float
    mass_g: float

    @property
    def number(self) -> int:
        """The position's number as a person sees it (from 1)."""
        return number_of(self.index)


def split(mass_g: float, angle_deg: float, positions_deg: Sequence[float]) -> list[Part]:
    """Split a correction onto the two positions either side of it (one if it falls on one).

    Parameters
    ----------
    mass_g : float
        Correction mass, g (not below 0).
    angle_deg : float
        Correction angle from the reference mark, degrees against rotation.
    positions_deg : sequence of float
        Angles of the positions where masses can go, position 1 first.

    Returns
    -------
    list of Part
        One part if the correction falls on a position, else two parts on the neighbouring
        positions (less than 180 deg apart) whose vector sum is the correction.

    Raises
    ------
    UserError
        When the mass is negative or not finite, an angle is not finite, no positions are
        given, or the neighbouring positions are 180 deg or more apart.

    Notes
    -----
    With the correction at ``theta`` between positions ``a`` and ``b`` (gap ``g = b - a``), the
    triangle of the two parts and the correction gives by the law of sines
    ``m_a = m sin(g - (theta - a)) / sin g`` and ``m_b = m sin(theta - a) / sin g``.

    References
    ----------
    .. [1] Resolution of a force into two components along given lines by the law of sines
       (parallelogram law), e.g. F. P. Beer, E. R. Johnston, "Vector Mechanics for Engineers:
       Statics", ch. 2 (from memory).
    """
    if not math.isfinite(mass_g) or mass_g < 0:
        raise UserError(f"mass must be a finite number not below 0, got {mass_g:g}")
    if not math.isfinite(angle_deg) or not all(math.isfinite(p) for p in positions_deg):
        raise UserError("angles must be finite numbers")
    if not positions_deg:
        raise UserError("no positions given")
    theta = wrap_deg(angle_deg)
    for i, p in enumerate(positions_deg):
        if abs(math.remainder(theta - p, 360.0)) < 1e-9:
            return [Part(i, wrap_deg(p), mass_g)]
    order = sorted(range(len(positions_deg)), key=lambda i: wrap_deg(positions_deg[i]))
    best = None
    for n, i in enumerate(order):
        j = order[(n + 1) % len(order)]
        a, b = wrap_deg(positions_deg[i]), wrap_deg(positions_deg[j])
        gap = wrap_deg(b - a) if len(order) > 1 else 0.0
        if gap > 0 and wrap_deg(theta - a) < gap:
            best = (i, j, a, gap)
            break
    if best is None or best[3] >= 180.0 - 1e-9:
        raise UserError(f"no two positions less than 180° apart on either side of {theta:g}°; "
                        "a correction there cannot be made from positive masses")
    i, j, a, gap = best
    da = math.radians(wrap_deg(theta - a))
    g = math.radians(gap)
    m_a = mass_g * math.sin(g - da) / math.sin(g)
    m_b = mass_g * math.sin(da) / math.sin(g)
    return [Part(i, wrap_deg(positions_deg[i]), m_a), Part(j, wrap_deg(positions_deg[j]), m_b)]


#: A split part may be left out when leaving it out costs at most this share of the plane's
#: permissible residual unbalance: the 10:1 rule of thumb between a tolerance and what is
#: negligible against it (as for a gauge's resolution; common practice, no source).
NEGLIGIBLE_SHARE_OF_TOLERANCE = 0.1


def negligible_parts(parts: Sequence[Part], resolution_g: float, radius_mm: float | None = None,
                     allowed_gmm: float | None = None) -> tuple[Part, ...]:
    """The parts of one split correction that need not be placed.

    A part is negligible when it rounds to nothing at the scale's resolution (below half of
    ``resolution_g``), or, when the plane's radius and permissible residual unbalance are
    known, when leaving it out adds at most :data:`NEGLIGIBLE_SHARE_OF_TOLERANCE` of that
    allowance (``m r``, smallest parts first, their sum counted). The largest part is never
    left out by the tolerance rule: a correction is placed or refused whole, not dropped.

    Parameters
    ----------
    parts : sequence of Part
        The parts of one correction (:func:`split`).
    resolution_g : float
        The scale's resolution, g (0.01 g for a pocket scale).
    radius_mm : float, optional
        Radius of the positions, mm.
    allowed_gmm : float, optional
        Permissible residual unbalance of the plane, g·mm (ISO 21940-11 share).

    Returns
    -------
    tuple of Part
        The negligible parts (a subset of ``parts``).

    References
    ----------
    .. [1] Leaving a part of mass m at radius r out adds at most m r to the residual
       unbalance (triangle inequality); the 10:1 ratio of tolerance to negligible is a
       gauging rule of thumb (common practice, no source).
    """
    out = [p for p in parts if p.mass_g < resolution_g / 2]
    if radius_mm is None or allowed_gmm is None or len(parts) < 2:
        return tuple(out)
    budget = NEGLIGIBLE_SHARE_OF_TOLERANCE * allowed_gmm - sum(p.mass_g for p in out) * radius_mm
    largest = max(parts, key=lambda p: p.mass_g)
    for p in sorted(parts, key=lambda p: p.mass_g):
        if p in out or p is largest:
            continue
        if p.mass_g * radius_mm <= budget:
            out.append(p)
            budget -= p.mass_g * radius_mm
    return tuple(out)


def combine(masses: Sequence[tuple[float, float]]) -> tuple[float, float]:
    """One mass equivalent to several masses at the same radius (their vector sum).

    Parameters
    ----------
    masses : sequence of (float, float)
        Each mass as ``(mass_g, angle_deg)``: grams, and degrees in the :mod:`trueturn.angles`
        convention.

    Returns
    -------
    tuple of (float, float)
        The equivalent mass, g, and its angle, degrees in 0...360.

    References
    ----------
    .. [1] Vector addition of centrifugal forces at a common radius and speed (parallelogram
       law), e.g. F. P. Beer, E. R. Johnston, "Vector Mechanics for Engineers: Statics", ch. 2
       (from memory).
    """
    total = sum((phasor(m, a) for m, a in masses), 0j)
    return amplitude_phase(total)


@dataclass(frozen=True)
class Removal:
    """Material to remove at ``angle_deg`` instead of adding a mass; hole depths in mm."""

    angle_deg: float
    mass_g: float
    volume_mm3: float
    depth_full_diameter_mm: float   # depth of the full-diameter part of the hole
    depth_to_tip_mm: float          # from the surface to the drill point's tip


def removal(mass_g: float, angle_deg: float, drill_diameter_mm: float, density_g_cm3: float,
            point_angle_deg: float = DEFAULT_POINT_ANGLE_DEG) -> Removal:
    """Remove ``mass_g`` opposite an addition at ``angle_deg`` with one drilled hole.

    Parameters
    ----------
    mass_g : float
        Mass that would be added, g (not below 0); the same mass is removed.
    angle_deg : float
        Angle where it would be added, degrees; the hole goes 180 deg opposite.
    drill_diameter_mm : float
        Drill diameter, mm (greater than 0).
    density_g_cm3 : float
        Density of the rotor's material, g/cm^3 (greater than 0).
    point_angle_deg : float, default 118.0
        Included angle of the drill point, degrees (between 0 and 180).

    Returns
    -------
    Removal
        The hole's angle (degrees), mass (g), volume (mm^3), the depth of its full-diameter
        part and the depth to the drill point's tip (mm).

    Raises
    ------
    UserError
        When the mass is negative or not finite, the diameter or density is not above 0, or
        the point angle is outside 0...180 deg.

    Notes
    -----
    Volume ``V = m / rho``; the drill point is a cone of height ``h = r / tan(point/2)`` and
    volume ``pi r^2 h / 3``; a hole smaller than that cone is a cone alone.

    References
    ----------
    .. [1] Removal at the opposite angle: equivalence of a negative mass at ``theta`` with a
       positive one at ``theta + 180 deg`` (vector sum of centrifugal forces; common practice,
       no source).
    .. [2] Volume of a cylinder and of a cone (elementary geometry); 118 deg as the common
       twist-drill point angle (common practice, no source).
    """
    if not math.isfinite(mass_g) or mass_g < 0:
        raise UserError(f"mass must be a finite number not below 0, got {mass_g:g}")
    if not (0 < drill_diameter_mm < math.inf and 0 < density_g_cm3 < math.inf):
        raise UserError("drill diameter and density must be greater than 0")
    if not 0 < point_angle_deg < 180:
        raise UserError(f"drill point angle must be between 0 and 180°, got {point_angle_deg:g}")
    volume = mass_g / density_g_cm3 * 1000.0
    r = drill_diameter_mm / 2.0
    half = math.radians(point_angle_deg / 2.0)
    tip_h = r / math.tan(half)
    cone = math.pi * r * r * tip_h / 3.0
    if volume <= cone:
        to_tip = (3.0 * volume / (math.pi * math.tan(half) ** 2)) ** (1.0 / 3.0)
        full = 0.0
    else:
        full = (volume - cone) / (math.pi * r * r)
        to_tip = full + tip_h
    return Removal(wrap_deg(angle_deg + 180.0), mass_g, volume, full, to_tip)
