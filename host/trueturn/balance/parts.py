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
gets there, the smallest residual. A kit shared by two planes is placed jointly
(:func:`best_joint_combination`): the least left on the worse plane, not the first plane's
pick with the second left what remains.

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
    target = PlaneTarget(mass_g, angle_deg, tuple(positions_deg))
    _check(target, parts_g, stack, node_limit)
    if enough_g is not None and not 0 <= enough_g < math.inf:
        raise UserError(f"a good-enough residual must be a finite number not below 0, "
                        f"got {enough_g:g}")
    return _search((target,), parts_g, stack, node_limit, enough_g)[0]


@dataclass(frozen=True)
class PlaneTarget:
    """One plane's correction for :func:`best_joint_combination`: ``mass_g`` at
    ``angle_deg`` (g at the plane's radius), the angles of its positions, and its radius,
    which weighs the unbalance each plane is left with (g·mm) against the others'."""

    mass_g: float
    angle_deg: float
    positions_deg: tuple[float, ...]
    radius_mm: float = 1.0


def best_joint_combination(targets: Sequence[PlaneTarget], parts_g: Sequence[float],
                           stack: int = 1,
                           node_limit: int = DEFAULT_NODE_LIMIT) -> tuple[PartsFit, ...]:
    """Share one kit of owned parts between several planes: the least unbalance left on
    the worse plane, then the least in total, then the fewest parts.

    Filling the planes one by one lets the first take the parts that suit it best and
    leaves the second with what is left, however much better the second would have done
    with them (a kit of 2 g and 1 g for corrections of 1.6 g and 2 g: the first plane
    takes the 2 g part and leaves 0.4 g, the second is left 1 g short; shared jointly the
    two leave 0.6 g and none). Here every part may go on any position of any plane or stay
    in the drawer, and the search starts from the plane-by-plane answer (each plane's
    search under the same node limit), so the joint one is never worse than it, even when
    the search stops at its node limit.

    Parameters
    ----------
    targets : sequence of PlaneTarget
        Each plane's correction, positions and radius (radius greater than 0).
    parts_g : sequence of float
        Mass of each part the person owns, g (one entry per piece, each greater than 0).
    stack : int, default 1
        Most parts one position takes.
    node_limit : int, default DEFAULT_NODE_LIMIT
        Search nodes before the best so far is returned unproven.

    Returns
    -------
    tuple of PartsFit
        One per target, in order: its parts, the unbalance it is left with, and whether
        the sharing is proven best; ``unused_g`` is what the planes together leave in the
        drawer.

    Raises
    ------
    UserError
        As :func:`best_combination`, for any target; also when no target is given or a
        radius is not a finite number greater than 0.

    Notes
    -----
    Objective, lexicographic with ties within 1e-9 of the scale: ``max_p r_p |T_p -
    sum_{k on p} m_k exp(i phi(k))|`` (the worse plane's unbalance left, g·mm: each plane
    is judged against the same share of the allowance, ISO 21940-11), then the sum over
    the planes, then the parts used. The same exact branch and bound as
    :func:`best_combination` over the choice of a plane's position or the drawer for each
    part; bound: each plane's residual shortened by all the parts not yet placed. The
    first best is the plane-by-plane answer (:func:`best_combination` in turn on what
    the planes before left).

    References
    ----------
    .. [1] A. H. Land, A. G. Doig, "An automatic method of solving discrete programming
       problems", Econometrica 28(3), 1960 (branch and bound).
    """
    if not targets:
        raise UserError("no planes given")
    for t in targets:
        _check(t, parts_g, stack, node_limit)
        if not 0 < t.radius_mm < math.inf:
            raise UserError(f"radius must be a finite number greater than 0, got "
                            f"{t.radius_mm:g}")
    drawer = list(parts_g)
    seed: list[tuple[int, int]] = []  # (plane, position) per part placed, plane by plane
    parts_seed: list[float] = []
    for p, t in enumerate(targets):
        if not drawer:
            break
        fit = _search((t,), drawer, stack, node_limit, None)[0]
        for use in fit.uses:
            for m in use.masses_g:
                drawer.remove(m)
                parts_seed.append(m)
                seed.append((p, use.position))
    return _search(tuple(targets), parts_g, stack, node_limit, None,
                   list(zip(parts_seed, seed, strict=True)))


def _check(target: PlaneTarget, parts_g: Sequence[float], stack: int, node_limit: int) -> None:
    """The inputs' guards, one :class:`UserError` each."""
    if not math.isfinite(target.mass_g) or target.mass_g < 0:
        raise UserError(f"mass must be a finite number not below 0, got {target.mass_g:g}")
    if not math.isfinite(target.angle_deg) or \
            not all(math.isfinite(p) for p in target.positions_deg):
        raise UserError("angles must be finite numbers")
    if not target.positions_deg:
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


def _search(targets: tuple[PlaneTarget, ...], parts_g: Sequence[float], stack: int,
            node_limit: int, enough_g: float | None,
            seed: Sequence[tuple[float, tuple[int, int]]] = ()) -> tuple[PartsFit, ...]:
    """The branch and bound of :func:`best_combination` (one target, ``enough_g``) and
    :func:`best_joint_combination` (``seed``: parts already known to go (plane,
    position), the first best). Inputs checked by the callers."""
    parts = sorted((float(m) for m in parts_g), reverse=True)
    # every (plane, position) a part may take; the drawer is the choice after the last
    options = [(p, j) for p, t in enumerate(targets) for j in range(len(t.positions_deg))]
    units = [phasor(1.0, targets[p].positions_deg[j]) for p, j in options]
    weight = [t.radius_mm for t in targets]
    left_after = [sum(parts[k:]) for k in range(1, len(parts) + 1)]  # mass left after part k
    tol = 1e-9 * sum(t.radius_mm * (t.mass_g + sum(parts)) for t in targets)
    drawer = len(options)

    def sizes(residuals: Sequence[complex]) -> list[float]:
        return [w * abs(r) for w, r in zip(weight, residuals, strict=True)]

    choice = [drawer] * len(parts)
    load = [0] * len(options)
    residuals = [phasor(t.mass_g, t.angle_deg) for t in targets]
    start = sizes(residuals)
    best_choice = list(choice)
    best = [max(start), sum(start), 0]  # worse plane, total, parts used
    if seed:
        free = list(range(len(parts)))
        seeded = list(residuals)
        for m, where in seed:
            k = next(i for i in free if parts[i] == m)
            free.remove(k)
            best_choice[k] = options.index(where)
            seeded[where[0]] -= m * units[best_choice[k]]
        at_seed = sizes(seeded)
        best[:] = [max(at_seed), sum(at_seed), len(seed)]
    nodes = 0
    stopped = False

    def fits(size: float) -> bool:
        return enough_g is not None and size <= enough_g + tol

    def better(worst: float, total: float, used: int) -> bool:
        if fits(worst) != fits(best[0]):
            return fits(worst)
        if fits(worst):  # both good enough: fewer parts, then the smaller residual
            return used < best[2] or (used == best[2] and worst < best[0] - tol)
        if abs(worst - best[0]) > tol:
            return worst < best[0]
        if abs(total - best[1]) > tol:
            return total < best[1]
        return used < best[2]

    plane_of = [p for p, _ in options]
    now = sizes(residuals)  # each plane's unbalance left, kept in step with ``residuals``
    planes = range(len(targets))
    single = len(targets) == 1

    def visit(k: int, used: int) -> None:
        nonlocal nodes, stopped
        nodes += 1
        worst = max(now)
        total = worst if single else sum(now)
        if better(worst, total, used):
            best[:] = [worst, total, used]
            best_choice[:] = choice
        if k == len(parts) or worst <= tol:
            return  # leaving the rest in the drawer cannot do better
        if nodes >= node_limit:
            stopped = True
            return
        m = parts[k]
        # the least the worse plane can be left with below: every part left laid straight
        # against each plane's residual at once (a bound, never reached for two planes)
        rest = m + left_after[k]
        reach = now[0] - weight[0] * rest if single else \
            max([now[p] - weight[p] * rest for p in planes])
        if fits(best[0]):
            if used >= best[2] or not fits(reach):
                return  # more parts, or never good enough
        elif reach > best[0] + tol:
            return
        lowest = choice[k - 1] if k > 0 and parts[k - 1] == m else 0
        tried = []
        for c in range(lowest, drawer):
            if load[c] < stack:
                p = plane_of[c]
                after = weight[p] * abs(residuals[p] - m * units[c])
                tried.append((after - now[p], c, after))
        tried.sort()  # nearest first: the choice that shortens a residual most
        for _, c, after in tried:
            p = plane_of[c]
            was, was_size = residuals[p], now[p]
            choice[k] = c
            load[c] += 1
            residuals[p] -= m * units[c]
            now[p] = after
            visit(k + 1, used + 1)
            residuals[p], now[p] = was, was_size
            load[c] -= 1
            choice[k] = drawer
            if stopped:
                return
        visit(k + 1, used)  # this part stays in the drawer

    visit(0, 0)

    unused = tuple(m for m, c in zip(parts, best_choice, strict=True) if c == drawer)
    fits_out = []
    for p, t in enumerate(targets):
        by_position: dict[int, list[float]] = {}
        placed = 0j
        for m, c in zip(parts, best_choice, strict=True):
            if c != drawer and options[c][0] == p:
                by_position.setdefault(options[c][1], []).append(m)
                placed += m * units[c]
        uses = tuple(PartUse(j, wrap_deg(t.positions_deg[j]), tuple(by_position[j]))
                     for j in sorted(by_position))
        residual_g, residual_angle = amplitude_phase(placed - phasor(t.mass_g, t.angle_deg))
        fits_out.append(PartsFit(uses, unused, residual_g, residual_angle, not stopped, nodes))
    return tuple(fits_out)
