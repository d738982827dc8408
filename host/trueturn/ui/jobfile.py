"""Keep the procedure's record in a job file (``trueturn.jobs``) through the one persistence
path, :class:`trueturn.jobs.store.Workspace`: saved atomically after every hands-on step and
every run (a failed save leaves the job as it was), pending work folded into the next run
with its notes, closed with the verdict and an HTML report. The job lives in the workspace,
or in the file given with ``--job`` (the workspace holds it there)."""

from __future__ import annotations

import math
import os
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path
from typing import Literal, cast

import numpy as np

from trueturn.angles import amplitude_phase
from trueturn.balance.model_first import (
    CoefficientEstimate,
    Distrust,
    PredictedInfluence,
    circle95_radius,
    correction_spread,
)
from trueturn.dsp.coast import SweepOutcome
from trueturn.dsp.findings import Finding
from trueturn.dsp.severity import Severity
from trueturn.errors import UserError
from trueturn.jobs import records as rec
from trueturn.jobs.condition import severity_entries, unbalance_entry
from trueturn.jobs.profiles import MachineProfile
from trueturn.jobs.report import html_report
from trueturn.jobs.store import Workspace, atomic_write_text
from trueturn.jobs.sweeps import sweep_entry
from trueturn.model import Run, RunKind, SafetyEvent
from trueturn.model.units import VIBRATION_UNIT_LABELS
from trueturn.positions import number_of
from trueturn.procedure.guide import (
    GateRefused,
    MassChange,
    Mode,
    Procedure,
    TapOutcome,
    planes_for,
)
from trueturn.procedure.standstill import StandstillEvidence
from trueturn.ui.texts import VERDICT_FLAG_WORDS, verdict_note


class _InMemory(Workspace):
    """The same record-keeping as :class:`Workspace` (pending work folded into runs, the
    rules of a closed job) with saves that write nothing: what the keeper falls back on when
    the disk refuses, so the job in memory holds every step until it can be saved."""

    def save_job(self, job: rec.JobRecord, path: str | os.PathLike[str] | None = None) -> Path:
        job.updated = rec.now_iso()
        return Path(path) if path is not None else self.path_of(job)


class JobKeeper:
    """One job per procedure: created at the start, updated after every step.

    Storage faults (a file where the workspace folder should be, a full disk, no
    permission) never lose a step: the step is kept in the job in memory, ``unsaved`` says
    why the file is behind, every later save writes the whole job again, and
    :meth:`move_to` saves it in another folder the person chooses."""

    def __init__(self, profile: MachineProfile, workspace: Path | None = None,
                 job_file: Path | None = None) -> None:
        self.profile = profile
        self.workspace = Workspace.open(workspace)
        self.job_file = job_file
        self.job: rec.JobRecord | None = None
        self.path: Path | None = None
        self.report_path: Path | None = None
        self.unsaved: str | None = None  # why the job file is behind the job in memory
        self._confirmed = 0

    def _save(self, action: str, *args: object) -> Path | None:
        """``Workspace.<action>(*args)``; if the disk refuses, the same in memory only, and
        ``unsaved`` says why (the file stays as it was: the store rolls a failed save back)."""
        try:
            path: Path = getattr(self.workspace, action)(*args)
        except UserError as exc:
            getattr(_InMemory(self.workspace.root), action)(*args)
            self.unsaved = str(exc)
            return None
        self.unsaved = None
        return path

    def save(self) -> Path:
        """Save the whole job in memory where it belongs (after a storage fault was fixed);
        one-line UserError if it still cannot be saved."""
        if self.job is None:
            raise UserError("no job yet: nothing to save")
        if self.job_file is None:
            self.workspace.save_machine(self.profile)
        self.path = self.workspace.save_job(self.job, self._where())
        if self.job.status == "closed":
            self.report_path = self.path.with_suffix(".html")
            atomic_write_text(self.report_path, html_report(self.job))
        self.unsaved = None
        return self.path

    def _where(self) -> Path | None:
        """The job's file when the person named one (``--job``), else the workspace's."""
        return self.job_file

    def move_to(self, folder: Path) -> Path:
        """Save the job in memory (every step so far) in another folder: the workspace
        there, or the same file name there for a ``--job`` file; one-line UserError if it
        cannot be saved there either (the job stays in memory)."""
        if self.job is None:
            raise UserError("no job yet: nothing to save")
        folder = Path(folder).expanduser()
        here = self.job_file.parent if self.job_file is not None else self.workspace.root
        if folder.resolve() == here.resolve():
            return self.save()  # the same place again (space was freed): save there
        if not folder.is_dir():
            raise UserError(f"{folder} is not a folder")
        workspace = Workspace(folder)
        job_file = folder / self.job_file.name if self.job_file is not None else None
        target = job_file or workspace.job_path(self.job.job_id)
        if target.exists():
            raise UserError(f"{target} exists: choose another folder (a file is never "
                            "overwritten by another job)")
        if job_file is None:
            workspace.save_machine(self.profile)
        path = workspace.save_job(self.job, job_file)
        if self.job.status == "closed":
            report = path.with_suffix(".html")
            atomic_write_text(report, html_report(self.job))
            self.report_path = report
        self.workspace, self.job_file, self.path, self.unsaved = workspace, job_file, path, None
        return path

    def start(self, proc: Procedure, saved: rec.CoefficientSet | None = None) -> None:
        """A new job for ``proc``; ``saved``: the coefficients a one-run trim uses (kept in
        the job, so the trim can be resumed with the very same ones)."""
        method = METHOD_OF_MODE[proc.setup.mode]
        notes = AMPLITUDE_NOTE if proc.setup.mode is Mode.AMPLITUDE_ONLY else ""
        self._confirmed = 0
        try:
            if self.job_file is None:
                self.workspace.save_machine(self.profile)
            self.job = self.workspace.new_job(self.profile, method=method,
                                              speed_rpm=proc.setup.speed_rpm, notes=notes,
                                              path=self.job_file)
        except UserError as exc:
            if self.job_file is not None and self.job_file.exists():
                raise  # a new job never overwrites a file: the person names another
            self.job = _InMemory(self.workspace.root).new_job(
                self.profile, method=method, speed_rpm=proc.setup.speed_rpm, notes=notes)
            self.unsaved = str(exc)
            self.path = self.job_file or self.workspace.job_path(self.job.job_id)
            return
        self.unsaved = None
        self.path = self.workspace.path_of(self.job)
        if saved is not None and proc.setup.mode is Mode.SAVED_TRIM:
            self.job.influence = saved
            self.path = self._save("save_job", self.job, self._where()) or self.path

    def resume(self, job: rec.JobRecord, path: Path) -> None:
        """Keep on with an open job read from ``path`` (its runs are the procedure's)."""
        self.job, self.path, self.report_path, self._confirmed = job, path, None, 0
        if self.job_file is None and path.resolve() != self.workspace.job_path(
                job.job_id).resolve():
            self.job_file = path  # a job named otherwise is saved back where it was read

    def _new_confirmations(self, proc: Procedure) -> list[rec.Confirmation]:
        """The confirmations given since the last save, each with the standstill evidence
        seen at that moment (nothing written as a constant); counted as kept by
        :meth:`_kept` once the save that holds them succeeded."""
        out = []
        for k in range(self._confirmed, len(proc.confirmations)):
            t, text = proc.confirmations[k]
            ev = proc.evidence_log[k] if k < len(proc.evidence_log) else None
            out.append(confirmation_record(text, t, ev))
        return out

    def _kept(self, path: Path | None, confirmations: list[rec.Confirmation]) -> None:
        """The confirmations are in the job (saved, or in memory while ``unsaved``)."""
        self.path = path or self.path
        self._confirmed += len(confirmations)

    def hands_on(self, proc: Procedure, changes: tuple[MassChange, ...]) -> None:
        """Keep the confirmed hands-on work as pending (a crash does not forget a weight)."""
        if self.job is None:
            return
        pending = self.job.pending or rec.PendingStep()
        model = self.job.model
        if (proc.model_shook is not None and model is not None and model.trusted
                and model.refuted_by_alarm_after_run is None and model.refuted_by_run is None):
            # the model's masses came off after the alarm: a continued job goes on with
            # trials too (kept in the same save as the changes)
            self.job.model = replace(model, refuted_at=proc.model_shook.sensor,
                                     refuted_by_alarm_after_run=proc.model_shook.after_run)
        added = [mass_record(proc, change) for change in changes
                 if change.mass is not None and change.action in ("attach", "detach")]
        confirmations = self._new_confirmations(proc)
        step = replace(pending, changes=[*pending.changes, *added],
                       confirmations=[*pending.confirmations, *confirmations],
                       redo_of=proc.redo_of)
        self._kept(self._save("record_pending", self.job, step, self._where()), confirmations)

    def refit(self, proc: Procedure, before: MassChange, after: MassChange) -> None:
        """A mass the last hands-on step put on was entered as fitted otherwise before its
        run started: the pending step records what is on the rotor now."""
        if self.job is None or self.job.pending is None or before.mass is None:
            return
        m = before.mass
        changes = list(self.job.pending.changes)
        for k in range(len(changes) - 1, -1, -1):
            c = changes[k]
            if (c.action == "attach" and c.plane == m.plane and c.mass_g == abs(m.mass_g)
                    and c.angle_deg == m.angle_deg and c.hole == m.removal):
                changes[k] = replace(mass_record(proc, after), time=c.time)
                break
        else:
            return
        step = replace(self.job.pending, changes=changes)
        self.path = self._save("record_pending", self.job, step, self._where()) or self.path

    def event(self, event: SafetyEvent) -> None:
        """A run stopped (alarm or by the person) is not kept, but its event is: saved at
        once with the pending step, and folded into the next run that is kept."""
        if self.job is None or event.kind not in ("overspeed", "runaway", "aborted"):
            return  # link-lost and board-restart travel with the run that completes
        pending = self.job.pending or rec.PendingStep()
        step = replace(pending, events=[*pending.events,
                                        rec.Event(rec.now_iso(), event.kind, event.detail)])
        self.path = self._save("record_pending", self.job, step, self._where()) or self.path

    def run(self, proc: Procedure, run: Run,
            condition: tuple[Sequence[Severity], Sequence[Finding]] | None = None,
            runup: SweepOutcome | None = None) -> None:
        """Keep a completed run; ``condition``: the machine's severity and the unbalance
        verdict measured in it (as found and check runs); ``runup``: the run-up that led to
        it (issue #20), kept with it in the same save."""
        if self.job is None:
            return
        kind = run.kind or RunKind.CHECK  # the procedure says why it ran
        # the model's readings as measured; only what the file's limits need is folded in
        readings = [replace(r, phase_deg=None if r.phase_deg is None else r.phase_deg % 360.0,
                            confidence_deg=min(180.0, r.confidence_deg),
                            speed_rpm=r.speed_rpm or run.speed_rpm)
                    for r in run.readings.values()]
        corrections = []
        if proc.step.kind == "correction" and proc.solution is not None:
            for c in proc.solution.corrections:
                parts = [rec.SplitPart(number_of(p.position), p.angle_deg, abs(p.mass_g))
                         for p in proc.solution.parts
                         if p.plane == c.plane and p.position is not None]
                kit = next((k for k in proc.solution.kit if k.plane == c.plane), None)
                corrections.append(rec.CorrectionEntry(
                    c.plane, c.mass_g, c.angle_deg, "remove" if proc.removal else "add",
                    proc.plane(c.plane).radius_mm, parts,
                    kit.residual_gmm if kit else None, kit.allowed_gmm if kit else None,
                    kit.proven_best if kit else None))
        events = [rec.Event(rec.now_iso(), e.kind, e.detail) for e in run.events]
        confirmations = self._new_confirmations(proc)
        runups = [sweep_entry(runup)] if runup is not None else []
        runups = [s for s in runups if s.points]
        assert run.speed_rpm is not None  # Procedure.record: every run has its measured speed
        record = rec.RunEntry(index=self.job.next_run_index, kind=kind,
                              time=rec.now_iso(), speed_rpm=run.speed_rpm, readings=readings,
                              label=run.label, confirmations=confirmations,
                              corrections=corrections, events=events,
                              notes="; ".join(run.forces_confirmed),
                              replaces=proc.last_replaced,
                              sweeps=runups)
        if condition is not None:
            record.severity = severity_entries(condition[0])
            record.unbalance = unbalance_entry(condition[1])
        self._refine_model(proc, run)
        self._kept(self._save("append_run", self.job, record, self._where()), confirmations)

    def second_start(self, run: Run, severity: Sequence[Severity],
                     unbalance: Sequence[Finding]) -> None:
        """Keep a second start as found with the as-found run, and the unbalance judgement
        over both starts (issue #22)."""
        if self.job is None or not self.job.runs:
            return
        assert run.speed_rpm is not None  # Procedure.record: every run has its measured speed
        readings = [replace(r, phase_deg=None if r.phase_deg is None else r.phase_deg % 360.0,
                            confidence_deg=min(180.0, r.confidence_deg),
                            speed_rpm=r.speed_rpm or run.speed_rpm)
                    for r in run.readings.values()]
        entry = rec.SecondStartEntry(rec.now_iso(), run.speed_rpm, readings,
                                     severity_entries(severity))
        self.path = self._save("record_second_start", self.job, entry,
                               unbalance_entry(unbalance), self._where()) or self.path

    def sweep(self, run_index: int, outcome: SweepOutcome) -> None:
        """Keep a coast-down or run-up with run ``run_index`` of the job (issue #20); a
        closed job's report is written again with it."""
        if self.job is None or not 1 <= run_index <= len(self.job.runs):
            return
        saved = self._save("record_sweep", self.job, run_index, sweep_entry(outcome),
                           self._where())
        if saved is None:
            return
        self.path = saved
        if self.job.status == "closed":
            self._write_report()

    def model(self, proc: Procedure) -> None:
        """Keep the model's answer after the as-found run's coast-down (model-first, issue
        #20 item 4): its prior and spread when trusted, else why not (the job goes on with
        trials), so the job can be continued with the very same model."""
        if self.job is None or proc.model is None or not proc.runs:
            return
        entry = model_record(proc)
        self.path = self._save("record_model", self.job, entry, self._where()) or self.path

    def went_on(self, proc: Procedure) -> None:
        """Keep that the person went on although balancing may not help (issue #22): a
        continued job does not ask again."""
        if self.job is None or not proc.runs:
            return
        because = [cast(rec.EvidenceCode, c) for c in proc.doubt]
        entry = rec.WentOnEntry(max(1, proc.run_numbers[-1]), rec.now_iso(), because)
        self.path = self._save("record_went_on", self.job, entry, self._where()) or self.path

    def _refine_model(self, proc: Procedure, run: Run) -> None:
        """A run the model's coefficients took in (model-first, trusted): the coefficients
        refined by every run so far join the job's model entry, saved with the run; a run
        that refuted the model is kept there as such."""
        job = self.job
        if (job is None or job.model is None or not job.model.trusted or proc.model is None
                or run.kind is RunKind.AS_FOUND):
            return
        if (proc.model.refuted_at is not None and job.model.refuted_by_run is None
                and job.model.refuted_by_alarm_after_run is None):
            job.model = replace(job.model, refuted_by_run=job.next_run_index,
                                refuted_at=proc.model.refuted_at)
            return
        if proc.fallback or run not in proc.runs:
            return
        try:
            estimate = proc.engine.model_estimate(proc.setup, proc.runs, proc.model.prior)
        except (GateRefused, KeyError, ValueError):
            return  # no estimate from these runs: the run is kept all the same
        if not isinstance(estimate, CoefficientEstimate):
            return
        covariance = estimate.covariance[:, 1:, 1:]
        entries = coefficient_entries(estimate.sensors, job.model.planes, estimate.matrix,
                                      np.real(np.diagonal(covariance, axis1=1, axis2=2)))
        _, mass95, angle95 = correction_spread(estimate)
        bounded = bool(np.all(np.isfinite(mass95)))  # else: not bounded, nothing kept
        refined = rec.ModelRefinementEntry(
            job.next_run_index, list(proc.run_numbers), entries,
            [float(m) for m in mass95] if bounded else [],
            [float(a) for a in angle95] if bounded else [])
        job.model = replace(job.model, refined=[*job.model.refined, refined])

    def stop(self, proc: Procedure) -> Path | None:
        """Close the job without a verdict because the person stopped it (the reason kept),
        and write the HTML report beside it."""
        if self.job is None or proc.stopped is None:
            return None
        because = [cast(rec.EvidenceCode, c) for c in proc.stopped.because]
        entry = rec.StopEntry(proc.stopped.reason, max(1, proc.stopped.after_run),
                              rec.now_iso(), because)
        saved = self._save("stop_job", self.job, entry, self._where())
        if saved is None:
            return None
        self.path = saved
        self._write_report()
        return self.path

    def _write_report(self) -> None:
        """The HTML report beside the closed job (a failure is said, the job stays saved)."""
        assert self.job is not None and self.path is not None
        try:
            report = self.path.with_suffix(".html")
            atomic_write_text(report, html_report(self.job))
            self.report_path = report
        except UserError as exc:
            self.unsaved = f"the job is saved but not its report: {exc}"

    def _keep_coefficients(self, proc: Procedure) -> None:
        """Store the influence coefficients (refitted over every run) for later trims."""
        assert self.job is not None
        model = proc.solution.coefficients if proc.solution is not None else None
        saved = model.as_saved() if hasattr(model, "as_saved") else []
        unit = next((r.unit for r in proc.runs[-1].readings.values()), "") if proc.runs else ""
        if not saved or unit not in VIBRATION_UNIT_LABELS:
            return
        entries = [rec.InfluenceEntry(c.sensor, c.plane, c.amp_per_g, c.phase_deg % 360.0)
                   for c in saved]
        coefficients = rec.CoefficientSet(proc.setup.speed_rpm, unit,  # type: ignore[arg-type]
                                          entries, job_id=self.job.job_id,
                                          created=rec.now_iso())
        self.job.influence = coefficients
        try:  # kept in the job too: a failure here loses nothing of the job
            self.workspace.save_coefficients(self.profile.name, coefficients)
        except UserError as exc:
            self.unsaved = str(exc)

    def finish(self, proc: Procedure) -> Path | None:
        """Close the job with the verdict and write the HTML report beside it."""
        if self.job is None:
            return None
        v = proc.verdict
        verdict = None
        if v is not None:
            planes = [rec.PlaneVerdict(name, res, per, within)
                      for name, res, per, within in v.rows()]
            note = " ".join([verdict_note(v, proc.setup.speed_rpm),
                             *(VERDICT_FLAG_WORDS[f] + "." for f in v.flags)])
            verdict = rec.VerdictEntry(proc.setup.grade_mm_per_s, proc.setup.speed_rpm,
                                       len(self.job.runs), planes, v.passed, note=note)
        self._keep_coefficients(proc)
        saved = self._save("close_job", self.job, verdict, self._where())
        if saved is None:
            return None
        self.path = saved
        self._write_report()
        return self.path


def coefficient_entries(sensors: Sequence[str], planes: Sequence[str], matrix: np.ndarray,
                        variance: np.ndarray) -> list[rec.ModelCoefficientEntry]:
    """The job file's entries of a coefficient matrix (pickups x planes, complex) with each
    one's 95 % circle as a share of its amplitude (``variance``: ``E|dH|^2`` per entry;
    inf: not bounded)."""
    out = []
    for i, sensor in enumerate(sensors):
        for j, plane in enumerate(planes):
            h = complex(matrix[i, j])
            amp, phase = amplitude_phase(h)
            radius = circle95_radius(float(variance[i, j]))
            spread = radius / amp if amp > 0 and math.isfinite(radius) else None
            out.append(rec.ModelCoefficientEntry(sensor, plane, amp, phase % 360.0, spread))
    return out


def model_record(proc: Procedure) -> rec.ModelEntry:
    """The job file's entry of the model's answer (model-first, issue #20 item 4): trusted,
    its prior (coefficients and complex covariance per pickup, in the readings' unit per
    gram) and the first correction's 95 % +/-; else the reasons it was not trusted."""
    model = proc.model
    assert model is not None
    distrust = [Distrust(d) for d in model.distrust]
    after = proc.run_numbers[0] if proc.run_numbers else 1
    prior = model.prior
    tap = tap_record(proc.tap) if proc.tap is not None else None
    if not model.trusted or not isinstance(prior, PredictedInfluence):
        return rec.ModelEntry(after, rec.now_iso(), False, distrust,
                              model.residual_fraction_95, tap=tap,
                              tap_offered=model.tap_may_help)
    planes = [p.name for p in planes_for(proc.setup)]
    variance = np.array([np.real(np.diagonal(c)) for c in prior.covariance])
    covariance = [rec.ModelCovarianceEntry(s, np.real(c).tolist(), np.imag(c).tolist())
                  for s, c in zip(prior.sensors, prior.covariance, strict=True)]
    return rec.ModelEntry(after, rec.now_iso(), True, [], model.residual_fraction_95, planes,
                          list(model.mass_95_g), list(model.angle_95_deg),
                          coefficient_entries(prior.sensors, planes, prior.matrix, variance),
                          covariance, tap=tap, tap_offered=model.tap_may_help)


def tap_record(tap: TapOutcome) -> rec.TapEntry:
    """The job file's entry of the tap test that informed the model: when, the taps, the
    modes per pickup."""
    return rec.TapEntry(rec.now_iso(), tap.taps,
                        [rec.TapModeEntry(sensor, m.frequency_hz, m.frequency_se_hz)
                         for sensor, modes in tap.modes.items() for m in modes])


def mass_record(proc: Procedure, change: MassChange) -> rec.MassChange:
    """The job file's record of a mass put on (attach) or taken off (detach): what is
    fitted, and what was suggested when it differs."""
    m = change.mass
    assert m is not None
    action: Literal["attach", "remove"] = "attach" if change.action == "attach" else "remove"
    s = change.suggested
    suggested = None if s is None else rec.SuggestedMass(
        abs(s.mass_g), s.angle_deg, None if s.position is None else number_of(s.position),
        s.removal)
    return rec.MassChange(
        action, m.plane, abs(m.mass_g), m.angle_deg, purpose=m.kind.value,
        position=None if m.position is None else number_of(m.position),
        radius_mm=proc.plane(m.plane).radius_mm, part="drilled out" if m.removal else "",
        time=rec.now_iso(), hole=m.removal, suggested=suggested)


#: the note of an amplitude-only job (files before "four-run" said only this)
AMPLITUDE_NOTE = "amplitude-only procedure (four-run method)"
#: the job file's word for each procedure (JobRecord.method)
METHOD_OF_MODE: dict[Mode, Literal["single-plane", "two-plane", "four-run", "trim",
                                  "model-first"]] = {
    Mode.ONE_PLANE: "single-plane", Mode.TWO_PLANE: "two-plane",
    Mode.AMPLITUDE_ONLY: "four-run", Mode.SAVED_TRIM: "trim", Mode.MODEL_FIRST: "model-first"}


def confirmation_record(step: str, board_time_s: float,
                        ev: StandstillEvidence | None) -> rec.Confirmation:
    """A job-file confirmation holding the evidence seen (host time now, board time given)."""
    if ev is None:
        return rec.Confirmation(rec.now_iso(), step, standstill_by_tach=False,
                                text="no standstill evidence kept", board_time_s=board_time_s)
    finite = [p for p in ev.pickups if math.isfinite(p.level_g_rms)]
    return rec.Confirmation(
        rec.now_iso(), step,
        standstill_by_tach=ev.proven and ev.tach_trusted,
        tach_rpm=ev.last_speed_rpm,
        text=("" if ev.proven else f"standstill not proven: {ev.state.value}"),
        basis=ev.basis.value if ev.basis is not None else None,
        board_time_s=max(0.0, board_time_s), tach_silent_s=ev.tach_silent_s,
        tach_edges_seen=ev.tach_edges_seen, tach_seen_working=ev.tach_trusted,
        last_edge_age_s=ev.last_edge_age_s,
        pickups=[rec.PickupLevel(p.name, p.level_g_rms, p.limit_g_rms, p.periodic_hz)
                 for p in finite])
