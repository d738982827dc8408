"""Machine profiles: what stays the same every time a machine is balanced.

A profile is written once per machine (``machines/<name>.yaml`` in the workspace) and copied
into every job so a job file is complete on its own. Angles follow host/trueturn/angles.py:
positions are counted from the reference mark against the direction of rotation, and numbered
from 1 (host/trueturn/positions.py).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

from trueturn.angles import Rotation
from trueturn.model.fields import Rule, RuleCode, limits
from trueturn.model.mass import OwnedParts
from trueturn.model.rotor import Bearing, Pickup, Plane
from trueturn.model.rotor import PlaneLayout as PlaneLayout  # the profile's planes use it
from trueturn.model.units import (  # the one definition of each; re-exported for the report
    G_PER_OZ as G_PER_OZ,
)
from trueturn.model.units import (
    MM_PER_IN as MM_PER_IN,
)
from trueturn.model.units import (
    LengthUnit,
    MassUnit,
    UnitChoice,
    VelocityUnit,
    length_text,
    mass_text,
)
from trueturn.model.units import (
    convert_vibration as convert_vibration,
)
from trueturn.model.units import (
    split_unit as split_unit,
)


@dataclass
class Units:
    """How the person wants masses, lengths and vibration shown (storage is always g, mm, mm/s)."""

    mass: MassUnit = "g"
    length: LengthUnit = "mm"
    vibration: VelocityUnit = "mm/s"

    def choice(self) -> UnitChoice:
        """The same choice as the model's :class:`~trueturn.model.units.UnitChoice` (the
        conversions and words are there)."""
        return UnitChoice(self.mass, self.length, self.vibration)


@dataclass
class TachSetup:
    """The once-per-rev reference: which edge counts and where the mark is."""

    edge: Literal["rising", "falling"] = "rising"
    marks_per_rev: int = field(default=1, metadata=limits(minimum=1, maximum=64))
    mark: str = ""


@dataclass
class MachineProfile:
    """One machine: rotor, speeds, planes, pickups, tach, mains and target grade.

    ``rotation`` is the direction of rotation as seen from the machine's front (the end the
    person works from; the pickup side): each plane says which end its face is seen from
    (``Plane.face``); from the back the rotation looks reversed.
    ``target_grade`` is the balance quality grade G of ISO 21940-11 in mm/s (e.g. 6.3).
    """

    name: str = field(metadata=limits(nonempty=True))
    rotor_kind: str = field(metadata=limits(nonempty=True))
    rotor_mass_kg: float = field(metadata=limits(above=0))
    speed_min_rpm: float = field(metadata=limits(above=0))
    speed_max_rpm: float = field(metadata=limits(above=0))
    max_speed_rpm: float = field(metadata=limits(above=0))
    rotation: Rotation
    planes: list[Plane] = field(metadata=limits(nonempty=True))
    pickups: list[Pickup] = field(metadata=limits(nonempty=True))
    tach: TachSetup = field(default_factory=TachSetup)
    mains_hz: Literal[50, 60] = 50
    target_grade: float = field(default=6.3, metadata=limits(above=0))
    units: Units = field(default_factory=Units)
    notes: str = ""
    #: the two bearings (empty in profiles written before bearing positions were kept:
    #: the verdict is then judged in the correction planes, and says so)
    bearings: list[Bearing] = field(default_factory=list)
    #: axial position of the rotor's centre of mass (planes' origin); None: midway
    cg_axial_mm: float | None = None
    #: the correction parts the person owns (None: any mass can be made); optional, so
    #: files of schema version 2 without it read as before (no migration)
    correction_parts: OwnedParts | None = None
    #: the rotor's moment of inertia about a line across the shaft through its centre of
    #: mass, kg m^2 (optional; None: not known). The model-first correction needs it for
    #: two planes: how the rotor rocks on its supports (guessed as a slender rod otherwise,
    #: which is mostly too uncertain to spare a trial run)
    transverse_inertia_kg_m2: float | None = field(default=None, metadata=limits(above=0))
    #: the rotor's moment of inertia about the shaft, kg m^2 (optional; None: guessed as a
    #: solid disc as wide as the largest correction radius). The model-first correction
    #: needs it for the gyroscopic stiffening of a disc's rocking (a fan, a wheel)
    polar_inertia_kg_m2: float | None = field(default=None, metadata=limits(above=0))
    #: everything that shakes with the rotor on its mounts, kg: for a machine on its own
    #: feet or rubber mounts the whole machine's weight (a household scale will do); for a
    #: rotor in bearings bolted to a heavy base, about the rotor's (optional; None: not
    #: known). The unbalance force shakes all of it, so the model-first correction needs it
    #: to say how far a gram moves the 1x; a coast-down cannot tell it
    mounted_mass_kg: float | None = field(default=None, metadata=limits(above=0))

    def _checks(self) -> list[tuple[str, str | Rule]]:
        problems: list[tuple[str, str | Rule]] = []
        if self.bearings:
            if len(self.bearings) != 2:
                problems.append(("bearings", Rule(RuleCode.TWO_OR_NONE,
                                                  "give exactly two bearings (or none)")))
            elif self.bearings[0].axial_mm == self.bearings[1].axial_mm:
                problems.append(("bearings", Rule(
                    RuleCode.MUST_DIFFER, "the two bearings must be at different positions",
                    value=f"{self.bearings[0].axial_mm:g}")))
            elif self.bearings[0].name == self.bearings[1].name:
                problems.append(("bearings", Rule(
                    RuleCode.NAME_TWICE, f"name {self.bearings[0].name!r} is used twice",
                    value=self.bearings[0].name)))
            else:
                missing = [i for i, p in enumerate(self.planes) if p.axial_mm is None]
                if missing:
                    problems.append((f"planes[{missing[0]}].axial_mm", Rule(
                        RuleCode.NEEDED, "with bearings, give each plane its axial_mm",
                        other="bearings")))
                elif len(self.planes) == 2 and self.planes[0].axial_mm == self.planes[1].axial_mm:
                    problems.append(("planes[1].axial_mm", Rule(
                        RuleCode.MUST_DIFFER, "with bearings, the two planes need different "
                        "axial_mm", other="planes[0].axial_mm",
                        value=f"{self.planes[1].axial_mm:g}")))
        if self.mounted_mass_kg is not None and self.mounted_mass_kg < self.rotor_mass_kg:
            problems.append(("mounted_mass_kg", Rule(
                RuleCode.NOT_LESS_THAN, "must not be less than the rotor's mass (the mounts "
                "carry the rotor too)", other="rotor_mass_kg")))
        if self.speed_min_rpm > self.speed_max_rpm:
            problems.append(("speed_min_rpm", Rule(RuleCode.NOT_MORE_THAN,
                                                   "must not exceed speed_max_rpm",
                                                   other="speed_max_rpm")))
        if self.speed_max_rpm > self.max_speed_rpm:
            problems.append(("speed_max_rpm", Rule(RuleCode.NOT_MORE_THAN,
                                                   "must not exceed max_speed_rpm",
                                                   other="max_speed_rpm")))
        if len(self.planes) > 2:
            problems.append(("planes", Rule(RuleCode.AT_MOST_TWO, "at most two correction "
                                            "planes are supported")))
        for what, names in (("planes", [p.name for p in self.planes]),
                            ("pickups", [p.name for p in self.pickups])):
            duplicates = [i for i, n in enumerate(names) if n in names[:i]]
            if duplicates:
                i = duplicates[0]
                problems.append((f"{what}[{i}].name", Rule(
                    RuleCode.NAME_TWICE, f"name {names[i]!r} is used twice", value=names[i])))
        plane_names = {p.name for p in self.planes}
        for i, pickup in enumerate(self.pickups):
            if pickup.on_bearing is not None and len(self.bearings) != 2:
                problems.append(("bearings", Rule(
                    RuleCode.NEEDED, "bearings are needed when a pickup names its bearing",
                    other=f"pickups[{i}].on_bearing")))
                break
        for i, pickup in enumerate(self.pickups):
            if pickup.near_plane is not None and pickup.near_plane not in plane_names:
                problems.append((f"pickups[{i}].near_plane", Rule(
                    RuleCode.UNKNOWN_NAME, f"near_plane {pickup.near_plane!r} is not a plane",
                    other="planes", value=pickup.near_plane)))
        return problems

    def bearing_positions_mm(self) -> tuple[float, float] | None:
        """Axial positions of the two bearings, or None in a profile that does not give them."""
        if len(self.bearings) != 2:
            return None
        return (self.bearings[0].axial_mm, self.bearings[1].axial_mm)

    def plane(self, name: str) -> Plane:
        """The plane called ``name`` (KeyError if there is none)."""
        for plane in self.planes:
            if plane.name == name:
                return plane
        raise KeyError(name)


def format_mass(mass_g: float, unit: MassUnit) -> str:
    """A mass in the person's unit: ``'3.20 g'`` or ``'0.113 oz'``."""
    return mass_text(mass_g, unit)


def format_length(length_mm: float, unit: LengthUnit) -> str:
    """A length in the person's unit: ``'75.0 mm'`` or ``'2.953 in'``."""
    return length_text(length_mm, unit)
