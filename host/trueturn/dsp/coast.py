"""Sweeps met while a meter is connected: each revolution's 1x kept from a start to a stop.

The app's run meter averages a sliding window and starts afresh for every run, so it cannot
hold a whole coast-down. A :class:`SweepRecorder` is a second, bounded store fed the same
messages: every revolution's 1x per pickup, the last :data:`MAX_SWEEP_REVS` of them, from
the moment it is started (a run's end, with the machine still at speed; or the arming of a
run, at standstill) to the moment it is finished (standstill proven; or the run recorded).
:meth:`SweepRecorder.finish` then bins them against speed and finds the support resonances
(:func:`trueturn.dsp.sweep.analyse_sweep`), and says as findings whether the balancing
speed sits near one (:func:`sweep_findings`, the same findings as ``analyze --sweep``).

References
----------
.. [1] The sweep itself: :mod:`trueturn.dsp.sweep` (half-power bandwidth, Ewins 2000,
   sec. 4.2; from memory).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np

from trueturn.dsp.findings import Code, Finding
from trueturn.dsp.meter import LiveAnalyzer, MessageLike
from trueturn.dsp.sweep import (
    MIN_SWEEP_RATIO,
    NORMALISING_POWER,
    RESONANCE_MARGIN,
    Sweep,
    analyse_sweep,
    balancing_speed_rpm,
    near_resonances,
    revolution_spans_rpm,
)
from trueturn.dsp.units import PickupProfile

#: the most revolutions one recorder keeps (the oldest go first): 4000 revolutions are
#: 67 s at 3600 rpm, longer than a small machine's coast-down, and about 1 MB of fit rows
#: (2 pickups x ~16 numbers x 8 bytes per revolution); the coast-down's end is what counts
MAX_SWEEP_REVS = 4000
#: revolutions fitted together while nobody asks (bounds the samples held between fits)
BATCH_REVS = 32

SweepKind = Literal["coastdown", "runup"]


@dataclass(frozen=True)
class SweepOutcome:
    """A finished recording that was a sweep: ``kind`` (a coast-down when it ended below
    its fastest speed by :data:`trueturn.dsp.sweep.MIN_SWEEP_RATIO`, else a run-up), the
    sweep, the balancing speed (its steady part, rpm; None when it held no steady stretch)
    and the findings about it (``near_resonance``)."""

    kind: SweepKind
    sweep: Sweep
    balancing_rpm: float | None
    findings: tuple[Finding, ...]
    #: samples at the ADC's ends while recording (a resonance driving a pickup past its
    #: range): some points' 1x then reads low, so the curve is not fitted point by point
    clipped_samples: int = 0


def meter_sweep(meter: LiveAnalyzer, unit: str | None = None) -> Sweep:
    """Every revolution a meter holds, its 1x binned against speed (:mod:`trueturn.dsp.sweep`),
    in one unit for all pickups (volts when they differ, e.g. one without a sensitivity);
    the pickups are accelerometers (their 1x converted to the unit at each revolution's
    speed), which the swept model of a fast sweep is told.

    Parameters
    ----------
    meter : LiveAnalyzer
        The meter holding the revolutions.
    unit : str or None, default None
        A key of :data:`trueturn.dsp.units.UNITS`; None: the meter's own.

    Returns
    -------
    Sweep
        See :func:`trueturn.dsp.sweep.analyse_sweep`.

    References
    ----------
    .. [1] :func:`trueturn.dsp.sweep.analyse_sweep` (half-power method; Ewins 2000).
    """
    channels = range(meter.channels)
    vectors = [meter.revolution_vectors(c, unit) for c in channels]
    if len({v[3] for v in vectors}) > 1:
        vectors = [meter.revolution_vectors(c, "V pk") for c in channels]
    speeds = vectors[0][0] if vectors else np.zeros(0)
    kept = [(c, v) for c, v in zip(channels, vectors, strict=True) if len(v[0]) == len(speeds)]
    return analyse_sweep(speeds, {meter.profile(c).name: v[1] for c, v in kept},
                         {meter.profile(c).name: v[2] for c, v in kept},
                         vectors[0][3] if vectors else "V pk",
                         spans_rpm=revolution_spans_rpm(speeds),
                         sensed_power=NORMALISING_POWER["acceleration"])


def sweep_findings(sweep: Sweep, run_speed_rpm: float | None = None
                   ) -> tuple[float | None, list[Finding]]:
    """The balancing speed of a sweep and what to say about it: ``no_speed_change`` when it
    is not a sweep, ``near_resonance`` (per pickup) when the balancing speed lies within
    :data:`trueturn.dsp.sweep.RESONANCE_MARGIN` of a resonance found: of its fitted natural
    speed when the fit resolved it (a fast sweep's peak lies well after the mode), else of
    its peak (``peak_rpm`` in the details).

    Parameters
    ----------
    sweep : Sweep
        The sweep.
    run_speed_rpm : float or None, default None
        The balancing speed measured by the run the sweep belongs to, taken when the sweep
        itself holds no steady part (a coast-down begun right at the run's end).

    Returns
    -------
    tuple
        ``(balancing_rpm, findings)``; the speed None when neither the sweep held a steady
        part nor a run's speed was given.

    References
    ----------
    .. [1] Separation margin of 15-20 % between running and critical speeds (from memory:
       API 684-style margins; common practice, no single source).
    """
    at = balancing_speed_rpm(sweep)
    if at is None:
        at = run_speed_rpm
    found: list[Finding] = []
    if not sweep.is_sweep:
        found.append(Finding(Code.NO_SPEED_CHANGE, details={
            "low_rpm": round(sweep.low_rpm, 1), "high_rpm": round(sweep.high_rpm, 1),
            "ratio_needed": MIN_SWEEP_RATIO}))
    elif at is not None:
        for res in near_resonances(at, sweep.resonances):
            found.append(Finding(Code.NEAR_RESONANCE, res.pickup, details={
                "speed_rpm": round(at, 1), "resonance_rpm": round(res.speed_rpm, 1),
                "peak_rpm": None if res.peak_rpm is None else round(res.peak_rpm, 1),
                "damping_ratio": None if res.damping_ratio is None
                else round(res.damping_ratio, 4), "margin": RESONANCE_MARGIN}))
    return at, found


class SweepRecorder:
    """Each revolution's 1x per pickup from :meth:`feed` until :meth:`finish` (bounded).

    Parameters
    ----------
    profiles : sequence of PickupProfile
        The pickups, one per channel (as the run meter's).
    mains_hz : float or None
        The mains frequency (its hum is fitted out, as in the run meter).
    preamble : iterable of message
        The identity and stream set-up already seen (a recorder starts mid-stream).
    max_revs : int, default MAX_SWEEP_REVS
        The most revolutions kept.
    """

    def __init__(self, profiles: Sequence[PickupProfile], mains_hz: float | None,
                 preamble: Iterable[MessageLike] = (), max_revs: int = MAX_SWEEP_REVS) -> None:
        if max_revs < 1:
            raise ValueError(f"max_revs must be at least 1, got {max_revs!r}")
        self.analyzer = LiveAnalyzer(profiles, mains_hz=mains_hz, max_revs=max_revs,
                                     batch_revs=BATCH_REVS)
        for msg in preamble:
            self.analyzer.feed(msg)

    def feed(self, msg: MessageLike) -> None:
        """Take one decoded message (the same ones the run meter gets).

        Parameters
        ----------
        msg : MessageLike
            A decoded message (identity, stream_config, samples, tach, status).

        References
        ----------
        .. [1] :meth:`trueturn.dsp.meter.LiveAnalyzer.feed` (protocol/SPEC.md; ours).
        """
        self.analyzer.feed(msg)

    def finish(self, run_speed_rpm: float | None = None) -> SweepOutcome | None:
        """The recording as a sweep, or None when it is none (the speed changed by less
        than :data:`trueturn.dsp.sweep.MIN_SWEEP_RATIO`, or too few revolutions).

        Parameters
        ----------
        run_speed_rpm : float or None, default None
            The speed of the run the recording belongs to: the balancing speed when the
            recording holds no steady part (:func:`sweep_findings`).

        Returns
        -------
        SweepOutcome or None
            The sweep, its kind, balancing speed and findings.

        References
        ----------
        .. [1] :func:`meter_sweep`, :func:`sweep_findings`.
        """
        sweep = meter_sweep(self.analyzer)
        if not sweep.is_sweep:
            return None
        speeds = self.analyzer.speeds_rpm()
        # ending well below its fastest: a coast-down (also when a run-up came before it)
        kind: SweepKind = ("coastdown" if float(speeds[-1]) * MIN_SWEEP_RATIO
                           < float(speeds.max()) else "runup")
        at, found = sweep_findings(sweep, run_speed_rpm)
        return SweepOutcome(kind, sweep, at, tuple(found), self.analyzer.clipped_samples)
