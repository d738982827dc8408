"""Adapter: the procedure's questions answered by the balancing engine (``trueturn.balance``).

No arithmetic of balancing here: this module only converts between the procedure's
records and the engine's input/output dataclasses. Methods used: influence coefficients by
least squares over all runs, the amplitude-only (four-run) method, trial-mass sizing by the
10 %-of-rotor-weight rule, splitting onto positions, ISO 21940-11 permissible unbalance.
"""

from __future__ import annotations

from trueturn.angles import wrap_deg
from trueturn.balance.iso21940 import TolerancePlanes
from trueturn.balance.readings import (
    BalanceInput,
    Bearing,
    Plane,
    Reading,
    Run,
    SavedCoefficient,
    Sensor,
    Tolerance,
)
from trueturn.balance.readings import PlacedMass as EngineMass
from trueturn.balance.sanity import NoInformationError
from trueturn.balance.solve import SolveReport, solve
from trueturn.balance.splitting import split
from trueturn.balance.trial_mass import centrifugal_force_n, size_trial_mass
from trueturn.errors import UserError
from trueturn.jobs.profiles import MachineProfile
from trueturn.ui.procedure import (
    Correction,
    GateRefused,
    Mode,
    OffSpeed,
    PlacedMass,
    PlaneSetup,
    ProcedureSetup,
    RunRecord,
    Solution,
    TooSmallTrial,
    TrialSuggestion,
    Verdict,
    planes_for,
)

MIN_PART_FRACTION = 0.02  # a split share under 2 % of the correction is left out


def _engine_mass(m: PlacedMass) -> EngineMass:
    """A placed part as the engine sees it: removed material = the same mass added opposite."""
    if m.removal:
        return EngineMass(m.plane, abs(m.mass_g), wrap_deg(m.angle_deg + 180.0))
    return EngineMass(m.plane, m.mass_g, m.angle_deg)


class BalanceEngine:
    """The :class:`trueturn.ui.procedure.Engine` backed by ``trueturn.balance``."""

    def __init__(self, profile: MachineProfile | None = None) -> None:
        self.profile = profile

    # ---- sizes and forces ---------------------------------------------------------------
    def trial_mass(self, setup: ProcedureSetup, plane: PlaneSetup) -> TrialSuggestion:
        t = size_trial_mass(setup.rotor_mass_kg, plane.radius_mm, setup.speed_rpm)
        mass_g = max(0.1, round(t.mass_g, 1))  # what a kitchen scale can weigh
        position = 0 if plane.position_angles_deg else None
        angle = plane.position_angles_deg[0] if plane.position_angles_deg else 0.0
        force = self.force_n(mass_g, plane.radius_mm, setup.speed_rpm)
        weight_n = setup.rotor_mass_kg * 9.80665  # standard gravity (CGPM 1901)
        return TrialSuggestion(plane.name, mass_g, angle, position, force, force / weight_n)

    def force_n(self, mass_g: float, radius_mm: float, speed_rpm: float) -> float:
        """Centrifugal force F = m r omega^2 (newtons)."""
        return centrifugal_force_n(mass_g, radius_mm, speed_rpm)

    # ---- solving ------------------------------------------------------------------------
    def _input(self, setup: ProcedureSetup, runs: list[RunRecord],
               with_tolerance: bool) -> BalanceInput:
        planes = planes_for(setup)
        phase = setup.mode is not Mode.AMPLITUDE_ONLY
        engine_runs = []
        for run in runs:
            readings = {
                name: Reading(r.amplitude, r.phase_deg if phase else None, r.confidence_radius)
                for name, r in run.readings.items()}
            engine_runs.append(Run(run.label, tuple(_engine_mass(m) for m in run.masses),
                                   readings, run.speed_rpm))
        # judged at the bearings when the profile places them and every plane used
        at_bearings = (len(setup.bearings) == 2
                       and all(p.axial_mm is not None for p in planes))
        tolerance = None
        if with_tolerance:
            # the grade at the machine's maximum service speed (profile), never the run's
            tolerance = Tolerance(setup.rotor_mass_kg, setup.grade_mm_per_s, setup.speed_rpm,
                                  cg_axial_mm=setup.cg_axial_mm)
        saved = tuple(c for c in setup.saved_coefficients if isinstance(c, SavedCoefficient))
        bearings = tuple(Bearing(name, z) for name, z in setup.bearings) if at_bearings else ()
        return BalanceInput(tuple(Plane(p.name, p.radius_mm, p.max_mass_g,
                                        p.axial_mm if at_bearings else None) for p in planes),
                            tuple(Sensor(s) for s in setup.sensors), tuple(engine_runs),
                            influence=saved, tolerance=tolerance, bearings=bearings)

    def _report(self, inp: BalanceInput) -> SolveReport:
        """Solve, turning the engine's refusals into gate refusals (with the facts kept)."""
        try:
            return solve(inp)
        except NoInformationError as exc:
            raise GateRefused(str(exc), TooSmallTrial(exc.plane, exc.trial_g,
                                                      exc.suggested_g)) from None
        except UserError as exc:
            raise GateRefused(str(exc)) from None

    def _parts(self, setup: ProcedureSetup, corrections: list[Correction], kind: str,
               removal: bool) -> tuple[PlacedMass, ...]:
        parts: list[PlacedMass] = []
        for c in corrections:
            plane = next(p for p in setup.planes if p.name == c.plane)
            angle = wrap_deg(c.angle_deg + 180.0) if removal else c.angle_deg
            if c.mass_g <= 0:
                continue
            if plane.position_angles_deg:
                try:
                    pieces = split(c.mass_g, angle, plane.position_angles_deg)
                except UserError as exc:
                    raise GateRefused(f"plane {plane.name}: {exc}") from None
                for piece in pieces:
                    if piece.mass_g >= max(0.005, MIN_PART_FRACTION * c.mass_g):
                        parts.append(PlacedMass(c.plane, round(piece.mass_g, 2), piece.angle_deg,
                                                piece.index, kind, removal))  # type: ignore[arg-type]
            else:
                parts.append(PlacedMass(c.plane, round(c.mass_g, 2), angle, None, kind,  # type: ignore[arg-type]
                                        removal))
        return tuple(parts)

    def _solution(self, setup: ProcedureSetup, report: SolveReport, corrections, kind: str,  # type: ignore[no-untyped-def]
                  removal: bool) -> Solution:
        sol = report.solution
        corr = [Correction(c.plane, c.mass_g, c.angle_deg) for c in corrections]
        off: tuple[OffSpeed, ...] = ()
        if report.speed is not None:
            off = tuple(OffSpeed(o.index, o.label, o.deviation, report.speed.worst_cut_fraction)
                        for o in report.speed.off_speed)
        return Solution(tuple(corr), self._parts(setup, corr, kind, removal), sol.method,
                        tuple(sol.warnings), sol.influence, off)

    def solve(self, setup: ProcedureSetup, runs: list[RunRecord], removal: bool) -> Solution:
        report = self._report(self._input(setup, runs, with_tolerance=False))
        return self._solution(setup, report, report.solution.corrections, "correction", removal)

    def assess(self, setup: ProcedureSetup, runs: list[RunRecord],
               removal: bool) -> tuple[Verdict, Solution]:
        """Refit over every run so far; verdict on the last run; trim still needed."""
        report = self._report(self._input(setup, runs, with_tolerance=True))
        sol = report.solution
        v = report.verdict
        assert v is not None
        names = list(v.labels) or [c.plane for c in sol.corrections]
        at_bearings = v.tolerance_planes is TolerancePlanes.BEARINGS
        where = "at the bearings" if at_bearings else "in the correction planes"
        verdict = Verdict(v.passed, setup.grade_mm_per_s,
                          dict(zip(names, v.residual_gmm, strict=True)),
                          dict(zip(names, v.permissible_gmm, strict=True)),
                          note=f"permissible U_per {report.u_per_gmm:.1f} g·mm at "
                               f"{setup.speed_rpm:.0f} rpm, shared {where} "
                               f"(ISO 21940-11: e_per = G/omega, U_per = e_per * m)",
                          at_bearings=at_bearings, speed_rpm=v.speed_rpm,
                          flags=tuple(f.value for f in v.flags))
        trim = self._solution(setup, report, sol.corrections_keeping_current, "trim", removal)
        return verdict, trim
