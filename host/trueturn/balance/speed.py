"""Runs at slightly different speeds: find them, estimate what they cost, normalise them.

The influence-coefficient method assumes every run of a speed group was taken at the same
speed. The 1x response to unbalance scales with speed as ``(n / n_ref) ** p``: the
centrifugal force goes as omega^2, and the mounting adds omega^0 (displacement, well below a
resonance) up to omega^2 more (velocity or acceleration pickups, or near a resonance), so
``p`` lies between about 2 and 4 (forced-vibration response of a single-degree-of-freedom
system, from memory: any vibration textbook, e.g. Thomson, *Theory of Vibration with
Applications*, rotating unbalance). A trial run 2 % slower than the as-found run then reads
4...8 % low; when the trial changed the 1x only a little, that error lands wholly on the
trial's apparent effect and on the influence coefficients.

* :func:`off_speed_runs` lists runs more than :data:`SPEED_WARN_FRACTION` (0.3 %) from the
  reference speed of their group (the first run of the group, usually "as found").
* :func:`normalise_speeds` rescales every reading to its group's reference speed with a
  known local slope ``p`` (e.g. measured on a coast-down sweep).
* :func:`normalise_with_slopes` does the same with each pickup's measured local slope of
  amplitude *and* phase (``analyze --sweep``): near a resonance the exponent is far from
  2...4 (even negative above it) and the phase moves too, so only the measured slope
  compares runs a fraction of a percent apart correctly.
* :func:`speed_error_estimate` re-solves with the readings normalised at ``p = 2`` and
  ``p = 4`` and reports how far the correction moves: the estimated error of not knowing the
  slope (common practice, no source: a sensitivity check by re-solving).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import numpy as np

from trueturn.balance.influence import SPEED_MATCH, Solution, speed_groups
from trueturn.balance.readings import BalanceInput, SpeedSlopeEntry
from trueturn.constants import SPEED_MATCH_FRACTION
from trueturn.model import Run

#: runs further than this fraction from their group's reference speed are reported
SPEED_WARN_FRACTION = SPEED_MATCH_FRACTION
#: the range of the response's speed exponent p (1x ~ speed**p) used for the estimate
EXPONENT_RANGE: tuple[float, float] = (2.0, 4.0)


@dataclass(frozen=True)
class OffSpeedRun:
    """A run whose speed differs from its group's reference speed by ``deviation`` (signed
    fraction: -0.02 = 2 % slow). ``amplitude_error_range`` is the reading's relative error
    for p = 2 and p = 4 (``(n / n_ref) ** p - 1``)."""

    index: int
    label: str
    speed_rpm: float
    reference_rpm: float
    deviation: float
    amplitude_error_range: tuple[float, float]


@dataclass(frozen=True)
class SpeedErrorEstimate:
    """What the speed differences may cost: per plane, the vector change of the correction
    (grams) and that change as a fraction of the correction, worst over p = 2...4; and the
    1x cut the correction would still give if the worst case were the truth."""

    off_speed: tuple[OffSpeedRun, ...]
    correction_change_g: tuple[float, ...]
    correction_change_fraction: tuple[float, ...]
    worst_cut_fraction: float
    normalised_with_exponent: float | None = None
    #: True when the readings were normalised with each pickup's measured slope
    normalised_with_slopes: bool = False


def _reference_speeds(runs: Sequence[Run]) -> list[float | None]:
    """Each run's reference: the speed of the first run of its group (within 3 %)."""
    groups = speed_groups(runs)
    refs: list[float | None] = []
    for run in runs:
        if run.speed_rpm is None:
            refs.append(None)
            continue
        group = next(g for g in groups if g is not None and abs(run.speed_rpm - g) <= SPEED_MATCH * g)
        refs.append(group)
    return refs


def off_speed_runs(runs: Sequence[Run], warn_fraction: float = SPEED_WARN_FRACTION
                   ) -> list[OffSpeedRun]:
    """Runs more than ``warn_fraction`` from their speed group's reference speed.

    Parameters
    ----------
    runs : sequence of Run
        The runs, each with its ``speed_rpm`` (rpm) or None.
    warn_fraction : float, default 0.003
        Largest deviation left unreported (fraction of the reference speed).

    Returns
    -------
    list of OffSpeedRun
        Each off-speed run with its deviation and the reading error ``(n / n_ref) ** p - 1``
        for p = 2 and p = 4.

    References
    ----------
    .. [1] 1x response to a rotating unbalance ~ speed^p, p = 2...4 (forced response of a
       single-degree-of-freedom system; from memory: W. T. Thomson, "Theory of Vibration with
       Applications", rotating unbalance).
    .. [2] The 0.3 % limit (``constants.SPEED_MATCH_FRACTION``): common practice, no source.
    """
    out = []
    for k, (run, ref) in enumerate(zip(runs, _reference_speeds(runs), strict=True)):
        if run.speed_rpm is None or ref is None:
            continue
        deviation = run.speed_rpm / ref - 1.0
        if abs(deviation) > warn_fraction:
            ratio = run.speed_rpm / ref
            errors = tuple(float(ratio ** p - 1.0) for p in EXPONENT_RANGE)
            out.append(OffSpeedRun(k, run.label, run.speed_rpm, ref, deviation,
                                   (errors[0], errors[1])))
    return out


def normalise_speeds(inp: BalanceInput, exponent: float) -> BalanceInput:
    """Readings rescaled to their group's reference speed: ``R (n_ref / n) ** exponent``.

    Amplitude and confidence radius are scaled; the phase is unchanged.

    Parameters
    ----------
    inp : BalanceInput
        The checked input.
    exponent : float
        The response's speed exponent p (1x ~ speed ** p), e.g. from a coast-down sweep.

    Returns
    -------
    BalanceInput
        A copy with every off-reference run's readings rescaled.

    References
    ----------
    .. [1] 1x response to a rotating unbalance ~ speed^p, p = 2...4 (forced response of a
       single-degree-of-freedom system; from memory: W. T. Thomson, "Theory of Vibration with
       Applications", rotating unbalance).
    """
    runs = []
    for run, ref in zip(inp.runs, _reference_speeds(inp.runs), strict=True):
        if run.speed_rpm is None or ref is None or run.speed_rpm == ref:
            runs.append(run)
            continue
        scale = (ref / run.speed_rpm) ** exponent
        readings = {name: replace(r, amplitude=r.amplitude * scale,
                                  confidence_radius=None if r.confidence_radius is None
                                  else r.confidence_radius * scale)
                    for name, r in run.readings.items()}
        runs.append(replace(run, readings=readings))
    return replace(inp, runs=tuple(runs))


def normalise_with_slopes(inp: BalanceInput,
                          slopes: Sequence[SpeedSlopeEntry] | None = None) -> BalanceInput:
    """Readings carried to their group's reference speed with each pickup's local slope.

    A reading ``R`` at speed ``n`` becomes ``R exp(-(p + i q) ln(n / n_ref))`` with ``p`` the
    amplitude exponent (``|R| ~ n^p``) and ``q`` the phase slope in radians per unit of
    ``ln n`` (the phase lag at ``n`` is ``phi_ref + q ln(n / n_ref)``): the first-order
    Taylor step of ``ln R`` in ``ln n``. Amplitude, phase and confidence radius change;
    a reading without a phase keeps none.

    Parameters
    ----------
    inp : BalanceInput
        The checked input.
    slopes : sequence of SpeedSlopeEntry or None, default None
        One per sensor; None takes ``inp.speed_slopes``.

    Returns
    -------
    BalanceInput
        A copy with every off-reference run's readings carried to the reference speed.

    References
    ----------
    .. [1] Local log-log (power-law) slope of the 1x with speed, measured on a coast-down
       sweep (:mod:`trueturn.dsp.sweep`); a first-order Taylor expansion of ``ln R`` in
       ``ln n`` (common practice, no source).
    """
    by_sensor = {s.sensor: s for s in (inp.speed_slopes if slopes is None else slopes)}
    runs = []
    for run, ref in zip(inp.runs, _reference_speeds(inp.runs), strict=True):
        if run.speed_rpm is None or ref is None or run.speed_rpm == ref:
            runs.append(run)
            continue
        step = math.log(run.speed_rpm / ref)
        readings = {}
        for name, r in run.readings.items():
            slope = by_sensor.get(name)
            if slope is None:
                readings[name] = r
                continue
            scale = math.exp(-slope.amplitude_exponent * step)
            turn = math.degrees(-math.radians(slope.phase_deg_per_ln_speed) * step)
            readings[name] = replace(
                r, amplitude=r.amplitude * scale,
                phase_deg=None if r.phase_deg is None else (r.phase_deg + turn) % 360.0,
                confidence_radius=None if r.confidence_radius is None
                else r.confidence_radius * scale)
        runs.append(replace(run, readings=readings))
    return replace(inp, runs=tuple(runs))


def speed_error_estimate(inp: BalanceInput, solution: Solution,
                         solver: Callable[[BalanceInput], Solution],
                         normalised_with_exponent: float | None = None
                         ) -> SpeedErrorEstimate | None:
    """Re-solve with readings normalised at p = 2 and p = 4; None when no run is off speed.

    Parameters
    ----------
    inp : BalanceInput
        The checked input, as measured.
    solution : Solution
        The answer given (from ``inp`` as it is, or normalised with a known exponent).
    solver : callable
        The function that produced it (phase or amplitude-only), ``BalanceInput -> Solution``.
    normalised_with_exponent : float or None, default None
        The exponent the given answer was normalised with, if any (carried in the result).

    Returns
    -------
    SpeedErrorEstimate or None
        Per plane the largest vector change of the correction (g) and that change as a
        fraction of the correction, and the worst 1x cut the given correction would still
        achieve; None when every run is within 0.3 % of its group's speed.

    References
    ----------
    .. [1] 1x response to a rotating unbalance ~ speed^p, p = 2...4 (forced response of a
       single-degree-of-freedom system; from memory: W. T. Thomson, "Theory of Vibration with
       Applications", rotating unbalance).
    .. [2] Re-solving over the plausible range of p as a sensitivity check: common practice,
       no source.
    """
    off = off_speed_runs(inp.runs)
    if not off:
        return None
    given = np.array([c.vector_g for c in solution.corrections])
    worst_change = np.zeros(len(given))
    worst_cut = 1.0
    for p in EXPONENT_RANGE:
        other = solver(normalise_speeds(inp, p))
        alt = np.array([c.vector_g for c in other.corrections])
        change = np.abs(alt - given)
        worst_change = np.maximum(worst_change, change)
        # if `alt` were the true correction, applying `given` leaves |alt - given| of it
        size = float(np.linalg.norm(alt))
        if size > 0:
            worst_cut = min(worst_cut, 1.0 - float(np.linalg.norm(alt - given)) / size)
    fraction = worst_change / np.maximum(np.abs(given), 1e-30)
    return SpeedErrorEstimate(tuple(off), tuple(float(x) for x in worst_change),
                              tuple(float(x) for x in fraction), worst_cut,
                              normalised_with_exponent)
