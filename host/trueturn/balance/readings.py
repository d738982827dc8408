"""The balancing input (planes, pickups, runs, optional saved coefficients) as dataclasses.

:func:`parse_readings` turns the already-loaded READINGS document (a dict from YAML or JSON)
into :class:`BalanceInput`, checking every field and naming the first problem in one line
(:class:`trueturn.errors.UserError`). No file access here: the caller loads the document.
Angles follow :mod:`trueturn.angles` (counted against rotation from the reference mark).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from trueturn.angles import phasor, wrap_deg
from trueturn.errors import UserError
from trueturn.model import Bearing, PlacedMass, Plane, Reading, Run


@dataclass(frozen=True)
class Sensor:
    """A pickup; ``weight`` scales its importance in the least-squares correction."""

    name: str
    weight: float = 1.0


@dataclass(frozen=True)
class SavedCoefficient:
    """One saved influence coefficient: reading units per gram at the plane's radius."""

    sensor: str
    plane: str
    amp_per_g: float
    phase_deg: float
    speed_rpm: float | None = None

    @property
    def vector(self) -> complex:
        return phasor(self.amp_per_g, self.phase_deg)


@dataclass(frozen=True)
class Tolerance:
    """Optional ISO 21940-11 target for a pass/fail verdict on the last run.

    ``speed_rpm`` is the maximum service speed the grade is judged at (ISO 21940-11:
    e_per = G / omega at the maximum service speed). ``speed_from_last_run`` is True when the
    document did not give it and the last run's speed stood in (the verdict is flagged).
    """

    rotor_mass_kg: float
    grade_mm_s: float
    speed_rpm: float
    cg_from_first_plane_mm: float | None = None
    plane_distance_mm: float | None = None
    cg_axial_mm: float | None = None
    speed_from_last_run: bool = False


@dataclass(frozen=True)
class BalanceInput:
    """Everything `solve` needs, checked."""

    planes: tuple[Plane, ...]
    sensors: tuple[Sensor, ...]
    runs: tuple[Run, ...]
    influence: tuple[SavedCoefficient, ...] = field(default_factory=tuple)
    tolerance: Tolerance | None = None
    bearings: tuple[Bearing, ...] = ()
    #: local slope p of the 1x with speed (1x ~ speed**p), e.g. from a coast-down sweep;
    #: when given, readings are normalised to their group's reference speed
    speed_exponent: float | None = None

    @property
    def has_phase(self) -> bool:
        return all(r.phase_deg is not None for run in self.runs for r in run.readings.values())

    def plane(self, name: str) -> Plane:
        for plane in self.planes:
            if plane.name == name:
                return plane
        raise KeyError(name)


def _number(value: Any, where: str, *, positive: bool = False, nonneg: bool = False) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise UserError(f"{where}: expected a number, got {value!r}")
    number = float(value)
    if not math.isfinite(number):
        raise UserError(f"{where}: must be a finite number, got {value!r}")
    if positive and number <= 0:
        raise UserError(f"{where}: must be greater than 0, got {value!r}")
    if nonneg and number < 0:
        raise UserError(f"{where}: must not be negative, got {value!r}")
    return number


def _angle(value: Any, where: str) -> float:
    """An angle as a person or an instrument writes it, 0..360 or -180..180 degrees, taken
    modulo 360; beyond a full turn either way it is more likely a typo and is refused."""
    number = _number(value, where)
    if not -360.0 <= number <= 360.0:
        raise UserError(f"{where}: must be within -360..360 degrees (from the reference mark, "
                        f"against rotation), got {value!r}")
    return wrap_deg(number)


def _mapping(value: Any, where: str) -> dict:
    if not isinstance(value, dict):
        raise UserError(f"{where}: expected a mapping (key: value), got {type(value).__name__}")
    return value


def _list(value: Any, where: str) -> list:
    if not isinstance(value, list):
        raise UserError(f"{where}: expected a list, got {type(value).__name__}")
    return value


def _require(mapping: dict, key: str, where: str) -> Any:
    if key not in mapping or mapping[key] is None:
        raise UserError(f"{where}: missing field '{key}'")
    return mapping[key]


def _name(value: Any, where: str) -> str:
    if not isinstance(value, (str, int)) or str(value).strip() == "":
        raise UserError(f"{where}: expected a non-empty name, got {value!r}")
    return str(value)


def parse_masses(items: Any, where: str, plane_names: set[str]) -> tuple[PlacedMass, ...]:
    """Parse a list of ``{plane, mass_g, angle_deg}``; unknown planes are refused."""
    masses = []
    for i, item in enumerate(_list(items if items is not None else [], where)):
        at = f"{where}[{i}]"
        item = _mapping(item, at)
        plane = _name(_require(item, "plane", at), f"{at}.plane")
        if plane not in plane_names:
            known = ", ".join(sorted(plane_names))
            raise UserError(f"{at}.plane: unknown plane '{plane}' (planes: {known})")
        mass_g = _number(_require(item, "mass_g", at), f"{at}.mass_g", positive=True)
        angle = _angle(_require(item, "angle_deg", at), f"{at}.angle_deg")
        masses.append(PlacedMass(plane, mass_g, angle))
    return tuple(masses)


def parse_readings(doc: Any, source: str = "READINGS") -> BalanceInput:
    """Check and convert a READINGS document; the first problem raises a one-line UserError."""
    doc = _mapping(doc, source)
    planes: list[Plane] = []
    for i, item in enumerate(_list(_require(doc, "planes", source), f"{source}: planes")):
        at = f"{source}: planes[{i}]"
        item = _mapping(item, at)
        name = _name(_require(item, "name", at), f"{at}.name")
        if any(p.name == name for p in planes):
            raise UserError(f"{at}.name: plane '{name}' given twice")
        radius = _number(_require(item, "radius_mm", at), f"{at}.radius_mm", positive=True)
        max_mass = item.get("max_mass_g")
        limit = None if max_mass is None else _number(max_mass, f"{at}.max_mass_g", positive=True)
        axial = item.get("axial_mm")
        axial_mm = None if axial is None else _number(axial, f"{at}.axial_mm")
        planes.append(Plane(name, radius, axial_mm, max_mass_g=limit))
    if not planes:
        raise UserError(f"{source}: planes: at least one correction plane is needed")

    sensors: list[Sensor] = []
    for i, item in enumerate(_list(_require(doc, "sensors", source), f"{source}: sensors")):
        at = f"{source}: sensors[{i}]"
        item = _mapping(item, at)
        name = _name(_require(item, "name", at), f"{at}.name")
        if any(s.name == name for s in sensors):
            raise UserError(f"{at}.name: sensor '{name}' given twice")
        weight = item.get("weight", 1.0)
        sensors.append(Sensor(name, _number(weight, f"{at}.weight", positive=True)))
    if not sensors:
        raise UserError(f"{source}: sensors: at least one pickup is needed")

    if doc.get("weights") is not None:
        at = f"{source}: weights"
        given = _mapping(doc["weights"], at)
        names = {s.name for s in sensors}
        for key in given:
            if str(key) not in names:
                raise UserError(f"{at}: unknown sensor '{key}' (sensors: {', '.join(sorted(names))})")
        sensors = [Sensor(s.name, _number(given[s.name], f"{at}.{s.name}", positive=True))
                   if s.name in given else s for s in sensors]

    plane_names = {p.name for p in planes}
    sensor_names = [s.name for s in sensors]
    unit = str(doc.get("unit", ""))
    runs: list[Run] = []
    for i, item in enumerate(_list(_require(doc, "runs", source), f"{source}: runs")):
        at = f"{source}: runs[{i}]"
        item = _mapping(item, at)
        label = str(item.get("label", f"run {i + 1}"))
        added = parse_masses(item.get("added", []), f"{at}.added", plane_names)
        speed = item.get("speed_rpm")
        speed_rpm = None if speed is None else _number(speed, f"{at}.speed_rpm", positive=True)
        raw = _mapping(_require(item, "readings", at), f"{at}.readings")
        for key in raw:
            if str(key) not in sensor_names:
                raise UserError(f"{at}.readings: unknown sensor '{key}' "
                                f"(sensors: {', '.join(sensor_names)})")
        readings: dict[str, Reading] = {}
        for name in sensor_names:
            if name not in raw:
                raise UserError(f"{at}.readings: missing sensor '{name}'")
            r_at = f"{at}.readings.{name}"
            r = _mapping(raw[name], r_at)
            amp = _number(_require(r, "amp", r_at), f"{r_at}.amp", nonneg=True)
            phase = r.get("phase_deg")
            phase_deg = None if phase is None else _angle(phase, f"{r_at}.phase_deg")
            conf = r.get("confidence")
            confidence = None if conf is None else _number(conf, f"{r_at}.confidence", nonneg=True)
            clipped = r.get("clipped", False)
            if not isinstance(clipped, bool):
                raise UserError(f"{r_at}.clipped: expected true or false, got {clipped!r}")
            readings[name] = Reading(name, amp, unit, phase_deg, speed_rpm=speed_rpm,
                                     confidence_radius=confidence, clipped=clipped)
        runs.append(Run(label, added, readings, speed_rpm))
    if not runs:
        raise UserError(f"{source}: runs: at least one run is needed")
    with_phase = [r.phase_deg is not None for run in runs for r in run.readings.values()]
    if any(with_phase) and not all(with_phase):
        raise UserError(f"{source}: runs: phase_deg is given in some readings but not in others "
                        "(give it everywhere, or nowhere for the amplitude-only method)")

    saved: list[SavedCoefficient] = []
    for i, item in enumerate(_list(doc.get("influence") or [], f"{source}: influence")):
        at = f"{source}: influence[{i}]"
        item = _mapping(item, at)
        sensor = _name(_require(item, "sensor", at), f"{at}.sensor")
        if sensor not in sensor_names:
            raise UserError(f"{at}.sensor: unknown sensor '{sensor}'")
        plane = _name(_require(item, "plane", at), f"{at}.plane")
        if plane not in plane_names:
            raise UserError(f"{at}.plane: unknown plane '{plane}'")
        amp = _number(_require(item, "amp_per_g", at), f"{at}.amp_per_g", positive=True)
        phase = _angle(_require(item, "phase_deg", at), f"{at}.phase_deg")
        speed = item.get("speed_rpm")
        speed_rpm = None if speed is None else _number(speed, f"{at}.speed_rpm", positive=True)
        saved.append(SavedCoefficient(sensor, plane, amp, phase, speed_rpm))

    bearings: list[Bearing] = []
    if doc.get("bearings") is not None:
        items = _list(doc["bearings"], f"{source}: bearings")
        if len(items) != 2:
            raise UserError(f"{source}: bearings: exactly two bearings are needed, got {len(items)}")
        for i, item in enumerate(items):
            at = f"{source}: bearings[{i}]"
            item = _mapping(item, at)
            name = _name(item.get("name", "AB"[i]), f"{at}.name")
            bearings.append(Bearing(name, _number(_require(item, "axial_mm", at), f"{at}.axial_mm")))
        if bearings[0].axial_mm == bearings[1].axial_mm:
            raise UserError(f"{source}: bearings: the two bearings must be at different axial_mm")
        if bearings[0].name == bearings[1].name:
            raise UserError(f"{source}: bearings[1].name: bearing '{bearings[1].name}' given twice")
        for i, plane in enumerate(planes):
            if plane.axial_mm is None:
                raise UserError(f"{source}: planes[{i}]: missing field 'axial_mm' (needed with "
                                "bearings, to refer residuals to the bearing planes)")
        if len(planes) > 1 and len({p.axial_mm for p in planes}) < len(planes):
            raise UserError(f"{source}: planes: two planes at the same axial_mm")

    tolerance = None
    if doc.get("tolerance") is not None:
        at = f"{source}: tolerance"
        t = _mapping(doc["tolerance"], at)
        run_speed = runs[-1].speed_rpm
        speed = t.get("speed_rpm")
        from_last_run = speed is None
        if from_last_run:
            speed = run_speed
        if speed is None:
            raise UserError(f"{at}: missing field 'speed_rpm' (the maximum service speed; the "
                            "last run gives no speed_rpm either)")
        cg = t.get("cg_from_first_plane_mm")
        dist = t.get("plane_distance_mm")
        cg_axial = t.get("cg_axial_mm")
        tolerance = Tolerance(
            rotor_mass_kg=_number(_require(t, "rotor_mass_kg", at), f"{at}.rotor_mass_kg",
                                  positive=True),
            grade_mm_s=_number(_require(t, "grade", at), f"{at}.grade", positive=True),
            speed_rpm=_number(speed, f"{at}.speed_rpm", positive=True),
            cg_from_first_plane_mm=None if cg is None else _number(cg, f"{at}.cg_from_first_plane_mm"),
            plane_distance_mm=None if dist is None else _number(dist, f"{at}.plane_distance_mm",
                                                                 positive=True),
            cg_axial_mm=None if cg_axial is None else _number(cg_axial, f"{at}.cg_axial_mm"),
            speed_from_last_run=from_last_run,
        )
    exponent = doc.get("speed_exponent")
    speed_exponent = None
    if exponent is not None:
        speed_exponent = _number(exponent, f"{source}: speed_exponent")
        if not 0.0 <= speed_exponent <= 6.0:
            raise UserError(f"{source}: speed_exponent: expected 0...6 (1x ~ speed**p; "
                            f"usually 2...4), got {exponent!r}")
    return BalanceInput(tuple(planes), tuple(sensors), tuple(runs), tuple(saved), tolerance,
                        tuple(bearings), speed_exponent)
