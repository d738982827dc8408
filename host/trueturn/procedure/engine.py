"""The procedure's questions answered by the balancing engine (``trueturn.balance``).

No arithmetic of balancing here and no conversion of nouns: the procedure's runs, readings
and masses are the model's (:mod:`trueturn.model`), which the engine takes as they are.
Methods used: influence coefficients by least squares over all runs, the amplitude-only
(four-run) method, trial-mass sizing by the 10 %-of-rotor-weight rule, splitting onto
positions, ISO 21940-11 permissible unbalance judged at the bearings when they are known.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace

from trueturn.angles import wrap_deg
from trueturn.balance.iso21940 import per_plane_permissible, permissible_unbalance_gmm
from trueturn.balance.parts import best_combination
from trueturn.balance.readings import BalanceInput, SavedCoefficient, Sensor, Tolerance
from trueturn.balance.sanity import NoInformationError
from trueturn.balance.solve import SolveReport, solve
from trueturn.balance.splitting import negligible_parts, split
from trueturn.balance.trial_mass import (
    STANDARD_GRAVITY_M_S2,
    centrifugal_force_n,
    size_trial_mass,
)
from trueturn.errors import UserError
from trueturn.model import Correction, MassKind, PlacedMass, Plane, Run, Verdict
from trueturn.procedure.guide import (
    GateRefused,
    KitFit,
    Mode,
    OffSpeed,
    ProcedureSetup,
    Solution,
    TooSmallTrial,
    TrialSuggestion,
    planes_for,
)

#: the resolution parts are weighed and listed to, g (a pocket scale: 0.01 g)
PART_RESOLUTION_G = 0.01
#: A plane that takes a mass at any angle, corrected from the person's parts: the parts go
#: at the correction's angle or in steps of this from it (12 places: enough to split a
#: mass between two neighbours, few enough for the exact search). Ours, no source.
ANY_ANGLE_STEP_DEG = 30.0


class BalanceEngine:
    """The :class:`trueturn.procedure.guide.Engine` backed by ``trueturn.balance``."""

    # ---- sizes and forces ---------------------------------------------------------------
    def trial_mass(self, setup: ProcedureSetup, plane: Plane) -> TrialSuggestion:
        t = size_trial_mass(setup.rotor_mass_kg, plane.radius_mm, setup.speed_rpm)
        mass_g = max(0.1, round(t.mass_g, 1))  # what a kitchen scale can weigh
        position = 0 if plane.position_angles_deg else None
        angle = plane.position_angles_deg[0] if plane.position_angles_deg else 0.0
        force = self.force_n(mass_g, plane.radius_mm, setup.speed_rpm)
        weight_n = setup.rotor_mass_kg * STANDARD_GRAVITY_M_S2
        return TrialSuggestion(plane.name, mass_g, angle, position, force, force / weight_n)

    def force_n(self, mass_g: float, radius_mm: float, speed_rpm: float) -> float:
        """Centrifugal force F = m r omega^2 (newtons)."""
        return centrifugal_force_n(mass_g, radius_mm, speed_rpm)

    # ---- solving ------------------------------------------------------------------------
    def _input(self, setup: ProcedureSetup, runs: Sequence[Run],
               with_tolerance: bool) -> BalanceInput:
        planes = planes_for(setup)
        if setup.mode is Mode.AMPLITUDE_ONLY:
            # the four-run method uses amplitudes only, whatever the meter measured
            runs = [replace(run, readings={name: replace(r, phase_deg=None)
                                           for name, r in run.readings.items()})
                    for run in runs]
        # judged at the bearings when the profile places them and every plane used
        at_bearings = (len(setup.bearings) == 2
                       and all(p.axial_mm is not None for p in planes))
        if not at_bearings:
            planes = tuple(replace(p, axial_mm=None) for p in planes)
        tolerance = None
        if with_tolerance:
            # the grade at the machine's maximum service speed (profile), never the run's
            tolerance = Tolerance(setup.rotor_mass_kg, setup.grade_mm_per_s, setup.speed_rpm,
                                  cg_axial_mm=setup.cg_axial_mm)
        saved = tuple(c for c in setup.saved_coefficients if isinstance(c, SavedCoefficient))
        return BalanceInput(planes, tuple(Sensor(s) for s in setup.sensors), tuple(runs),
                            influence=saved, tolerance=tolerance,
                            bearings=setup.bearings if at_bearings else ())

    def _report(self, inp: BalanceInput) -> SolveReport:
        """Solve, turning the engine's refusals into gate refusals (with the facts kept)."""
        try:
            return solve(inp)
        except NoInformationError as exc:
            raise GateRefused(str(exc), TooSmallTrial(exc.plane, exc.trial_g,
                                                      exc.suggested_g)) from None
        except UserError as exc:
            raise GateRefused(str(exc)) from None

    def _parts(self, setup: ProcedureSetup, corrections: Sequence[Correction], kind: MassKind,
               removal: bool) -> tuple[PlacedMass, ...]:
        """The parts a person places: each correction split onto the plane's positions;
        removal takes the same mass out opposite (:meth:`PlacedMass.as_addition` undoes it)."""
        parts: list[PlacedMass] = []
        # a split part is left out when it is negligible against the plane's share of the
        # tolerance (balance.splitting.negligible_parts: at most a tenth of it)
        u_per = permissible_unbalance_gmm(setup.grade_mm_per_s, setup.speed_rpm,
                                          setup.rotor_mass_kg)
        allowed = per_plane_permissible(u_per, max(setup.profile_planes, len(setup.planes)))[0]
        for c in corrections:
            if c.mass_g <= 0:
                continue
            plane = next(p for p in setup.planes if p.name == c.plane)
            whole = PlacedMass(c.plane, c.mass_g, c.angle_deg, None, kind)
            if removal:
                whole = replace(whole.as_addition(), removal=True)  # same effect, opposite
            if not plane.position_angles_deg:
                parts.append(replace(whole, mass_g=round(whole.mass_g, 2)))
                continue
            try:
                pieces = split(whole.mass_g, whole.angle_deg, plane.position_angles_deg)
            except UserError as exc:
                raise GateRefused(f"plane {plane.name}: {exc}") from None
            left_out = negligible_parts(pieces, PART_RESOLUTION_G, plane.radius_mm, allowed)
            for piece in pieces:
                if piece not in left_out:
                    parts.append(replace(whole, mass_g=round(piece.mass_g, 2),
                                         angle_deg=piece.angle_deg, position=piece.index))
        return tuple(parts)

    def _kit_parts(self, setup: ProcedureSetup, corrections: Sequence[Correction],
                   kind: MassKind, runs: Sequence[Run]
                   ) -> tuple[tuple[PlacedMass, ...], tuple[KitFit, ...]]:
        """The correction made from the parts the person owns (issue #22): plane by plane
        from one drawer, the best combination on the plane's positions
        (:func:`trueturn.balance.parts.best_combination`; a plane that takes any angle: the
        correction's angle and every :data:`ANY_ANGLE_STEP_DEG` from it). Parts already on
        the rotor as corrections are out of the drawer. Each plane says what it is left with
        against its share of the allowance."""
        drawer = list(setup.owned_parts_g)
        for m in runs[-1].masses if runs else ():
            if m.kind in (MassKind.CORRECTION, MassKind.TRIM) and not m.removal:
                same = next((g for g in drawer if abs(g - m.mass_g) < PART_RESOLUTION_G), None)
                if same is not None:
                    drawer.remove(same)
        u_per = permissible_unbalance_gmm(setup.grade_mm_per_s, setup.speed_rpm,
                                          setup.rotor_mass_kg)
        allowed = per_plane_permissible(u_per, max(setup.profile_planes, len(setup.planes)))[0]
        parts: list[PlacedMass] = []
        fits: list[KitFit] = []
        for c in corrections:
            if c.mass_g <= 0:
                continue
            plane = next(p for p in setup.planes if p.name == c.plane)
            fixed = bool(plane.position_angles_deg)
            positions = plane.position_angles_deg if fixed else tuple(
                wrap_deg(c.angle_deg + ANY_ANGLE_STEP_DEG * k)
                for k in range(round(360 / ANY_ANGLE_STEP_DEG)))
            if not drawer:  # nothing left to place: the whole correction is what is left
                fits.append(KitFit(c.plane, c.mass_g * plane.radius_mm, allowed, True, 0))
                continue
            try:
                fit = best_combination(c.mass_g, c.angle_deg, positions, drawer,
                                       setup.owned_stack)
            except UserError as exc:
                raise GateRefused(f"plane {plane.name}: {exc}") from None
            for use in fit.uses:
                for grams in use.masses_g:
                    parts.append(PlacedMass(c.plane, grams, use.angle_deg,
                                            use.position if fixed else None, kind))
                    drawer.remove(grams)
            fits.append(KitFit(c.plane, fit.residual_gmm(plane.radius_mm), allowed,
                               fit.proven_best, len(drawer) + sum(len(u.masses_g)
                                                                  for u in fit.uses)))
        return tuple(parts), tuple(fits)

    def _solution(self, setup: ProcedureSetup, report: SolveReport,
                  corrections: Sequence[Correction], kind: MassKind, removal: bool,
                  runs: Sequence[Run] = ()) -> Solution:
        sol = report.solution
        off: tuple[OffSpeed, ...] = ()
        if report.speed is not None:
            off = tuple(OffSpeed(o.index, o.label, o.deviation, report.speed.worst_cut_fraction)
                        for o in report.speed.off_speed)
        if setup.owned_parts_g and not removal:
            parts, kit = self._kit_parts(setup, corrections, kind, runs)
        else:
            parts, kit = self._parts(setup, corrections, kind, removal), ()
        return Solution(tuple(corrections), parts, sol.method, tuple(sol.warnings),
                        sol.influence, off, kit)

    def solve(self, setup: ProcedureSetup, runs: Sequence[Run], removal: bool) -> Solution:
        report = self._report(self._input(setup, runs, with_tolerance=False))
        return self._solution(setup, report, report.solution.corrections, MassKind.CORRECTION,
                              removal, runs)

    def assess(self, setup: ProcedureSetup, runs: Sequence[Run],
               removal: bool) -> tuple[Verdict, Solution]:
        """Refit over every run so far; verdict on the last run; trim still needed."""
        report = self._report(self._input(setup, runs, with_tolerance=True))
        sol = report.solution
        assert report.verdict is not None
        verdict = replace(report.verdict, grade_mm_s=setup.grade_mm_per_s)
        trim = self._solution(setup, report, sol.corrections_keeping_current, MassKind.TRIM,
                              removal, runs)
        return verdict, trim
