"""Adapter: machine profiles (``trueturn.jobs``) to the procedure's set-up, demo profiles from
the simulated scenarios (``trueturn.sim``), and one-line descriptions of hands-on actions."""

from __future__ import annotations

from typing import TYPE_CHECKING

from trueturn.balance.readings import SavedCoefficient
from trueturn.constants import STANDARD_GRAVITY_M_S2
from trueturn.jobs.profiles import Bearing, MachineProfile, Pickup
from trueturn.jobs.records import CoefficientSet
from trueturn.model import PlacedMass
from trueturn.positions import number_of, position_text
from trueturn.procedure.guide import MassChange, Mode, Procedure, ProcedureSetup
from trueturn.ui.texts import Shown

if TYPE_CHECKING:
    from trueturn.procedure.engine import BalanceEngine
    from trueturn.sim.scenario import Scenario

DEMO_GRADE_MM_S = 6.3  # ISO 21940-11 grade G 6.3: fans, general machinery (demo target)


def profile_from_scenario(scenario: Scenario) -> MachineProfile:
    """A machine profile for a simulated rig (its numbers are the scenario's, invented)."""
    motor = scenario.motor
    speed = scenario.speed_rpm
    if motor.speed_range_rpm is not None:
        low, high = motor.speed_range_rpm
    else:
        low, high = speed * 0.97, speed * 1.01
    planes = [scenario.balancing_planes[cp.name] for cp in scenario.rotor.planes]
    pickups = [Pickup(p.name, e.sensitivity_v_per_g * 1000.0, e.zero_g_v * 1000.0,
                      direction="vertical" if abs(p.direction_deg - 90.0) < 1 else "horizontal",
                      angle_from_tach_deg=scenario.rotor.angle_from_tach_deg(p),
                      on_bearing=p.bearing + 1)
               for p, e in zip(scenario.rotor.pickups, scenario.electrical, strict=False)]
    return MachineProfile(
        name=f"{scenario.name} (demo)", rotor_kind=scenario.title,
        rotor_mass_kg=scenario.rotor.mass_kg, speed_min_rpm=round(low, 1),
        speed_max_rpm=round(high, 1), max_speed_rpm=round(high * 1.08, 1), rotation="cw",
        planes=planes, pickups=pickups, mains_hz=int(motor.mains_hz),  # type: ignore[arg-type]
        target_grade=DEMO_GRADE_MM_S,
        bearings=[Bearing(f"bearing {i + 1}", b.axial_mm)
                  for i, b in enumerate(scenario.rotor.bearings)],
        cg_axial_mm=scenario.rotor.centre_of_mass_axial_mm,
        transverse_inertia_kg_m2=scenario.rotor.transverse_inertia_kg_m2,
        polar_inertia_kg_m2=scenario.rotor.polar_inertia_kg_m2 or None,
        # the simulated machine's weight on its mounts: the rotor and its housing
        mounted_mass_kg=scenario.rotor.mass_kg + scenario.rotor.housing_mass_kg,
        notes="Simulated rig for the demo; all numbers are invented.")


def setup_from_profile(profile: MachineProfile, mode: Mode, standstill_s: float = 3.0,
                       revolutions_per_run: int = 30,
                       saved: CoefficientSet | None = None) -> ProcedureSetup:
    """The procedure's view of a machine profile; the planned speed is the top service speed.

    ``saved``: influence coefficients kept by an earlier job, for the one-run trim.
    """
    coefficients: tuple[SavedCoefficient, ...] = ()
    if saved is not None:
        coefficients = tuple(SavedCoefficient(e.sensor, e.plane, e.amp, e.phase_deg,
                                              saved.speed_rpm) for e in saved.entries)
    bearings = profile.bearing_positions_mm()
    planes = tuple(profile.planes)
    return ProcedureSetup(
        machine=profile.name, mode=mode, planes=planes,
        sensors=tuple(p.name for p in profile.pickups), rotor_mass_kg=profile.rotor_mass_kg,
        speed_rpm=profile.speed_max_rpm, max_speed_rpm=profile.max_speed_rpm,
        grade_mm_per_s=profile.target_grade, revolutions_per_run=revolutions_per_run,
        standstill_s=standstill_s,
        saved_planes=tuple(dict.fromkeys(c.plane for c in coefficients)),
        profile_planes=len(profile.planes),
        saved_coefficients=coefficients,
        bearings=tuple(profile.bearings) if bearings else (),
        cg_axial_mm=profile.cg_axial_mm,
        owned_parts_g=tuple(profile.correction_parts.masses_g())
        if profile.correction_parts is not None else (),
        owned_stack=profile.correction_parts.stack if profile.correction_parts else 1,
        units=profile.units.choice(),
        pickup_angles_deg=tuple(p.angle_from_tach_deg for p in profile.pickups),
        pickup_bearings=tuple(None if p.on_bearing is None else p.on_bearing - 1
                              for p in profile.pickups),
        transverse_inertia_kg_m2=profile.transverse_inertia_kg_m2,
        polar_inertia_kg_m2=profile.polar_inertia_kg_m2,
        mounted_mass_kg=profile.mounted_mass_kg)


def describe_change(change: MassChange, proc: Procedure, engine: BalanceEngine,
                    shown: Shown | None = None) -> str:
    """One line for a hands-on action, with the mass's force at the planned speed, in the
    machine's units (``shown``; metric when not given)."""
    u = shown or Shown()
    if change.action == "mount-pickups":
        names = ", ".join(proc.setup.sensors)
        if proc.setup.mode is Mode.AMPLITUDE_ONLY:
            return (f"Mount the pickups ({names}) firmly on the bearing housings; no tach "
                    "is needed (speed from the spectrum).")
        return (f"Mount the pickups ({names}) firmly on the bearing housings and aim the tach "
                "at its reflective mark (0° = the mark).")
    m = change.mass
    assert m is not None
    plane = proc.plane(m.plane)
    where = position_text(number_of(m.position), m.angle_deg) if m.position is not None \
        else f"{m.angle_deg:.0f}° from the mark, against rotation"
    force = engine.force_n(abs(m.mass_g), plane.radius_mm, proc.setup.speed_rpm)
    if change.action == "check":
        what = "a hole of" if m.removal else f"the {m.kind.value} mass"
        at = (position_text(number_of(m.position), m.angle_deg) if m.position is not None
              else f"{m.angle_deg:.0f}°")
        return f"Check: {what} {u.mass(abs(m.mass_g))} on {m.plane} at {at}."
    if change.action == "detach":
        return (f"Take off the {m.kind.value} mass {u.mass(abs(m.mass_g))} from {m.plane} at "
                f"{where}.")
    fitted = "" if change.suggested is None else \
        f" [yellow](fitted; suggested {u.mass(abs(change.suggested.mass_g))})[/]"
    if m.removal:
        return (f"Remove {u.mass(abs(m.mass_g))} of material from {m.plane} at {where}, "
                f"r {u.length(plane.radius_mm)} (where the maker allows){fitted}.")
    text = (f"Attach {m.kind.value} mass [b]{u.mass(m.mass_g)}[/b] on {m.plane} at {where}, "
            f"r {u.length(plane.radius_mm)}: {u.force(force)} at "
            f"{u.speed(proc.setup.speed_rpm)}")
    if m.kind == "trial" and change.suggested is None:
        ratio = force / (proc.setup.rotor_mass_kg * STANDARD_GRAVITY_M_S2)
        text += f" (about {ratio:.0%} of the rotor's weight)"
    return text + fitted + "."


def brief_work(changes: tuple[MassChange, ...], proc: Procedure,
               engine: BalanceEngine, shown: Shown | None = None) -> tuple[str, ...]:
    """The work of a hands-on step in a few lines, for when the placement pictures
    (:mod:`trueturn.ui.placement`) show each part's place and mass: what to do and the
    largest force a part will pull with at the planned speed (F = m r omega^2, in the
    machine's units, ``shown``; metric when not given), for a trial also as a share of the
    rotor's weight."""
    u = shown or Shown()
    rpm = proc.setup.speed_rpm
    lines = []
    if any(c.action == "detach" for c in changes):
        lines.append("First take off what the picture marks [b]take off[/b].")
    attach = [c.mass for c in changes if c.action == "attach" and c.mass is not None]
    for kind in dict.fromkeys(m.kind for m in attach):
        masses = [m for m in attach if m.kind == kind]
        force = max(engine.force_n(abs(m.mass_g), proc.plane(m.plane).radius_mm, rpm)
                    for m in masses)
        verb = ("Remove material where the maker allows, as pictured" if masses[0].removal
                else f"Attach {kind.value} mass as pictured")
        many = f"{len(masses)} parts, up to " if len(masses) > 1 else ""
        text = f"{verb}: {many}{u.force(force)} at {u.speed(rpm)}"
        if kind == "trial":
            share = force / (proc.setup.rotor_mass_kg * STANDARD_GRAVITY_M_S2)
            text += f" ({share:.0%} of rotor weight)"
        lines.append(text + ".")
    return tuple("  " + line for line in lines)


def fitted_lines(changes: tuple[MassChange, ...], shown: Shown | None = None) -> tuple[str, ...]:
    """A line for each part entered as fitted otherwise than suggested (issue #17)."""
    u = shown or Shown()
    lines = []
    for c in changes:
        m, s = c.mass, c.suggested
        if m is None or s is None:
            continue
        what = "hole" if m.removal else m.kind.value
        lines.append(f"  [yellow]Fitted: {what} {u.mass(abs(m.mass_g))} on {m.plane} at "
                     f"{_where(m)} (suggested {u.mass(abs(s.mass_g))} at {_where(s)})[/]")
    return tuple(lines)


def _where(m: PlacedMass) -> str:
    return (position_text(number_of(m.position)) if m.position is not None
            else f"{m.angle_deg:.0f}°")
