"""A sweep (:class:`trueturn.dsp.sweep.Sweep`) to the job file's entry and back.

The job keeps the sweep's points and resonances as plain numbers (:class:`SweepEntry`); the
report draws them again with :func:`trueturn.jobs.sweep_plot.sweep_svg`, which takes a
:class:`Sweep`. Nothing is computed here: the two forms carry the same numbers (phases
folded into 0-360, as the file's limits ask).
"""

from __future__ import annotations

from trueturn.dsp.coast import SweepOutcome
from trueturn.dsp.sweep import Resonance, Sweep, SweepPoint, SweepValue
from trueturn.jobs.records import (
    JobRecord,
    ResonanceEntry,
    SweepEntry,
    SweepPointEntry,
    SweepValueEntry,
    now_iso,
)
from trueturn.model import RunKind


def sweep_entry(outcome: SweepOutcome) -> SweepEntry:
    """The job file's entry for a finished sweep (its points and resonances)."""
    sweep = outcome.sweep
    points = [SweepPointEntry(p.speed_rpm, p.revolutions, [
        SweepValueEntry(v.name, v.amplitude, v.phase_deg % 360.0, v.confidence_radius)
        for v in p.pickups]) for p in sweep.points if p.pickups]
    resonances = [ResonanceEntry(
        r.speed_rpm, r.pickup, r.damping_ratio, r.lower_rpm, r.upper_rpm, r.points_in_band,
        r.peak_ratio, "sdof_fit" if r.method == "sdof_fit" else "half_power", r.fit_speed_rpm,
        r.fit_damping_ratio, r.single_mode,
        None if r.damping_ratio_95 is None else r.damping_ratio_95[0],
        None if r.damping_ratio_95 is None else r.damping_ratio_95[1],
        r.half_power_damping_ratio, r.swept, r.peak_rpm, r.sweep_rate_parameter)
        for r in sweep.resonances]
    return SweepEntry(outcome.kind, now_iso(), sweep.unit, sweep.low_rpm, sweep.high_rpm,
                      points, resonances, outcome.balancing_rpm,
                      clipped_samples=outcome.clipped_samples)


def sweep_of(entry: SweepEntry) -> Sweep:
    """The kept entry as the DSP layer's :class:`Sweep` again (to draw it)."""
    points = tuple(SweepPoint(p.speed_rpm, p.revolutions, tuple(
        SweepValue(v.pickup, v.amplitude, v.phase_deg, v.confidence_radius)
        for v in p.pickups)) for p in entry.points)
    resonances = tuple(Resonance(
        r.speed_rpm, r.pickup, r.damping_ratio, r.lower_rpm, r.upper_rpm, r.points_in_band,
        r.peak_ratio, r.method, r.fit_speed_rpm, r.fit_damping_ratio, r.single_mode,
        None if r.damping_ratio_95_low is None or r.damping_ratio_95_high is None
        else (r.damping_ratio_95_low, r.damping_ratio_95_high), r.half_power_damping_ratio,
        r.swept, r.peak_rpm, r.sweep_rate_parameter)
        for r in entry.resonances)
    return Sweep(entry.unit, points, resonances, entry.low_rpm, entry.high_rpm, True)


def outcome_of(entry: SweepEntry) -> SweepOutcome:
    """The kept entry as the finished recording it came from (its findings are not kept:
    none), as the model and the trial sizing take it."""
    return SweepOutcome(entry.kind, sweep_of(entry), entry.balancing_rpm, (),
                        entry.clipped_samples)


def as_found_coast_down(job: JobRecord) -> SweepEntry | None:
    """The as-found run's coast-down the job kept with its points (the last one measured
    when the as-found run was measured again); None when there is none (the app was closed
    while it coasted, or its side file cannot be read)."""
    if not job.runs or job.runs[0].kind != RunKind.AS_FOUND:
        return None
    kept = [sw for sw in job.runs[0].sweeps if sw.kind == "coastdown" and sw.points]
    return kept[-1] if kept else None


def slope_sweeps(job: JobRecord) -> list[Sweep]:
    """The job's kept sweeps in the order the speed slopes are taken from them: the as-found
    run's coast-down first (it starts at the balancing speed, from the rotor as found), then
    every other sweep, the latest first."""
    kept = [(run, sw) for run in reversed(job.runs) for sw in reversed(run.sweeps)]
    first = [sw for run, sw in kept
             if run.kind == RunKind.AS_FOUND and sw.kind == "coastdown"][:1]
    rest = [sw for _, sw in kept if not any(sw is f for f in first)]
    return [sweep_of(sw) for sw in [*first, *rest]]
