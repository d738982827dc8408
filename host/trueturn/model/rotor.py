"""The rotor as every layer sees it: correction planes, where masses can go, the bearings."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

from trueturn.angles import Face, Rotation, seen_rotation, wrap_deg
from trueturn.model.fields import Rule, RuleCode, angle_limits, limits
from trueturn.positions import equally_spaced_deg


@dataclass(frozen=True)
class PlaneLayout:
    """Where weights can go in a plane.

    ``equal``: ``positions`` equally spaced holes/slots, position 1 at ``offset_deg``;
    ``angles``: an explicit list (bolt holes, blade roots), position 1 first; ``free``:
    anywhere on the circle.
    """

    kind: Literal["equal", "angles", "free"] = "free"
    positions: int | None = field(default=None, metadata=limits(minimum=1, maximum=360))
    offset_deg: float = 0.0
    angles_deg: list[float] = field(default_factory=list)

    def _checks(self) -> list[tuple[str, str | Rule]]:
        if self.kind == "equal" and self.positions is None:
            return [("positions", Rule(RuleCode.NEEDED, "layout 'equal' needs the number of "
                                       "positions", other="kind"))]
        if self.kind == "angles" and not self.angles_deg:
            return [("angles_deg", Rule(RuleCode.NEEDED, "layout 'angles' needs at least one "
                                        "angle", other="kind"))]
        return []

    def position_angles_deg(self) -> tuple[float, ...]:
        """Angles of the numbered positions (position k+1 at index k); empty for ``free``."""
        if self.kind == "equal" and self.positions:
            return equally_spaced_deg(self.positions, self.offset_deg)
        if self.kind == "angles":
            return tuple(wrap_deg(a) for a in self.angles_deg)
        return ()


@dataclass(frozen=True)
class Plane:
    """A correction plane: where masses go, at ``radius_mm`` from the axis.

    ``axial_mm``: along the shaft, from the origin the bearings use (None: not given);
    ``layout``: the blades/holes a mass can go on; ``removal_allowed``: the machine's maker
    allows drilling or grinding material out here (a flywheel rim, a pulley web; never a
    grinding wheel, a cutterhead body or a fan blade); ``max_mass_g``: the largest
    correction the plane takes (None: no limit given); ``face``: the end of the machine
    this plane's face is looked at, worked on and its ring laid on from: ``front`` (the
    end the machine profile's rotation is seen from) or ``back`` (the far end of a rotor
    between bearings, the second wheel of a bench grinder): the rotation looks reversed
    there and so does every picture of the plane (:func:`trueturn.angles.seen_rotation`).
    """

    name: str = field(metadata=limits(nonempty=True))
    radius_mm: float = field(metadata=limits(above=0))
    axial_mm: float | None = None
    layout: PlaneLayout = field(default_factory=PlaneLayout)
    removal_allowed: bool = False
    max_mass_g: float | None = field(default=None, metadata=limits(above=0))
    face: Face = "front"

    def rotation_seen(self, rotation: Rotation) -> Rotation:
        """The direction of rotation as seen looking at this plane's face, given the
        machine's ``rotation`` as seen from its front."""
        return seen_rotation(rotation, self.face)

    @property
    def position_angles_deg(self) -> tuple[float, ...]:
        """Angles of the plane's positions, position 1 first (empty: any angle)."""
        return self.layout.position_angles_deg()


@dataclass(frozen=True)
class Bearing:
    """A bearing (support) of the rotor at ``axial_mm`` (same origin as the planes')."""

    name: str = field(metadata=limits(nonempty=True))
    axial_mm: float = 0.0


@dataclass(frozen=True)
class Pickup:
    """A vibration pickup (accelerometer): its sensitivity and zero-g output (from the
    module's datasheet or the flip calibration, hardware/CALIBRATION.md) and how it is
    mounted; the ``name`` keys its readings everywhere. ``lowpass_corner_hz``: the corner
    of the first-order RC low-pass between the pickup and the ADC (the module's output
    capacitor or an anti-alias filter, hardware/WIRING.md), None when there is none worth
    correcting; every reading of the pickup takes its gain and lag out.

    ``angle_from_tach_deg`` (optional, for the first correction from a model): where the
    pickup looks from, as an angle around the shaft seen from the front. Start at the line
    from the shaft's centre to the tach sensor and count, in degrees, AGAINST the direction
    of rotation (the house convention, trueturn/angles.py) to the direction the pickup's
    sensing axis points (its arrow, away from the shaft). A pickup on the tach's side,
    pointing the same way, is 0; one a quarter turn back from the tach (the side the rotor
    comes from) is 90. None: not measured (then no phase can be predicted, and the model
    cannot give a correction without trial runs).

    ``on_bearing`` (optional): the bearing the pickup sits on, numbered from 1 in the
    profile's order of bearings (None: not said; the model-first correction then takes the
    pickups in order, the first on the first bearing)."""

    name: str = field(metadata=limits(nonempty=True))
    sensitivity_mv_per_g: float = field(metadata=limits(above=0))
    zero_offset_mv: float = 0.0
    mounting: str = ""
    direction: Literal["horizontal", "vertical", "axial", "other"] = "horizontal"
    near_plane: str | None = None
    lowpass_corner_hz: float | None = field(default=None, metadata=limits(above=0))
    angle_from_tach_deg: float | None = field(default=None, metadata=angle_limits())
    on_bearing: int | None = field(default=None, metadata=limits(minimum=1, maximum=2))
