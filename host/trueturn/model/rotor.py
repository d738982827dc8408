"""The rotor as the balancing math needs it: correction planes and bearings."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Plane:
    """A correction plane: where masses go, at ``radius_mm`` from the axis.

    ``axial_mm``: along the shaft (the bearings' origin; None: not given);
    ``position_angles_deg``: the blades/holes a mass can go on, position 1 first (empty: any
    angle); ``removal_allowed``: the machine profile allows drilling/grinding material out
    here; ``max_mass_g``: the largest correction the plane takes (None: no limit given).
    """

    name: str
    radius_mm: float
    max_mass_g: float | None = None
    axial_mm: float | None = None
    position_angles_deg: tuple[float, ...] = ()
    removal_allowed: bool = False


@dataclass(frozen=True)
class Bearing:
    """A bearing (support) of the rotor at ``axial_mm`` (same origin as the planes')."""

    name: str
    axial_mm: float
