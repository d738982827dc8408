"""Continue an open job: rebuild its procedure from the runs the job file kept (issue #17).

The job file is the record: its runs (readings, the masses on the rotor in each), the
hands-on work confirmed since the last run (``pending``) and, for a one-run trim, the
coefficients it uses. :func:`restore_procedure` turns them into the model's runs and masses
and lets :meth:`trueturn.procedure.guide.Procedure.restore` solve them again; nothing of the
screens is replayed and nothing about standstill is carried over (a fresh watch proves it
again before any hands-on step).

The machine: a job carries the profile it was measured with, and its coefficients and
positions mean something only with that profile. :func:`profile_change` names what differs
from the machine as saved now: a job is never continued on a changed profile (a lowered
speed limit or a plane that may no longer be drilled must not be overruled by an old copy);
a machine no longer saved is continued with the job's own copy, said in one line.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from trueturn.angles import phasor
from trueturn.balance.model_first import PredictedInfluence
from trueturn.balance.support_fit import StandstillMode
from trueturn.dsp.findings import Finding
from trueturn.dsp.severity import BAND_HZ, NoSeverity, Severity, Zone
from trueturn.dsp.unbalance import failing_rules
from trueturn.errors import UserError
from trueturn.jobs import records as rec
from trueturn.jobs.condition import evidence_finding, verdict_finding
from trueturn.jobs.profiles import MachineProfile
from trueturn.jobs.store import Workspace
from trueturn.jobs.sweeps import as_found_coast_down, outcome_of, slope_sweeps
from trueturn.model import MassKind, PlacedMass, Plane, Run, RunKind
from trueturn.positions import index_of, number_of, position_text
from trueturn.procedure.engine import (
    SweepEvidence,
    resonances_of_sweeps,
    speed_slopes_from_sweeps,
    sweep_evidence,
)
from trueturn.procedure.guide import (
    Engine,
    KeptRun,
    Mode,
    ModelAnswer,
    Procedure,
    TapOutcome,
    planes_for,
)
from trueturn.procedure.standstill import StandstillWatch
from trueturn.schema import to_data
from trueturn.ui.jobfile import AMPLITUDE_NOTE, METHOD_OF_MODE
from trueturn.ui.machine import setup_from_profile
from trueturn.ui.texts import Shown

MODE_OF_METHOD = {method: mode for mode, method in METHOD_OF_MODE.items()}
#: how close a part taken off must be to a part put on to be that part (as
#: JobRecord.parts_on_rotor matches them)
SAME_MASS_G = 0.01
SAME_ANGLE_DEG = 0.5


def job_mode(job: rec.JobRecord) -> Mode:
    """The procedure a job was started with."""
    if job.method == "single-plane" and job.notes == AMPLITUDE_NOTE:
        return Mode.AMPLITUDE_ONLY  # written so before the job file said "four-run"
    return MODE_OF_METHOD[job.method]


def profile_change(job: rec.JobRecord, profile: MachineProfile) -> list[str]:
    """The fields of ``profile`` that differ from the copy the job was started with."""
    now, then = to_data(profile), to_data(job.machine)
    return [k for k in dict.fromkeys([*then, *now]) if now.get(k) != then.get(k)]


def refuse_changed_profile(job: rec.JobRecord, profile: MachineProfile, where: str) -> None:
    """One-line UserError when ``profile`` (the machine as saved now) is not the job's."""
    changed = profile_change(job, profile)
    if job.machine.name != profile.name:
        raise UserError(f"job {job.job_id} is a job of machine {job.machine.name!r}, and "
                        f"{where} is {profile.name!r}: continue it on its own machine")
    if changed:
        raise UserError(
            f"job {job.job_id} was started on machine {job.machine.name!r} as it was then; "
            f"{where} differs ({', '.join(changed[:4])}): a job is continued only on the "
            "same profile - start a new job")


def _placed(change: rec.MassChange, planes: dict[str, Plane]) -> PlacedMass:
    plane = planes.get(change.plane)
    if plane is None:
        raise UserError(f"the job names plane {change.plane!r}, which its machine lacks")
    position = None
    if change.position is not None:
        try:
            position = index_of(change.position, len(plane.position_angles_deg))
        except ValueError as exc:
            raise UserError(f"{change.plane}: {exc}") from None
    kind = MassKind(change.purpose) if change.purpose != "other" else MassKind.CORRECTION
    hole = change.hole or change.part == "drilled out"  # files written before ``hole``
    return PlacedMass(change.plane, change.mass_g, change.angle_deg, position, kind, hole)


def _apply(on_rotor: list[PlacedMass], changes: list[rec.MassChange],
           planes: dict[str, Plane], where: str) -> None:
    """The hands-on work of one step, in order, on the list of masses on the rotor."""
    for change in changes:
        mass = _placed(change, planes)
        if change.action == "attach":
            on_rotor.append(mass)
            continue
        for k in range(len(on_rotor) - 1, -1, -1):
            m = on_rotor[k]
            if (m.plane == mass.plane and abs(m.mass_g - mass.mass_g) < SAME_MASS_G
                    and abs((m.angle_deg - mass.angle_deg + 180) % 360 - 180) < SAME_ANGLE_DEG):
                del on_rotor[k]
                break
        else:
            raise UserError(f"{where} takes off {mass.mass_g:g} g on {mass.plane}, which the "
                            "job never put on: the job cannot be continued")


@dataclass(frozen=True)
class RotorState:
    """What a job says is on the rotor now, and its runs as the procedure keeps them."""

    runs: tuple[KeptRun, ...]
    on_rotor: tuple[PlacedMass, ...]


def rotor_state(job: rec.JobRecord) -> RotorState:
    """Replay the job's recorded hands-on work and runs (data only, no engine)."""
    planes = {p.name: p for p in job.machine.planes}
    on_rotor: list[PlacedMass] = []
    kept = []
    for entry in job.runs:
        _apply(on_rotor, entry.changes, planes, f"run {entry.index}")
        parts = [c for c in entry.changes if c.action == "attach"
                 and c.purpose in ("correction", "trim")]
        removal = any(_placed(c, planes).removal for c in parts) if parts else None
        run = Run(entry.label or entry.kind.value, tuple(on_rotor),
                  {r.sensor: r for r in entry.readings}, entry.speed_rpm, entry.kind)
        kept.append(KeptRun(run, entry.index, entry.replaces, removal))
    if job.pending is not None:
        _apply(on_rotor, job.pending.changes, planes, "the work since the last run")
    return RotorState(tuple(kept), tuple(on_rotor))


def describe_mass(m: PlacedMass, shown: Shown) -> str:
    """``trial 0.60 g at position 2 (90°)`` / ``hole 1.20 g at 200°``."""
    where = (position_text(number_of(m.position), m.angle_deg) if m.position is not None
             else f"{m.angle_deg:.0f}°")
    what = "hole" if m.removal else m.kind.value
    return f"{what} {shown.mass(abs(m.mass_g))} at {where}"


def rotor_lines(job: rec.JobRecord, on_rotor: tuple[PlacedMass, ...]) -> list[str]:
    """What is on the rotor now, one line per plane (every plane of the machine)."""
    shown = Shown(job.machine.units.choice())
    lines = []
    for plane in job.machine.planes:
        here = [describe_mass(m, shown) for m in on_rotor if m.plane == plane.name]
        lines.append(f"{plane.name}: {', '.join(here) if here else 'nothing added'}")
    return lines


def as_found_unbalance(job: rec.JobRecord) -> tuple[Finding, ...]:
    """The as-found run's judgement (is it unbalance? issue #22) as the job kept it, the
    verdict first and its evidence after, as findings (empty when none was kept)."""
    judged = job.runs[0].unbalance if job.runs else None
    if judged is None:
        return ()
    return (verdict_finding(judged), *(evidence_finding(e) for e in judged.evidence))


def as_found_condition(job: rec.JobRecord) -> tuple[tuple[Severity, ...], tuple[Finding, ...]]:
    """The as-found run's overall severity per pickup and its judgement as the job kept
    them, in the form the app holds them live (for its words and a second start)."""
    first = job.runs[0] if job.runs else None
    severity = tuple(Severity(e.sensor, e.velocity_rms_mm_s, Zone(e.zone) if e.zone else None,
                              e.band_hz or BAND_HZ, NoSeverity(e.refused) if e.refused else None)
                     for e in (first.severity if first is not None else []))
    return severity, as_found_unbalance(job)


def as_found_doubt(job: rec.JobRecord) -> tuple[str, ...]:
    """The rules the as-found run failed (over both starts, when a second was measured)
    when its judgement said balancing may not help; empty otherwise - as
    :func:`trueturn.dsp.unbalance.failing_rules` gives them live."""
    return failing_rules(as_found_unbalance(job))


def model_answer(entry: rec.ModelEntry, job: rec.JobRecord) -> ModelAnswer:
    """The model's answer as the job kept it (model-first, issue #20 item 4): its prior
    rebuilt from the kept coefficients and covariance, so every later correction and
    verdict comes out as it did live; one-line UserError when the entry does not fit the
    job's pickups and planes."""
    distrust = tuple(d.value for d in entry.distrust)
    tapped = entry.tap is not None
    if not entry.trusted:
        return ModelAnswer(False, distrust, residual_fraction_95=entry.residual_fraction_95,
                           tapped=tapped)
    sensors = tuple(p.name for p in job.machine.pickups)
    table = {(c.sensor, c.plane): c for c in entry.predicted}
    covariance = {c.sensor: c for c in entry.covariance}
    try:
        matrix = np.array([[phasor(table[s, p].amp, table[s, p].phase_deg)
                            for p in entry.planes] for s in sensors])
        cov = tuple(np.array(covariance[s].real) + 1j * np.array(covariance[s].imag)
                    for s in sensors)
    except KeyError as exc:
        raise UserError(f"job {job.job_id}: its model lacks {exc.args[0]}: the job cannot be "
                        "continued") from None
    spread = np.array([[table[s, p].spread_rel_95 if table[s, p].spread_rel_95 is not None
                        else np.inf for p in entry.planes] for s in sensors])
    prior = PredictedInfluence(sensors, matrix, np.abs(matrix), cov,
                               np.degrees(np.arcsin(np.minimum(spread, 1.0))), spread, False,
                               entry.residual_fraction_95)
    return ModelAnswer(True, (), tuple(entry.mass_95_g), tuple(entry.angle_95_deg),
                       entry.residual_fraction_95, prior, tapped=tapped)


def shaken_by_alarm(entry: rec.ModelEntry | None) -> tuple[int, str] | None:
    """After which kept run the runaway alarm stopped a check run of the model's masses,
    and at which pickup (the model refuted: procedure.guide.ModelShook); None: it did not."""
    if entry is None or entry.refuted_by_alarm_after_run is None:
        return None
    return entry.refuted_by_alarm_after_run, entry.refuted_at or "a pickup"


def kept_tap(entry: rec.ModelEntry | None) -> TapOutcome | None:
    """The tap test the job's model was computed with, as the procedure holds it (None:
    none was made)."""
    if entry is None or entry.tap is None:
        return None
    modes: dict[str, list[StandstillMode]] = {}
    for m in entry.tap.modes:
        modes.setdefault(m.sensor, []).append(StandstillMode(m.frequency_hz, m.frequency_se_hz))
    return TapOutcome({k: tuple(v) for k, v in modes.items()}, entry.tap.taps)


def job_speed_slopes(job: rec.JobRecord) -> tuple[object, ...]:
    """Each pickup's speed slope from the sweeps the job kept (the as-found run's
    coast-down first, then the latest), at the as-found run's speed in its readings' units;
    empty before an as-found run, or when no sweep measured every pickup's slope well
    enough (:func:`trueturn.procedure.engine.speed_slopes_from_sweeps`). The live app and a
    continued job take them from the same kept sweeps, so they solve alike."""
    as_found = [r for r in job.runs if r.kind == RunKind.AS_FOUND]
    if not as_found:
        return ()
    latest = as_found[-1]
    units = {r.sensor: str(r.unit) for r in latest.readings}
    return speed_slopes_from_sweeps(slope_sweeps(job), units, latest.speed_rpm)


def job_support_resonances(job: rec.JobRecord) -> object:
    """The support resonances the job's kept sweeps found (the as-found run's coast-down
    first), below the as-found run's speed, as the trials are sized with them
    (:func:`trueturn.procedure.engine.resonances_of_sweeps`); None before an as-found run
    or without a sweep. The live app and a continued job take them alike."""
    as_found = [r for r in job.runs if r.kind == RunKind.AS_FOUND]
    if not as_found:
        return None
    latest = as_found[-1]
    return resonances_of_sweeps(slope_sweeps(job), [r.sensor for r in latest.readings],
                                latest.speed_rpm)


def offered_tap_evidence(job: rec.JobRecord, sensors: tuple[str, ...]
                         ) -> SweepEvidence | None:
    """A job kept while the tap test was on offer (model-first): the as-found run's
    coast-down as the model took it (:func:`trueturn.procedure.engine.sweep_evidence`),
    rebuilt from the points the job keeps, so the tap's modes can be held to the same fit;
    None when the offer is not open or the points are not there (then the job goes on as
    the kept answer says)."""
    model = job.model
    if model is None or not model.tap_offered or model.tap is not None or len(job.runs) != 1:
        return None
    return job_coast_down_evidence(job, sensors)


def job_coast_down_evidence(job: rec.JobRecord, sensors: tuple[str, ...]
                            ) -> SweepEvidence | None:
    """The as-found run's coast-down as the job keeps it, rebuilt as the engine takes it
    (:func:`trueturn.procedure.engine.sweep_evidence`: the resonances below the as-found
    speed and the curve); None when the job kept none. The live app sizes the trials from
    it once the coast-down is kept, and a continued job the same
    (:meth:`trueturn.procedure.engine.BalanceEngine.trial_sensitivity`)."""
    entry = as_found_coast_down(job)
    if entry is None:
        return None
    return sweep_evidence(outcome_of(entry), sensors, job.runs[0].speed_rpm)


def restore_procedure(job: rec.JobRecord, engine: Engine, watch: StandstillWatch | None,
                      standstill_s: float = 3.0, revolutions_per_run: int = 30) -> Procedure:
    """The procedure of an open job, at the step after its last run (one-line UserError
    when it cannot be continued)."""
    if job.status != "open":
        raise UserError(f"job {job.job_id} is closed; nothing to resume (start a new job)")
    mode = job_mode(job)
    model = None
    if mode is Mode.MODEL_FIRST and job.model is not None:
        model = model_answer(job.model, job)
    elif mode is Mode.MODEL_FIRST and len(job.runs) > 1:
        raise UserError(f"job {job.job_id} is a model-first job written before the job kept "
                        "its model: start a new job")
    if mode is Mode.SAVED_TRIM and job.influence is None:
        raise UserError(f"job {job.job_id} does not keep the coefficients its trim used: "
                        "start a new trim")
    state = rotor_state(job)
    try:
        setup = setup_from_profile(job.machine, mode, standstill_s, revolutions_per_run,
                                   job.influence if mode is Mode.SAVED_TRIM else None)
        setup = replace(setup, speed_slopes=job_speed_slopes(job),   # as the live app had
                        support_resonances=job_support_resonances(job))
        if job.model is not None and job.model.trusted and job.model.planes != [
                p.name for p in planes_for(setup)]:
            raise ValueError(f"its model covers planes {', '.join(job.model.planes)}, not the "
                             "machine's")
        pending = job.pending
        return Procedure.restore(setup, engine, state.runs, state.on_rotor,
                                 rotor_set=pending is not None,
                                 redo_of=pending.redo_of if pending is not None else None,
                                 watch=watch, model=model, doubt=as_found_doubt(job),
                                 went_on=job.went_on is not None, tap=kept_tap(job.model),
                                 sweep=offered_tap_evidence(job, setup.sensors),
                                 shaken=shaken_by_alarm(job.model))
    except ValueError as exc:
        raise UserError(f"job {job.job_id} cannot be continued: {exc}") from None


@dataclass(frozen=True)
class OpenJob:
    """An open job of this machine the app offers to continue."""

    path: Path
    job: rec.JobRecord
    lines: tuple[str, ...]  # what is on the rotor now, per plane
    refusal: str = ""  # why it cannot be continued (empty: it can)


def find_open_job(workspace: Workspace, profile: MachineProfile) -> OpenJob | None:
    """The latest open job of ``profile``'s machine in the workspace that got past its
    set-up (a run kept or hands-on work confirmed); None when there is none."""
    try:
        summaries, _ = workspace.scan_jobs(profile.name)
    except UserError:
        return None
    for summary in reversed(summaries):
        if summary.status != "open":
            continue
        try:
            job = workspace.load_job(summary.path)
        except UserError:
            continue
        if not job.runs and job.pending is None:
            continue
        try:
            state = rotor_state(job)
            refuse_changed_profile(job, profile, "the machine's profile now")
        except UserError as exc:
            return OpenJob(summary.path, job, (), str(exc))
        return OpenJob(summary.path, job, tuple(rotor_lines(job, state.on_rotor)))
    return None
