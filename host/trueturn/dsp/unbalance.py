"""Is it unbalance? Rules of the trade applied to one run, as coded evidence and a verdict.

Balancing removes the once-per-rev force of a mass off the axis and nothing else. A loose
mount, a misaligned belt or coupling, or a worn bearing shakes the machine too, and weights
will not cure it. Before a trial run the as-found run is judged, per pickup, on:

* **1x share**: the 1x velocity as a fraction of the broadband velocity (RMS over 10-1000 Hz,
  :mod:`trueturn.dsp.severity`) -- unbalance puts most of the vibration at 1x;
* **1x phase steady within the run**: the 1x vector neither drifting between the run's
  halves nor too uncertain (the meter's own steadiness tests, findings
  ``vector_drifting`` and a blocking ``phase_uncertain``) -- an unbalance force turns with
  the shaft at a fixed angle;
* **2x relative to 1x**: a strong 2x points at misalignment or looseness;
* **non-synchronous peaks**: a strong peak at no order of the shaft (nor the mains) points at
  bearings, belts or another machine.

and, when the machine was started a second time as found (a stop and a restart, same speed):

* **1x repeatable between two starts**: the two starts' 1x vectors agree within a tenth of
  the 1x beyond their 95 % circles (:func:`repeat_evidence`) -- a steady unbalance gives the
  same 1x, within a few degrees, after a restart; a 1x that moves between starts points at a
  part that shifts (a loose pulley, key or hub), a rub, or a thermal bow.

Every level is compared as velocity (the acceleration peaks of the spectrum divided by
``2 pi f``), so the ratios do not depend on whether the pickup is calibrated. The thresholds
are **common practice, no source**: shop rules of thumb of vibration analysis, each given a
reason beside it. With a sweep (``analyze --sweep``, :mod:`trueturn.dsp.sweep`) one more:

* **1x rising with speed** below the first resonance (:func:`sweep_evidence`): an unbalance
  force grows as speed squared.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from trueturn.angles import angle_difference_deg
from trueturn.dsp.findings import Code, Finding
from trueturn.dsp.spectrum import SpectrumPeak
from trueturn.model import Reading

#: 1x velocity at least this fraction of the broadband velocity RMS (amplitude ratio; 0.7 is
#: half the vibration energy): below it, taking the 1x away leaves more than half of the
#: vibration, so balancing alone cannot make the machine smooth. Common practice, no source.
ONE_X_SHARE_MIN = 0.7
#: 2x velocity above this fraction of the 1x: misalignment (belt, coupling) or looseness
#: (mounting bolts, a cracked foot) is likely to be at work; rules of thumb put the 2x of a
#: plain unbalance well below half the 1x. Common practice, no source.
TWO_X_RATIO_MAX = 0.5
#: A peak at no shaft order and no mains line above this fraction of the 1x velocity:
#: bearings, belts, a neighbouring machine or a resonance share the vibration, and balancing
#: cannot touch them. Common practice, no source.
NONSYNC_RATIO_MAX = 0.5

#: A sweep's 1x displacement well below the first resonance must grow at least as speed^1:
#: an unbalance force grows as speed^2 and so does the displacement it causes there; 1 is
#: halfway (in log) between that and a flat response (runout, a bent shaft, electrical),
#: leaving room for a second source adding to it. Common practice, no source.
RISE_EXPONENT_MIN = 1.0
#: Two starts' 1x vectors may differ by this fraction of the 1x beyond their 95 % circles:
#: 0.1 is about 6 degrees of phase at the same amplitude, or a 10 % change of amplitude at
#: the same phase -- "the same phase within a few degrees after a restart", as the trade says
#: of a steady unbalance. A wider test would pass a part that shifts a little every start; a
#: narrower one would fail the ordinary change of a warm machine. Common practice, no source.
REPEAT_DIFFERENCE_MAX = 0.1
#: Two starts are compared only at the same speed within this fraction (3 %: an induction
#: motor's slip under load moves it about 1-2 %); the 1x of one rotor changes with speed,
#: most near a resonance. Common practice, no source.
REPEAT_SPEED_TOLERANCE = 0.03

#: The reading's findings that say the 1x phase did not stay put within the run.
_UNSTEADY_PHASE = (Code.VECTOR_DRIFTING, Code.PHASE_UNCERTAIN)
#: The codes of the evidence, in the order they are listed.
EVIDENCE_CODES = (Code.ONE_X_SHARE, Code.PHASE_STEADINESS, Code.TWO_X_RATIO, Code.NONSYNC_PEAK,
                  Code.PHASE_REPEATABLE)


def _velocity(peak: SpectrumPeak) -> float:
    """A peak's velocity RMS in the acceleration unit times seconds (a_pk / (2 pi f) / sqrt 2)."""
    return peak.amplitude / (2.0 * math.pi * peak.hz) / math.sqrt(2.0) if peak.hz > 0 else 0.0


def _names(peak: SpectrumPeak) -> tuple[str, ...]:
    return (peak.label, *peak.also)


def pickup_evidence(pickup: str, peaks: Sequence[SpectrumPeak], overall_velocity: float,
                    reading_findings: Sequence[Finding] | None,
                    rotation_hz: float) -> list[Finding]:
    """The evidence for and against unbalance at one pickup, one finding per rule.

    Parameters
    ----------
    pickup : str
        The pickup's name.
    peaks : sequence of SpectrumPeak
        Its labelled spectrum peaks (acceleration, any unit).
    overall_velocity : float
        Its broadband velocity RMS over 10...1000 Hz in the peaks' unit times seconds
        (:func:`trueturn.dsp.severity.band_velocity_rms`).
    reading_findings : sequence of Finding or None
        The findings of its 1x reading; None when it has no reading (no phase evidence).
    rotation_hz : float
        Shaft speed, Hz (to tell orders from other peaks).

    Returns
    -------
    list of Finding
        ``one_x_share``, ``phase_steadiness`` (when a reading exists), ``two_x_ratio`` and
        ``nonsync_peak`` (when a peak at no order stands out), each with ``ok`` and the
        numbers in its details.

    References
    ----------
    .. [1] Common practice, no source: the usual spectrum rules of vibration analysis for
       unbalance, misalignment, looseness and bearing faults (1x dominant and steady; 2x
       against 1x; non-synchronous peaks).
    """
    one = [p for p in peaks if "1x" in _names(p)]
    v1 = max((_velocity(p) for p in one), default=0.0)
    out: list[Finding] = []
    share = v1 / overall_velocity if overall_velocity > 0 else math.nan
    out.append(Finding(Code.ONE_X_SHARE, pickup, details={
        "ok": bool(share >= ONE_X_SHARE_MIN), "share": round(share, 4) if math.isfinite(share)
        else None, "limit": ONE_X_SHARE_MIN}))
    if reading_findings is not None:
        unsteady = [f for f in reading_findings if f.code in _UNSTEADY_PHASE
                    and (f.code is Code.VECTOR_DRIFTING or f.blocking)]
        out.append(Finding(Code.PHASE_STEADINESS, pickup, details={
            "ok": not unsteady, "because": [f.code.value for f in unsteady]}))
    two = [p for p in peaks if "2x" in _names(p)]
    v2 = max((_velocity(p) for p in two), default=0.0)
    if v1 > 0:
        ratio = v2 / v1
        out.append(Finding(Code.TWO_X_RATIO, pickup, details={
            "ok": bool(ratio <= TWO_X_RATIO_MAX), "ratio": round(ratio, 4),
            "limit": TWO_X_RATIO_MAX}))
        others = [p for p in peaks if p.label == "other" and not p.also]
        if others:
            worst = max(others, key=_velocity)
            ratio = _velocity(worst) / v1
            out.append(Finding(Code.NONSYNC_PEAK, pickup, details={
                "ok": bool(ratio <= NONSYNC_RATIO_MAX), "ratio": round(ratio, 4),
                "limit": NONSYNC_RATIO_MAX, "hz": round(worst.hz, 2),
                "order": round(worst.hz / rotation_hz, 3) if rotation_hz > 0 else None}))
    return out


def sweep_evidence(pickup: str, exponent: float, points: int) -> Finding:
    """The sweep's evidence at one pickup: does the 1x rise with speed as unbalance does?

    Parameters
    ----------
    pickup : str
        The pickup's name.
    exponent : float
        How the 1x displacement grows with speed below the first resonance (``~ n^p``;
        :func:`trueturn.dsp.sweep.rise_below_first_resonance`).
    points : int
        The sweep points it was fitted on.

    Returns
    -------
    Finding
        ``one_x_rises_with_speed`` with ``ok`` (``p >= RISE_EXPONENT_MIN``), the exponent,
        the limit and the points.

    References
    ----------
    .. [1] Common practice, no source: unbalance response grows with speed (force ``m e
       omega^2``; below resonance ``X ~ m e omega^2 / k``, Rao, *Mechanical Vibrations*,
       rotating unbalance, from memory).
    """
    return Finding(Code.ONE_X_RISES_WITH_SPEED, pickup, details={
        "ok": bool(exponent >= RISE_EXPONENT_MIN), "exponent": round(exponent, 3),
        "limit": RISE_EXPONENT_MIN, "points": points})
def repeat_evidence(first: Reading, second: Reading) -> Finding | None:
    """Whether one pickup's 1x repeated between two starts of the machine as found.

    Parameters
    ----------
    first, second : Reading
        The pickup's 1x in the first and in the second start (same unit, same speed within
        :data:`REPEAT_SPEED_TOLERANCE`: the caller checks the speeds).

    Returns
    -------
    Finding or None
        Code ``phase_repeatable`` with ``ok``, both phases (``phases_deg``), the phase
        change (``phase_change_deg``, signed, -180...180), ``amplitude_ratio`` (second over
        first), the vector ``difference`` and its ``limit`` (both as fractions of the mean
        1x amplitude; the limit is :data:`REPEAT_DIFFERENCE_MAX` plus both 95 % circles).
        None when it cannot be told: a reading without a phase or a 95 % circle, a 1x of
        zero, or circles so wide that together they exceed the allowed difference.

    Raises
    ------
    ValueError
        When the readings are of different pickups or units.

    Notes
    -----
    The difference of two independent estimates lies within the sum of their 95 % circles
    with at least 95 % probability (a conservative bound: the root of the sum of squares is
    the exact one for circular Gaussian errors). The vector difference judges phase and
    amplitude together: at equal amplitudes a phase change of ``d`` degrees is a difference
    of ``2 sin(d/2)``, so 0.1 is 5.7 degrees.

    References
    ----------
    .. [1] Common practice, no source: a steady unbalance repeats its 1x amplitude and phase
       after a stop and restart; a phase that wanders between starts points at looseness, a
       shifting part or a thermal bow.
    """
    if first.sensor != second.sensor or first.unit != second.unit:
        raise ValueError(f"compare one pickup in one unit: {first.sensor} ({first.unit}) and "
                         f"{second.sensor} ({second.unit})")
    if (first.phase_deg is None or second.phase_deg is None
            or first.confidence_radius is None or second.confidence_radius is None):
        return None
    scale = 0.5 * (first.amplitude + second.amplitude)
    if not scale > 0:
        return None
    margin = (first.confidence_radius + second.confidence_radius) / scale
    if margin > REPEAT_DIFFERENCE_MAX:
        return None  # the circles alone are wider than the rule: it cannot tell
    difference = abs(second.vector - first.vector) / scale
    limit = REPEAT_DIFFERENCE_MAX + margin
    return Finding(Code.PHASE_REPEATABLE, first.sensor, details={
        "ok": bool(difference <= limit),
        "phases_deg": [round(first.phase_deg, 1), round(second.phase_deg, 1)],
        "phase_change_deg": round(angle_difference_deg(second.phase_deg, first.phase_deg), 1),
        "amplitude_ratio": round(second.amplitude / first.amplitude, 3)
        if first.amplitude > 0 else None,
        "difference": round(difference, 4), "limit": round(limit, 4)})


def same_speed(first_rpm: float, second_rpm: float) -> bool:
    """Two starts ran at the same speed within :data:`REPEAT_SPEED_TOLERANCE`.

    Parameters
    ----------
    first_rpm, second_rpm : float
        The two starts' mean speeds, rpm.

    Returns
    -------
    bool
        True when both are finite, positive and within the tolerance of each other.

    References
    ----------
    .. [1] Common practice, no source (see :data:`REPEAT_SPEED_TOLERANCE`).
    """
    if not (0 < first_rpm < math.inf and 0 < second_rpm < math.inf):
        return False
    return abs(second_rpm - first_rpm) <= REPEAT_SPEED_TOLERANCE * max(first_rpm, second_rpm)


def verdict(evidence: Sequence[Finding], pickups: int) -> Finding:
    """The unbalance verdict over every pickup's evidence.

    Parameters
    ----------
    evidence : sequence of Finding
        Every pickup's findings from :func:`pickup_evidence`.
    pickups : int
        Number of pickups judged.

    Returns
    -------
    Finding
        ``balancing_may_not_help`` when any rule fails (details: the failing codes),
        ``unbalance_likely`` when 1x share, phase and 2x were judged and passed at every
        pickup, else ``unbalance_undecided``.

    References
    ----------
    .. [1] Common practice, no source (see the module's rules).
    """
    failing = [f for f in evidence if not f.details.get("ok", True)]
    if failing:
        return Finding(Code.BALANCING_MAY_NOT_HELP, details={
            "because": sorted({f.code.value for f in failing})})
    needed = {Code.ONE_X_SHARE, Code.PHASE_STEADINESS, Code.TWO_X_RATIO}
    judged = {(f.pickup, f.code) for f in evidence if f.code in needed}
    if pickups > 0 and len(judged) == pickups * len(needed):
        return Finding(Code.UNBALANCE_LIKELY)
    return Finding(Code.UNBALANCE_UNDECIDED)


def failing_rules(unbalance: Sequence[Finding]) -> tuple[str, ...]:
    """The codes of the rules that failed, from a verdict and its evidence.

    Parameters
    ----------
    unbalance : sequence of Finding
        The verdict first, then the evidence (as :func:`verdict` callers keep them).

    Returns
    -------
    tuple of str
        The failing evidence codes (sorted, each once) when the verdict is
        ``balancing_may_not_help``; empty otherwise.

    References
    ----------
    .. [1] Common practice, no source (see the module's rules).
    """
    if not unbalance or unbalance[0].code is not Code.BALANCING_MAY_NOT_HELP:
        return ()
    return tuple(sorted({f.code.value for f in unbalance[1:] if not f.details.get("ok", True)}))
