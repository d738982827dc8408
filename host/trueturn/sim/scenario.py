"""Scenario files: an invented machine (rotor, unbalance, pickups, motor, shop noise) in YAML.

The packaged scenarios live in ``trueturn/sim/scenarios/<name>.yaml``; a person can copy one,
edit it and pass the path wherever a scenario name is accepted. Every number in them is
invented for the demo and describes no real machine.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any, Literal

import numpy as np

from trueturn.angles import Face
from trueturn.errors import UserError
from trueturn.files import read_text_file
from trueturn.model import Plane, PlaneLayout
from trueturn.schema import SchemaError, from_data, limits
from trueturn.sim.rotor import (
    LARGEST_VALUE,
    STANDARD_GRAVITY_M_S2,
    CorrectionPlane,
    Mass,
    PickupMount,
    RigidRotor,
    Support,
)
from trueturn.yamltext import load_yaml_text

#: Field limits of the scenario's quantities: any size up to LARGEST_VALUE, not negative, or
#: above zero.
ANY = limits(minimum=-LARGEST_VALUE, maximum=LARGEST_VALUE)
NON_NEGATIVE = limits(minimum=0, maximum=LARGEST_VALUE)
POSITIVE = limits(above=0, maximum=LARGEST_VALUE)

ADC_REFERENCE_V = 5.0
# ATmega328P datasheet, ADC conversion result: ADC = Vin * 1024 / Vref, at most 1023.
ADC_COUNTS_PER_REFERENCE = 1024
ADC_MAX_COUNT = 1023


@dataclass(frozen=True)
class PickupElectrical:
    """How a pickup turns acceleration into volts: ``zero_g_v + sensitivity_v_per_g * a/g``."""

    sensitivity_v_per_g: float
    zero_g_v: float


@dataclass(frozen=True)
class Motor:
    """Drive of the rotor: an induction motor on the mains (optionally through a belt) or a
    variable-speed drive; slow speed wander and start/stop times."""

    mains_hz: float = field(metadata=POSITIVE)
    kind: Literal["induction", "variable"] = "induction"
    poles: int = field(default=2, metadata=limits(minimum=1, maximum=LARGEST_VALUE))
    #: fraction below synchronous speed at the scenario's load
    slip: float = field(default=0.0, metadata=limits(minimum=0, below=1))
    #: relative wander of the slip (load-dependent speed)
    load_wander: float = field(default=0.0, metadata=NON_NEGATIVE)
    pulley_ratio: float = field(default=1.0, metadata=POSITIVE)  # rotor speed / motor speed
    speed_rpm: float = field(default=0.0, metadata=NON_NEGATIVE)  # variable drive: set speed
    speed_range_rpm: tuple[float, float] | None = None
    #: variable drive: relative slow speed wander
    drift_fraction: float = field(default=0.0, metadata=NON_NEGATIVE)
    drift_period_s: float = field(default=20.0, metadata=POSITIVE)
    spin_up_s: float = field(default=3.0, metadata=POSITIVE)
    coast_down_s: float = field(default=8.0, metadata=POSITIVE)

    def _checks(self) -> list[tuple[str, str]]:
        if self.mains_hz not in (50.0, 60.0):
            return [("mains_hz", f"must be 50 or 60, got {self.mains_hz:g}")]
        if self.speed_range_rpm is not None:
            low, high = self.speed_range_rpm
            if not 0 < low <= high <= LARGEST_VALUE:
                return [("speed_range_rpm", "must be [low, high] with 0 < low <= high")]
        if self.nominal_speed_rpm() <= 0:
            return [("speed_rpm", f"the rotor speed comes out as "
                     f"{self.nominal_speed_rpm():g} rpm")]
        return []

    def nominal_speed_rpm(self) -> float:
        """Steady rotor speed with no wander: synchronous speed less slip, through the belt."""
        if self.kind == "variable":
            return self.speed_rpm
        synchronous_rpm = 120.0 * self.mains_hz / self.poles
        return synchronous_rpm * (1.0 - self.slip) * self.pulley_ratio


@dataclass(frozen=True)
class Tone:
    """A component of every pickup signal: a harmonic of shaft speed (``order``), a tone at a
    non-integer order (belt), or a fixed frequency (``hz``); amplitude in g."""

    amplitude_g: float = field(metadata=NON_NEGATIVE)
    phase_deg: float = field(default=0.0, metadata=ANY)
    order: float | None = field(default=None, metadata=NON_NEGATIVE)
    hz: float | None = field(default=None, metadata=NON_NEGATIVE)
    label: str = ""

    def _checks(self) -> list[tuple[str, str]]:
        if (self.order is None) == (self.hz is None):
            return [("order", "give exactly one of 'order' or 'hz'")]
        return []


@dataclass(frozen=True)
class ShopSignals:
    """What real shops add to the 1x: noise, mains hum, harmonics, other tones, tach jitter."""

    noise_rms_g: float = field(default=0.0, metadata=NON_NEGATIVE)
    #: mains hum at line frequency, volts at the ADC
    hum_line_v: float = field(default=0.0, metadata=NON_NEGATIVE)
    hum_double_v: float = field(default=0.0, metadata=NON_NEGATIVE)  # and at twice it
    harmonics: tuple[Tone, ...] = ()
    tones: tuple[Tone, ...] = ()
    tach_jitter_us: float = field(default=0.0, metadata=NON_NEGATIVE)
    tach_mark_width_deg: float = field(default=10.0, metadata=NON_NEGATIVE)


@dataclass(frozen=True)
class ShiftingPart:
    """A part loose on the rotor -- a pulley on a worn key, a hub on its set screw -- that
    settles at a new angle at every start: ``mass_g`` on ``plane``, at an angle drawn anew
    (uniformly) within ``angle_deg`` +/- ``wander_deg`` each time the motor is switched on.
    The 1x then moves between starts, which balancing cannot cure (issue #22)."""

    plane: str = field(metadata=limits(nonempty=True))
    mass_g: float = field(metadata=limits(above=0, maximum=LARGEST_VALUE))
    angle_deg: float = field(default=0.0, metadata=ANY)
    wander_deg: float = field(default=180.0, metadata=limits(minimum=0, maximum=180))


@dataclass
class Scenario:
    """One invented machine, ready for the virtual board and ``trueturn sim describe``."""

    name: str
    title: str
    description: str
    rotor: RigidRotor
    electrical: list[PickupElectrical]
    as_found: list[Mass]
    motor: Motor
    signals: ShopSignals
    #: the correction planes as a person balances them (model nouns): radius, axial
    #: position, the positions a mass can go on, whether removal is allowed
    balancing_planes: dict[str, Plane] = field(default_factory=dict)
    plane_notes: dict[str, str] = field(default_factory=dict)
    source: str = ""
    #: parts that settle at a new angle at every start (a loose pulley); none in most
    shifting: tuple[ShiftingPart, ...] = ()

    @property
    def speed_rpm(self) -> float:
        return self.motor.nominal_speed_rpm()

    def pickup_volts(self, accel_m_s2: complex | float, channel: int) -> complex | float:
        """Acceleration (m/s^2, phasor or value) to volts at the ADC, without the offset."""
        return accel_m_s2 / STANDARD_GRAVITY_M_S2 * self.electrical[channel].sensitivity_v_per_g


def scenario_dir() -> Path:
    """The folder of packaged scenarios."""
    return Path(str(resources.files("trueturn.sim").joinpath("scenarios")))


def list_scenarios() -> list[str]:
    """Names of the packaged scenarios, sorted."""
    return sorted(p.stem for p in scenario_dir().glob("*.yaml"))


# -- the scenario file as a person writes it (sim/README.md, "Add a scenario") --------------


@dataclass(frozen=True)
class RotorSection:
    """``rotor:`` the rigid body (the bearings, planes and pickups are their own sections)."""

    mass_kg: float = field(metadata=POSITIVE)
    transverse_inertia_kg_m2: float = field(metadata=POSITIVE)
    polar_inertia_kg_m2: float = field(default=0.0, metadata=NON_NEGATIVE)
    centre_of_mass_axial_mm: float = field(default=0.0, metadata=ANY)
    nonlinearity: float = field(default=0.0, metadata=NON_NEGATIVE)
    tach_direction_deg: float = field(default=0.0, metadata=ANY)
    #: what moves with the rotor on its mounts without turning (a motor's housing, a fan's
    #: frame): RigidRotor.housing_mass_kg; 0: the rotor alone on its supports
    housing_mass_kg: float = field(default=0.0, metadata=NON_NEGATIVE)
    housing_transverse_inertia_kg_m2: float = field(default=0.0, metadata=NON_NEGATIVE)


@dataclass(frozen=True)
class BearingSection:
    """A support: ``stiffness_n_per_m`` and ``damping_ns_per_m`` for both directions, or the
    ``_h_``/``_v_`` values (a missing ``_v_`` value takes the ``_h_`` one)."""

    axial_mm: float = field(metadata=ANY)
    stiffness_n_per_m: float | None = field(default=None, metadata=POSITIVE)
    stiffness_h_n_per_m: float | None = field(default=None, metadata=POSITIVE)
    stiffness_v_n_per_m: float | None = field(default=None, metadata=POSITIVE)
    damping_ns_per_m: float | None = field(default=None, metadata=NON_NEGATIVE)
    damping_h_ns_per_m: float | None = field(default=None, metadata=NON_NEGATIVE)
    damping_v_ns_per_m: float | None = field(default=None, metadata=NON_NEGATIVE)

    def _checks(self) -> list[tuple[str, str]]:
        if self.stiffness_n_per_m is None and self.stiffness_h_n_per_m is None:
            return [("stiffness_n_per_m", "missing field (or give stiffness_h_n_per_m)")]
        if self.damping_ns_per_m is None and self.damping_h_ns_per_m is None:
            return [("damping_ns_per_m", "missing field (or give damping_h_ns_per_m)")]
        return []

    def support(self) -> Support:
        k = self.stiffness_n_per_m if self.stiffness_n_per_m is not None else \
            self.stiffness_h_n_per_m
        c = self.damping_ns_per_m if self.damping_ns_per_m is not None else \
            self.damping_h_ns_per_m
        assert k is not None and c is not None  # _checks
        return Support(
            axial_mm=self.axial_mm,
            stiffness_h_n_per_m=k if self.stiffness_h_n_per_m is None else self.stiffness_h_n_per_m,
            stiffness_v_n_per_m=k if self.stiffness_v_n_per_m is None else self.stiffness_v_n_per_m,
            damping_h_ns_per_m=c if self.damping_h_ns_per_m is None else self.damping_h_ns_per_m,
            damping_v_ns_per_m=c if self.damping_v_ns_per_m is None else self.damping_v_ns_per_m)


@dataclass(frozen=True)
class PlaneSection:
    """A correction plane: where it is, its radius, and where weights can go."""

    name: str = field(metadata=limits(nonempty=True))
    axial_mm: float = field(metadata=ANY)
    radius_mm: float = field(metadata=POSITIVE)
    removal: bool = False
    positions: int = field(default=0, metadata=limits(minimum=0, maximum=360))
    first_position_deg: float = field(default=0.0, metadata=ANY)
    note: str = ""
    face: Face = "front"  # the end the plane's face is seen from (model.Plane.face)


@dataclass(frozen=True)
class PickupSection:
    """An accelerometer on bearing ``bearing`` (0 = the first listed), its direction and its
    electrical output."""

    name: str = field(metadata=limits(nonempty=True))
    bearing: int = field(metadata=limits(minimum=0))
    direction_deg: float = field(metadata=ANY)
    sensitivity_v_per_g: float = field(default=0.3, metadata=POSITIVE)
    zero_g_v: float = field(default=1.65, metadata=NON_NEGATIVE)


@dataclass(frozen=True)
class ScenarioFile:
    """A scenario file's shape; ``_checks`` holds the rules across sections."""

    rotor: RotorSection
    bearings: list[BearingSection]
    planes: list[PlaneSection]
    pickups: list[PickupSection]
    motor: Motor
    name: str | None = None
    title: str | None = None
    description: str = ""
    as_found: list[Mass] | None = None
    signals: ShopSignals | None = None
    shifting: list[ShiftingPart] | None = None

    def _checks(self) -> list[tuple[str, str]]:
        for section in ("bearings", "planes", "pickups"):
            if not getattr(self, section):
                return [(section, "expected a non-empty list")]
        names = [p.name for p in self.planes]
        for i, name in enumerate(names):
            if name in names[:i]:
                return [(f"planes[{i}].name", f"plane '{name}' given twice")]
        for i, pickup in enumerate(self.pickups):
            if pickup.bearing >= len(self.bearings):
                return [(f"pickups[{i}].bearing", f"names bearing {pickup.bearing}, the rotor "
                         f"has {len(self.bearings)} (numbered from 0)")]
        for i, mass in enumerate(self.as_found or []):
            if mass.plane not in names:
                return [(f"as_found[{i}].plane",
                         f"plane {mass.plane!r} is not one of {', '.join(names)}")]
        for i, part in enumerate(self.shifting or []):
            if part.plane not in names:
                return [(f"shifting[{i}].plane",
                         f"plane {part.plane!r} is not one of {', '.join(names)}")]
        return []

    def scenario(self, fallback_name: str, source: str) -> Scenario:
        """The checked file as the simulator's :class:`Scenario`."""
        r = self.rotor
        rotor = RigidRotor(
            mass_kg=r.mass_kg, transverse_inertia_kg_m2=r.transverse_inertia_kg_m2,
            polar_inertia_kg_m2=r.polar_inertia_kg_m2,
            centre_of_mass_axial_mm=r.centre_of_mass_axial_mm,
            bearings=[b.support() for b in self.bearings],
            planes=[CorrectionPlane(p.name, p.axial_mm, p.radius_mm) for p in self.planes],
            pickups=[PickupMount(p.name, p.bearing, p.direction_deg) for p in self.pickups],
            nonlinearity=r.nonlinearity, tach_direction_deg=r.tach_direction_deg,
            housing_mass_kg=r.housing_mass_kg,
            housing_transverse_inertia_kg_m2=r.housing_transverse_inertia_kg_m2)
        name = self.name or fallback_name
        return Scenario(
            name=name, title=self.title or name, description=self.description.strip(),
            rotor=rotor,
            electrical=[PickupElectrical(p.sensitivity_v_per_g, p.zero_g_v) for p in self.pickups],
            as_found=list(self.as_found or []), motor=self.motor,
            signals=self.signals or ShopSignals(),
            balancing_planes={p.name: Plane(
                p.name, p.radius_mm, p.axial_mm,
                PlaneLayout("equal", p.positions, p.first_position_deg) if p.positions
                else PlaneLayout(), removal_allowed=p.removal, face=p.face) for p in self.planes},
            plane_notes={p.name: p.note for p in self.planes},
            source=source, shifting=tuple(self.shifting or ()))


def parse_scenario(raw: Any, source: str) -> Scenario:
    """Build a :class:`Scenario` from the loaded YAML through the one validator
    (:mod:`trueturn.schema`); any mistake is one line ``file:line: field.path: problem``."""
    if raw is None:
        raise SchemaError(f"{source}:1: (top): the file is empty")
    document: ScenarioFile = from_data(ScenarioFile, raw, source)
    try:
        scenario = document.scenario(Path(source).stem, source)
    except ValueError as exc:  # the model's own guards; the validator should have said it
        raise SchemaError(f"{source}:{getattr(raw, 'line', 1)}: rotor: {exc}") from None
    _check_model(scenario, getattr(raw, "key_lines", {}).get("rotor", 1))
    return scenario


def _check_model(scenario: Scenario, line: int = 1) -> None:
    """Values each fine alone can still make a model with no finite response: say so."""
    try:
        with np.errstate(all="ignore"):
            response = scenario.rotor.response_1x(scenario.speed_rpm, scenario.as_found)
            modes = scenario.rotor.natural_frequencies_hz()
        finite = all(np.isfinite(v) for v in response.values()) and \
            bool(np.all(np.isfinite(modes)))
    except (ValueError, ArithmeticError, np.linalg.LinAlgError):
        finite = False
    if not finite:
        raise SchemaError(f"{scenario.source}:{line}: rotor: the model has no finite response; "
                          "check the masses, inertias, stiffnesses and positions")


def load_scenario(name_or_path: str | Path) -> Scenario:
    """A packaged scenario by name (``bench-grinder``) or a person's YAML file by path."""
    text_name = str(name_or_path)
    path = Path(text_name)
    if not (text_name.endswith((".yaml", ".yml")) or path.is_file()):
        path = scenario_dir() / f"{text_name}.yaml"
        if not path.is_file():
            raise UserError(f"no scenario called {text_name!r}; known: {', '.join(list_scenarios())}")
    source = path.name if path.parent == scenario_dir() else str(path)
    text = read_text_file(path)  # a regular file, at most files.MAX_TEXT_BYTES
    return parse_scenario(load_yaml_text(text, source), source)
