"""The guide: one widget per step kind of the procedure, chosen by the step's type.

:class:`GuideView` holds a :class:`~textual.widgets.ContentSwitcher` with one panel per
kind of :data:`trueturn.procedure.guide.Step` (:class:`HandsOnPanel`, :class:`RunPanel`,
:class:`CorrectionPanel`, :class:`VerdictPanel`), one for choosing the procedure
(:class:`SetupPanel`) and one for a lost link (:class:`LinkLostPanel`), then the run's
progress bar and the message line.

Each panel takes what it shows from the procedure and the latest snapshot
(``show(proc, snap, ctx)``) into ``reactive`` attributes and draws only from them
(``render``): Textual repaints a panel when one of its attributes changes, not every
refresh, and a hidden panel never draws. No procedure logic here: the panels ask the
procedure (``checklist``, ``forces``, ``settled``...) and put its answers into words; the
fixed words live in :mod:`trueturn.ui.texts`.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from pathlib import Path

from textual.app import ComposeResult
from textual.containers import Vertical
from textual.content import Content
from textual.reactive import reactive
from textual.widgets import ContentSwitcher, ProgressBar, Static

from trueturn.angles import wrap_deg
from trueturn.dsp.findings import Code, Finding, describe
from trueturn.jobs.profiles import MachineProfile
from trueturn.model import Correction, PlacedMass, Reading, Verdict
from trueturn.model.result import WITHHOLDING_FLAGS
from trueturn.model.units import ceil_to_scale_g
from trueturn.positions import number_of, position_text
from trueturn.procedure.engine import BalanceEngine
from trueturn.procedure.guide import (
    HandsOn,
    HandsOnPhase,
    KitFit,
    Measure,
    Mode,
    OffSpeed,
    Procedure,
    RunPhase,
    ShowCorrection,
    ShowDoubt,
    ShowVerdict,
    Step,
    Stopped,
    TapPhase,
    TapTest,
    TooSmallTrial,
    Widened,
    standstill_basis_words,
    standstill_refusal,
)
from trueturn.procedure.standstill import StandstillEvidence, StandstillState
from trueturn.ui import texts
from trueturn.ui.machine import brief_work, describe_change, fitted_lines
from trueturn.ui.placement import PlacementView, fits_legend, pictures_for
from trueturn.ui.session import Snapshot
from trueturn.ui.texts import VERDICT_FLAG_WORDS, Shown, verdict_note
from trueturn.ui.widgets import MarkupText, markup


@dataclass(frozen=True)
class GuideContext:
    """What the guide shows besides the procedure and the snapshot (from the app)."""

    profile: MachineProfile
    engine: BalanceEngine
    demo: bool = False  # a simulated rig: x stops its motor
    tach_live: bool = True  # a tach edge lately (a run keeps nothing without one)
    link_error: str = ""  # the link is lost: why
    saved_trim: bool = False  # coefficients of an earlier job are saved for this machine
    job_path: Path | None = None
    report_path: Path | None = None
    message: str = ""
    alarm: str = ""  # an alarm held until acknowledged: shown instead of the message
    condition: tuple[str, ...] = ()  # the machine's condition from the last as-found/check run
    open_job: tuple[str, ...] = ()  # the set-up's offer of an open job (texts.open_job_lines)
    tap_status: str = ""  # the tap test's recording: seconds kept, or being analysed


class StepPanel(Static):
    """A panel of the guide: draws its lines from its reactive attributes while shown."""

    DEFAULT_CSS = "StepPanel { height: auto; padding: 0 1; }"

    shown: reactive[bool] = reactive(False)
    demo: reactive[bool] = reactive(False)
    #: numbers in the machine's units (its profile), each kept with its unit
    units: reactive[Shown] = reactive(Shown())

    def show(self, proc: Procedure | None, snap: Snapshot, ctx: GuideContext) -> None:
        """Take what this panel draws (only attributes: the drawing is :meth:`render`)."""
        self.demo = ctx.demo
        self.units = Shown(ctx.profile.units.choice())

    def lines(self) -> list[str]:
        raise NotImplementedError

    def render(self) -> Content:
        if not self.shown:
            return Content("")
        return markup("\n".join(self.lines()))


class SetupPanel(StepPanel):
    """Before a procedure is chosen: the machine and the procedures to choose from."""

    profile: reactive[MachineProfile | None] = reactive(None)
    saved_trim: reactive[bool] = reactive(False)
    open_job: reactive[tuple[str, ...]] = reactive(())

    def show(self, proc: Procedure | None, snap: Snapshot, ctx: GuideContext) -> None:
        super().show(proc, snap, ctx)
        self.profile = ctx.profile
        self.saved_trim = ctx.saved_trim
        self.open_job = ctx.open_job

    def lines(self) -> list[str]:
        prof = self.profile
        if prof is None:
            return []
        u = self.units
        planes = ", ".join(f"{p.name} (r {u.length(p.radius_mm)})" for p in prof.planes)
        return [
            f"[b]Machine[/b] {prof.name}: {prof.rotor_kind}, {u.rotor_mass(prof.rotor_mass_kg)}, "
            f"max {u.speed(prof.max_speed_rpm)}",
            f"  planes: {planes}",
            f"  pickups: {', '.join(p.name for p in prof.pickups)} · target G "
            f"{prof.target_grade:g}",
            *(self.open_job or ("",)), *texts.setup_choices(self.saved_trim), "",
            *texts.SETUP_FOOTER]


class ProcedurePanel(StepPanel):
    """A panel that shows one step of a chosen procedure, under the step's title."""

    title: reactive[str] = reactive("")
    runs: reactive[int] = reactive(0)
    condition: reactive[tuple[str, ...]] = reactive(())
    as_found: reactive[str] = reactive("")  # the as-found 1x, once measured

    def show(self, proc: Procedure | None, snap: Snapshot, ctx: GuideContext) -> None:
        super().show(proc, snap, ctx)
        assert proc is not None
        self.title = proc.step.title
        self.runs = len(proc.runs)
        self.condition = ctx.condition
        base = proc.as_found()
        self.as_found = "" if base is None else texts.as_found_line(
            base.readings, proc.setup.sensors, self.units)

    def lines(self) -> list[str]:
        return [f"[b]{self.title}[/b]   [dim](runs so far: {self.runs})[/dim]",
                *([self.as_found] if self.as_found else []), *self.body(), *self.condition]

    def body(self) -> list[str]:
        raise NotImplementedError


class LinkLostPanel(StepPanel):
    """The link is down: what it means for the job and the run, and how to reconnect."""

    title: reactive[str] = reactive("")
    runs: reactive[int | None] = reactive(None)  # None: no procedure chosen yet
    error: reactive[str] = reactive("")
    job_path: reactive[Path | None] = reactive(None)
    interrupted: reactive[str] = reactive("")  # the label of the run cut off, if any

    def show(self, proc: Procedure | None, snap: Snapshot, ctx: GuideContext) -> None:
        super().show(proc, snap, ctx)
        self.error = ctx.link_error
        self.job_path = ctx.job_path
        self.title = proc.step.title if proc is not None else ""
        self.runs = len(proc.runs) if proc is not None else None
        step = proc.step if proc is not None else None
        self.interrupted = step.run_label if (isinstance(step, Measure) and
                                              step.phase is RunPhase.INTERRUPTED) else ""

    def lines(self) -> list[str]:
        lines = []
        n = self.runs
        if n is not None:
            lines.append(f"[b]{self.title}[/b]   [dim](runs so far: {n})[/dim]")
        lines.append(f"[b red]LINK LOST[/]: {self.error}")
        if n is not None:
            lines.append(f"Job saved up to the last complete run ({n} runs): {self.job_path}")
            if self.interrupted:
                lines.append(f"Run {n + 1} ({self.interrupted}) is incomplete: nothing of it "
                             "was kept; it starts over after reconnecting.")
        lines.append(texts.LINK_CHECK)
        return lines


class HandsOnPanel(ProcedurePanel):
    """A hands-on step: the work, the standstill evidence, the gate's checklist."""

    phase: reactive[HandsOnPhase] = reactive(HandsOnPhase.LOCKOUT)
    work: reactive[tuple[str, ...]] = reactive(())
    items: reactive[tuple[str, ...]] = reactive(())
    ticked: reactive[frozenset[int]] = reactive(frozenset())
    #: the standstill evidence in words: as shown (whole seconds, rounded levels), so the
    #: panel repaints when the words change, not with every new sample
    standstill: reactive[tuple[str, ...]] = reactive(())
    #: a second start as found is offered (before the first trial mass goes on)
    offer_second_start: reactive[bool] = reactive(False)
    fittable: reactive[bool] = reactive(False)  # f enters what was fitted (issue #17)
    #: after a runaway alarm on a trial run: why a smaller trial goes on; on the check run
    #: of the model's correction: why its masses come off ("" otherwise)
    shrunk: reactive[str] = reactive("")

    def show(self, proc: Procedure | None, snap: Snapshot, ctx: GuideContext) -> None:
        super().show(proc, snap, ctx)
        assert proc is not None and isinstance(proc.step, HandsOn)
        self.shrunk = (texts.shrunk_trial_line(proc.shrunk_trial, self.units)
                       if proc.shrunk_trial is not None else
                       texts.model_shook_line(proc.model_shook)
                       if proc.model_shook is not None else "")
        step = proc.step
        self.phase = step.phase
        changes = step.changes
        u = self.units
        pictured = pictures_for(changes, proc.planes_used, ctx.profile.rotation)
        if proc.sizing_trial:  # the size shown is the one used: none till it is in
            self.work = (texts.TRIAL_SIZING,)
        elif proc.checking_resumed_rotor:  # what the job says is on the rotor, item by item
            checks = tuple("  " + describe_change(c, proc, ctx.engine, u) for c in changes)
            self.work = (texts.RESUMED_CHECK, *(checks or ("  nothing added to the rotor",)))
        elif any(c.mass is not None for c in changes) and fits_legend(pictured):
            # the pictures list the parts
            self.work = (*brief_work(changes, proc, ctx.engine, u), *fitted_lines(changes, u))
        else:
            self.work = tuple("  " + describe_change(c, proc, ctx.engine, u) for c in changes)
        self.fittable = bool(proc.fittable())
        self.items = proc.checklist()
        self.ticked = frozenset(proc.ticked)
        self.standstill = self.evidence_words(snap.evidence)
        # offered once the rotor is at proven standstill (a second start needs a stop)
        self.offer_second_start = (proc.offers_second_start and snap.evidence is not None
                                   and snap.evidence.proven)

    def evidence_words(self, ev: StandstillEvidence | None) -> tuple[str, ...]:
        """What proved standstill, or why it is not proven (and to stop the machine)."""
        return standstill_lines(ev, self.demo)

    def body(self) -> list[str]:
        lines = [*((self.shrunk,) if self.shrunk else ()),
                 *(self.work or (texts.LOOK_OVER,)), *self.standstill]
        if self.offer_second_start:
            lines.append(texts.N_SECOND_START)
        lockout = self.phase is HandsOnPhase.LOCKOUT
        lines.append(texts.TICK_BEFORE if lockout else texts.TICK_AFTER)
        for i, item in enumerate(self.items):
            box = "\\[x]" if i in self.ticked else "\\[ ]"
            lines.append(f"  {box} {item}")
        lines.append(texts.MAKER_NOTE)
        lines.append((texts.ENTER_LOCKED_OUT if lockout else texts.ENTER_DONE)
                     + (texts.FIT_KEYS if self.fittable else ""))
        return lines


def standstill_lines(ev: StandstillEvidence | None, demo: bool) -> tuple[str, ...]:
    """What proved standstill, or why it is not proven (and to stop the machine)."""
    if ev is None:
        return ()
    if ev.proven:
        return (f"[green]Standstill proven: {standstill_basis_words(ev)}.[/green]",)
    style = ("yellow" if ev.state in (StandstillState.CHECKING, StandstillState.TAP_RINGING)
             else "b red")
    lines = [f"[{style}]Not at proven standstill: {standstill_refusal(ev)}.[/]"]
    if ev.state in (StandstillState.TURNING, StandstillState.TACH_FAULT) or (
            ev.tach_absent and ev.moving_pickups):
        how = texts.STOP_DEMO if demo else texts.STOP_MACHINE
        lines.append(f"[b red]Stop: {how}.[/]")
    return tuple(lines)


@dataclass(frozen=True)
class ForcePlan:
    """What a run's confirmation shows: each mass's force at the speed forces are shown at."""

    planned_rpm: float
    max_rpm: float
    at_rpm: float
    forces: tuple[tuple[PlacedMass, float], ...]


class RunPanel(ProcedurePanel):
    """A run: the forces to confirm, the live readings while measuring, or the alarm."""

    phase: reactive[RunPhase] = reactive(RunPhase.ARMING)
    plan: reactive[ForcePlan | None] = reactive(None)
    alarm: reactive[str] = reactive("")
    speed_rpm: reactive[float] = reactive(0.0)
    revolutions: reactive[int] = reactive(0)
    readings: reactive[tuple[tuple[str, Reading | None], ...]] = reactive(())
    tach_silent_s: reactive[float | None] = reactive(None)  # None: the tach is seen
    no_tach: reactive[bool] = reactive(False)  # amplitude only: speed and 1x from the spectrum
    no_line: reactive[str] = reactive("")  # no tach, and no steady line in the speed band
    #: no tach, the 1x lost in the noise: the order of the line the speed comes from (1: 1x)
    speed_order: reactive[int] = reactive(1)
    #: amplitude only, yet a tach is seen: the 1x is read locked to it (tach_reads_1x)
    tach_reads: reactive[bool] = reactive(False)
    tach_faults: reactive[tuple[str, ...]] = reactive(())
    not_ready: reactive[str] = reactive("")
    #: pickups whose 1x the hum line next to it hides: True while the meter waits it out,
    #: False when it cannot (trueturn.dsp.findings: order_on_mains)
    on_hum: reactive[tuple[tuple[str, bool], ...]] = reactive(())
    fittable: reactive[bool] = reactive(False)  # f: the masses just put on, as fitted (#17)
    #: why the run averages longer than it wanted (procedure.guide.Procedure.widen_to)
    widened: reactive[Widened | None] = reactive(None)

    def show(self, proc: Procedure | None, snap: Snapshot, ctx: GuideContext) -> None:
        super().show(proc, snap, ctx)
        assert proc is not None and isinstance(proc.step, Measure)
        self.phase = proc.step.phase
        if self.phase is RunPhase.STOPPED:
            self.alarm = proc.alarm.detail if proc.alarm else "alarm"
        elif self.phase is RunPhase.ARMING:
            self.plan = ForcePlan(proc.setup.speed_rpm, proc.setup.max_speed_rpm,
                                  proc.force_speed_rpm, tuple(proc.forces()))
            self.fittable = bool(proc.fittable())
        else:
            meter = snap.meter
            sensors = proc.setup.sensors
            self.speed_rpm = meter.speed_rpm or 0.0
            hum = [f for f in meter.findings
                   if f.code is Code.ORDER_ON_MAINS and f.blocking and f.pickup in sensors]
            self.on_hum = tuple((str(f.pickup), "revolutions_held" in f.details) for f in hum)
            # a 1x next to the hum line is averaged over one beat (dsp.meter)
            self.widened = proc.widened
            self.revolutions = max([proc.revolutions_target] + [
                int(f.details["revolutions_needed"]) for f in hum
                if "revolutions_held" in f.details])
            self.readings = tuple((name, meter.readings.get(name)) for name in sensors)
            self.no_tach = proc.setup.mode is Mode.AMPLITUDE_ONLY
            self.tach_silent_s = None if ctx.tach_live or self.no_tach else snap.quiet_s
            self.tach_faults = tuple(meter.tach_faults[:2])
            self.no_line = next((describe(f) for f in meter.findings
                                 if f.code is Code.NO_SPEED_LINE), "")
            self.speed_order = next((int(f.details["order"]) for f in meter.findings
                                     if f.code is Code.SPEED_FROM_ORDER), 1)
            self.tach_reads = any(f.code is Code.TACH_READS_1X for f in meter.findings)
            waiting = [r for _, r in self.readings if r is not None and not proc.settled(r)]
            own = [w for r in waiting for w in meter.pickup_warnings(r.sensor)]
            # a 1x next to a mains line says first what the reading waits for, on one line
            # (the pickups' lines above say which are settling)
            mains = [describe(dataclasses.replace(f, pickup=None), brief=True)
                     for r in waiting for f in meter.findings
                     if f.pickup == r.sensor and f.code is Code.ORDER_ON_MAINS and f.blocking]
            self.not_ready = ((mains or own or [texts.NOT_READY_WHY])[0]) if waiting else ""

    def body(self) -> list[str]:
        if self.phase is RunPhase.STOPPED:
            return [f"[b red]STOPPED: {self.alarm}[/]", texts.RUN_NOTHING_KEPT,
                    texts.RUN_SWITCH_OFF_DEMO if self.demo else texts.RUN_SWITCH_OFF,
                    texts.ENTER_ALARM_SEEN]
        if self.phase is RunPhase.ARMING:
            return self._arming()
        return self._measuring()

    def _arming(self) -> list[str]:
        plan = self.plan
        if plan is None:
            return []
        why = "" if plan.at_rpm <= plan.planned_rpm else \
            f" (measured {plan.at_rpm:.0f} rpm last run, above the planned speed)"
        u = self.units
        lines = [f"Planned speed {u.speed(plan.planned_rpm)} (max {plan.max_rpm:.0f}). Forces "
                 f"at {u.speed(plan.at_rpm)}{why}. Masses on the rotor:"]
        for m, f in plan.forces:
            kind = "remove" if m.removal else m.kind.value
            lines.append(f"  {kind} {u.mass(abs(m.mass_g))} on {m.plane} at "
                         f"{m.angle_deg:.0f}°: [b]{u.force(f)}[/b] outward")
        if not plan.forces:
            lines.append(texts.NO_MASS_ADDED)
        return lines + [texts.GUARDS_ON,
                        texts.ENTER_FORCES + (texts.ENTER_FORCES_DEMO if self.demo else ""),
                        texts.A_NOT_NOW + (texts.FIT_KEYS if self.fittable else "")]

    def _measuring(self) -> list[str]:
        if self.no_tach and self.tach_reads:
            lines = [texts.tach_reads_amplitude_only(self.speed_rpm)]
        elif self.no_tach:
            lines = [texts.no_tach_measuring(self.speed_rpm, self.speed_order)]
        else:
            lines = [f"Measuring at {self.units.speed(self.speed_rpm)}; averaging "
                     f"{self.revolutions} steady revolutions"
                     + (f" ({texts.WIDENED_WHY[self.widened]})." if self.widened else ".")]
        for name, r in self.readings:
            if r is None:
                lines.append(f"  {name}: waiting")
                continue
            if r.no_tach:
                st = "[green]steady[/]" if r.steady else "[yellow]settling[/]"
                amplitude, unit = self.units.vibration_value(r.amplitude, r.unit)
                radius = (self.units.vibration_value(r.confidence_radius, r.unit)[0]
                          if r.confidence_radius is not None else None)
                pm = f" ±{radius:.3f}" if radius is not None else ""  # none from 1 segment
                lines.append(f"  {name}: 1x {amplitude:.3f}{pm} {unit} (95 %), {st}")
                continue
            ph = f"{r.phase_deg:.0f}°" if r.phase_deg is not None else "—"
            hum = dict(self.on_hum)
            if name in hum and not r.steady:  # its circle cannot hold the hum: none shown
                st = ("[yellow]hum not separated yet[/]" if hum[name] else
                      "[red]hum not separable[/]")
                lines.append(f"  {name}: {self.units.vibration(r.amplitude, r.unit)} at {ph}, "
                             f"{r.revolutions} rev, {st}")
                continue
            st = "[green]steady[/]" if r.steady else "[yellow]settling[/]"
            lines.append(f"  {name}: {self.units.vibration(r.amplitude, r.unit)} at {ph} "
                         f"±{r.confidence_deg:.0f}°, {r.revolutions} rev, {st}")
        if self.tach_silent_s is not None:
            lines.append(f"[b red]No tach edge for {self.tach_silent_s:.1f} s (spinning up? "
                         "tach not seeing its mark?): nothing is kept meanwhile.[/]")
        lines += [f"[yellow]Tach: {f}[/]" for f in self.tach_faults]
        if self.no_tach and self.no_line:
            lines.append(f"[yellow]{self.no_line}[/]")
        if self.not_ready:
            lines.append(f"[yellow]Not ready: {self.not_ready}[/]")
        lines.append(texts.A_STOP_RUN)
        return lines


def describe_part(p: PlacedMass, shown: Shown = texts.METRIC_SHOWN) -> str:
    """One correction part as a line (position, angle, mass, add or remove)."""
    where = position_text(number_of(p.position), p.angle_deg) if p.position is not None \
        else f"{p.angle_deg:.0f}°"
    verb = "remove" if p.removal else "add"
    return f"{p.plane}: {verb} {shown.mass(abs(p.mass_g))} at {where}"


class CorrectionPanel(ProcedurePanel):
    """The correction and the parts to place, or why no correction can be given."""

    problem: reactive[str] = reactive("")
    redo: reactive[TooSmallTrial | None] = reactive(None)
    sweep_lost: reactive[bool] = reactive(False)  # model-first: measure as found again
    method: reactive[str] = reactive("")
    corrections: reactive[tuple[Correction, ...]] = reactive(())
    parts: reactive[tuple[PlacedMass, ...]] = reactive(())
    warnings: reactive[tuple[str, ...]] = reactive(())
    off_speed: reactive[tuple[OffSpeed, ...]] = reactive(())
    speed_normalised: reactive[tuple[OffSpeed, ...]] = reactive(())
    offer_again: reactive[bool] = reactive(False)  # e: run the off-speed run again first
    kit: reactive[tuple[KitFit, ...]] = reactive(())  # made from the person's parts
    removal: reactive[bool] = reactive(False)
    removal_allowed: reactive[bool] = reactive(False)
    #: model-first: waiting for the coast-down; the model's 95 % +/- per plane (mass g,
    #: angle deg) and the share of the 1x it leaves, shown with its first correction
    waiting_sweep: reactive[bool] = reactive(False)
    model_spread: reactive[tuple[tuple[float, float], ...]] = reactive(())
    model_left: reactive[float | None] = reactive(None)
    model_tapped: reactive[bool] = reactive(False)  # a tap test's modes informed the model

    def show(self, proc: Procedure | None, snap: Snapshot, ctx: GuideContext) -> None:
        super().show(proc, snap, ctx)
        assert proc is not None and isinstance(proc.step, ShowCorrection)
        self.waiting_sweep = proc.awaiting_sweep
        model = proc.model
        first = model is not None and model.trusted and not proc.trims_done
        self.model_spread = (tuple(zip(model.mass_95_g, model.angle_95_deg, strict=True))
                             if first and model is not None else ())
        self.model_left = model.residual_fraction_95 if first and model is not None else None
        self.model_tapped = first and model is not None and model.tapped
        self.problem = proc.problem
        self.sweep_lost = proc.sweep_lost
        small = proc.too_small_trial
        self.redo = small if small is not None and small.suggested_g is not None else None
        sol = proc.solution
        if not proc.problem and sol is not None:
            # the solution's pieces, not the solution: its coefficients are opaque arrays
            self.method = sol.method
            self.corrections = sol.corrections
            self.parts = sol.parts
            self.warnings = sol.warnings[:2]
            self.off_speed = sol.off_speed
            self.speed_normalised = sol.speed_normalised
            self.kit = sol.kit
            self.offer_again = bool(sol.off_speed) and not proc.trims_done
        self.removal = proc.removal
        self.removal_allowed = proc.removal_allowed

    def body(self) -> list[str]:
        if self.problem:
            lines = [f"[b red]No correction from these runs:[/] {self.problem}"]
            small = self.redo
            if small is not None and small.suggested_g is not None:
                u = self.units
                lines.append(f"[b]Enter[/b]: redo the trial on {small.plane} with "
                             f"{u.mass(ceil_to_scale_g(small.suggested_g, u.units.mass))} instead of "
                             f"{u.mass(small.trial_g)} (the other runs are kept)")
            elif self.sweep_lost:
                lines.append(texts.ENTER_MEASURE_AGAIN)
            else:
                lines += [texts.CHECK_THE_RIG, texts.ENTER_MEASURE_AGAIN]
            return lines
        if self.waiting_sweep:
            return [texts.MODEL_WAITING]
        spread = self.model_spread
        trusted = texts.MODEL_TRUSTED_TAPPED if self.model_tapped else texts.MODEL_TRUSTED
        lines = [trusted] if spread else [f"Method: {self.method}"]
        for j, c in enumerate(self.corrections):
            # removal: the same mass taken out opposite the add angle
            verb, at = (("remove", wrap_deg(c.angle_deg + 180.0)) if self.removal
                        else ("add", c.angle_deg))
            sure = (f" ± {self.units.mass(spread[j][0])}, ± {spread[j][1]:.0f}° (95 %)"
                    if j < len(spread) else "")
            lines.append(f"  {c.plane}: {verb} [b]{self.units.mass(c.mass_g)}[/b] at "
                         f"{at:.0f}°{sure}")
        if spread and self.model_left is not None:
            lines.append(f"  It leaves at most {100 * self.model_left:.0f} % of the 1x in "
                         "95 % of the model's draws.")
            if self.model_left > 1.0:
                lines.append(texts.MODEL_MAY_RAISE)
        lines.append(texts.PARTS_TO_PLACE)
        lines += ["  " + describe_part(p, self.units) for p in self.parts]
        for k in self.kit:
            style = "green" if k.residual_gmm <= k.allowed_gmm else "yellow"
            proven = "" if k.proven_best else " (search stopped: not proven best)"
            head = ("no part of your kit is left, which" if not k.parts_in_drawer
                    else "best with your parts, it")
            lines.append(f"[{style}]{k.plane}: {head} leaves "
                         f"{self.units.unbalance(k.residual_gmm)}, allowed "
                         f"{self.units.unbalance(k.allowed_gmm)}{proven}[/]")
        lines += [f"[yellow]{w}[/]" for w in self.warnings]
        for off in self.off_speed:
            way = "slow" if off.deviation < 0 else "fast"
            lines.append(f"[yellow]Run '{off.label}' was {100 * abs(off.deviation):.1f} % "
                         f"{way}: this correction might cut the 1x by only "
                         f"{100 * max(off.worst_cut, 0.0):.0f} %.[/]")
        for off in self.speed_normalised:
            way = "slow" if off.deviation < 0 else "fast"
            lines.append(f"Run '{off.label}' {100 * abs(off.deviation):.1f} % {way}: "
                         "compared at one speed (coast-down slope).")
        if self.offer_again:
            lines.append(texts.E_RUN_AGAIN)
        if self.removal_allowed:
            lines.append((texts.R_ADD_INSTEAD if self.removal else texts.R_REMOVE_INSTEAD)
                         + texts.ENTER_PLACE)
        else:
            lines.append(texts.ENTER_PLACE_NO_REMOVAL)
        return lines


class VerdictPanel(ProcedurePanel):
    """The verdict against the grade (ISO 21940-11), then where the job was saved."""

    verdict: reactive[Verdict | None] = reactive(None)
    grade: reactive[float] = reactive(0.0)
    service_rpm: reactive[float] = reactive(0.0)
    turning: reactive[bool] = reactive(False)
    finished: reactive[bool] = reactive(False)
    job_path: reactive[Path | None] = reactive(None)
    report_path: reactive[Path | None] = reactive(None)

    def show(self, proc: Procedure | None, snap: Snapshot, ctx: GuideContext) -> None:
        super().show(proc, snap, ctx)
        assert proc is not None and isinstance(proc.step, ShowVerdict)
        self.verdict = proc.verdict
        self.grade = proc.setup.grade_mm_per_s
        self.service_rpm = proc.setup.speed_rpm
        ev = snap.evidence
        self.turning = ev is not None and ev.state is StandstillState.TURNING
        self.finished = proc.finished
        self.job_path = ctx.job_path
        self.report_path = ctx.report_path

    def body(self) -> list[str]:
        v = self.verdict
        if v is None:
            return []
        word = "[b green]PASS[/]" if v.passed else "[b red]NOT YET[/]"
        where = "at the bearings" if v.at_bearings else "in the correction planes"
        u = self.units
        lines = [f"{word}: ISO 21940-11, grade G {self.grade:g} at the maximum service speed "
                 f"{u.speed(v.speed_rpm or self.service_rpm)}, judged {where}, {self.runs} runs"]
        uppers = v.residual_upper_gmm or (None,) * len(v.residual_gmm)
        for (label, res, per, _), upper in zip(v.rows(), uppers, strict=True):
            bound = f" (95 % up to {u.unbalance(upper)})" if upper is not None else ""
            lines.append(f"  {label}: residual {u.unbalance(res)}{bound}, permissible "
                         f"{u.unbalance(per)}")
        lines.append(verdict_note(v, self.service_rpm, u))
        for f in v.flags:
            style = "b red" if f in WITHHOLDING_FLAGS else "yellow"
            lines.append(f"[{style}]{VERDICT_FLAG_WORDS[f]}[/]")
        if v.worse_pickups:
            lines.append(f"[b red]Worse than as found at {', '.join(v.worse_pickups)}.[/]")
        if self.turning:
            lines.append(texts.SWITCH_OFF_VERDICT +
                         (" (x for the demo motor)." if self.demo else "."))
        if self.finished:
            lines.append(f"Saved: {self.job_path}")
            if self.report_path:
                lines.append(f"Report: {self.report_path}")
        else:
            lines.append(texts.ENTER_CLOSE_JOB)
        return lines


class DoubtPanel(ProcedurePanel):
    """After the as-found run, when balancing may not help: stop the job here or go on (the
    failing rules are in the machine's condition below)."""

    offer_second_start: reactive[bool] = reactive(False)

    def show(self, proc: Procedure | None, snap: Snapshot, ctx: GuideContext) -> None:
        super().show(proc, snap, ctx)
        assert proc is not None and isinstance(proc.step, ShowDoubt)
        # offered once the rotor is at proven standstill (a second start needs a stop)
        self.offer_second_start = (proc.offers_second_start and snap.evidence is not None
                                   and snap.evidence.proven)

    def body(self) -> list[str]:
        lines = list(texts.DOUBT_BODY)
        if self.offer_second_start:
            lines.append(texts.N_SECOND_START)
        return lines


class StoppedPanel(ProcedurePanel):
    """The person stopped the job before a verdict: why, and where it was saved."""

    because: reactive[str] = reactive("")
    turning: reactive[bool] = reactive(False)
    job_path: reactive[Path | None] = reactive(None)
    report_path: reactive[Path | None] = reactive(None)

    def show(self, proc: Procedure | None, snap: Snapshot, ctx: GuideContext) -> None:
        super().show(proc, snap, ctx)
        assert proc is not None and isinstance(proc.step, Stopped)
        stop = proc.stopped
        self.because = describe(Finding(Code.BALANCING_MAY_NOT_HELP, details={
            "because": list(stop.because)})) if stop is not None else ""
        ev = snap.evidence
        self.turning = ev is not None and ev.state is StandstillState.TURNING
        self.job_path = ctx.job_path
        self.report_path = ctx.report_path

    def body(self) -> list[str]:
        runs = "the as-found run" if self.runs == 1 else f"{self.runs} runs"
        lines = [f"Stopped after {runs} by your choice: {self.because}."]
        if self.turning:
            lines.append(texts.SWITCH_OFF_VERDICT +
                         (" (x for the demo motor)." if self.demo else "."))
        lines.append(f"Saved: {self.job_path}")
        if self.report_path:
            lines.append(f"Report: {self.report_path}")
        lines.append(texts.STOPPED_NEXT)
        return lines


class TapPanel(ProcedurePanel):
    """The optional tap test (model-first on a stiff mount): what to do and the cautions,
    the standstill evidence and the gate's checklist, then the recording's status; a
    recording refused says why; the modes found and the model's answer follow the step."""

    phase: reactive[TapPhase] = reactive(TapPhase.OFFERED)
    refused: reactive[str] = reactive("")
    items: reactive[tuple[str, ...]] = reactive(())
    ticked: reactive[frozenset[int]] = reactive(frozenset())
    standstill: reactive[tuple[str, ...]] = reactive(())
    recording: reactive[str] = reactive("")  # the recording's status (from the app)
    #: the model is trusted without the tap: what its correction may leave, % of the 1x
    #: (the tap is offered to narrow it; skipping keeps the correction); None: not trusted
    trusted_left_pct: reactive[float | None] = reactive(None)

    def show(self, proc: Procedure | None, snap: Snapshot, ctx: GuideContext) -> None:
        super().show(proc, snap, ctx)
        assert proc is not None and isinstance(proc.step, TapTest)
        self.phase = proc.step.phase
        why = proc.step.refused
        self.refused = texts.TAP_REFUSED[why] if why is not None else ""
        self.items = proc.checklist()
        self.ticked = frozenset(proc.ticked)
        ev = snap.evidence
        # while tapping its ringing is expected: only a turning rotor is said (it refuses
        # the recording)
        turning = ev is not None and ev.state in (StandstillState.TURNING,
                                                  StandstillState.TACH_FAULT)
        self.standstill = standstill_lines(ev, self.demo) \
            if self.phase is not TapPhase.TAPPING or turning else ()
        self.recording = ctx.tap_status
        model = proc.model
        self.trusted_left_pct = (100.0 * model.residual_fraction_95
                                 if model is not None and model.trusted
                                 and model.residual_fraction_95 is not None else None)

    def body(self) -> list[str]:
        skip = texts.TAP_SKIP_TO[self.trusted_left_pct is not None]
        if self.phase is TapPhase.TAPPING:
            return [texts.TAP_TAPPING, *([texts.TAP_DEMO] if self.demo else []),
                    *([self.recording] if self.recording else []), *self.standstill,
                    texts.MAKER_NOTE,
                    texts.ENTER_TAP_DONE + skip]
        if self.refused:
            lines = [f"[b red]Tap test not used[/]: {self.refused}."]
        elif self.trusted_left_pct is not None:
            lines = [line.format(left=self.trusted_left_pct)
                     for line in texts.TAP_OFFER_TRUSTED]
        else:
            lines = list(texts.TAP_OFFER)
        lines += [*self.standstill, texts.TAP_TICK]
        for i, item in enumerate(self.items):
            box = "\\[x]" if i in self.ticked else "\\[ ]"
            lines.append(f"  {box} {item}")
        lines += [texts.MAKER_NOTE,
                  (texts.ENTER_TAP_AGAIN if self.refused else texts.ENTER_TAP) + skip]
        return lines


def panel_for(step: Step) -> str:
    """The id of the panel that shows a step, by the step's type (the tagged union)."""
    match step:
        case HandsOn():
            return "hands-on-panel"
        case Measure():
            return "run-panel"
        case ShowCorrection():
            return "correction-panel"
        case ShowVerdict():
            return "verdict-panel"
        case ShowDoubt():
            return "doubt-panel"
        case TapTest():
            return "tap-panel"
        case Stopped():
            return "stopped-panel"
    raise TypeError(f"no panel for {type(step).__name__}")


class MessageLine(MarkupText):
    """The guide's message line; an alarm is shown in its place, in red, until acknowledged."""

    alarm: reactive[bool] = reactive(False)

    def watch_alarm(self, alarm: bool) -> None:
        self.set_class(alarm, "alarm")


class GuideView(Vertical):
    """The guide: the placement pictures at a hands-on step, the current step's panel (it
    scrolls when it is longer than the screen), the run's progress bar, the message line."""

    DEFAULT_CSS = "GuideView #step-panels { height: 1fr; overflow-y: auto; }"

    #: the id of the panel shown
    panel: reactive[str] = reactive("setup-panel", init=False)
    #: the run's progress 0..1 while measuring (None: no bar)
    progress: reactive[float | None] = reactive(None, init=False)

    _drawn: tuple[str, tuple[int, ...]] = ("", ())  # the shown panel's lines, by length

    def compose(self) -> ComposeResult:
        yield PlacementView(id="placement")
        with ContentSwitcher(initial="setup-panel", id="step-panels"):
            yield SetupPanel(id="setup-panel")
            yield HandsOnPanel(id="hands-on-panel")
            yield RunPanel(id="run-panel")
            yield CorrectionPanel(id="correction-panel")
            yield VerdictPanel(id="verdict-panel")
            yield DoubtPanel(id="doubt-panel")
            yield TapPanel(id="tap-panel")
            yield StoppedPanel(id="stopped-panel")
            yield LinkLostPanel(id="link-panel")
        yield ProgressBar(total=100, show_eta=False, id="progress")
        yield MessageLine(id="guide-msg")

    def on_mount(self) -> None:
        self.query_one("#setup-panel", StepPanel).shown = True

    def watch_panel(self, old: str, new: str) -> None:
        self.query_one("#step-panels", ContentSwitcher).current = new
        self.query_one(f"#{old}", StepPanel).shown = False
        self.query_one(f"#{new}", StepPanel).shown = True

    def scroll_step(self, pages: float) -> None:
        """Scroll the step's panel by ``pages`` screenfuls (negative: up)."""
        panels = self.query_one("#step-panels", ContentSwitcher)
        panels.scroll_relative(y=pages * max(1, panels.size.height - 1), animate=False)

    def watch_progress(self, done: float | None) -> None:
        bar = self.query_one("#progress", ProgressBar)
        bar.set_class(done is not None, "shown")
        if done is not None:
            bar.update(progress=100 * done)

    def show(self, proc: Procedure | None, snap: Snapshot, ctx: GuideContext) -> None:
        """Show the procedure's current step (or the set-up, or the lost link)."""
        if ctx.link_error:
            self.panel = "link-panel"
        elif proc is None:
            self.panel = "setup-panel"
        else:
            self.panel = panel_for(proc.step)
        panel = self.query_one(f"#{self.panel}", StepPanel)
        panel.show(proc, snap, ctx)
        # A panel is as tall as its text (height auto): one whose lines changed in number
        # or length is laid out again, or it keeps the height of its first, empty, drawing
        # (the set-up showed one line of its list). Digits that change in place do not.
        drawn = (self.panel, tuple(len(line) for line in panel.lines()) if panel.shown else ())
        if drawn != self._drawn:
            self._drawn = drawn
            panel.refresh(layout=True)
        hands_on = proc.step if proc is not None and not ctx.link_error else None
        self.query_one("#placement", PlacementView).show(
            pictures_for(hands_on.changes, proc.planes_used, ctx.profile.rotation)
            if isinstance(hands_on, HandsOn) and proc is not None
            and not proc.sizing_trial else (),   # no size drawn that is not the one used
            ctx.profile.units.choice())
        msg = self.query_one("#guide-msg", MessageLine)
        msg.alarm = bool(ctx.alarm)
        msg.text = ctx.alarm or ctx.message
        step = proc.step if proc is not None else None
        if isinstance(step, Measure) and step.phase is RunPhase.RUNNING:
            assert proc is not None
            done = proc.progress(snap.meter.readings)
            if not proc.ready(snap.meter.readings):
                done = min(done, 0.95)  # full only when every pickup has settled
            for f in snap.meter.findings:  # a 1x waiting out a mains line: its own count
                held, needed = f.details.get("revolutions_held"), \
                    f.details.get("revolutions_needed")
                if f.code is Code.ORDER_ON_MAINS and held is not None and needed:
                    done = min(done, 0.95 * held / needed)
            self.progress = done
        else:
            self.progress = None
