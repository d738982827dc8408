"""The balancing input (planes, pickups, runs, optional saved coefficients) as dataclasses.

:func:`parse_readings` turns the already-loaded READINGS document (plain data from YAML or
JSON) into :class:`BalanceInput` through the one validator (:mod:`trueturn.schema`): the
document's shape is :class:`ReadingsDocument`, and the first problem comes back as one line
``file:line: field.path: problem`` (:class:`trueturn.schema.SchemaError`, a
:class:`trueturn.errors.UserError`). No file access here: the caller loads the document.
Angles follow :mod:`trueturn.angles` (counted against rotation from the reference mark); an
angle is accepted in -360..360 degrees and taken modulo 360.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from trueturn.angles import phasor
from trueturn.model import Bearing, PlacedMass, Plane, Reading, Run
from trueturn.model.rotor import PlaneLayout
from trueturn.model.units import MassUnit
from trueturn.schema import SchemaError, angle_limits, from_data, limits


@dataclass(frozen=True)
class Sensor:
    """A pickup; ``weight`` scales its importance in the least-squares correction."""

    name: str = field(metadata=limits(nonempty=True))
    weight: float = field(default=1.0, metadata=limits(above=0))


@dataclass(frozen=True)
class SpeedSlopeEntry:
    """A pickup's measured local response slope (from a coast-down sweep, ``trueturn
    analyze --sweep``): 1x ~ speed**amplitude_exponent nearby, and its phase lag growing by
    ``phase_deg_per_ln_speed`` per unit of ln(speed). Near a resonance the exponent may be
    far from 2...4, even negative (above it); the phase slope is then large too. The
    exponent belongs to the readings' unit (acceleration's is velocity's plus 1,
    displacement's plus 2); the phase slope does not depend on it."""

    sensor: str = field(metadata=limits(nonempty=True))
    amplitude_exponent: float = field(metadata=limits(minimum=-30.0, maximum=30.0))
    phase_deg_per_ln_speed: float = field(default=0.0,
                                          metadata=limits(minimum=-5000.0, maximum=5000.0))


@dataclass(frozen=True)
class SavedCoefficient:
    """One saved influence coefficient: reading units per gram at the plane's radius."""

    sensor: str = field(metadata=limits(nonempty=True))
    plane: str = field(metadata=limits(nonempty=True))
    amp_per_g: float = field(metadata=limits(above=0))
    phase_deg: float = field(metadata=angle_limits())
    speed_rpm: float | None = field(default=None, metadata=limits(above=0))

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
    #: per pickup, the measured local slope (amplitude exponent and phase slope) from a
    #: sweep; when given it is used instead of speed_exponent
    speed_slopes: tuple[SpeedSlopeEntry, ...] = ()
    #: the unit the person sees masses in (the machine profile's, or the readings file's):
    #: the math is in grams; only the warnings' words use it
    mass_unit: MassUnit = "g"

    @property
    def has_phase(self) -> bool:
        return all(r.phase_deg is not None for run in self.runs for r in run.readings.values())

    def plane(self, name: str) -> Plane:
        """The correction plane of that name.

        Parameters
        ----------
        name : str
            The plane's name.

        Returns
        -------
        Plane
            The plane (radius, mass limit, axial position).

        Raises
        ------
        KeyError
            When no plane has that name (a programming error: names are checked on input).

        References
        ----------
        .. [1] Lookup only; common practice, no source.
        """
        for plane in self.planes:
            if plane.name == name:
                return plane
        raise KeyError(name)


# -- the READINGS document as a person writes it (balance/README.md, "READINGS") ------------


@dataclass(frozen=True)
class AddedMass:
    """A mass on the rotor in a run, relative to the as-found rotor."""

    plane: str = field(metadata=limits(nonempty=True))
    mass_g: float = field(metadata=limits(above=0))
    angle_deg: float = field(metadata=angle_limits())


@dataclass(frozen=True)
class ReadingEntry:
    """One pickup's 1x in a run: ``amp`` in the document's ``unit``, ``confidence`` the radius
    of its 95 % circle (same unit), ``clipped`` the capture hit the ADC limits."""

    amp: float = field(metadata=limits(minimum=0))
    phase_deg: float | None = field(default=None, metadata=angle_limits())
    confidence: float | None = field(default=None, metadata=limits(minimum=0))
    clipped: bool = False


@dataclass(frozen=True)
class RunReadings:
    """One run: what was added, at what speed, and every pickup's reading by name."""

    readings: dict[str, ReadingEntry]
    label: str | None = None
    added: list[AddedMass] | None = None
    speed_rpm: float | None = field(default=None, metadata=limits(above=0))


@dataclass(frozen=True)
class BearingAt:
    """A bearing's axial position (same origin as the planes' ``axial_mm``); unnamed bearings
    are called A and B."""

    axial_mm: float
    name: str | None = field(default=None, metadata=limits(nonempty=True))


@dataclass(frozen=True)
class ToleranceEntry:
    """The ISO 21940-11 target: ``grade`` in mm/s (G 6.3 -> 6.3), ``speed_rpm`` the maximum
    service speed (left out: the last run's speed stands in, flagged)."""

    rotor_mass_kg: float = field(metadata=limits(above=0))
    grade: float = field(metadata=limits(above=0))
    speed_rpm: float | None = field(default=None, metadata=limits(above=0))
    cg_from_first_plane_mm: float | None = None
    plane_distance_mm: float | None = field(default=None, metadata=limits(above=0))
    cg_axial_mm: float | None = None


def _names(items: list[Any]) -> str:
    return ", ".join(str(i) for i in items)


@dataclass(frozen=True)
class ReadingsDocument:
    """A READINGS document: planes, pickups and runs, optional weights, saved coefficients,
    bearings, tolerance and speed exponent. ``_checks`` holds the rules across fields."""

    planes: list[Plane]
    sensors: list[Sensor]
    runs: list[RunReadings]
    unit: str = ""
    weights: dict[str, float] | None = None
    influence: list[SavedCoefficient] | None = None
    bearings: list[BearingAt] | None = None
    tolerance: ToleranceEntry | None = None
    #: local slope p of the 1x with speed (1x ~ speed**p)
    speed_exponent: float | None = None
    #: per pickup, the measured local slope of amplitude and phase (a coast-down sweep)
    speed_slopes: list[SpeedSlopeEntry] | None = None

    def _checks(self) -> list[tuple[str, str]]:
        """The first rule broken, as (field path, problem)."""
        for check in (self._check_planes, self._check_sensors, self._check_runs,
                      self._check_influence, self._check_bearings, self._check_rest):
            problems = check()
            if problems:
                return problems[:1]
        return []

    def _check_planes(self) -> list[tuple[str, str]]:
        if not self.planes:
            return [("planes", "at least one correction plane is needed")]
        seen: set[str] = set()
        for i, plane in enumerate(self.planes):
            if plane.name in seen:
                return [(f"planes[{i}].name", f"plane '{plane.name}' given twice")]
            seen.add(plane.name)
            if plane.layout != PlaneLayout():
                return [(f"planes[{i}].layout", "solve places masses at any angle; split a "
                         "correction onto positions with 'trueturn split'")]
            if plane.removal_allowed:
                return [(f"planes[{i}].removal_allowed", "solve gives masses to add; drill "
                         "out at the opposite angle with 'trueturn split --remove'")]
        return []

    def _check_sensors(self) -> list[tuple[str, str]]:
        if not self.sensors:
            return [("sensors", "at least one pickup is needed")]
        seen: set[str] = set()
        for i, sensor in enumerate(self.sensors):
            if sensor.name in seen:
                return [(f"sensors[{i}].name", f"sensor '{sensor.name}' given twice")]
            seen.add(sensor.name)
        for key, weight in (self.weights or {}).items():
            if key not in seen:
                return [(f"weights.{key}", f"unknown sensor '{key}' "
                         f"(sensors: {_names(sorted(seen))})")]
            if not weight > 0:
                return [(f"weights.{key}", f"must be greater than 0, got {weight:g}")]
        return []

    def _check_runs(self) -> list[tuple[str, str]]:
        if not self.runs:
            return [("runs", "at least one run is needed")]
        planes = [p.name for p in self.planes]
        sensors = [s.name for s in self.sensors]
        for i, run in enumerate(self.runs):
            for j, mass in enumerate(run.added or []):
                if mass.plane not in planes:
                    return [(f"runs[{i}].added[{j}].plane", f"unknown plane '{mass.plane}' "
                             f"(planes: {_names(sorted(planes))})")]
            for key in run.readings:
                if key not in sensors:
                    return [(f"runs[{i}].readings.{key}", f"unknown sensor '{key}' "
                             f"(sensors: {_names(sensors)})")]
            for name in sensors:
                if name not in run.readings:
                    return [(f"runs[{i}].readings", f"missing sensor '{name}'")]
        with_phase = [(i, name, r.phase_deg is not None) for i, run in enumerate(self.runs)
                      for name, r in run.readings.items()]
        given = sum(has for _, _, has in with_phase)
        if 0 < given < len(with_phase):
            # point at the odd one out: the first reading on the minority side
            odd = given * 2 < len(with_phase)
            i, name, _ = next(w for w in with_phase if w[2] == odd)
            where = f"runs[{i}].readings.{name}"
            if odd:
                return [(f"{where}.phase_deg", "given here but not in most other readings "
                         "(give it everywhere, or nowhere for the amplitude-only method)")]
            return [(where, "phase_deg is missing here but given in other readings (give "
                     "it everywhere, or nowhere for the amplitude-only method)")]
        return []

    def _check_influence(self) -> list[tuple[str, str]]:
        planes = {p.name for p in self.planes}
        sensors = {s.name for s in self.sensors}
        for i, saved in enumerate(self.influence or []):
            if saved.sensor not in sensors:
                return [(f"influence[{i}].sensor", f"unknown sensor '{saved.sensor}' "
                         f"(sensors: {_names(sorted(sensors))})")]
            if saved.plane not in planes:
                return [(f"influence[{i}].plane", f"unknown plane '{saved.plane}' "
                         f"(planes: {_names(sorted(planes))})")]
        return []

    def _check_bearings(self) -> list[tuple[str, str]]:
        if self.bearings is None:
            return []
        if len(self.bearings) != 2:
            return [("bearings", f"exactly two bearings are needed, got {len(self.bearings)}")]
        first, second = self.bearing_list()
        if first.axial_mm == second.axial_mm:
            return [("bearings[1].axial_mm", "the two bearings must be at different axial_mm")]
        if first.name == second.name:
            return [("bearings[1].name", f"bearing '{second.name}' given twice")]
        for i, plane in enumerate(self.planes):
            if plane.axial_mm is None:
                return [(f"planes[{i}].axial_mm", "missing field (needed with bearings, to "
                         "refer residuals to the bearing planes)")]
        for i, plane in enumerate(self.planes):
            if any(p.axial_mm == plane.axial_mm for p in self.planes[:i]):
                return [(f"planes[{i}].axial_mm", "two planes at the same axial_mm")]
        return []

    def _check_rest(self) -> list[tuple[str, str]]:
        if (self.tolerance is not None and self.tolerance.speed_rpm is None
                and self.runs[-1].speed_rpm is None):
            return [("tolerance.speed_rpm", "missing field (the maximum service speed; the "
                     "last run gives no speed_rpm either)")]
        sensors = [x.name for x in self.sensors]
        seen: set[str] = set()
        for i, slope in enumerate(self.speed_slopes or []):
            if slope.sensor not in sensors:
                return [(f"speed_slopes[{i}].sensor", f"unknown sensor '{slope.sensor}' "
                         f"(sensors: {_names(sensors)})")]
            if slope.sensor in seen:
                return [(f"speed_slopes[{i}].sensor", f"sensor '{slope.sensor}' given twice")]
            seen.add(slope.sensor)
        if self.speed_slopes and len(seen) != len(sensors):
            missing = [x for x in sensors if x not in seen]
            return [("speed_slopes", f"give every sensor's slope (missing: {_names(missing)})")]
        p = self.speed_exponent
        if p is not None and not 0.0 <= p <= 6.0:
            return [("speed_exponent", f"expected 0...6 (1x ~ speed**p; usually 2...4), "
                     f"got {p:g}")]
        return []

    def bearing_list(self) -> tuple[Bearing, ...]:
        """The bearings as the model's nouns (unnamed ones called A and B).

        Returns
        -------
        tuple of Bearing
            Each bearing with its name and axial position, mm; empty when none are given.

        References
        ----------
        .. [1] ISO 21940-11:2016, clause 4: the bearing planes are the tolerance planes (why they
           are asked for; from memory).
        """
        return tuple(Bearing(b.name if b.name is not None else "AB"[i % 2], b.axial_mm)
                     for i, b in enumerate(self.bearings or []))

    def balance_input(self) -> BalanceInput:
        """The checked document as the balancing engine's input.

        Returns
        -------
        BalanceInput
            Planes, pickups with their weights, runs (masses in g at degrees, 1x readings in the
            document's unit, speeds in rpm), saved coefficients, tolerance (the last run's speed
            standing in for the maximum service speed when none is given, flagged) and bearings.

        References
        ----------
        .. [1] The READINGS format: balance/README.md (ours; no external source).
        """
        weights = self.weights or {}
        sensors = tuple(Sensor(s.name, weights.get(s.name, s.weight)) for s in self.sensors)
        runs = []
        for i, run in enumerate(self.runs):
            added = tuple(PlacedMass(m.plane, m.mass_g, m.angle_deg) for m in run.added or [])
            readings = {s.name: Reading(s.name, run.readings[s.name].amp, self.unit,  # type: ignore[arg-type]
                                        run.readings[s.name].phase_deg,
                                        speed_rpm=run.speed_rpm,
                                        confidence_radius=run.readings[s.name].confidence,
                                        clipped=run.readings[s.name].clipped)
                        for s in sensors}
            label = run.label if run.label is not None else f"run {i + 1}"
            runs.append(Run(label, added, readings, run.speed_rpm))
        tolerance = None
        if self.tolerance is not None:
            t = self.tolerance
            speed = t.speed_rpm if t.speed_rpm is not None else self.runs[-1].speed_rpm
            assert speed is not None  # _check_rest
            tolerance = Tolerance(t.rotor_mass_kg, t.grade, speed, t.cg_from_first_plane_mm,
                                  t.plane_distance_mm, t.cg_axial_mm,
                                  speed_from_last_run=t.speed_rpm is None)
        return BalanceInput(tuple(self.planes), sensors, tuple(runs),
                            tuple(self.influence or ()), tolerance, self.bearing_list(),
                            self.speed_exponent, tuple(self.speed_slopes or ()))


def parse_readings(doc: Any, source: str = "READINGS") -> BalanceInput:
    """Check and convert a READINGS document into the balancing engine's input.

    Parameters
    ----------
    doc : Any
        The document as plain data (mappings, lists, numbers, text), with lines when loaded
        by :func:`trueturn.yamltext.load_yaml_text`.
    source : str, default "READINGS"
        The file's name for the messages.

    Returns
    -------
    BalanceInput
        The checked input (:meth:`ReadingsDocument.balance_input`).

    Raises
    ------
    SchemaError
        On the first problem, one line ``source:line: field.path: problem`` (a
        :class:`~trueturn.errors.UserError`: exit 2).

    References
    ----------
    .. [1] The READINGS format: balance/README.md (ours; no external source).
    """
    if doc is None:
        raise SchemaError(f"{source}:1: (top): the document is empty")
    document: ReadingsDocument = from_data(ReadingsDocument, doc, source)
    return document.balance_input()
