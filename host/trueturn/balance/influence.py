"""Influence-coefficient balancing for 1, 2 or N planes, M >= N pickups, one or more speeds.

Method (the influence coefficient method, e.g. Thearle's two-plane procedure generalised by
least squares; see README in this folder): with the complex 1x reading ``R[c]`` of channel
``c`` (a pickup at a speed) and the complex masses ``W[j]`` (grams at the plane's radius,
relative to the as-found rotor) the rotor is modelled as linear,

    R_k[c] = R0[c] + sum_j A[c, j] * W_k[j]            for every run k,

so the as-found vector ``R0`` and the influence coefficients ``A`` follow from any set of runs
in which the masses changed, by linear least squares (``numpy.linalg.lstsq``). The
correction ``C`` minimises ``sum_c w_c^2 |R0[c] + A[c, :] C|^2`` (weights per pickup),
optionally with ``|C_j| <= max_mass_g`` per plane (``scipy.optimize.minimize``, SLSQP).

Angles follow :mod:`trueturn.angles`.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import minimize

from trueturn.angles import amplitude_phase
from trueturn.balance.readings import BalanceInput, SavedCoefficient
from trueturn.balance.sanity import check_trial_information
from trueturn.errors import UserError
from trueturn.model import Correction, PlacedMass, Plane, Run
from trueturn.model.units import mass_text

#: a 95 % confidence circle holds a 2-D normal within this many per-axis sigmas
#: (sqrt(-2 ln 0.05), Rayleigh distribution quantile).
CIRCLE95_SIGMAS = float(np.sqrt(-2.0 * np.log(0.05)))
#: trial effect thresholds: at least this relative change of the 1x ...
MIN_TRIAL_CHANGE = 0.25
#: ... and at least this many confidence radii (common practice, no source)
MIN_TRIAL_CONFIDENCES = 3.0
#: 1 sigma of the 1x's change between runs that no reading's own circle shows (speed wander
#: of +/-0.5 % moves it by 1-2 % on a stiff mount, more near a soft mount's modes; mounts
#: are mildly nonlinear; masses placed within 2 % and 2 degrees): a floor on the Monte
#: Carlo's scatter, so a verdict's bound holds on a soft mount too (our choice, measured by
#: bench/bench_balance.py: on its soft-mounted rotors "said within G 6.3 but the true residual
#: was not" fell from 10 % to 4 % with 0.02 and to 0 with 0.04, before the runs' speeds were
#: normalised by the coast-down's slope). Since then, [default] (seed 2024, 2026-12-04):
#: with 0.04 the true residual passed the 95 % bound in 1 of 402 plane-checks (0.2 %, the
#: bound far wider than 95 %: trims that corrected nothing), with 0.03 in 7 of 382 (1.8 %,
#: still wider than 95 %), 95.0 % of rotors within 5 runs (0.04: 94.5 %), said within
#: wrongly 0 of 200; with 0.02 said within wrongly 0.5 %
RUN_TO_RUN_REL_SIGMA = 0.03
#: runs whose speeds differ by less than this fraction belong to the same speed
SPEED_MATCH = 0.03
#: beyond this the runs cannot separate the planes (numerically singular)
SINGULAR_CONDITION = 1e8
MONTE_CARLO_DRAWS = 200


class SingularSystemError(UserError):
    """The runs or coefficients cannot separate the planes."""


@dataclass(frozen=True)
class Channel:
    """One row of the influence matrix: a pickup at a speed (None: a single, unnamed speed)."""

    sensor: str
    speed_rpm: float | None = None

    @property
    def key(self) -> str:
        return self.sensor if self.speed_rpm is None else f"{self.sensor}@{self.speed_rpm:g}rpm"


@dataclass(frozen=True)
class InfluenceModel:
    """Influence coefficients ``matrix[c, j]`` in reading units per gram at plane j's radius."""

    planes: tuple[str, ...]
    channels: tuple[Channel, ...]
    matrix: np.ndarray

    def as_saved(self) -> list[SavedCoefficient]:
        """The coefficients in the form READINGS accepts back under ``influence``.

        Returns
        -------
        list of SavedCoefficient
            One per channel (pickup at a speed) and plane: amplitude in reading units per gram at
            the plane's radius, phase in degrees, speed in rpm (None for a single speed).

        References
        ----------
        .. [1] Influence-coefficient method: E. L. Thearle, "Dynamic Balancing of Rotating
           Machinery in the Field", Trans. ASME (1934), two-plane field balancing, here
           generalised by least squares (from memory).
        """
        out = []
        for c, channel in enumerate(self.channels):
            for j, plane in enumerate(self.planes):
                amp, phase = amplitude_phase(complex(self.matrix[c, j]))
                out.append(SavedCoefficient(channel.sensor, plane, amp, phase, channel.speed_rpm))
        return out


@dataclass
class Solution:
    """What `solve` reports (see balance/README.md for the JSON form)."""

    method: str
    corrections: list[Correction]
    predicted_residual: dict[str, complex]
    condition_number: float | None
    warnings: list[str] = field(default_factory=list)
    trial_masses: str = "none"
    on_rotor_now: list[PlacedMass] = field(default_factory=list)
    corrections_keeping_current: list[Correction] = field(default_factory=list)
    influence: InfluenceModel | None = None
    as_found: dict[str, complex] = field(default_factory=dict)
    residual_now_gmm: list[float] | None = None
    #: residual unbalance per plane as phasors (g·mm; angle of the heavy spot), None if unknown
    residual_now_vector_gmm: list[complex] | None = None
    candidates: list[list[Correction]] = field(default_factory=list)
    ambiguous: bool = False
    #: amplitude-only: RMS misfit of the amplitudes per pickup (reading units), not a prediction
    fit_scatter: dict[str, float] | None = None
    #: amplitude-only: the fit scatter exceeds 10 % of the readings (no PASS is given)
    inconsistent: bool = False
    #: (run label, sensor) of every clipped reading, left out of the coefficients
    clipped: list[tuple[str, str]] = field(default_factory=list)
    #: the last run (the one the verdict is on) has a clipped reading: no PASS
    clipped_last_run: bool = False
    #: the last run's residual vectors (g·mm, draws x planes) redrawn with every reading
    #: moved within its 95 % circle: the verdict's uncertainty (None when unknown)
    residual_now_draws_gmm: np.ndarray | None = None


# ----------------------------------------------------------------------------- helpers

def mass_vector(masses: Sequence[PlacedMass], planes: Sequence[Plane]) -> np.ndarray:
    """Complex vector sum of the masses per plane.

    Parameters
    ----------
    masses : sequence of PlacedMass
        Masses on the rotor (g, degrees), each naming its plane.
    planes : sequence of Plane
        The correction planes, in the order of the result.

    Returns
    -------
    numpy.ndarray
        Complex mass per plane, shape (N,), grams at the plane's radius (angle in the
        :mod:`trueturn.angles` convention).

    References
    ----------
    .. [1] Vector sum of centrifugal forces at a common radius (common practice, no source).
    """
    names = [p.name for p in planes]
    out = np.zeros(len(names), dtype=complex)
    for m in masses:
        out[names.index(m.plane)] += m.vector_g
    return out


def speed_groups(runs: Sequence[Run]) -> list[float | None]:
    """The distinct speeds of the runs (within 3 %), in order of first appearance.

    Parameters
    ----------
    runs : sequence of Run
        The runs, each with ``speed_rpm`` (rpm) or None.

    Returns
    -------
    list of float or None
        The first speed of each group, rpm; ``[None]`` when no run gives a speed.

    Raises
    ------
    UserError
        When some runs give a speed and others do not.

    References
    ----------
    .. [1] Grouping runs within 3 % as one speed: common practice, no source.
    """
    speeds = [r.speed_rpm for r in runs]
    if all(s is None for s in speeds):
        return [None]
    if any(s is None for s in speeds):
        raise UserError("runs: speed_rpm is given in some runs but not in others")
    groups: list[float] = []
    for s in speeds:
        assert s is not None  # every run has a speed (checked above)
        if not any(abs(s - g) <= SPEED_MATCH * g for g in groups):
            groups.append(s)
    return [g for g in groups]


def _group_of(speed: float | None, groups: Sequence[float | None]) -> float | None:
    if speed is None:
        return None if None in groups else groups[0]
    for g in groups:
        if g is not None and abs(speed - g) <= SPEED_MATCH * g:
            return g
    raise UserError(f"no coefficients for the speed {speed:g} rpm")


def _describe(masses: Sequence[PlacedMass]) -> str:
    if not masses:
        return "nothing"
    return ", ".join(f"{m.mass_g:g} g at {m.angle_deg:g}° in {m.plane}" for m in masses)


def trial_handling(runs: Sequence[Run]) -> str:
    """What happened to trial masses between runs.

    Parameters
    ----------
    runs : sequence of Run
        The runs in order, each with the masses on the rotor relative to as found.

    Returns
    -------
    str
        ``'removed'``, ``'left on'``, ``'mixed'`` or ``'none'`` (no trial mass was ever on
        the rotor). A trial still on the rotor in the last run counts as left on, even when
        it is the only one (as found, then one trial run).

    References
    ----------
    .. [1] Bookkeeping of the run sequence (common practice, no source).
    """
    seen = set()
    for prev, cur in zip(runs, runs[1:], strict=False):
        if not prev.masses or list(prev.masses) == list(cur.masses):
            continue
        cur_left = list(cur.masses)
        kept = True
        for m in prev.masses:
            if m in cur_left:
                cur_left.remove(m)
            else:
                kept = False
        if kept and cur_left:
            seen.add("left on")
        elif not kept:
            seen.add("removed")
    if not seen:
        # one trial run and its mass still on in the last run: left on (this used to read
        # 'none', as only changes between two runs with masses were counted)
        return "left on" if runs and len(runs[-1].masses) > 0 else "none"
    return seen.pop() if len(seen) == 1 else "mixed"


# ----------------------------------------------------------------------------- fitting

def fit_influence(runs: Sequence[Run], planes: Sequence[Plane], sensors: Sequence[str],
                  readings_override: dict[tuple[int, str], complex] | None = None
                  ) -> tuple[np.ndarray, InfluenceModel]:
    """As-found vectors ``R0[c]`` and coefficients ``A[c, j]`` from runs, by least squares.

    Solves ``R_k[c] = R0[c] + sum_j A[c, j] W_k[j]`` for every channel (a pickup at a speed)
    with ``numpy.linalg.lstsq``. Each speed needs at least N+1 runs whose mass vectors (with a
    constant term) have full rank, e.g. the classic sequence: as found, then one trial per
    plane (removed or left on). Clipped readings are left out.

    Parameters
    ----------
    runs : sequence of Run
        The runs: masses relative to as found (g, degrees) and 1x readings per pickup.
    planes : sequence of Plane
        The correction planes.
    sensors : sequence of str
        The pickups' names, in the order of the channels.
    readings_override : dict or None, default None
        ``(run index, pickup) -> reading phasor`` used instead of the measured readings (the
        Monte Carlo of the uncertainty); None uses the readings.

    Returns
    -------
    r0 : numpy.ndarray
        As-found 1x per channel, complex, reading units.
    model : InfluenceModel
        Coefficients per channel and plane, reading units per gram at the plane's radius.

    Raises
    ------
    SingularSystemError
        When a speed has too few runs, or the mass changes cannot separate the planes (also
        after leaving out a pickup's clipped readings).

    References
    ----------
    .. [1] Influence-coefficient method: E. L. Thearle, "Dynamic Balancing of Rotating
       Machinery in the Field", Trans. ASME (1934), two-plane field balancing, here
       generalised by least squares (from memory).
    .. [2] Linear least squares, ``numpy.linalg.lstsq`` (LAPACK ``gelsd``).
    """
    groups = speed_groups(runs)
    n_planes = len(planes)
    channels: list[Channel] = []
    r0_rows: list[complex] = []
    a_rows: list[np.ndarray] = []
    for g in groups:
        members = [(k, r) for k, r in enumerate(runs) if _group_of(r.speed_rpm, groups) == g]
        design = np.array([[1.0 + 0j, *mass_vector(r.masses, planes)] for _, r in members])
        at = "" if g is None else f" at {g:g} rpm"
        _check_design(design, n_planes, planes, at)
        for name in sensors:
            # a clipped reading never enters the coefficients
            keep = [i for i, (_, r) in enumerate(members) if not r.readings[name].clipped]
            if len(keep) < len(members):
                try:
                    _check_design(design[keep], n_planes, planes, at)
                except SingularSystemError as exc:
                    raise SingularSystemError(
                        f"pickup {name}: without its clipped reading(s) {exc}; repeat the "
                        "clipped run(s) with the pickup's gain reduced") from None
            y = np.array([
                readings_override[(k, name)] if readings_override else r.readings[name].vector
                for k, r in (members[i] for i in keep)])
            x, *_ = np.linalg.lstsq(design[keep], y, rcond=None)
            channels.append(Channel(name, g))
            r0_rows.append(x[0])
            a_rows.append(x[1:])
    model = InfluenceModel(tuple(p.name for p in planes), tuple(channels), np.array(a_rows))
    return np.array(r0_rows), model


def _check_design(design: np.ndarray, n_planes: int, planes: Sequence[Plane], at: str) -> None:
    """Enough runs, with independent mass changes, to fit R0 and one coefficient per plane."""
    if len(design) < n_planes + 1:
        raise SingularSystemError(
            f"runs{at}: {n_planes} plane(s) need at least {n_planes + 1} runs "
            f"(as-found plus one trial per plane), got {len(design)}")
    if np.linalg.matrix_rank(design) < n_planes + 1 or np.linalg.cond(design) > SINGULAR_CONDITION:
        untouched = [p.name for j, p in enumerate(planes) if np.allclose(design[:, j + 1], design[0, j + 1])]
        why = (f"plane(s) {', '.join(untouched)} never got a different mass" if untouched
               else "the mass changes of the runs are not independent between planes")
        raise SingularSystemError(f"runs{at}: singular system, {why}")


def model_from_saved(saved: Sequence[SavedCoefficient], planes: Sequence[Plane],
                     sensors: Sequence[str], runs: Sequence[Run]) -> InfluenceModel:
    """Rebuild an :class:`InfluenceModel` for the speeds of ``runs`` from saved coefficients.

    Parameters
    ----------
    saved : sequence of SavedCoefficient
        Coefficients saved from an earlier solve (reading units per gram, degrees, rpm).
    planes : sequence of Plane
        The correction planes.
    sensors : sequence of str
        The pickups' names.
    runs : sequence of Run
        The runs whose speeds need coefficients.

    Returns
    -------
    InfluenceModel
        The coefficients per channel and plane.

    Raises
    ------
    UserError
        When no coefficients were saved near a run's speed (3 %), or a pickup/plane pair has
        none.

    References
    ----------
    .. [1] Influence-coefficient method: E. L. Thearle, "Dynamic Balancing of Rotating
       Machinery in the Field", Trans. ASME (1934), two-plane field balancing, here
       generalised by least squares (from memory). Saved coefficients for a one-run
       trim: common practice, no source.
    """
    saved_speeds = sorted({s.speed_rpm for s in saved}, key=lambda v: -1 if v is None else v)
    channels, rows = [], []
    for g in speed_groups(runs):
        match = [s for s in saved_speeds if s is None or g is None
                 or abs(s - g) <= SPEED_MATCH * g]
        if not match:
            raise UserError(f"influence: no saved coefficients for {g:g} rpm")
        speed = match[0]
        for name in sensors:
            row = []
            for plane in planes:
                found = [s for s in saved if s.sensor == name and s.plane == plane.name
                         and s.speed_rpm == speed]
                if not found:
                    raise UserError(f"influence: no coefficient for sensor '{name}', "
                                    f"plane '{plane.name}'")
                row.append(found[0].vector)
            channels.append(Channel(name, g))
            rows.append(row)
    return InfluenceModel(tuple(p.name for p in planes), tuple(channels),
                          np.array(rows, dtype=complex))


def as_found_with_model(model: InfluenceModel, runs: Sequence[Run], planes: Sequence[Plane],
                        readings_override: dict[tuple[int, str], complex] | None = None
                        ) -> np.ndarray:
    """``R0[c]`` from any runs given known coefficients: mean of ``R_k - A W_k`` (trim).

    Parameters
    ----------
    model : InfluenceModel
        Known coefficients, reading units per gram.
    runs : sequence of Run
        The runs (usually one: the as-found run of a trim).
    planes : sequence of Plane
        The correction planes.
    readings_override : dict or None, default None
        ``(run index, pickup) -> reading phasor`` used instead of the measured readings.

    Returns
    -------
    numpy.ndarray
        As-found 1x per channel of ``model``, complex, reading units.

    Raises
    ------
    UserError
        When every reading of a channel is clipped.

    References
    ----------
    .. [1] Influence-coefficient method: E. L. Thearle, "Dynamic Balancing of Rotating
       Machinery in the Field", Trans. ASME (1934), two-plane field balancing, here
       generalised by least squares (from memory).
    """
    groups = [c.speed_rpm for c in model.channels]
    sums = np.zeros(len(model.channels), dtype=complex)
    counts = np.zeros(len(model.channels))
    for k, run in enumerate(runs):
        g = _group_of(run.speed_rpm, groups)
        w = mass_vector(run.masses, planes)
        for c, ch in enumerate(model.channels):
            if ch.speed_rpm != g or run.readings[ch.sensor].clipped:
                continue
            value = readings_override[(k, ch.sensor)] if readings_override else run.readings[ch.sensor].vector
            sums[c] += value - model.matrix[c] @ w
            counts[c] += 1
    if np.any(counts == 0):
        missing = ", ".join(ch.key for c, ch in enumerate(model.channels) if counts[c] == 0)
        raise UserError(f"pickup(s) {missing}: every reading is clipped; repeat the run with "
                        "the pickup's gain reduced")
    return sums / counts


# ----------------------------------------------------------------------------- correcting

def correction_for(r0: np.ndarray, matrix: np.ndarray, channel_weights: np.ndarray,
                   max_mass_g: Sequence[float | None]) -> tuple[np.ndarray, list[int]]:
    """Weighted least-squares correction ``C`` and the planes whose mass limit was applied.

    Minimises ``sum_c w_c^2 |R0[c] + A[c, :] C|^2``; when a plane's correction exceeds its
    limit, again subject to ``|C_j| <= max_mass_g[j]`` (SLSQP).

    Parameters
    ----------
    r0 : numpy.ndarray
        As-found 1x per channel, complex, reading units, shape (M,).
    matrix : numpy.ndarray
        Influence coefficients, reading units per gram, shape (M, N).
    channel_weights : numpy.ndarray
        Weight per channel, shape (M,).
    max_mass_g : sequence of float or None
        Mass limit per plane, g (None: no limit).

    Returns
    -------
    correction : numpy.ndarray
        Complex correction per plane, grams at the plane's radius, shape (N,).
    limited : list of int
        Indices of the planes whose limit changed the answer.

    References
    ----------
    .. [1] Linear least squares, ``numpy.linalg.lstsq``; with limits, sequential least-squares
       programming, ``scipy.optimize.minimize(method="SLSQP")``, D. Kraft, "A software
       package for sequential quadratic programming", Technical Report DFVLR-FB 88-28,
       DLR Oberpfaffenhofen, 1988.
    """
    aw = matrix * channel_weights[:, None]
    bw = -r0 * channel_weights
    c, *_ = np.linalg.lstsq(aw, bw, rcond=None)
    over = [j for j, lim in enumerate(max_mass_g) if lim is not None and abs(c[j]) > lim * (1 + 1e-9)]
    if not over:
        return c, []
    n = len(c)

    def cost(x: np.ndarray) -> float:
        z = x[:n] + 1j * x[n:]
        return float(np.sum(np.abs(aw @ z - bw) ** 2))

    def grad(x: np.ndarray) -> np.ndarray:
        z = x[:n] + 1j * x[n:]
        g = 2 * aw.conj().T @ (aw @ z - bw)
        return np.concatenate([g.real, g.imag])

    limits = [(j, lim) for j, lim in enumerate(max_mass_g) if lim is not None]
    cons = [{"type": "ineq", "fun": (lambda x, j=j, lim=lim: lim ** 2 - x[j] ** 2 - x[n + j] ** 2)}
            for j, lim in limits]
    start = c.copy()
    for j, lim in limits:
        if abs(start[j]) > lim:
            start[j] *= 0.99 * lim / abs(start[j])
    x0 = np.concatenate([start.real, start.imag])
    scale = max(float(np.sum(np.abs(bw) ** 2)), 1e-30)
    res = minimize(lambda x: cost(x) / scale, x0, jac=lambda x: grad(x) / scale,
                   constraints=cons, method="SLSQP", options={"maxiter": 300, "ftol": 1e-12})
    z = res.x[:n] + 1j * res.x[n:]
    return z, over


#: Re-fit of the as-found vectors and the coefficient matrix with some readings replaced
#: (run index, pickup) -> reading phasor; ``None`` keeps the readings as measured.
_Refit = Callable[[dict[tuple[int, str], complex] | None], tuple[np.ndarray, np.ndarray]]


def _uncertainty(inp: BalanceInput, fit: _Refit, nominal: np.ndarray, weights: np.ndarray,
                 limits: Sequence[float | None], model: InfluenceModel,
                 planes: Sequence[Plane]) -> tuple[list[float], list[float], np.ndarray] | None:
    """95 % half-widths of each correction's mass and angle, and the last run's residual
    unbalance vectors drawn alongside (draws x planes, g·mm), Monte Carlo over the readings'
    confidence circles (fixed seed, reproducible)."""
    sigma = {}
    for k, run in enumerate(inp.runs):
        for name, r in run.readings.items():
            if r.confidence_radius:
                # a reading's circle holds its own scatter; between runs the 1x also moves
                # with the speed's wander and the mount's nonlinearity: a floor
                sigma[(k, name)] = max(r.confidence_radius / CIRCLE95_SIGMAS,
                                       RUN_TO_RUN_REL_SIGMA * r.amplitude)
    if not sigma:
        return None
    rng = np.random.default_rng(20211)
    draws = []
    residuals = []
    last = len(inp.runs) - 1
    for _ in range(MONTE_CARLO_DRAWS):
        override: dict[tuple[int, str], complex] = {}
        for k, run in enumerate(inp.runs):
            for name, r in run.readings.items():
                s = sigma.get((k, name), 0.0)
                override[(k, name)] = r.vector + s * complex(rng.normal(), rng.normal())
        r0, matrix = fit(override)
        c, _ = correction_for(r0, matrix, weights, limits)
        draws.append(c)
        drawn = {name: override[(last, name)] for name in inp.runs[last].readings}
        residuals.append(_residual_vectors(model.channels, matrix, drawn,
                                           inp.runs[last].speed_rpm, planes, weights))
    d = np.array(draws)
    mass_pm = np.percentile(np.abs(np.abs(d) - np.abs(nominal)), 95, axis=0)
    radius95 = np.percentile(np.abs(d - nominal), 95, axis=0)
    ratio = np.clip(radius95 / np.maximum(np.abs(nominal), 1e-30), 0.0, 1.0)
    angle_pm = np.degrees(np.arcsin(ratio))
    angle_pm[radius95 >= np.abs(nominal)] = 180.0
    return [float(v) for v in mass_pm], [float(v) for v in angle_pm], np.array(residuals)


def _largest_confidence(inp: BalanceInput) -> dict[str, float]:
    """Each pickup's largest 95 % confidence radius over the runs (pickups without one left out)."""
    conf: dict[str, float] = {}
    for run in inp.runs:
        for name, r in run.readings.items():
            if r.confidence_radius:
                conf[name] = max(conf.get(name, 0.0), r.confidence_radius)
    return conf


def _trial_warnings(inp: BalanceInput, r0: np.ndarray, model: InfluenceModel) -> list[str]:
    """Warn where a plane's trial changed the 1x too little against the level or the scatter."""
    warnings = []
    conf = _largest_confidence(inp)
    for j, plane in enumerate(inp.planes):
        trial_g = max(abs(mass_vector(r.masses, inp.planes)[j]) for r in inp.runs)
        if trial_g <= 0:
            continue
        effects = np.abs(model.matrix[:, j]) * trial_g
        levels = np.abs(r0)
        change = float(np.max(effects / np.maximum(levels, 1e-30)))
        factor = MIN_TRIAL_CHANGE / change if change < MIN_TRIAL_CHANGE else 1.0
        reasons = []
        if change < MIN_TRIAL_CHANGE:
            reasons.append(f"changed the 1x by only {100 * change:.0f} % (want ≥ {100 * MIN_TRIAL_CHANGE:.0f} %)")
        noise = [MIN_TRIAL_CONFIDENCES * conf[ch.sensor] / max(e, 1e-30)
                 for ch, e in zip(model.channels, effects, strict=True) if ch.sensor in conf]
        if noise and min(noise) > 1.0:
            factor = max(factor, min(noise))
            reasons.append(f"its effect is under {MIN_TRIAL_CONFIDENCES:g}× the readings' confidence radius")
        if reasons:
            warnings.append(
                f"plane {plane.name}: the trial mass ({mass_text(trial_g, inp.mass_unit)}) "
                f"{' and '.join(reasons)}; use a trial mass about {factor:.1f}× bigger "
                f"(about {mass_text(trial_g * factor, inp.mass_unit)})")
    return warnings


def _refuse_uninformative_trials(inp: BalanceInput, r0: np.ndarray, model: InfluenceModel) -> None:
    """No information, no answer: a plane whose trial is unresolved on every pickup is refused
    (:func:`trueturn.balance.sanity.check_trial_information`)."""
    conf = _largest_confidence(inp)
    for j, plane in enumerate(inp.planes):
        trial_g = max(abs(mass_vector(r.masses, inp.planes)[j]) for r in inp.runs)
        effects = [float(abs(model.matrix[c, j]) * trial_g) for c in range(len(model.channels))]
        levels = [float(abs(v)) for v in r0]
        # the change of a reading: two independent 95 % circles add in quadrature
        unc = [float(np.sqrt(2.0) * conf[ch.sensor]) if ch.sensor in conf else None
               for ch in model.channels]
        check_trial_information(plane.name, trial_g, effects, levels, unc, inp.mass_unit)


def _corrections(planes: Sequence[Plane], c: np.ndarray,
                 pm: tuple[list[float], list[float]] | None = None) -> list[Correction]:
    out = []
    for j, plane in enumerate(planes):
        mass, angle = amplitude_phase(complex(c[j]))
        out.append(Correction(plane.name, mass, angle, plane.radius_mm,
                              None if pm is None else pm[0][j], None if pm is None else pm[1][j]))
    return out


def solve_with_phase(inp: BalanceInput, *, uncertainty: bool = True) -> Solution:
    """Corrections from phase-and-amplitude readings (fresh coefficients or a saved-set trim).

    Parameters
    ----------
    inp : BalanceInput
        The checked input with phase readings; ``influence`` given for a trim.
    uncertainty : bool, default True
        Draw the Monte Carlo half-widths; False leaves them out (None), for a re-solve that
        only wants the corrections themselves (the speed error estimate's).

    Returns
    -------
    Solution
        Corrections per plane (g, degrees, with 95 % half-widths by Monte Carlo over the
        readings' confidence circles when they carry radii), the predicted residual per
        channel, condition number, warnings, coefficients to save, and the residual unbalance
        of the last run (g·mm).

    Raises
    ------
    SingularSystemError
        When there are fewer channels than planes, or the pickups cannot tell the planes
        apart (condition number above 1e8).
    UserError
        As the functions it calls (e.g. ``NoInformationError`` for a trial that changed the
        1x less than the readings resolve).

    References
    ----------
    .. [1] Influence-coefficient method: E. L. Thearle, "Dynamic Balancing of Rotating
       Machinery in the Field", Trans. ASME (1934), two-plane field balancing, here
       generalised by least squares (from memory).
    .. [2] Uncertainty by Monte Carlo propagation of the readings' 95 % circles (fixed seed):
       common practice, no source.
    """
    sensors = [s.name for s in inp.sensors]
    planes = inp.planes
    if inp.influence:
        model = model_from_saved(inp.influence, planes, sensors, inp.runs)

        def fit(override: dict[tuple[int, str], complex] | None = None
                ) -> tuple[np.ndarray, np.ndarray]:
            return as_found_with_model(model, inp.runs, planes, override), model.matrix
        method = "trim with saved influence coefficients"
    else:
        def fit(override: dict[tuple[int, str], complex] | None = None
                ) -> tuple[np.ndarray, np.ndarray]:
            r0_, m_ = fit_influence(inp.runs, planes, sensors, override)
            return r0_, m_.matrix
        _, model = fit_influence(inp.runs, planes, sensors)
        method = "influence coefficients" + (" (least squares)" if len(inp.runs) > len(planes) + 1
                                             or len(model.channels) > len(planes) else "")
    r0, matrix = fit()
    if len(model.channels) < len(planes):
        raise SingularSystemError(
            f"{len(planes)} planes need at least {len(planes)} pickup readings "
            f"(pickups × speeds), got {len(model.channels)}")
    if not inp.influence:
        _refuse_uninformative_trials(inp, r0, model)
    weights = np.array([next(s.weight for s in inp.sensors if s.name == ch.sensor)
                        for ch in model.channels])
    aw = matrix * weights[:, None]
    cond = float(np.linalg.cond(aw))
    if not np.isfinite(cond) or cond > SINGULAR_CONDITION:
        raise SingularSystemError("singular system: the pickups cannot tell the planes apart "
                                  f"(condition number {cond:.3g})")
    limits = [p.max_mass_g for p in planes]
    c, limited = correction_for(r0, matrix, weights, limits)
    warnings = []
    if cond > 30:
        warnings.append(f"condition number {cond:.0f}: the planes act alike on the pickups; "
                        "the answer is sensitive to reading errors (move a pickup or a plane)")
    free, _ = correction_for(r0, matrix, weights, [None] * len(planes))
    for j in limited:
        limit_g = planes[j].max_mass_g
        assert limit_g is not None  # only a plane with a limit is limited
        warnings.append(f"plane {planes[j].name}: correction limited to "
                        f"{mass_text(limit_g, inp.mass_unit)} (without the limit it would be "
                        f"{mass_text(abs(free[j]), inp.mass_unit)})")
    if not inp.influence:
        warnings += _trial_warnings(inp, r0, model)
    drawn = _uncertainty(inp, fit, c, weights, limits, model, planes) if uncertainty else None
    pm = drawn[:2] if drawn is not None else None
    residual_now = residual_unbalance_vectors_gmm(model, inp.runs[-1], planes, weights)
    predicted = r0 + matrix @ c
    now = inp.runs[-1].masses
    keep = c - mass_vector(now, planes)
    return Solution(
        method=method,
        corrections=_corrections(planes, c, pm),
        predicted_residual={ch.key: complex(v) for ch, v in zip(model.channels, predicted, strict=True)},
        condition_number=cond,
        warnings=warnings,
        trial_masses=trial_handling(inp.runs),
        on_rotor_now=list(now),
        corrections_keeping_current=_corrections(planes, keep),
        influence=model,
        as_found={ch.key: complex(v) for ch, v in zip(model.channels, r0, strict=True)},
        residual_now_gmm=[abs(u) for u in residual_now],
        residual_now_vector_gmm=residual_now,
        clipped=clipped_readings(inp.runs),
        clipped_last_run=any(r.clipped for r in inp.runs[-1].readings.values()),
        residual_now_draws_gmm=drawn[2] if drawn is not None else None,
    )


def clipped_readings(runs: Sequence[Run]) -> list[tuple[str, str]]:
    """(run label, pickup) of every reading flagged clipped.

    Parameters
    ----------
    runs : sequence of Run
        The runs.

    Returns
    -------
    list of (str, str)
        Run label and pickup name of each clipped reading, in run order.

    References
    ----------
    .. [1] A reading at the ADC limits is not linear in the unbalance and is left out (common
       practice, no source).
    """
    return [(run.label, name) for run in runs for name, r in run.readings.items() if r.clipped]


def residual_unbalance_vectors_gmm(model: InfluenceModel, run: Run, planes: Sequence[Plane],
                                   channel_weights: np.ndarray | None = None) -> list[complex]:
    """Residual unbalance per plane as phasors: minus the correction still needed, times radius.

    The least-squares correction for the run's 1x (grams at the plane's radius) is the
    negative of the unbalance left; times the radius it is the residual unbalance, its angle
    the heavy spot's.

    Parameters
    ----------
    model : InfluenceModel
        Influence coefficients, reading units per gram.
    run : Run
        The run whose residual is wanted.
    planes : sequence of Plane
        The correction planes (their radii, mm).
    channel_weights : numpy.ndarray or None, default None
        Weight per channel; None weighs them equally.

    Returns
    -------
    list of complex
        Residual unbalance per plane, g·mm phasors.

    References
    ----------
    .. [1] Influence-coefficient method: E. L. Thearle, "Dynamic Balancing of Rotating
       Machinery in the Field", Trans. ASME (1934), two-plane field balancing, here
       generalised by least squares (from memory).
    """
    w = np.ones(len(model.channels)) if channel_weights is None else channel_weights
    vectors = {name: r.vector for name, r in run.readings.items()}
    return [complex(v) for v in _residual_vectors(model.channels, model.matrix, vectors,
                                                  run.speed_rpm, planes, w)]


def _residual_vectors(channels: Sequence[Channel], matrix: np.ndarray,
                      vectors: dict[str, complex], speed_rpm: float | None,
                      planes: Sequence[Plane], weights: np.ndarray) -> np.ndarray:
    """Residual unbalance per plane (g·mm phasors) that explains a run's 1x ``vectors``
    through ``matrix``: the weighted least-squares correction still needed, sign reversed."""
    groups = sorted({c.speed_rpm for c in channels}, key=lambda v: -1 if v is None else v)
    g = _group_of(speed_rpm, groups)
    rows = [c for c, ch in enumerate(channels) if ch.speed_rpm == g]
    y = np.array([vectors[channels[c].sensor] for c in rows])
    a = matrix[rows] * weights[rows][:, None]
    d, *_ = np.linalg.lstsq(a, -y * weights[rows], rcond=None)
    return -d * np.array([p.radius_mm for p in planes])


def trial_size_factor(before: dict[str, complex], after: dict[str, complex],
                      confidence: dict[str, float] | None = None) -> float:
    """How many times bigger a trial mass should have been (1.0 = big enough).

    Right after one trial run: the trial changed the 1x from ``before`` to ``after``. It is big
    enough when on some pickup the change is at least 25 % of the level before and at least
    three confidence radii.

    Parameters
    ----------
    before : dict of str to complex
        1x per pickup before the trial, reading units (phasors).
    after : dict of str to complex
        1x per pickup with the trial, reading units.
    confidence : dict of str to float or None, default None
        95 % confidence radius per pickup, reading units.

    Returns
    -------
    float
        The factor, at least 1.0.

    Raises
    ------
    UserError
        When the trial changed no pickup's 1x at all.

    References
    ----------
    .. [1] The 25 % and three-radii thresholds: common practice, no source.
    """
    factor = np.inf
    for name, b in before.items():
        change = abs(after[name] - b)
        if change <= 0:
            continue
        need = MIN_TRIAL_CHANGE * abs(b) / change
        if confidence and confidence.get(name):
            need = max(need, MIN_TRIAL_CONFIDENCES * confidence[name] / change)
        factor = min(factor, need)
    if not np.isfinite(factor):
        raise UserError("the trial run shows no change at all: is the trial mass on the rotor?")
    return float(max(1.0, factor))
