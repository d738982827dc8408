"""Scenario files: an invented machine (rotor, unbalance, pickups, motor, shop noise) in YAML.

The packaged scenarios live in ``trueturn/sim/scenarios/<name>.yaml``; a person can copy one,
edit it and pass the path wherever a scenario name is accepted. Every number in them is
invented for the demo and describes no real machine.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any

import numpy as np
import yaml

from trueturn.errors import UserError
from trueturn.positions import equally_spaced_deg
from trueturn.sim.rotor import (
    STANDARD_GRAVITY_M_S2,
    CorrectionPlane,
    Mass,
    Pickup,
    RigidRotor,
    Support,
)

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

    kind: str  # "induction" or "variable"
    mains_hz: float
    poles: int = 2
    slip: float = 0.0  # fraction below synchronous speed at the scenario's load
    load_wander: float = 0.0  # relative wander of the slip (load-dependent speed)
    pulley_ratio: float = 1.0  # rotor speed / motor speed
    speed_rpm: float = 0.0  # variable drive: default set speed
    speed_range_rpm: tuple[float, float] | None = None
    drift_fraction: float = 0.0  # variable drive: relative slow speed wander
    drift_period_s: float = 20.0
    spin_up_s: float = 3.0
    coast_down_s: float = 8.0

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

    amplitude_g: float
    phase_deg: float = 0.0
    order: float | None = None
    hz: float | None = None
    label: str = ""


@dataclass(frozen=True)
class ShopSignals:
    """What real shops add to the 1x: noise, mains hum, harmonics, other tones, tach jitter."""

    noise_rms_g: float = 0.0
    hum_line_v: float = 0.0  # mains hum at line frequency, volts at the ADC
    hum_double_v: float = 0.0  # and at twice line frequency
    harmonics: tuple[Tone, ...] = ()
    tones: tuple[Tone, ...] = ()
    tach_jitter_us: float = 0.0
    tach_mark_width_deg: float = 10.0


@dataclass(frozen=True)
class PlaneLayout:
    """Where weights can go in a plane: anywhere (``positions`` 0) or ``positions`` fixed
    spots (blades, tapped holes) evenly spaced from ``first_position_deg``."""

    positions: int = 0
    first_position_deg: float = 0.0
    note: str = ""
    removal: bool = False  # drilling/grinding material out is allowed in this plane

    def angles_deg(self) -> list[float]:
        """Angles of positions 1..N (entry k is position k + 1); empty when anywhere."""
        if not self.positions:
            return []
        return list(equally_spaced_deg(self.positions, self.first_position_deg))


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
    layouts: dict[str, PlaneLayout] = field(default_factory=dict)
    source: str = ""

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


# No quantity in a scenario comes near this; beyond it the model's arithmetic overflows.
LARGEST_VALUE = 1e12
# Quantities that must be above zero, and those that must not be negative.
POSITIVE_KEYS = {"mass_kg", "transverse_inertia_kg_m2", "stiffness_n_per_m",
                 "stiffness_h_n_per_m", "stiffness_v_n_per_m", "radius_mm",
                 "sensitivity_v_per_g", "poles", "pulley_ratio", "drift_period_s",
                 "spin_up_s", "coast_down_s", "mains_hz"}
NON_NEGATIVE_KEYS = {"damping_ns_per_m", "damping_h_ns_per_m", "damping_v_ns_per_m",
                     "polar_inertia_kg_m2", "mass_g", "positions", "slip", "load_wander",
                     "speed_rpm", "drift_fraction", "noise_rms_g", "hum_line_v",
                     "hum_double_v", "tach_jitter_us", "tach_mark_width_deg", "amplitude_g",
                     "nonlinearity", "order", "hz", "zero_g_v"}


def _num(section: dict[str, Any], key: str, where: str, default: float | None = None) -> float:
    value = section.get(key, default)
    if value is None:
        raise UserError(f"{where}: missing '{key}'")
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise UserError(f"{where}: '{key}' must be a number, got {value!r}")
    if abs(value) > LARGEST_VALUE:
        raise UserError(f"{where}: '{key}' is out of range ({value:g})")
    if key in POSITIVE_KEYS and not value > 0:
        raise UserError(f"{where}: '{key}' must be greater than 0, got {value:g}")
    if key in NON_NEGATIVE_KEYS and value < 0:
        raise UserError(f"{where}: '{key}' must not be negative, got {value:g}")
    return float(value)


def _mapping(value: Any, where: str) -> dict[str, Any]:
    if not isinstance(value, dict):
        raise UserError(f"{where}: expected a mapping of keys to values")
    return value


def _list(value: Any, where: str) -> list[Any]:
    if not isinstance(value, list) or not value:
        raise UserError(f"{where}: expected a non-empty list")
    return value


def _optional_list(value: Any, where: str) -> list[Any]:
    if value is None:
        return []
    if not isinstance(value, list):
        raise UserError(f"{where}: expected a list")
    return value


def _tone(raw: Any, where: str) -> Tone:
    raw = _mapping(raw, where)
    order = raw.get("order")
    hz = raw.get("hz")
    if (order is None) == (hz is None):
        raise UserError(f"{where}: give exactly one of 'order' or 'hz'")
    return Tone(amplitude_g=_num(raw, "amplitude_g", where), phase_deg=_num(raw, "phase_deg", where, 0.0),
                order=None if order is None else _num(raw, "order", where),
                hz=None if hz is None else _num(raw, "hz", where), label=str(raw.get("label", "")))


def parse_scenario(raw: Any, source: str) -> Scenario:
    """Build a :class:`Scenario` from the YAML mapping; any mistake is one UserError line."""
    top = _mapping(raw, source)
    name = str(top.get("name") or Path(source).stem)
    rotor_raw = _mapping(top.get("rotor"), f"{source}: rotor")
    bearings = []
    for i, b in enumerate(_list(top.get("bearings"), f"{source}: bearings")):
        w = f"{source}: bearings[{i}]"
        b = _mapping(b, w)
        k = _num(b, "stiffness_n_per_m", w, b.get("stiffness_h_n_per_m"))
        c = _num(b, "damping_ns_per_m", w, b.get("damping_h_ns_per_m"))
        bearings.append(Support(axial_mm=_num(b, "axial_mm", w),
                                stiffness_h_n_per_m=_num(b, "stiffness_h_n_per_m", w, k),
                                stiffness_v_n_per_m=_num(b, "stiffness_v_n_per_m", w, k),
                                damping_h_ns_per_m=_num(b, "damping_h_ns_per_m", w, c),
                                damping_v_ns_per_m=_num(b, "damping_v_ns_per_m", w, c)))
    planes, layouts = [], {}
    for i, p in enumerate(_list(top.get("planes"), f"{source}: planes")):
        w = f"{source}: planes[{i}]"
        p = _mapping(p, w)
        if not p.get("name"):
            raise UserError(f"{w}: missing 'name'")
        planes.append(CorrectionPlane(str(p["name"]), _num(p, "axial_mm", w), _num(p, "radius_mm", w)))
        removal = p.get("removal", False)
        if not isinstance(removal, bool):
            raise UserError(f"{w}: removal must be true or false")
        layouts[str(p["name"])] = PlaneLayout(int(_num(p, "positions", w, 0)),
                                              _num(p, "first_position_deg", w, 0.0),
                                              str(p.get("note", "")), removal)
    pickups, electrical = [], []
    for i, p in enumerate(_list(top.get("pickups"), f"{source}: pickups")):
        w = f"{source}: pickups[{i}]"
        p = _mapping(p, w)
        if not p.get("name"):
            raise UserError(f"{w}: missing 'name'")
        pickups.append(Pickup(str(p["name"]), int(_num(p, "bearing", w)), _num(p, "direction_deg", w)))
        electrical.append(PickupElectrical(_num(p, "sensitivity_v_per_g", w, 0.3),
                                           _num(p, "zero_g_v", w, 1.65)))
    try:
        rotor = RigidRotor(
            mass_kg=_num(rotor_raw, "mass_kg", f"{source}: rotor"),
            transverse_inertia_kg_m2=_num(rotor_raw, "transverse_inertia_kg_m2", f"{source}: rotor"),
            polar_inertia_kg_m2=_num(rotor_raw, "polar_inertia_kg_m2", f"{source}: rotor", 0.0),
            centre_of_mass_axial_mm=_num(rotor_raw, "centre_of_mass_axial_mm", f"{source}: rotor", 0.0),
            bearings=bearings, planes=planes, pickups=pickups,
            nonlinearity=_num(rotor_raw, "nonlinearity", f"{source}: rotor", 0.0),
            tach_direction_deg=_num(rotor_raw, "tach_direction_deg", f"{source}: rotor", 0.0),
        )
    except ValueError as exc:
        raise UserError(f"{source}: {exc}") from None
    as_found = []
    for i, m in enumerate(_optional_list(top.get("as_found"), f"{source}: as_found")):
        w = f"{source}: as_found[{i}]"
        m = _mapping(m, w)
        if not isinstance(m.get("plane"), str) or m["plane"] not in layouts:
            raise UserError(f"{w}: plane {m.get('plane')!r} is not one of {', '.join(layouts)}")
        as_found.append(Mass(str(m["plane"]), _num(m, "mass_g", w), _num(m, "angle_deg", w)))
    mw = f"{source}: motor"
    mo = _mapping(top.get("motor"), mw)
    kind = str(mo.get("kind", "induction"))
    if kind not in ("induction", "variable"):
        raise UserError(f"{mw}: kind must be 'induction' or 'variable', got {kind!r}")
    mains_hz = _num(mo, "mains_hz", mw)
    if mains_hz not in (50.0, 60.0):
        raise UserError(f"{mw}: mains_hz must be 50 or 60")
    rng = mo.get("speed_range_rpm")
    if rng is not None:
        if not isinstance(rng, list) or len(rng) != 2:
            raise UserError(f"{mw}: speed_range_rpm must be [low, high]")
        low = _num({"low": rng[0]}, "low", f"{mw}: speed_range_rpm")
        high = _num({"high": rng[1]}, "high", f"{mw}: speed_range_rpm")
        if not 0 < low <= high:
            raise UserError(f"{mw}: speed_range_rpm must be [low, high] with 0 < low <= high")
        rng = [low, high]
    if not 0 <= _num(mo, "slip", mw, 0.0) < 1:
        raise UserError(f"{mw}: slip must be a fraction below 1")
    motor = Motor(kind=kind, mains_hz=mains_hz, poles=int(_num(mo, "poles", mw, 2)),
                  slip=_num(mo, "slip", mw, 0.0), load_wander=_num(mo, "load_wander", mw, 0.0),
                  pulley_ratio=_num(mo, "pulley_ratio", mw, 1.0),
                  speed_rpm=_num(mo, "speed_rpm", mw, 0.0),
                  speed_range_rpm=None if rng is None else (float(rng[0]), float(rng[1])),
                  drift_fraction=_num(mo, "drift_fraction", mw, 0.0),
                  drift_period_s=_num(mo, "drift_period_s", mw, 20.0),
                  spin_up_s=_num(mo, "spin_up_s", mw, 3.0),
                  coast_down_s=_num(mo, "coast_down_s", mw, 8.0))
    if motor.nominal_speed_rpm() <= 0:
        raise UserError(f"{mw}: the rotor speed comes out as {motor.nominal_speed_rpm():g} rpm")
    sw = f"{source}: signals"
    si = _mapping(top.get("signals") or {}, sw)
    signals = ShopSignals(
        noise_rms_g=_num(si, "noise_rms_g", sw, 0.0),
        hum_line_v=_num(si, "hum_line_v", sw, 0.0),
        hum_double_v=_num(si, "hum_double_v", sw, 0.0),
        harmonics=tuple(_tone(t, f"{sw}: harmonics[{i}]") for i, t in enumerate(
            _optional_list(si.get("harmonics"), f"{sw}: harmonics"))),
        tones=tuple(_tone(t, f"{sw}: tones[{i}]") for i, t in enumerate(
            _optional_list(si.get("tones"), f"{sw}: tones"))),
        tach_jitter_us=_num(si, "tach_jitter_us", sw, 0.0),
        tach_mark_width_deg=_num(si, "tach_mark_width_deg", sw, 10.0),
    )
    scenario = Scenario(name=name, title=str(top.get("title", name)),
                        description=str(top.get("description", "")).strip(), rotor=rotor,
                        electrical=electrical, as_found=as_found, motor=motor, signals=signals,
                        layouts=layouts, source=source)
    _check_model(scenario)
    return scenario


def _check_model(scenario: Scenario) -> None:
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
        raise UserError(f"{scenario.source}: the rotor model has no finite response; check "
                        "the masses, inertias, stiffnesses and positions")


def load_scenario(name_or_path: str | Path) -> Scenario:
    """A packaged scenario by name (``bench-grinder``) or a person's YAML file by path."""
    text_name = str(name_or_path)
    path = Path(text_name)
    if not (text_name.endswith((".yaml", ".yml")) or path.is_file()):
        path = scenario_dir() / f"{text_name}.yaml"
        if not path.is_file():
            raise UserError(f"no scenario called {text_name!r}; known: {', '.join(list_scenarios())}")
    try:
        raw = yaml.safe_load(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise UserError(f"scenario file {text_name} does not exist") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise UserError(f"cannot read scenario {text_name}: {exc}") from None
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" at line {mark.line + 1}" if mark is not None else ""
        raise UserError(f"scenario {text_name} is not valid YAML{where}") from None
    return parse_scenario(raw, path.name if path.parent == scenario_dir() else str(path))
