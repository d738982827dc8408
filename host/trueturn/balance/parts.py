"""The weights you have: the best combination of owned parts on a rotor's positions.

In a garage the correction is made from what is in the drawer (washers, set screws, clip
weights), not from any mass at any angle. Given the correction (mass at an angle, at the
plane's radius), the angles of the positions where parts can go, the masses of the parts
the person owns (one entry per piece: two 0.5 g washers are ``[0.5, 0.5]``) and how many may
stack on one position, :func:`best_combination` chooses for every part a position or the
drawer so that the unbalance left, ``|correction - sum of the placed parts' vectors|``, is
as small as it can be; among equally good choices the one with the fewest parts wins. With
``enough_g`` given (e.g. a share of the grade's allowance), the fewest parts that leave at
most that much win instead (then the smaller residual among those), and only if no choice
gets there, the smallest residual.

Method: an exact depth-first **branch and bound** over the assignment of each part (largest
first) to one of the positions or to the drawer -- a multiple-choice, capacity-limited
relative of the knapsack problem (each position a bin of ``stack`` places, the objective a
vector norm instead of a sum). Bound: the parts not yet placed can shorten the residual
vector by at most their total mass (triangle inequality), so a branch with
``|residual| - mass left > best`` is cut. Identical parts are interchangeable, so a part
equal to the one before it is given only a choice at or after that part's choice (symmetry
breaking: each multiset of assignments is visited once). Choices are tried nearest-first
(the position that shortens the residual most), so a good answer is found early and the
bound cuts hard. The search stops after ``node_limit`` nodes; the answer then is the best
found, its residual true, and :attr:`PartsFit.proven_best` is False.

Masses are grams at the plane's radius; the unbalance left in g·mm is that mass times the
radius (:meth:`PartsFit.residual_gmm`). Angles follow :mod:`trueturn.angles`; positions are
indices into the plane's list, shown as numbers from 1 (:mod:`trueturn.positions`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from trueturn.angles import amplitude_phase, phasor, wrap_deg
from trueturn.errors import UserError
from trueturn.model.mass import MAX_OWNED_PARTS
from trueturn.positions import number_of

#: Nodes visited before the search gives its best so far (unproven). 200 000 nodes take
#: about a quarter of a second in CPython on the shared 2-core machine; kits of up to 8
#: parts on up to 12 positions finished proven within it in random trials (measured once,
#: not a timed test).
DEFAULT_NODE_LIMIT = 200_000

#: Most parts a search takes (the profile's limit, model.mass.MAX_OWNED_PARTS).
MAX_PARTS = MAX_OWNED_PARTS


@dataclass(frozen=True)
class PartUse:
    """The parts placed on one position: ``masses_g`` at ``angle_deg`` (index ``position``)."""

    position: int
    angle_deg: float
    masses_g: tuple[float, ...]

    @property
    def number(self) -> int:
        """The position's number as a person sees it (from 1)."""
        return number_of(self.position)

    @property
    def mass_g(self) -> float:
        """Total mass on this position, g."""
        return sum(self.masses_g)


@dataclass(frozen=True)
class PartsFit:
    """The chosen combination and the unbalance it leaves.

    ``uses``: positions with parts, in position order; ``unused_g``: parts left in the
    drawer; ``residual_g``/``residual_angle_deg``: the unbalance left on the rotor, as a mass
    at the plane's radius and its angle (placed parts minus the correction: the rotor's
    as-found unbalance is minus the correction); ``proven_best``: the search finished (the
    combination is the best there is), False when it stopped at its node limit.
    """

    uses: tuple[PartUse, ...]
    unused_g: tuple[float, ...]
    residual_g: float
    residual_angle_deg: float
    proven_best: bool
    nodes: int

    def residual_gmm(self, radius_mm: float) -> float:
        """The unbalance left, g·mm, with the parts at ``radius_mm``.

        Parameters
        ----------
        radius_mm : float
            Radius of the positions from the axis, mm (greater than 0).

        Returns
        -------
        float
            ``residual_g * radius_mm``, g·mm.

        Raises
        ------
        UserError
            When the radius is not a finite number greater than 0.

        References
        ----------
        .. [1] Unbalance U = m·r, ISO 21940-2:2017 (vocabulary), from memory.
        """
        if not 0 < radius_mm < math.inf:
            raise UserError(f"radius must be a finite number greater than 0, got {radius_mm:g}")
        return self.residual_g * radius_mm


def best_combination(mass_g: float, angle_deg: float, positions_deg: Sequence[float],
                     parts_g: Sequence[float], stack: int = 1,
                     node_limit: int = DEFAULT_NODE_LIMIT,
                     enough_g: float | None = None) -> PartsFit:
    """Place owned parts on the positions to leave the least unbalance.

    Parameters
    ----------
    mass_g : float
        Correction mass, g at the plane's radius (not below 0).
    angle_deg : float
        Correction angle from the reference mark, degrees against rotation.
    positions_deg : sequence of float
        Angles of the positions where parts can go, position 1 first.
    parts_g : sequence of float
        Mass of each part the person owns, g (one entry per piece, each greater than 0).
    stack : int, default 1
        Most parts one position takes (1: one part per hole or blade).
    node_limit : int, default DEFAULT_NODE_LIMIT
        Search nodes before the best so far is returned unproven.
    enough_g : float or None, default None
        A residual (g at the radius) that is good enough: the fewest parts that leave at
        most this win; None minimises the residual alone.

    Returns
    -------
    PartsFit
        Parts per position, parts left over, the unbalance left (mass and angle) and whether
        the combination is proven the best.

    Raises
    ------
    UserError
        When the correction or a part mass is not a finite number (parts greater than 0,
        the correction not below 0), an angle is not finite, no positions are given, more
        than ``MAX_PARTS`` parts are given, ``stack`` or ``node_limit`` is below 1, or
        ``enough_g`` is negative or not finite.

    Notes
    -----
    Objective: minimise ``|T - sum_k m_k exp(i phi_p(k))|`` with ``T = mass_g exp(i
    angle_deg)`` over assignments ``p(k)`` of part ``k`` to a position or to none, at most
    ``stack`` parts per position; ties (within 1e-9 of the scale) go to fewer parts. Exact
    depth-first branch and bound, bound ``|r| - sum of the parts left`` (triangle
    inequality), identical parts in non-decreasing choice order (symmetry breaking). With
    ``enough_g``: once a combination within it is known, a branch is cut when it already
    uses as many parts or when its bound cannot reach ``enough_g``.

    References
    ----------
    .. [1] A. H. Land, A. G. Doig, "An automatic method of solving discrete programming
       problems", Econometrica 28(3), 1960 (branch and bound).
    .. [2] S. Martello, P. Toth, "Knapsack Problems: Algorithms and Computer
       Implementations", Wiley, 1990 (depth-first branch and bound for knapsack-type
       problems; from memory).
    """
    if not math.isfinite(mass_g) or mass_g < 0:
        raise UserError(f"mass must be a finite number not below 0, got {mass_g:g}")
    if not math.isfinite(angle_deg) or not all(math.isfinite(p) for p in positions_deg):
        raise UserError("angles must be finite numbers")
    if not positions_deg:
        raise UserError("no positions given: owned parts go on the rotor's positions")
    if not parts_g:
        raise UserError("no parts given")
    if len(parts_g) > MAX_PARTS:
        raise UserError(f"at most {MAX_PARTS} parts, got {len(parts_g)}")
    for m in parts_g:
        if not 0 < m < math.inf:
            raise UserError(f"part masses must be finite numbers greater than 0, got {m:g}")
    if stack < 1:
        raise UserError(f"stack must be at least 1 part per position, got {stack}")
    if node_limit < 1:
        raise UserError(f"node limit must be at least 1, got {node_limit}")
    if enough_g is not None and not 0 <= enough_g < math.inf:
        raise UserError(f"a good-enough residual must be a finite number not below 0, "
                        f"got {enough_g:g}")

    parts = sorted((float(m) for m in parts_g), reverse=True)
    n_pos = len(positions_deg)
    units = [phasor(1.0, p) for p in positions_deg]
    target = phasor(mass_g, angle_deg)
    left_after = [sum(parts[k:]) for k in range(1, len(parts) + 1)]  # mass left after part k
    tol = 1e-9 * (mass_g + sum(parts))
    drawer = n_pos  # the choice index of "not used"

    choice = [drawer] * len(parts)
    load = [0] * n_pos
    best_choice = list(choice)
    best = [abs(target), 0]  # residual, parts used
    nodes = 0
    stopped = False

    def fits(size: float) -> bool:
        return enough_g is not None and size <= enough_g + tol

    def better(size: float, used: int) -> bool:
        if fits(size) != fits(best[0]):
            return fits(size)
        if fits(size):  # both good enough: fewer parts, then the smaller residual
            return used < best[1] or (used == best[1] and size < best[0] - tol)
        return size < best[0] - tol or (size <= best[0] + tol and used < best[1])

    def visit(k: int, residual: complex, used: int) -> None:
        nonlocal nodes, stopped
        nodes += 1
        size = abs(residual)
        if better(size, used):
            best[0], best[1] = size, used
            best_choice[:] = choice
        if k == len(parts) or size <= tol:
            return  # leaving the rest in the drawer cannot do better
        if nodes >= node_limit:
            stopped = True
            return
        m = parts[k]
        reach = size - m - left_after[k]  # the least residual any branch below can leave
        if fits(best[0]):
            if used >= best[1] or not fits(reach):
                return  # more parts, or never good enough
        elif reach > best[0] + tol:
            return  # even all parts left laid straight against the residual fall short
        lowest = choice[k - 1] if k > 0 and parts[k - 1] == m else 0
        options = [(abs(residual - m * units[j]), j) for j in range(lowest, n_pos)
                   if load[j] < stack]
        options.sort()
        for _, j in options:
            choice[k] = j
            load[j] += 1
            visit(k + 1, residual - m * units[j], used + 1)
            load[j] -= 1
            choice[k] = drawer
            if stopped:
                return
        visit(k + 1, residual, used)  # this part stays in the drawer

    visit(0, target, 0)

    placed = 0j
    by_position: dict[int, list[float]] = {}
    unused: list[float] = []
    for m, j in zip(parts, best_choice, strict=True):
        if j == drawer:
            unused.append(m)
        else:
            by_position.setdefault(j, []).append(m)
            placed += m * units[j]
    uses = tuple(PartUse(j, wrap_deg(positions_deg[j]), tuple(by_position[j]))
                 for j in sorted(by_position))
    residual_g, residual_angle = amplitude_phase(placed - target)
    return PartsFit(uses, tuple(unused), residual_g, residual_angle, not stopped, nodes)
