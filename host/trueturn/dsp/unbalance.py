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

Every level is compared as velocity (the acceleration peaks of the spectrum divided by
``2 pi f``), so the ratios do not depend on whether the pickup is calibrated. The thresholds
are **common practice, no source**: shop rules of thumb of vibration analysis, each given a
reason beside it. With a sweep (``analyze --sweep``, :mod:`trueturn.dsp.sweep`) one more:

* **1x rising with speed** below the first resonance (:func:`sweep_evidence`): an unbalance
  force grows as speed squared.

Not judged here (it needs more than one run): repeatability of the phase between two starts.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from trueturn.dsp.findings import Code, Finding
from trueturn.dsp.spectrum import SpectrumPeak

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

#: The reading's findings that say the 1x phase did not stay put within the run.
_UNSTEADY_PHASE = (Code.VECTOR_DRIFTING, Code.PHASE_UNCERTAIN)
#: The codes of the evidence, in the order they are listed.
EVIDENCE_CODES = (Code.ONE_X_SHARE, Code.PHASE_STEADINESS, Code.TWO_X_RATIO, Code.NONSYNC_PEAK)


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
