"""The trueturn Textual app: connect, live meter, spectrum, and the guided procedure.

Screens: :class:`ConnectScreen` (board identity, refusal of a mismatched firmware),
:class:`BenchScreen` (three views: meter, spectrum, guide; a status strip always on top),
:class:`TextPage` (keys, cautions). The guide shows one widget per step kind
(:mod:`trueturn.ui.steps`), the other views are in :mod:`trueturn.ui.views`. All blocking I/O runs in thread workers that pump the message
source (a :class:`~trueturn.ui.session.LinkSession`) and tell the app what happened with
messages (:class:`LinkLost`, :class:`Reconnected`...); the screen polls a snapshot ten
times a second. The message source and the host clock are given to the app
(``TrueturnApp(config, clock=..., source=...)``), the real ones by default.
"""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from textual import on, work
from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.content import Content
from textual.message import Message
from textual.screen import Screen
from textual.widgets import ContentSwitcher, Footer, Static
from textual.worker import get_current_worker

from trueturn.dsp.analysis import judge_second_start
from trueturn.dsp.bump import analyze_bump_messages
from trueturn.dsp.coast import SweepOutcome, SweepRecorder
from trueturn.dsp.findings import Finding, describe
from trueturn.dsp.severity import Severity
from trueturn.dsp.tachless import speed_band_hz
from trueturn.dsp.unbalance import failing_rules, same_speed
from trueturn.errors import UserError
from trueturn.jobs.profiles import MachineProfile
from trueturn.jobs.records import CoefficientSet
from trueturn.link.session import GreetPhase
from trueturn.model import Run, RunKind
from trueturn.procedure.engine import BalanceEngine, sweep_evidence, tap_outcome
from trueturn.procedure.guide import (
    GateRefused,
    HandsOn,
    HandsOnPhase,
    MassChange,
    Measure,
    Mode,
    ModelAnswer,
    Procedure,
    RunPhase,
    SafetyEvent,
    ShowCorrection,
    ShowDoubt,
    ShowVerdict,
    TapOutcome,
    TapPhase,
    TapTest,
)
from trueturn.ui import texts
from trueturn.ui.fitted import FitEntry, FittedForm
from trueturn.ui.jobfile import JobKeeper
from trueturn.ui.machine import setup_from_profile
from trueturn.ui.machines import MachinePicker
from trueturn.ui.meter import METER_WINDOW_REVS
from trueturn.ui.placement import marking_markup
from trueturn.ui.resume import (
    OpenJob,
    as_found_condition,
    find_open_job,
    job_coast_down_evidence,
    job_speed_slopes,
    job_support_resonances,
    refuse_changed_profile,
    restore_procedure,
    rotor_lines,
)
from trueturn.ui.rig import DemoRig
from trueturn.ui.savefolder import SaveFolderPrompt
from trueturn.ui.session import (
    Clock,
    LinkProblem,
    LinkSession,
    SessionFactory,
    Snapshot,
    TapRecording,
)
from trueturn.ui.steps import GuideContext, GuideView
from trueturn.ui.sweepview import ShownSweep, SweepView
from trueturn.ui.texts import CAUTIONS, keys_markup
from trueturn.ui.views import MeterView, SpectrumView, StatusStrip

#: What the screen says while the port opens (trueturn.link.session.BoardSession.greet).
GREET_PHASE_TEXT = {
    GreetPhase.WAITING_FOR_START: "waiting for the board to start… (opening the port resets "
                                  "a Uno or Nano; its bootloader listens for up to 2 s)",
    GreetPhase.ASKING: "asking the board who it is…",
}

TICK_S = 0.1
TACH_SILENT_S = 2.0  # no tach edge for this long while data arrive: the tach is not seen


@dataclass(frozen=True)
class PreparedModel:
    """The model-first answer to a coast-down, computed in the sweep's thread: the
    sweep's evidence and the engine's answer to it."""

    evidence: object
    answer: ModelAnswer


@dataclass
class AppConfig:
    """How the app was started (from ``trueturn demo`` or ``trueturn ui``)."""

    url: str
    profile: MachineProfile
    demo: bool = False
    workspace: Path | None = None
    job_file: Path | None = None
    mode: Mode | None = None
    resume_job: Path | None = None  # an open job file to continue (``ui --job FILE``)
    start_note: str = ""  # said once the bench shows (e.g. the job's own profile is used)
    standstill_s: float = 3.0
    revolutions_per_run: int = 30
    rate_hz: int = 2000


# ---- what the link workers tell the screens (posted from their threads) -------------------
class GreetProgress(Message, bubble=False):
    """The port is open and the board is being greeted (``phase``)."""

    def __init__(self, phase: GreetPhase) -> None:
        super().__init__()
        self.phase = phase


class BoardAnswered(Message, bubble=False):
    """The board told who it is (the session holds the identity)."""


class LinkRefused(Message, bubble=False):
    """The port cannot be used (``text``: why, in one line)."""

    def __init__(self, text: str) -> None:
        super().__init__()
        self.text = text


class LinkLost(LinkRefused):
    """The port failed while streaming."""


class ReconnectFailed(LinkRefused):
    """Reopening the port failed, or another firmware answered."""


class Reconnected(Message, bubble=False):
    """The port is open again and streaming; ``old_rig``: the simulated rig before it."""

    def __init__(self, old_rig: object) -> None:
        super().__init__()
        self.old_rig = old_rig


class TextPage(Screen):
    """A full-screen page of text (keys, cautions); Escape goes back."""

    BINDINGS = [Binding("escape", "app.pop_screen", "Back"), Binding("q", "app.pop_screen", "Back")]

    def __init__(self, markup: str, page_id: str) -> None:
        super().__init__(id=page_id)
        self.markup = markup

    def compose(self) -> ComposeResult:
        yield Static(self.markup, classes="page")
        yield Footer()


class ConnectScreen(Screen):
    """Open the port, show who answered, refuse a mismatched firmware."""

    BINDINGS = [Binding("enter", "go", "Continue"), Binding("q", "app.quit", "Quit"),
                Binding("c", "app.cautions", "Cautions"), Binding("r", "retry", "Try again")]

    def compose(self) -> ComposeResult:
        yield Static("", id="connect-body")
        yield Footer()

    def on_mount(self) -> None:
        app = self.trueturn
        self.ok = False
        self.refused = False  # the port could not be used: r tries again
        self.query_one("#connect-body", Static).update(f"Opening {app.config.url} …")
        self.open_link()

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        """``r`` (try again) is offered only after the port could not be used."""
        if action == "retry":
            return getattr(self, "refused", False)
        return True

    def action_retry(self) -> None:
        """r after a refusal: open the port again (a board plugged in late, a port freed)."""
        if not self.refused:
            return
        self.refused = False
        self.refresh_bindings()
        self.query_one("#connect-body", Static).update(Content.assemble(
            f"Opening {self.trueturn.config.url} … ", texts.CONNECT_TRYING))
        self.open_link()

    @property
    def trueturn(self) -> TrueturnApp:
        assert isinstance(self.app, TrueturnApp)
        return self.app

    @work(thread=True, exclusive=True, group="link-open")
    def open_link(self) -> None:
        try:
            self.trueturn.session.open(
                on_phase=lambda phase: self.post_message(GreetProgress(phase)))
        except LinkProblem as exc:
            self.post_message(LinkRefused(str(exc)))
            return
        self.post_message(BoardAnswered())

    @on(GreetProgress)
    def show_phase(self, event: GreetProgress) -> None:
        self.query_one("#connect-body", Static).update(
            f"Opening {self.trueturn.config.url} …\n\n{GREET_PHASE_TEXT[event.phase]}")

    @on(LinkRefused)
    def show_problem(self, event: LinkRefused) -> None:
        self.refused = True
        self.refresh_bindings()
        self.query_one("#connect-body", Static).update(Content.assemble(  # text, not markup
            (f"Cannot use {self.trueturn.config.url}", "bold red"),
            f"\n\n{event.text}\n\n{texts.CONNECT_RETRY}"))

    @on(BoardAnswered)
    def show_identity(self) -> None:
        ident = self.trueturn.session.identity
        assert ident is not None
        lines = [f"[b]Connected: {self.trueturn.config.url}[/b]", "",
                 f"  Board            {ident.board}",
                 f"  Firmware         {ident.firmware}",
                 f"  Protocol         v{ident.protocol_version}  (this trueturn: "
                 f"v{ident.host_protocol_version})",
                 f"  Definition hash  {ident.definition_hash:08x}  (this trueturn: "
                 f"{ident.host_definition_hash:08x})",
                 f"  Clock            {ident.tick_hz / 1e6:g} MHz, {ident.max_channels} channels",
                 ""]
        if ident.matches:
            self.ok = True
            prof = self.trueturn.config.profile
            lines += ["[green]Firmware and host speak the same protocol.[/green]", "",
                      f"Machine: [b]{prof.name}[/b] ({prof.rotor_kind})",
                      "" if not self.trueturn.config.demo else
                      "[i]Demo: a simulated rig stands in for the machine; weights you confirm "
                      "go onto the simulated rotor.[/i]",
                      "", "Press [b]Enter[/b] to start, [b]c[/b] for the cautions, [b]q[/b] "
                      "to quit."]
        else:
            lines += ["[b red]Refused: " + ident.mismatch_text() + "[/]", "",
                      "Press q to quit."]
        self.query_one("#connect-body", Static).update("\n".join(lines))

    def action_go(self) -> None:
        if self.ok:
            self.trueturn.start_bench()


class BenchScreen(Screen):
    """Status strip on top, then one of three views: meter, spectrum, guide."""

    BINDINGS = [
        Binding("m", "view('meter-view')", "Meter"),
        Binding("s", "view('spectrum-view')", "Spectrum"),
        Binding("v", "view('sweep-view')", "Sweep", show=False),
        Binding("g", "view('guide-view')", "Guide"),
        Binding("enter", "confirm", "Confirm"),
        *(Binding(key, f"choose({key})", show=False) for key in texts.MODE_KEYS),
        Binding("space", "tick", "Tick", show=False),
        Binding("backspace", "untick", "Untick", show=False),
        Binding("a", "abort", "Stop run", show=False),
        Binding("r", "removal", "Add/remove", show=False),
        Binding("e", "again", "Run again", show=False),
        Binding("p", "machine", "Machine", show=False),
        Binding("n", "second_start", "Start again", show=False),
        Binding("k", "stop_job", "Stop job", show=False),
        Binding("t", "skip_tap", "Skip tap test", show=False),
        Binding("o", "motor(True)", "Motor on", show=False),
        Binding("x", "motor(False)", "Motor off", show=False),
        Binding("l", "reconnect", "Reconnect", show=False),
        Binding("w", "save_elsewhere", "Save elsewhere", show=False),
        Binding("h", "marking", "Rings", show=False),
        Binding("pagedown", "scroll_guide(1)", show=False),
        Binding("pageup", "scroll_guide(-1)", show=False),
        Binding("down", "scroll_guide(0.25)", show=False),
        Binding("up", "scroll_guide(-0.25)", show=False),
        Binding("f", "fitted", "Fitted", show=False),
        Binding("u", "undo_fitted", "Undo fitted", show=False),
        Binding("c", "app.cautions", "Cautions"),
        Binding("question_mark", "app.keys", "Keys"),
        Binding("f1", "app.keys", "Keys", show=False),
        Binding("q", "app.quit", "Quit"),
    ]

    def compose(self) -> ComposeResult:
        yield StatusStrip(id="status")
        with ContentSwitcher(initial="guide-view", id="views"):
            yield MeterView(id="meter-view")
            yield SpectrumView(id="spectrum-view")
            yield SweepView(id="sweep-view")
            yield GuideView(id="guide-view")
        yield Footer()

    @property
    def trueturn(self) -> TrueturnApp:
        assert isinstance(self.app, TrueturnApp)
        return self.app

    def on_mount(self) -> None:
        self.set_interval(TICK_S, self.trueturn.tick)
        self.trueturn.tick()

    def action_view(self, view_id: str) -> None:
        self.query_one("#views", ContentSwitcher).current = view_id
        self.trueturn.tick()

    def action_confirm(self) -> None:
        self.trueturn.confirm()

    def action_choose(self, item: int) -> None:
        self.trueturn.choose_item(item)

    def action_tick(self) -> None:
        self.trueturn.tick_next()

    def action_untick(self) -> None:
        self.trueturn.untick()

    def action_abort(self) -> None:
        self.trueturn.abort_run()

    def action_removal(self) -> None:
        self.trueturn.toggle_removal()

    def action_again(self) -> None:
        self.trueturn.run_off_speed_again()

    def action_machine(self) -> None:
        self.trueturn.pick_machine()

    def action_second_start(self) -> None:
        self.trueturn.second_start()

    def action_stop_job(self) -> None:
        self.trueturn.stop_job()

    def action_skip_tap(self) -> None:
        self.trueturn.skip_tap()

    def action_motor(self, on: bool) -> None:
        self.trueturn.motor(on)

    def action_reconnect(self) -> None:
        self.trueturn.reconnect()

    def action_save_elsewhere(self) -> None:
        self.trueturn.save_elsewhere()

    def action_marking(self) -> None:
        """h: the rings to print for this rotor and how to mark its planes."""
        app = self.trueturn
        proc = app.procedure
        planes = proc.planes_used if proc is not None else tuple(app.config.profile.planes)
        app.push_screen(TextPage(marking_markup(app.config.profile, planes), "marking"))

    def action_scroll_guide(self, pages: float) -> None:
        self.query_one("#guide-view", GuideView).scroll_step(pages)
    def action_fitted(self) -> None:
        self.trueturn.enter_fitted()

    def action_undo_fitted(self) -> None:
        self.trueturn.undo_fitted()


class TrueturnApp(App):
    """trueturn: balance a rotor with the kit, guided step by step."""

    TITLE = "trueturn"
    CSS_PATH = "app.tcss"
    ENABLE_COMMAND_PALETTE = False
    BINDINGS = [Binding("ctrl+c", "quit", "Quit", show=False)]

    def __init__(self, config: AppConfig, *, clock: Clock = time.monotonic,
                 source: SessionFactory = LinkSession.for_machine) -> None:
        """``clock``: the host's monotonic clock (the board's data are fresh or stale by
        it); ``source``: makes the message source for ``config.url`` (a real port,
        ``sim://`` or ``emu://``; a test may hand in its own)."""
        super().__init__()
        self.config = config
        self.session = source(config.url, config.profile, rate_hz=config.rate_hz,
                              standstill_s=config.standstill_s, clock=clock)
        self.engine = BalanceEngine()
        self.rig = DemoRig(self.session) if config.demo else None
        self.keeper = JobKeeper(config.profile, workspace=config.workspace,
                                job_file=config.job_file)
        self.procedure: Procedure | None = None
        self.message = ""
        self.condition: tuple[str, ...] = ()  # the machine's condition, in words
        #: the as-found run's severity and unbalance judgement (a second start joins it)
        self.as_found_condition: tuple[tuple[Severity, ...], tuple[Finding, ...]] | None = None
        self.quit_armed = False  # q pressed once during a run: a second q quits
        self.alarm: SafetyEvent | None = None
        self.snap: Snapshot | None = None
        self.link_error = ""
        self.reconnecting = False
        self.restarts_seen = 0
        self.bench: BenchScreen | None = None
        self._saved_cache: dict[str, CoefficientSet | None] = {}
        self.open_job: OpenJob | None = None  # offered at the set-up (Enter continues it)
        #: sweeps (issue #20): the last one met, the job's run the recording belongs to,
        #: and whether it is a coast-down ending at standstill
        self.sweep_shown: ShownSweep | None = None
        self.sweep_run: int | None = None
        self.sweep_label = ""
        self.sweep_speed_rpm: float | None = None  # the speed of the run the sweep follows
        self.sweep_coasting = False
        self.sweeps_pending = 0  # recordings being fitted off the refresh (_finish_sweep)
        self.tap_analysing = False  # a tap test's recording is being analysed (a thread)
        #: the trials' size is being fitted to the as-found coast-down (a thread)
        self.trial_sizing = False
        #: the meter's window a run starts with (its readings may average longer: widen_to)
        self.run_window_revs = METER_WINDOW_REVS

    # ---- lifecycle ----------------------------------------------------------------------
    def on_mount(self) -> None:
        self.push_screen(ConnectScreen(id="connect"))

    def start_bench(self) -> None:
        try:
            self.session.start()
        except LinkProblem as exc:
            self.notify(str(exc), severity="error")
            return
        self.pump_link()
        self.bench = BenchScreen(id="bench")
        self.switch_screen(self.bench)
        self.message = self.config.start_note
        if self.config.resume_job is not None:
            self.continue_job(self.config.resume_job)
        elif self.config.mode is not None:
            self.choose_mode(self.config.mode)
        else:
            self.open_job = find_open_job(self.keeper.workspace, self.config.profile)

    @work(thread=True, exclusive=True, group="link-pump")
    def pump_link(self) -> None:
        worker = get_current_worker()
        while not worker.is_cancelled:
            try:
                handled = self.session.pump()
            except LinkProblem as exc:
                if not worker.is_cancelled:  # not a port we closed ourselves on quit
                    self.post_message(LinkLost(str(exc)))
                return
            silence = None if handled else self.session.silence()
            if silence is not None:  # the port is open but the board says nothing
                if not worker.is_cancelled:
                    self.post_message(LinkLost(silence))
                return
            # Sleep a little every time: a fast virtual rig must not starve the screen.
            time.sleep(0.0 if handled else 0.003)

    @on(LinkLost)
    def lost_link(self, event: LinkLost) -> None:
        """The port failed: say so at once, drop the run in progress, keep the job as saved."""
        text = event.text
        self.link_error = text
        self.session.watch.reset()  # nothing is proven about the rotor any more
        self.session.reset_meter()  # a partial average is never kept
        proc = self.procedure
        if proc is not None and proc.interrupt_run("link-lost", text,
                                                   self.session.watch.now_s or 0.0):
            self.alarm = None
        self.message = texts.LINK_LOST_SAY
        self.tick()

    def reconnect(self) -> None:
        """Open the same port again, identify, restart the stream, resume the step."""
        if not self.link_error:
            self.message = texts.LINK_UP
        elif not self.reconnecting:
            self.reconnecting = True
            self.message = f"Reconnecting to {self.config.url} …"
            self.reopen_link(self.session.rig)
        self.tick()

    @work(thread=True, exclusive=True, group="link-open")
    def reopen_link(self, old_rig: object) -> None:
        try:
            identity = self.session.reconnect(
                on_phase=lambda phase: self.post_message(GreetProgress(phase)))
            if identity.matches:
                self.session.start()
        except LinkProblem as exc:
            self.post_message(ReconnectFailed(f"reconnect failed: {exc}"))
            return
        if not identity.matches:
            self.post_message(ReconnectFailed("Refused: " + identity.mismatch_text()))
            return
        self.post_message(Reconnected(old_rig))

    @on(GreetProgress)
    def reconnect_phase(self, event: GreetProgress) -> None:
        self.message = f"Reconnecting to {self.config.url}: {GREET_PHASE_TEXT[event.phase]}"
        self.tick()

    @on(ReconnectFailed)
    def reconnect_failed(self, event: ReconnectFailed) -> None:
        self.reconnecting = False
        self.link_error = event.text
        self.message = texts.STILL_NO_LINK
        self.tick()

    @on(Reconnected)
    def on_reconnected(self, event: Reconnected) -> None:
        self.reconnected(event.old_rig)

    def reconnected(self, old_rig: object) -> None:
        """The port is open and streaming again: resume the step (a run starts over)."""
        self.reconnecting = False
        self.link_error = ""
        self.restarts_seen = self.session.restarts
        if self.rig is not None and old_rig is not None:
            self.rig.carry_over(old_rig)  # the rotor kept its weights while the cable was out
        ident = self.session.identity
        assert ident is not None
        self.message = f"Reconnected: {ident.board} fw {ident.firmware}."
        proc = self.procedure
        if proc is not None and running(proc, RunPhase.INTERRUPTED):
            proc.resume_run()
            self.alarm = None
            self.message += f" Run {len(proc.runs) + 1} ({proc.run_label}) starts over."
        self.pump_link()
        self.tick()

    def board_restarted(self) -> None:
        """The board restarted and the session started its stream again."""
        proc = self.procedure
        note = "the board restarted (power dip or loose cable?)"
        if proc is not None and proc.interrupt_run("board-restart", note,
                                                   self.session.watch.now_s or 0.0):
            self.alarm = None
            self.message = (f"{note[0].upper()}{note[1:]}; run {len(proc.runs) + 1} "
                            f"({proc.run_label}) starts over.")
        else:
            self.message = (f"{note[0].upper()}{note[1:]}; streaming again. Standstill must "
                            "be proven afresh by the tach.")

    async def action_quit(self) -> None:
        proc = self.procedure
        mid_run = proc is not None and running(proc, RunPhase.RUNNING, RunPhase.STOPPED)
        if (mid_run or self.keeper.unsaved) and not self.quit_armed:
            self.quit_armed = True
            self.message = texts.QUIT_UNSAVED if self.keeper.unsaved else texts.QUIT_MID_RUN
            self.tick()
            return
        self.workers.cancel_group(self, "link-pump")
        self.session.close()
        self.exit(return_code=1 if self.keeper.unsaved else 0)  # a job not saved: not a success

    def save_elsewhere(self) -> None:
        """w: the workspace cannot be written; ask for another folder and save there."""
        if not self.keeper.unsaved:
            self.message = texts.NOTHING_TO_SAVE
            self.tick()
            return
        here = (self.keeper.job_file.parent if self.keeper.job_file is not None
                else self.keeper.workspace.root)  # Enter as it is: try the same place again
        self.push_screen(SaveFolderPrompt(self.keeper.unsaved, here), self._save_in)

    def _save_in(self, folder: Path | None) -> None:
        if folder is None:
            return
        try:
            path = self.keeper.move_to(folder)
        except UserError as exc:
            self.keeper.unsaved = str(exc)
        else:
            self.quit_armed = False
            self.message = f"Saved in {path}."
        self.tick()

    def action_cautions(self) -> None:
        self.push_screen(TextPage(CAUTIONS, "cautions"))

    def action_keys(self) -> None:
        self.push_screen(TextPage(keys_markup(), "keys"))

    # ---- the person's actions -----------------------------------------------------------
    def pick_machine(self) -> None:
        if self.procedure is not None or self.rig is not None:
            self.message = (texts.DEMO_ONE_MACHINE if self.rig is not None else
                            texts.MACHINE_FIXED)
            self.tick()
            return
        picker = MachinePicker(self.keeper.workspace, self.session.channels,
                               self.config.profile)
        self.push_screen(picker, self.use_machine)

    def use_machine(self, profile: MachineProfile | None) -> None:
        if profile is None:
            return
        self.config.profile = profile
        self.engine = BalanceEngine()
        self.keeper = JobKeeper(profile, workspace=self.config.workspace,
                                job_file=self.config.job_file)
        self.session.use_machine([p.name for p in profile.pickups], profile.mains_hz,
                                 profile.pickups)
        self.message = f"Machine: {profile.name}"
        self.open_job = find_open_job(self.keeper.workspace, profile)
        self.tick()

    def continue_job(self, path: Path) -> None:
        """Continue the open job in ``path``: its procedure rebuilt from its runs, at the
        step after the last one; on a demo rig the simulated rotor gets the job's masses
        (the stand-in for a real rotor that kept them while the app was closed)."""
        try:
            job = self.keeper.workspace.resume_job(path)
            refuse_changed_profile(job, self.config.profile, "the machine's profile now")
            proc = restore_procedure(job, self.engine, self.session.watch,
                                     self.config.standstill_s, self.config.revolutions_per_run)
        except UserError as exc:
            self.message = str(exc)
            return
        self.procedure, self.open_job = proc, None
        self.keeper.resume(job, path)
        proc.await_trial_sizing()  # from the kept coast-down, as live (_size_trials)
        if len(proc.runs) == 1:  # the machine's condition as found, as shown live
            self.as_found_condition = as_found_condition(job)
            self.condition = texts.condition_lines(*self.as_found_condition, as_found=True)
        if self.rig is not None:
            self.rig.apply(tuple(MassChange("attach", m) for m in proc.on_rotor))
        self.message = texts.resumed(job.job_id, len(job.runs),
                                     rotor_lines(job, tuple(proc.on_rotor)))

    def enter_fitted(self) -> None:
        """f: at a hands-on step, enter what was actually fitted for one of its masses."""
        proc = self.procedure
        items = proc.fittable() if proc is not None else ()
        if proc is None or not items:
            self.message = texts.NOTHING_TO_FIT
            self.tick()
            return
        self.push_screen(FittedForm(proc, items, self.shown()), self._fitted)

    def _fitted(self, entry: FitEntry | None) -> None:
        proc = self.procedure
        if entry is None or proc is None:
            return
        try:
            before = proc.fit_target(entry.item)
            change = proc.fit(entry.item, mass_g=entry.mass_g, position=entry.position,
                              angle_deg=entry.angle_deg, removal=entry.removal)
            self.message = texts.fitted_words(change, shown=self.shown())
        except (GateRefused, IndexError) as exc:
            self.message = f"Refused: {exc}"
        else:
            self._refitted(proc, before, change)
        self.tick()

    def _refitted(self, proc: Procedure, before: MassChange, after: MassChange) -> None:
        """A mass already on the rotor (its run not started) was entered otherwise: the
        job's pending step and, in the demo, the simulated rotor follow."""
        if isinstance(proc.step, HandsOn):
            return  # nothing is on the rotor yet: the step's done gate applies it
        self.keeper.refit(proc, before, after)
        if self.rig is not None:
            self.rig.apply((MassChange("detach", before.mass), MassChange("attach", after.mass)))

    def shown(self) -> texts.Shown:
        """Numbers in the machine's units (its profile's)."""
        return texts.Shown(self.config.profile.units.choice())

    def undo_fitted(self) -> None:
        """u: take back the last fitted-mass entry of this hands-on step."""
        proc = self.procedure
        if proc is None:
            return
        try:
            now = proc.last_fit
            change = proc.undo_fit()
            self.message = texts.fitted_words(change, undone=True, shown=self.shown())
        except GateRefused as exc:
            self.message = f"Refused: {exc}"
        else:
            if now is not None:
                self._refitted(proc, now, change)
        self.tick()

    def choose_mode(self, mode: Mode) -> None:
        try:
            saved = self.saved_coefficients() if mode is Mode.SAVED_TRIM else None
            setup = setup_from_profile(self.config.profile, mode, self.config.standstill_s,
                                       self.config.revolutions_per_run, saved)
            self.procedure = Procedure(setup, self.engine, self.session.watch)
        except ValueError as exc:
            self.message = str(exc)
            return
        self._measure_for(self.procedure)
        self.keeper.start(self.procedure, saved)
        self.message = ""
        if self.procedure.partial_planes:
            self.message = (f"Note: {self.config.profile.name} has "
                            f"{len(self.config.profile.planes)} correction planes; balancing "
                            "one of them cannot show the whole rotor within its grade. "
                            "Quit and choose 2 for both planes.")

    def _measure_for(self, proc: Procedure) -> None:
        """Amplitude only: no tach needed, speed and 1x from the spectrum (dsp.tachless; once
        the as-found run is kept, a 1x lost in the noise is read at the speed a harmonic of
        the as-found speed gives); else from the tach (idempotent: the refresh calls it for a
        procedure made any way)."""
        setup = proc.setup
        if setup.mode is not Mode.AMPLITUDE_ONLY:
            self.session.use_tachless(None)
            return
        as_found = proc.as_found()
        self.session.use_tachless(speed_band_hz(setup.speed_rpm, setup.max_speed_rpm),
                                  as_found.speed_rpm if as_found is not None else None)

    def saved_coefficients(self) -> CoefficientSet | None:
        """Influence coefficients an earlier job kept for this machine near this speed."""
        prof = self.config.profile
        if prof.name not in self._saved_cache:
            try:
                found = self.keeper.workspace.find_coefficients(prof.name, prof.speed_max_rpm)
            except (UserError, OSError):
                found = None
            self._saved_cache[prof.name] = found
        return self._saved_cache[prof.name]

    def choose_item(self, item: int) -> None:
        """1-5 choose the procedure (only while none is chosen: they never tick a list)."""
        if self.procedure is None:
            mode = texts.MODE_KEYS.get(str(item))
            if mode is not None:
                self.choose_mode(mode)
        self.tick()

    def tick_next(self) -> None:
        """Space ticks the next item of the open checklist, only at proven standstill."""
        proc = self.procedure
        if proc is None:
            return
        try:
            proc.tick_next()
            self.message = ""
        except GateRefused as exc:
            self.message = f"Refused: {exc}"
        self.tick()

    def untick(self) -> None:
        if self.procedure is not None:
            self.procedure.untick_last()
        self.tick()

    def abort_run(self) -> None:
        """a stops the run at any moment: nothing of it is kept; inspect the rotor next."""
        proc = self.procedure
        if proc is None or not isinstance(proc.step, Measure):
            self.message = texts.NO_RUN_TO_STOP
            self.tick()
            return
        event = proc.abort_run(self.session.watch.now_s or 0.0)
        self.session.reset_meter()  # the partial average is dropped
        self.quit_armed = False
        self.keeper.event(event)
        if self.rig is not None:
            self.rig.motor(False)
            self.message = texts.RUN_STOPPED_DEMO
        else:
            self.message = texts.RUN_STOPPED
        self.tick()

    def confirm(self) -> None:
        proc = self.procedure
        if proc is None:
            offer = self.open_job
            if offer is not None and not offer.refusal:
                self.continue_job(offer.path)
            else:
                self.message = offer.refusal if offer is not None else texts.CHOOSE_FIRST
            self.tick()
            return
        try:
            self._confirm(proc, self.session.watch.now_s or 0.0)
        except GateRefused as exc:
            self.message = f"Refused: {exc}"
        self.tick()

    def _confirm(self, proc: Procedure, now: float) -> None:
        """Enter on the step shown: the step's type says what it confirms."""
        too_small = proc.too_small_trial
        match proc.step:
            case _ if proc.alarm is not None:
                alarm = proc.acknowledge_alarm()
                self.alarm = None
                self.message = (f"Alarm acknowledged ({alarm.kind}). Wait for standstill, then "
                                "inspect the rotor before it runs again"
                                + ("; a smaller trial goes on." if proc.shrunk_trial else
                                   "; the model's correction comes off and a trial goes on."
                                   if proc.model_shook else "."))
            case HandsOn(phase=HandsOnPhase.LOCKOUT):
                proc.lock_out(now)
                self.message = texts.LOCKED_OUT
            case HandsOn():
                changes = proc.hands_on_done(now)
                if self.rig is not None:
                    self.rig.apply(changes, proc)
                self.keeper.hands_on(proc, changes)
                self.message = ""
            case Measure(phase=RunPhase.ARMING):
                proc.arm_run(True, now)
                self.quit_armed = False
                # the meter's window holds what the run averages (a check run: more)
                self.run_window_revs = max(METER_WINDOW_REVS, proc.revolutions_wanted)
                self.session.reset_meter(self.run_window_revs)
                self.start_sweep(None, coasting=False)  # the run-up
                self.alarm = None
                if self.rig is not None:
                    self.rig.motor(True)
                    self.message = texts.MOTOR_STARTING_DEMO
                else:
                    self.message = texts.SWITCH_ON
            case Measure(phase=RunPhase.INTERRUPTED):
                self.message = texts.RUN_INTERRUPTED
            case Measure():
                self.message = texts.MEASURING
            case ShowCorrection() if too_small is not None and too_small.suggested_g is not None:
                larger = proc.redo_trial_larger()
                shown = texts.Shown(self.config.profile.units.choice())
                self.message = (f"Redo the trial on {larger.plane} with "
                                f"{shown.mass(larger.mass_g)}: the hands-on step comes first.")
            case ShowCorrection() if proc.problem:
                proc.repeat_run()
                self.message = texts.RUN_AGAIN
            case ShowCorrection():
                proc.accept_correction()
                self.message = ""
            case TapTest(phase=TapPhase.TAPPING):
                self.finish_tap(proc)
            case TapTest():
                proc.begin_tap(now)
                self.session.start_tap_recording()
                if self.rig is not None:
                    self.rig.taps(True)
                self.message = ""
            case ShowDoubt():
                proc.go_on()
                self.keeper.went_on(proc)  # a continued job does not ask again
                self.message = texts.GOING_ON
            case ShowVerdict() if not proc.finished:
                proc.finish()
                self.keeper.finish(proc)
                self._saved_cache.clear()
                self.message = texts.JOB_CLOSED
            case _:
                self.message = texts.JOB_FINISHED

    # ---- the tap test (model-first on a stiff mount) ---------------------------------------
    def skip_tap(self) -> None:
        """t: skip the tap test (offered, refused or recording): trial runs follow."""
        proc = self.procedure
        if proc is None or self.tap_analysing:
            return
        try:
            proc.skip_tap()
        except GateRefused as exc:
            self.message = f"Refused: {exc}"
        else:
            self._stop_taps()
            self.keeper.model(proc)  # no longer on offer: a continued job does not ask again
            self.message = texts.TAP_SKIPPED[not proc.fallback]
        self.tick()

    def _stop_taps(self) -> object:
        """End the tap test's recording (and the demo's mallet); the recording, or None."""
        recording = self.session.stop_tap_recording()
        if self.rig is not None:
            self.rig.taps(False)
        return recording

    def finish_tap(self, proc: Procedure) -> None:
        """Enter while recording: the taps are done; analyse them off the screen's refresh
        (the bump test's fits and the support fit take seconds), then hand the procedure
        the outcome and the model's answer with it."""
        if self.tap_analysing:
            return
        recording = self._stop_taps()
        if not isinstance(recording, TapRecording):
            return
        self.tap_analysing = True

        def analyse() -> None:
            capture = analyze_bump_messages(recording.messages, recording.profiles,
                                            recording.mains_hz, recording.identity)
            outcome = tap_outcome(capture.result, capture.tach_edges, recording.time_s)
            answer = None
            if outcome.refusal is None:
                answer = proc.tap_answer(outcome)
            self.call_from_thread(self._tap_analysed, proc, outcome, answer)

        self.run_worker(analyse, thread=True, group="tap", exit_on_error=False)

    def _tap_analysed(self, proc: Procedure, outcome: TapOutcome,
                      answer: ModelAnswer | None) -> None:
        self.tap_analysing = False
        if proc is not self.procedure:
            return
        try:
            refusal = proc.tap_recorded(outcome, answer)
        except GateRefused as exc:
            self.message = f"Refused: {exc}"
        else:
            if refusal is None:
                self.keeper.model(proc)  # a continued job uses the very same model
                self.message = texts.TAP_ANALYSED[proc.model is not None
                                                  and proc.model.trusted]
            else:
                self.message = f"Tap test not used: {texts.TAP_REFUSED[refusal]}."
        self.tick()

    def tap_status(self) -> str:
        """The tap test's recording in words (empty: none)."""
        if self.tap_analysing:
            return texts.TAP_ANALYSING
        seconds = self.session.tap_recording_s
        return "" if seconds is None else f"Recording: {seconds:.0f} s kept so far."

    def second_start(self) -> None:
        """n: start the machine once more as found, after a stop: does the 1x repeat?"""
        proc = self.procedure
        if proc is None:
            return
        try:
            proc.start_again()
            self.message = texts.SECOND_START
        except GateRefused as exc:
            self.message = f"Refused: {exc}"
        self.tick()

    def stop_job(self) -> None:
        """k: stop the job here because balancing may not help (offered after the as-found
        run); the job closes with the reason kept, and its report is written."""
        proc = self.procedure
        if proc is None:
            return
        try:
            proc.stop_here(self.session.watch.now_s or 0.0)
        except GateRefused as exc:
            self.message = f"Refused: {exc}"
        else:
            self.keeper.stop(proc)
            self._saved_cache.clear()
            self.message = texts.JOB_STOPPED
        self.tick()

    def run_off_speed_again(self) -> None:
        """e: measure again the coefficient run that was furthest off speed."""
        proc = self.procedure
        if proc is None:
            return
        try:
            off = proc.repeat_off_speed_run()
            self.message = (f"Run '{off.label}' again at the usual speed (it was "
                            f"{100 * abs(off.deviation):.1f} % "
                            f"{'slow' if off.deviation < 0 else 'fast'}).")
        except GateRefused as exc:
            self.message = f"Refused: {exc}"
        self.tick()

    def toggle_removal(self) -> None:
        proc = self.procedure
        if proc is None:
            return
        try:
            proc.set_removal(not proc.removal)
            self.message = texts.AS_REMOVAL if proc.removal else texts.AS_ADDITION
        except GateRefused as exc:
            self.message = f"Refused: {exc}"
        self.tick()

    def motor(self, on: bool) -> None:
        if self.rig is None:
            self.message = texts.REAL_MACHINE_SWITCH
        else:
            proc = self.procedure
            if on and proc is not None and not running(proc, RunPhase.RUNNING):
                self.message = texts.MOTOR_FROM_RUN
            else:
                self.rig.motor(on)
                self.message = "Demo: virtual motor " + ("on." if on else "off, coasting down.")
        self.tick()

    # ---- the 10 Hz refresh --------------------------------------------------------------
    def tick(self) -> None:
        bench = self.bench
        if bench is None or not bench.is_mounted:
            return
        current = bench.query_one("#views", ContentSwitcher).current
        self.session.meter.spectrum_wanted = current == "spectrum-view"
        snap = self.session.snapshot()
        self.snap = snap
        if snap.restarts != self.restarts_seen:
            self.restarts_seen = snap.restarts
            self.board_restarted()
        proc = self.procedure
        if proc is not None:
            self._measure_for(proc)
        if proc is not None and proc.check_ticks():
            self.message = texts.TICKS_CLEARED
        self._run_logic(snap)
        if self.sweep_coasting and snap.standstill:
            self.sweep_coasting = False
            self._finish_sweep(self.session.stop_sweep_recording(), self.sweep_run,
                               self.sweep_label, self._coast_down_analysed,
                               self.sweep_speed_rpm, self._model_answer)
        if (proc is not None and proc.trial_sizing_awaited and not self.sweep_coasting
                and self.sweeps_pending == 0 and not self.trial_sizing):
            self._size_trials(proc)
        bench.query_one("#status", StatusStrip).show(
            snap, machine=self.config.profile.name, demo=self.config.demo,
            identity=self.session.identity, link_error=self.link_error,
            reconnecting=self.reconnecting)
        if current == "meter-view":
            bench.query_one("#meter-view", MeterView).show(
                snap, self.procedure.runs if self.procedure is not None else [],
                self.config.profile.rotation, texts.Shown(self.config.profile.units.choice()))
        elif current == "spectrum-view":
            bench.query_one("#spectrum-view", SpectrumView).show(snap)
        elif current == "sweep-view":
            bench.query_one("#sweep-view", SweepView).show(
                self.sweep_shown, snap.meter.sensors, self.shown())
        else:
            self._draw_guide(bench, snap)

    def _run_logic(self, snap: Snapshot) -> None:
        proc = self.procedure
        if proc is None or not running(proc, RunPhase.RUNNING) or self.link_error:
            return
        meter = snap.meter
        now = snap.board_time_s
        alarms = proc.observe(meter.readings, meter.speed_rpm or 0.0, now)
        for ev in alarms:
            self.alarm = ev
            self.keeper.event(ev)
        if alarms:
            self.session.reset_meter()  # nothing of a stopped run is kept
            if self.rig is not None:
                self.rig.motor(False)
            self.quit_armed = False
            return
        live = self.tach_live(snap)
        wider = (proc.widen_to(meter.readings, meter.window_revs, meter.revolutions_fitted,
                               meter.hold_revs) if live else None)
        if wider is not None:
            # steady over the whole window, the phase not yet within its limit (a sliding
            # window would not tighten it, a longer one does), or a check run's verdict
            # undecided (its bound shrinks with a longer average)
            self.session.set_meter_window(wider)
        elif proc.ready(meter.readings, live):
            # The run's speed: the mean over the averaged revolutions of its readings.
            speeds = [r.speed_rpm for r in meter.readings.values()
                      if r.speed_rpm is not None and r.speed_rpm > 0]
            run = proc.record(meter.readings, statistics.fmean(speeds), now, live)
            if run.kind is RunKind.AS_FOUND and run is not proc.second_start:
                proc.await_trial_sizing()  # from the coast-down that follows (_size_trials)
            condition = None
            note = ""
            if run is proc.second_start:
                note = self._judge_second_start(proc, run)
            elif run.kind in (RunKind.AS_FOUND, RunKind.CHECK):
                # is it unbalance, and how bad overall (as found, and after each check)
                condition = self.session.machine_condition()
                self.condition = texts.condition_lines(*condition, as_found=(
                    run.kind is RunKind.AS_FOUND))
            # the run-up ends, the coast-down follows; the run is kept at once, its run-up
            # when its fits are done (off the refresh: they take most of a second)
            runup = self.session.start_sweep_recording()
            if run is not proc.second_start:
                self.keeper.run(proc, run, condition)
            if meter.window_revs > self.run_window_revs:
                self.session.set_meter_window(self.run_window_revs)  # the live view again
            self.start_sweep(run, coasting=True)
            self._finish_sweep(runup, self.sweep_run, run.label, None, run.speed_rpm)
            if condition is not None and run.kind is RunKind.AS_FOUND:
                self.as_found_condition = condition
                proc.as_found_judged(failing_rules(condition[1]))
            self.session.remember_running_level()
            self.quit_armed = False
            stop = "press x to switch the virtual motor off" if self.rig else \
                "switch the machine off"
            self.message = f"Run '{run.label}' recorded and saved: {stop}."
            why = {"link-lost": "a lost link", "board-restart": "a board restart"}
            over = [why[e.kind] for e in run.events if e.kind in why]
            if over:
                self.message += f" It started over after {over[-1]}."
            if note:
                self.message += f" {note}"

    # ---- sweeps (issue #20) ---------------------------------------------------------------
    def start_sweep(self, run: Run | None, coasting: bool) -> None:
        """Keep each revolution's 1x from now: a run-up (at arming, ``run`` None) or the
        coast-down after ``run``; the recording going on till now is finished (off the
        refresh) and kept first; at ``run``'s end its run-up was handed over already."""
        if run is None:
            self._finish_sweep(self.session.start_sweep_recording(), self.sweep_run,
                               self.sweep_label)
            self.sweep_run, self.sweep_label, self.sweep_speed_rpm = None, "", None
        else:
            job = self.keeper.job
            proc = self.procedure
            kept = job is not None and bool(job.runs) and (
                proc is None or run is not proc.second_start)
            self.sweep_run = len(job.runs) if kept and job is not None else None
            self.sweep_label = run.label
            self.sweep_speed_rpm = run.speed_rpm
        self.sweep_coasting = coasting

    def keep_sweep(self, outcome: SweepOutcome | None, run_number: int | None = None,
                   label: str | None = None) -> None:
        """Show a finished sweep, and keep it with its run (``run_number``, 1-based; default:
        the sweep's run now) in the job."""
        if outcome is None:
            return
        if label is None:
            run_number, label = self.sweep_run, self.sweep_label
        self.sweep_shown = ShownSweep(outcome, label)
        if run_number is not None:
            self.keeper.sweep(run_number, outcome)
            job, proc = self.keeper.job, self.procedure
            if job is not None and proc is not None:
                # the runs are compared at one speed with the slopes the kept sweeps
                # measured (a continued job takes the very same: ui.resume)
                proc.set_speed_slopes(job_speed_slopes(job))
                proc.set_support_resonances(job_support_resonances(job))

    def _finish_sweep(self, recording: SweepRecorder | None, run_number: int | None,
                      label: str,
                      then: Callable[[SweepOutcome | None, object], None] | None = None,
                      run_speed_rpm: float | None = None,
                      prepare: Callable[[SweepOutcome | None], object] | None = None) -> None:
        """Fit a finished recording off the screen's refresh (a thread: the resonance fits
        take most of a second), then, back on the app's thread, show it, keep it with run
        ``run_number`` and call ``then`` with it and what ``prepare`` made of it in the
        thread (a pure computation; None when it failed, so ``then`` does it itself).
        Pending fits are counted (:attr:`sweeps_pending`) so nothing waits on a sweep
        that never comes."""
        if recording is None:
            if then is not None:
                then(None, None)
            return
        self.sweeps_pending += 1

        def done(outcome: SweepOutcome | None, prepared: object) -> None:
            self.sweeps_pending -= 1
            self.keep_sweep(outcome, run_number, label)
            if then is not None:
                then(outcome, prepared)
            self.tick()  # what changed is drawn now, as after a key

        def fit() -> None:
            prepared = None
            try:
                outcome = recording.finish(run_speed_rpm)
            except Exception:  # noqa: BLE001 - a failed fit is a sweep not kept, said
                outcome = None
                self.call_from_thread(setattr, self, "message",
                                      "A sweep could not be analysed; it was not kept.")
            if prepare is not None:
                try:
                    prepared = prepare(outcome)
                except Exception:  # noqa: BLE001 - done again on the app's thread, said there
                    prepared = None
            self.call_from_thread(done, outcome, prepared)

        self.run_worker(fit, thread=True, group="sweeps", exit_on_error=False)

    def _model_answer(self, outcome: SweepOutcome | None) -> object:
        """Model-first, in the sweep's thread: the model's answer to the as-found run's
        coast-down (the support fit to its whole curve takes seconds), computed from the
        set-up and the as-found run alone, which cannot change while the model is awaited;
        None when the procedure is not waiting for it."""
        proc = self.procedure
        if proc is None or not proc.awaiting_sweep:
            return None
        evidence = sweep_evidence(outcome, proc.setup.sensors,
                                  proc.runs[0].speed_rpm or proc.setup.speed_rpm)
        return PreparedModel(evidence, proc.engine.model_first(proc.setup, proc.runs[:1],
                                                                 evidence))

    def _coast_down_analysed(self, outcome: SweepOutcome | None, prepared: object) -> None:
        """Model-first: the as-found run's coast-down gives the supports' resonances and
        curve (the answer prepared in the sweep's thread, else computed here)."""
        proc = self.procedure
        if proc is not None and proc.awaiting_sweep:
            if isinstance(prepared, PreparedModel):
                proc.sweep_analysed(prepared.evidence, prepared.answer)
            else:
                proc.sweep_analysed(sweep_evidence(
                    outcome, proc.setup.sensors,
                    proc.runs[0].speed_rpm or proc.setup.speed_rpm))
            self.keeper.model(proc)  # a continued job uses the very same model

    def _size_trials(self, proc: Procedure) -> None:
        """Size the trials from the as-found run's coast-down as the job keeps it (the
        support fit to its curve takes seconds: in a thread), so a continued job sizes
        them alike (:func:`trueturn.ui.resume.job_coast_down_evidence`); without a kept
        coast-down, or a curve to fit, they keep the size they have."""
        job = self.keeper.job
        evidence = job_coast_down_evidence(job, proc.setup.sensors) if job is not None else None
        if evidence is None or evidence.curve is None:
            proc.trial_sizing_in(None)
            return
        self.trial_sizing = True
        setup = proc.setup

        def done(sensitivity: object, failed: bool) -> None:
            self.trial_sizing = False
            if failed:
                self.message = texts.TRIAL_FIT_FAILED
            if self.procedure is proc and proc.trial_sizing_awaited:
                proc.trial_sizing_in(sensitivity)
            self.tick()

        def fit() -> None:
            try:
                sensitivity, failed = proc.engine.trial_sensitivity(setup, evidence), False
            except Exception:  # noqa: BLE001 - the trial keeps its size, said
                sensitivity, failed = None, True
            self.call_from_thread(done, sensitivity, failed)

        self.run_worker(fit, thread=True, group="trial-sizing", exit_on_error=False)

    def model_words(self) -> tuple[str, ...]:
        """Model-first: why the model was not trusted, while the trials it led to go on."""
        proc = self.procedure
        if proc is None or proc.model is None or proc.verdict is not None:
            return ()
        tap = texts.tap_lines(proc.tap, proc.model.trusted)
        if proc.model.trusted or isinstance(proc.step, TapTest):
            return tap
        return (texts.model_refused(proc.model.distrust), *tap)

    def sweep_warnings(self) -> tuple[str, ...]:
        """The last sweep's findings (a resonance near the balancing speed), in words."""
        if self.sweep_shown is None:
            return ()
        return tuple(describe(f) for f in self.sweep_shown.outcome.findings)

    def _judge_second_start(self, proc: Procedure, run: Run) -> str:
        """A second start as found: compare its 1x with the first start's (issue #22), keep
        it with the as-found run, and let the procedure ask when balancing may not help;
        returns a note for the message line (empty, or why the starts were not compared)."""
        severity, _ = self.session.machine_condition()
        first = proc.runs[0]
        kept = self.as_found_condition or ((), ())
        unbalance = kept[1]
        note = ""
        if same_speed(first.speed_rpm or 0.0, run.speed_rpm or 0.0):
            unbalance = judge_second_start(unbalance, list(first.readings.values()),
                                           list(run.readings.values()))[0]
        else:
            note = texts.second_start_off_speed(first.speed_rpm or 0.0, run.speed_rpm or 0.0)
        self.as_found_condition = (kept[0], unbalance)
        self.condition = texts.condition_lines(kept[0], unbalance, as_found=True)
        self.keeper.second_start(run, severity, unbalance)
        proc.as_found_judged(failing_rules(unbalance))
        return note

    def tach_live(self, snap: Snapshot) -> bool:
        """The tach is being seen: an edge within the last ``TACH_SILENT_S`` of board time."""
        return self.session.watch.last_edge_s is not None and snap.quiet_s < TACH_SILENT_S

    # ---- drawing ------------------------------------------------------------------------
    def _draw_guide(self, bench: BenchScreen, snap: Snapshot) -> None:
        """Hand the guide what it shows; its panels repaint only what changed."""
        proc = self.procedure
        alarm = ""
        if self.alarm is not None and proc is not None and isinstance(proc.step, Measure):
            alarm = (f"{self.alarm.detail} (x stops the demo motor)" if self.rig else
                     self.alarm.detail)
        ctx = GuideContext(
            profile=self.config.profile, engine=self.engine, demo=self.rig is not None,
            tach_live=self.tach_live(snap), link_error=texts.plain(self.link_error),
            saved_trim=proc is None and self.saved_coefficients() is not None,
            job_path=self.keeper.path, report_path=self.keeper.report_path,
            open_job=texts.open_job_lines(self.open_job) if proc is None else (),
            condition=(*self.condition, *self.sweep_warnings(), *self.model_words())
            if proc is not None else (),
            message=texts.plain(texts.not_saved(self.keeper.unsaved)
                                if self.keeper.unsaved and not self.quit_armed
                                else self.message),
            alarm=alarm, tap_status=self.tap_status())
        bench.query_one("#guide-view", GuideView).show(proc, snap, ctx)


def running(proc: Procedure, *phases: RunPhase) -> bool:
    """The procedure is at a run in one of ``phases``."""
    return isinstance(proc.step, Measure) and proc.step.phase in phases
