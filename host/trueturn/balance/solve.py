"""One entry point for `solve`: phase readings -> influence coefficients; amplitudes only ->
the amplitude-only method; optional ISO 21940-11 verdict on the last run."""

from __future__ import annotations

from dataclasses import dataclass

from trueturn.balance.amplitude_only import solve_amplitude_only
from trueturn.balance.influence import Solution, solve_with_phase
from trueturn.balance.iso21940 import (
    Verdict,
    per_plane_permissible,
    permissible_unbalance_gmm,
    verdict,
)
from trueturn.balance.readings import BalanceInput
from trueturn.balance.static_couple import StaticCouple, static_couple


@dataclass
class SolveReport:
    """The solution plus the optional tolerance verdict and two-plane decomposition."""

    solution: Solution
    u_per_gmm: float | None = None
    verdict: Verdict | None = None
    static_couple: StaticCouple | None = None


def solve(inp: BalanceInput) -> SolveReport:
    """Compute corrections for a checked READINGS input."""
    solution = solve_with_phase(inp) if inp.has_phase else solve_amplitude_only(inp)
    report = SolveReport(solution)
    if len(solution.corrections) == 2:
        first, second = solution.corrections
        report.static_couple = static_couple(first.vector_g * first.radius_mm,
                                             second.vector_g * second.radius_mm)
    tol = inp.tolerance
    if tol is not None and solution.residual_now_gmm is not None:
        u_per = permissible_unbalance_gmm(tol.grade_mm_s, tol.speed_rpm, tol.rotor_mass_kg)
        shares = per_plane_permissible(u_per, len(inp.planes), tol.plane_distance_mm,
                                       tol.cg_from_first_plane_mm)
        report.u_per_gmm = u_per
        report.verdict = verdict(solution.residual_now_gmm, shares)
    return report
