"""One entry point for `solve`: phase readings -> influence coefficients; amplitudes only ->
the amplitude-only method; optional ISO 21940-11 verdict on the last run.

The verdict is judged at the bearing planes when the READINGS give the bearings and the
planes' axial positions (ISO 21940-11:2016 clause 4, bearing planes as tolerance planes;
residual phasors referred by rigid-rotor statics, :func:`iso21940.bearing_verdict`);
otherwise in the correction planes, flagged :attr:`VerdictFlag.NOT_AT_BEARINGS`."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from functools import partial

import numpy as np

from trueturn.balance.amplitude_only import solve_amplitude_only
from trueturn.balance.influence import Solution, solve_with_phase
from trueturn.balance.iso21940 import (
    Verdict,
    VerdictFlag,
    bearing_lever_arms,
    bearing_verdict,
    per_plane_permissible,
    permissible_unbalance_gmm,
    verdict,
)
from trueturn.balance.readings import BalanceInput
from trueturn.balance.sanity import CorrectionFinding, check_corrections
from trueturn.balance.speed import (
    SpeedErrorEstimate,
    normalise_speeds,
    normalise_with_slopes,
    off_speed_runs,
    speed_error_estimate,
)
from trueturn.balance.static_couple import StaticCouple, static_couple


@dataclass
class SolveReport:
    """The solution plus the optional tolerance verdict and two-plane decomposition."""

    solution: Solution
    u_per_gmm: float | None = None
    verdict: Verdict | None = None
    static_couple: StaticCouple | None = None
    #: runs of a speed group taken at speeds more than 0.3 % apart, and what it may cost
    speed: SpeedErrorEstimate | None = None
    #: corrections allowed but large against the rotor's mass (shown loudly)
    correction_findings: list[CorrectionFinding] = field(default_factory=list)


def solve(inp: BalanceInput) -> SolveReport:
    """Corrections for a checked READINGS input, with the optional tolerance verdict.

    Phase readings go to the influence-coefficient method, amplitudes only to the
    amplitude-only method. Runs at slightly different speeds are normalised when
    each pickup's measured slope (``inp.speed_slopes``) or ``inp.speed_exponent`` is known,
    otherwise reported with an error estimate
    (:mod:`trueturn.balance.speed`).

    Parameters
    ----------
    inp : BalanceInput
        The checked input (:func:`trueturn.balance.readings.parse_readings`).

    Returns
    -------
    SolveReport
        The solution, the speed error estimate, correction findings, the static/couple split
        (two planes) and, when the input has a tolerance, ``U_per`` (g·mm) and the verdict.

    Raises
    ------
    UserError
        As the methods it calls: an input they cannot solve, a trial with no information
        (``NoInformationError``) or an absurd correction (``AbsurdCorrectionError``).

    References
    ----------
    .. [1] Influence-coefficient method (:func:`trueturn.balance.influence.solve_with_phase`)
       and the four-run method (:func:`trueturn.balance.amplitude_only.solve_amplitude_only`);
       see their references.
    .. [2] ISO 21940-11:2016, Mechanical vibration -- Rotor balancing -- Part 11: Procedures
       and tolerances for rotors with rigid behaviour (the verdict).
    """
    solver = solve_with_phase if inp.has_phase else solve_amplitude_only
    if inp.speed_slopes:
        solution = solver(normalise_with_slopes(inp))
        off = off_speed_runs(inp.runs)
        speed = (SpeedErrorEstimate(tuple(off), (), (), 1.0, normalised_with_slopes=True)
                 if off else None)
    elif inp.speed_exponent is not None:
        solution = solver(normalise_speeds(inp, inp.speed_exponent))
        off = off_speed_runs(inp.runs)
        speed = (SpeedErrorEstimate(tuple(off), (), (), 1.0, inp.speed_exponent)
                 if off else None)
    else:
        solution = solver(inp)
        # its re-solves want the corrections only: not the Monte Carlo half-widths again
        quick = partial(solve_with_phase, uncertainty=False) if inp.has_phase else solver
        speed = speed_error_estimate(inp, solution, quick)
    rotor_kg = inp.tolerance.rotor_mass_kg if inp.tolerance is not None else None
    findings = check_corrections([c.mass_g for c in solution.corrections],
                                 [c.plane for c in solution.corrections], rotor_kg)
    report = SolveReport(solution, speed=speed, correction_findings=findings)
    if len(solution.corrections) == 2:
        first, second = solution.corrections
        radius_mm = {p.name: p.radius_mm for p in inp.planes}
        report.static_couple = static_couple(first.vector_g * radius_mm[first.plane],
                                             second.vector_g * radius_mm[second.plane])
    tol = inp.tolerance
    if tol is not None and solution.residual_now_gmm is not None:
        report.u_per_gmm = permissible_unbalance_gmm(tol.grade_mm_s, tol.speed_rpm,
                                                     tol.rotor_mass_kg)
        report.verdict = tolerance_verdict(inp, solution, report.u_per_gmm)
        extra = []
        if tol.speed_from_last_run:
            extra.append(VerdictFlag.SPEED_FROM_LAST_RUN)
        if solution.ambiguous:
            extra.append(VerdictFlag.AMBIGUOUS)
        if solution.inconsistent:
            extra.append(VerdictFlag.INCONSISTENT)
        if solution.clipped_last_run:
            extra.append(VerdictFlag.CLIPPED)
        if extra:
            # an ambiguous, inconsistent or clipped answer never comes with a PASS
            withheld = solution.ambiguous or solution.inconsistent or solution.clipped_last_run
            report.verdict = replace(report.verdict,
                                     passed=report.verdict.passed and not withheld,
                                     flags=(*report.verdict.flags, *extra))
    return report


def tolerance_verdict(inp: BalanceInput, solution: Solution, u_per_gmm: float) -> Verdict:
    """ISO 21940-11 verdict on the residual of the last run: at the bearings when known.

    The residual of the last run is minus the least-squares correction still needed, times
    the plane's radius, as a phasor. With bearings (and the planes' axial positions) it is
    referred to the bearing planes; otherwise judged in the correction planes, flagged
    ``not_at_bearings``.

    Parameters
    ----------
    inp : BalanceInput
        The checked input; its ``tolerance`` must be given.
    solution : Solution
        The solution, with its residual of the last run.
    u_per_gmm : float
        Permissible residual unbalance of the rotor at the maximum service speed, g·mm.

    Returns
    -------
    Verdict
        Pass or fail with residual and permissible unbalance per tolerance plane, g·mm.

    References
    ----------
    .. [1] ISO 21940-11:2016, clause 4 (bearing planes as tolerance planes) and clause 7
       (allocation of ``U_per``, from memory); see
       :func:`trueturn.balance.iso21940.bearing_verdict`.
    """
    tol = inp.tolerance
    assert tol is not None and solution.residual_now_gmm is not None
    draws = solution.residual_now_draws_gmm
    if inp.bearings and solution.residual_now_vector_gmm is not None:
        planes_mm: list[float] = []
        for p in inp.planes:
            assert p.axial_mm is not None  # parse_readings requires them with bearings
            planes_mm.append(p.axial_mm)
        bearings_mm = [b.axial_mm for b in inp.bearings]
        v = bearing_verdict(solution.residual_now_vector_gmm, planes_mm, bearings_mm,
                            u_per_gmm, tol.cg_axial_mm,
                            bearing_names=[b.name for b in inp.bearings],
                            speed_rpm=tol.speed_rpm)
        if draws is not None:
            arms = np.array(bearing_lever_arms(planes_mm, bearings_mm))  # bearings x planes
            draws = draws @ arms.T  # each draw referred to the bearings (linear statics)
    else:
        shares = per_plane_permissible(u_per_gmm, len(inp.planes), tol.plane_distance_mm,
                                       tol.cg_from_first_plane_mm)
        plain = verdict(solution.residual_now_gmm, shares)
        v = Verdict(plain.passed, plain.residual_gmm, plain.permissible_gmm,
                    tuple(p.name for p in inp.planes), u_per_gmm=u_per_gmm,
                    speed_rpm=tol.speed_rpm, flags=plain.flags)
    return guard_band(v, draws)


def guard_band(v: Verdict, draws: np.ndarray | None) -> Verdict:
    """The verdict with the residual's 95 % upper bound per tolerance plane; a pass on the
    estimate whose bound reaches past a share becomes ``not_proven``.

    Parameters
    ----------
    v : Verdict
        The verdict on the residual estimate.
    draws : numpy.ndarray or None
        Residual vectors per tolerance plane (draws x planes, g·mm), the last run's readings
        redrawn within their 95 % circles (and the coefficients refitted with them); None:
        the uncertainty is not known and the verdict is left as it is.

    Returns
    -------
    Verdict
        With ``residual_upper_gmm`` (95th percentile of each plane's drawn magnitude, never
        below the estimate) and, when a bound exceeds its share, ``not_proven``.

    References
    ----------
    .. [1] ISO 14253-1:2017, decision rules for proving conformance with specifications:
       conformance is proven when the measurement result with its expanded uncertainty lies
       inside the specification zone (from memory).
    """
    if draws is None or len(draws) == 0:
        return v
    mags = np.abs(draws)
    unknown = ~np.all(np.isfinite(mags), axis=0)   # a draw that is not a number: no bound
    upper = np.percentile(np.where(np.isfinite(mags), mags, 0.0), 95, axis=0)
    upper = np.maximum(np.where(unknown, np.inf, upper), np.asarray(v.residual_gmm))
    if v.residual_upper_gmm:
        # a bound already known (another source of uncertainty): the wider one holds
        upper = np.maximum(upper, np.asarray(v.residual_upper_gmm))
    v = replace(v, residual_upper_gmm=tuple(float(u) for u in upper))
    if v.passed and any(u > p for u, p in zip(upper, v.permissible_gmm, strict=True)):
        v = v.with_flags(VerdictFlag.NOT_PROVEN)
    return v


def plane_draws_to_tolerance_planes(v: Verdict, draws_gmm: np.ndarray,
                                    plane_axial_mm: Sequence[float | None],
                                    bearing_axial_mm: Sequence[float]) -> np.ndarray:
    """Residual draws in the correction planes (draws x planes, g·mm phasors) carried to
    the verdict's tolerance planes: the bearings by rigid-rotor statics when the verdict is
    judged there, else as they are.

    Parameters
    ----------
    v : Verdict
        The verdict the draws are for.
    draws_gmm : numpy.ndarray
        Residual unbalance vectors per correction plane, g·mm.
    plane_axial_mm, bearing_axial_mm : sequence of float
        The planes' and the two bearings' axial positions (needed at the bearings).

    Returns
    -------
    numpy.ndarray
        Draws x tolerance planes, g·mm.

    References
    ----------
    .. [1] ISO 21940-11:2016, clause 4 (bearing planes as tolerance planes; from memory);
       :func:`trueturn.balance.iso21940.bearing_lever_arms`.
    """
    if not v.at_bearings:
        return draws_gmm
    planes = [float(z) for z in plane_axial_mm if z is not None]
    if len(planes) != draws_gmm.shape[1]:
        raise ValueError("every plane's axial position is needed at the bearings")
    arms = np.array(bearing_lever_arms(planes, list(bearing_axial_mm)))  # bearings x planes
    return draws_gmm @ arms.T
