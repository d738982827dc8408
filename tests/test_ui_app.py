"""The Textual app driven headless with Pilot at 80x24 against sim:// rigs.

Keys are posted to the app as the terminal's key events (App.post_message, public); Pilot.press
itself would wait for the app to go idle, which an app fed by a virtual rig running as fast
as possible seldom is. Where a test needs the board to misbehave in a way the rig cannot,
it hands the app its own message source (a LinkSession subclass) and host clock
(``TrueturnApp(config, clock=..., source=...)``). Physics truth for the honest residual:
the rig's exact 1x response (trueturn.sim board.exact_response_1x) with the weights the app
put on it.
"""

from __future__ import annotations

import asyncio
import math
import threading
import time
from collections.abc import Callable
from pathlib import Path

import yaml
from textual import events
from textual.pilot import Pilot
from textual.widgets import ContentSwitcher, Input, Static

from trueturn.balance.model_first import PredictedInfluence
from trueturn.jobs.store import read_document
from trueturn.link.catalogue import load_catalogue
from trueturn.link.session import GreetPhase
from trueturn.procedure.guide import HandsOn, Measure, Mode
from trueturn.sim.scenario import scenario_dir
from trueturn.ui.app import AppConfig, TrueturnApp
from trueturn.ui.launch import scenario_profile
from trueturn.ui.resume import job_coast_down_evidence
from trueturn.ui.session import BoardIdentity, LinkSession, SessionFactory
from trueturn.ui.steps import StepPanel, panel_for
from trueturn.ui.texts import KEYS

SIZE = (80, 24)


def quick_scenario(name: str, tmp_path: Path) -> str:
    """A copy of a demo scenario whose motor starts and stops in about a second (the
    scenario files are meant to be copied and edited), so the tests spend less time
    waiting for a coasting rotor; everything else is the scenario as shipped."""
    raw = yaml.safe_load((scenario_dir() / f"{name}.yaml").read_text(encoding="utf-8"))
    raw["motor"]["spin_up_s"] = 1.0
    raw["motor"]["coast_down_s"] = 1.5
    path = tmp_path / f"{name}.yaml"
    path.write_text(yaml.safe_dump(raw), encoding="utf-8")
    return str(path)


def make_app(scenario: str, tmp_path: Path, clock: Callable[[], float] = time.monotonic,
             source: SessionFactory = LinkSession.for_machine) -> TrueturnApp:
    path = quick_scenario(scenario, tmp_path)
    config = AppConfig(f"sim://{path}?realtime=0&motor=off", scenario_profile(path),
                       demo=True, workspace=tmp_path / "ws")
    return TrueturnApp(config, clock=clock, source=source)


class OtherFirmware(LinkSession):
    """A message source whose board answers with another protocol definition (while
    ``other`` is True; then like the real one)."""

    other = True

    def open(self, timeout_s: float = 3.0,
             on_phase: Callable[[GreetPhase], None] | None = None) -> BoardIdentity:
        if not self.other:
            return super().open(timeout_s, on_phase)
        host = self.catalogue
        self.identity = BoardIdentity(2, 0x12345678, "0.0.9", "simulated board", 2_000_000, 2,
                                      host.protocol_version, host.definition_hash)
        return self.identity


class HeldBoard(LinkSession):
    """A message source that can hold the board's messages back, the port staying open
    (a stalled USB hub, a board hung mid-stream): :meth:`hold` returns once no read is in
    flight, so nothing arrives after it."""

    def __init__(self, *args: object, **kwargs: object) -> None:
        super().__init__(*args, **kwargs)  # type: ignore[arg-type]
        self._gate = threading.Lock()
        self.held = False

    def hold(self, held: bool = True) -> None:
        with self._gate:
            self.held = held

    def pump(self) -> int:
        with self._gate:
            return 0 if self.held else super().pump()


class FakeClock:
    """The host's monotonic clock, moved only by the test."""

    def __init__(self) -> None:
        self.now_s = 0.0

    def __call__(self) -> float:
        return self.now_s


async def press(app: TrueturnApp, pilot: Pilot, *keys: str) -> None:
    """Keys as the terminal would send them, posted with Textual's public ``post_message``
    and a short pause after each (``Pilot.press`` and ``Pilot.pause()`` wait for the app to
    go idle, which this app, fed by its board thread, seldom is: minutes per test).

    The pause does not promise the keys were handled (a loaded machine may take longer):
    a test looks for their effect with :func:`wait_for`, never right after pressing."""
    for key in keys:
        app.post_message(events.Key(key, key if len(key) == 1 else None))
        await pilot.pause(0.02)


#: Textual's key names for the few printable characters the tests type (textual.keys)
KEY_NAMES = {" ": "space", ".": "full_stop", "-": "minus", "/": "slash", ",": "comma"}


async def type_text(app: TrueturnApp, pilot: Pilot, text: str) -> None:
    for ch in text:
        app.post_message(events.Key(KEY_NAMES.get(ch, ch), ch))
        await pilot.pause(0.01)


def _rig_seconds(pilot: Pilot) -> float | None:
    """The board's time as the app last looked at it (its last refresh's snapshot), else
    the simulated rig's own clock (None: neither). The app's own view, not the rig's clock:
    with ``realtime=0`` the reader thread pulls the rig's time on as fast as it can read,
    so on a loaded machine the rig's clock can run ahead of the refreshes that judge a
    run. (A run that "timed out" on CI, 2026-12-03, had really stopped on the runaway
    alarm; the timeout message now shows the step and the screen.)"""
    snap = getattr(pilot.app, "snap", None)
    value = getattr(snap, "board_time_s", None)
    if isinstance(value, (int, float)):
        return float(value)
    session = getattr(pilot.app, "session", None)
    rig = getattr(session, "rig", None) if session is not None else None
    value = getattr(rig, "time_s", None)
    return float(value) if isinstance(value, (int, float)) else None


#: a hang (nothing moves at all) fails after this many times the wait's own limit
HANG_FACTOR = 10.0


async def wait_for(pilot: Pilot, condition, timeout_s: float = 60.0) -> None:  # type: ignore[no-untyped-def]
    """Until ``condition()`` holds (looked at once before the first pause).

    Given up only when ``timeout_s`` has passed both on the wall clock and on the simulated
    rig's own clock (when there is one): a loaded machine slows the app and the rig it
    drives, not what the app must show after so many seconds of the machine's time; a hang
    fails after :data:`HANG_FACTOR` times the limit on the wall clock."""
    started = time.monotonic()
    rig_started = _rig_seconds(pilot)
    while not condition():
        wall = time.monotonic() - started
        rig_now = _rig_seconds(pilot)
        rig_done = rig_started is None or rig_now is None or rig_now - rig_started > timeout_s
        if (wall > timeout_s and rig_done) or wall > HANG_FACTOR * timeout_s:
            proc = getattr(pilot.app, "procedure", None)
            step = getattr(proc, "step", None)
            raise AssertionError(
                f"timed out waiting for the app ({wall:.0f} s wall, board "
                f"{rig_started} -> {rig_now} s); step {step!r}; screen:\n"
                f"{screen_text(pilot.app) if isinstance(pilot.app, TrueturnApp) else ''}")
        await pilot.pause(0.05)


def widget_text(app: TrueturnApp, widget_id: str) -> str:
    return str(app.screen.query_one(f"#{widget_id}", Static).render())


def screen_text(app: TrueturnApp) -> str:
    return "\n".join(str(w.render()) for w in app.screen.query(Static))


def drawn_panels(app: TrueturnApp) -> list[str]:
    """The guide's panels that draw anything (hidden ones must draw nothing)."""
    return [p.id or "" for p in app.screen.query(StepPanel) if str(p.render())]


async def through_hands_on_gates(app: TrueturnApp, pilot: Pilot, wait_s: float = 60.0) -> None:
    """Wait for proven standstill (and a trial's size from the coast-down, as a person
    waits for it to show), then tick the lock-out list, Enter, the done list, Enter;
    return once the run that follows is shown."""
    await wait_for(pilot, lambda: "Standstill proven" in screen_text(app) and not (
        app.procedure is not None and app.procedure.sizing_trial), wait_s)
    await press(app, pilot, "space", "space", "enter", "space", "space", "space", "space", "enter")
    await wait_for(pilot, lambda: app.procedure is not None
                   and isinstance(app.procedure.step, Measure), 10)


async def shows(app: TrueturnApp, pilot: Pilot, text: str) -> None:
    """Wait until ``text`` is on the screen (the keys pressed before it were handled)."""
    await wait_for(pilot, lambda: text in screen_text(app), 10)


async def connect(app: TrueturnApp, pilot: Pilot) -> None:
    await wait_for(pilot, lambda: "Press Enter to start" in screen_text(app), 20)
    await press(app, pilot, "enter")
    await wait_for(pilot, lambda: "Choose the procedure" in screen_text(app), 10)


async def follow_the_screens(app: TrueturnApp, pilot: Pilot, mode_key: str,
                             seen: list[str] | None = None) -> int:
    """Do what the guide says, as a person would; return the keys pressed.

    ``seen`` (when given) collects the screen as it stood at every step and after every key,
    so a test can look at each screen the person met without sampling on a timer."""
    keys = 0

    def look() -> None:
        if seen is not None:
            seen.append(screen_text(app))

    async def key(*k: str) -> None:
        nonlocal keys
        keys += len(k)
        await press(app, pilot, *k)
        look()

    await key(mode_key)
    proc = app.procedure
    assert proc is not None
    for _ in range(40):
        step = proc.step
        text = screen_text(app)
        if seen is not None:
            seen.append(text)
        # one panel per step kind, chosen by the step's type; the others draw nothing
        assert app.screen.query_one("#step-panels", ContentSwitcher).current == \
            panel_for(step)
        assert drawn_panels(app) == [panel_for(step)]
        if proc.sizing_trial:
            # the trial is sized from the as-found run's coast-down (issue #20 item 3): no
            # size is shown, and the lock-out does not open, until the fit is in
            assert "Attach trial mass" not in text and "sized from this run's coast-down" in \
                " ".join(text.split()), text
            if "Not at proven standstill" in text:
                await key("x")
            await wait_for(pilot, lambda: not proc.sizing_trial, 180)
            # then the size is shown where the wait was
            await wait_for(pilot, lambda: "Attach trial mass" in screen_text(app), 10)
            look()
            continue
        if isinstance(step, HandsOn):  # masses named by their kind's word ("trial")
            for change in step.changes:
                m = change.mass
                if m is not None and change.action == "attach" and not m.removal:
                    assert f"Attach {m.kind.value} mass" in text
        if step.kind == "hands-on" and step.phase == "lockout":
            if "Not at proven standstill" in text:
                await key("x")
                await wait_for(pilot, lambda: "Standstill proven" in screen_text(app))
            await key("space", "space", "enter")
        elif step.kind == "hands-on":
            assert "Do the work now" in screen_text(app)
            await key("space", "space", "space", "space", "enter")
        elif step.kind == "run" and step.phase == "arming":
            # forces in the machine's unit: N, or lbf for an imperial profile
            assert " N outward" in screen_text(app) or " lbf outward" in screen_text(app) \
                or "none added" in screen_text(app)
            runs = len(proc.runs)
            await key("enter")
            # kept and on to the next step (a run kept is one more run; model-first, a
            # run that refutes the model sets the model's runs aside)
            await wait_for(pilot, lambda n=runs: len(proc.runs) > n or proc.step.kind != "run")
        elif step.kind == "correction" and proc.awaiting_sweep:
            # model-first: its coast-down comes first (the demo's motor is switched off)
            assert "needs this run's coast-down" in screen_text(app)
            await key("x")
            await wait_for(pilot, lambda: not proc.awaiting_sweep, 180)
            look()
            continue
        elif step.kind == "correction":
            assert "Parts to place" in screen_text(app)
            await key("enter")
        elif step.kind == "verdict":
            await key("enter")
            await wait_for(pilot, lambda: "Report:" in screen_text(app), 10)
            look()
            return keys
        # the keys were handled: the step moved on, or a gate refused and said why
        await wait_for(pilot, lambda s=step: proc.step is not s or
                       app.message.startswith("Refused"), 10)
    raise AssertionError("no verdict after 40 steps")


def unbalance_now(app: TrueturnApp) -> float:
    return sum(abs(z) for z in app.session.rig_call("exact_response_1x").values())


def test_two_plane_bench_grinder_to_a_pass_verdict(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("bench-grinder", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            before = unbalance_now(app)
            keys = await follow_the_screens(app, pilot, "2")
            proc = app.procedure
            # (an intermittent failure of this test, seen twice and not reproduced: each
            # assertion says what it saw, so the next one can be told apart)
            assert proc is not None and proc.verdict is not None, screen_text(app)
            assert proc.verdict.passed, screen_text(app)
            assert "PASS" in screen_text(app)
            # ISO 21940-11 at the bearings (the profile places them), at the service speed
            assert "judged at the bearings" in screen_text(app)
            assert "bearing 1: residual" in screen_text(app)
            # Honest residual: the weights the app placed on the simulated rotor cut the
            # exact 1x (physics) by at least 90 %.
            assert unbalance_now(app) < 0.1 * before, (unbalance_now(app), before)
            assert keys < 60, keys
            job = read_document(app.keeper.path, "job")
            assert job.status == "closed" and job.verdict.passed
            assert [p.plane for p in job.verdict.planes] == ["bearing 1", "bearing 2"]
            assert [r.kind for r in job.runs] == ["initial", "trial", "trial", "check"], [
                (r.kind, r.label, [(x.sensor, x.amplitude, x.phase_deg) for x in r.readings])
                for r in job.runs]
            # Is it unbalance, and how bad overall (issue #22): measured in the as-found and
            # the check run, kept in the job; the demo grinder is plain unbalance.
            first, last = job.runs[0], job.runs[-1]
            assert first.unbalance is not None and \
                first.unbalance.verdict == "unbalance_likely", first.unbalance
            assert {s.sensor for s in first.severity} == set(proc.setup.sensors)
            assert all(s.velocity_rms_mm_s and s.zone for s in first.severity)
            assert last.severity and not job.runs[1].severity  # not in trial runs
            # a balanced rotor: the overall level fell with the 1x
            assert all(b.velocity_rms_mm_s < a.velocity_rms_mm_s
                       for a, b in zip(first.severity, last.severity, strict=True))
            assert job.influence is not None  # kept for a later one-run trim
            # the trials were sized from the as-found run's coast-down as the job keeps it
            # (issue #20 item 3: the support model fitted to its curve when it found the
            # feet's resonance and the fit holds, else its resonances), so a continued job
            # sizes the same; the first trial is the size the engine gives with it
            assert app.keeper.job is not None
            fit = proc.setup.trial_sensitivity
            again = proc.engine.trial_sensitivity(proc.setup, job_coast_down_evidence(
                app.keeper.job, proc.setup.sensors))
            assert (fit is None) == (again is None)
            if isinstance(fit, PredictedInfluence) and again is not None:
                assert again.magnitude.tolist() == fit.magnitude.tolist()
            first_trial = next(m for m in proc.runs[1].masses if m.kind == "trial")
            assert first_trial.mass_g == proc.engine.trial_mass(
                proc.setup, proc.plane(first_trial.plane), proc.runs[:1]).mass_g
            # readings are stored with the DSP layer's unit label, detector included
            shown = next(iter(proc.runs[-1].readings.values())).unit
            assert {r.unit for run in job.runs for r in run.readings} == {shown}
            assert job.influence.unit == shown
            # Every confirmation keeps the evidence seen; after the as-found run the tach
            # had been seen working, so from then on it rests on tach and pickups.
            assert all(c.basis and c.board_time_s is not None and c.pickups
                       for r in job.runs for c in r.confirmations)
            assert all(c.standstill_by_tach and c.basis == "tach-and-pickups"
                       for r in job.runs[1:] for c in r.confirmations)
            assert app.keeper.report_path.read_text(encoding="utf-8").count("<svg") >= 1
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_single_plane_shop_fan_split_onto_blades(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("shop-fan", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            before = unbalance_now(app)
            await follow_the_screens(app, pilot, "1")
            proc = app.procedure
            assert proc is not None and proc.verdict is not None and proc.verdict.passed
            placed = [m for m in app.rig.masses()[1:]]  # the first is the hidden as-found
            assert placed, "no correction reached the rotor"
            for m in placed:
                # Shop-fan scenario: six blades, blade 1 at the mark: weights only at k*60 deg.
                assert math.isclose(m.angle_deg % 60.0, 0.0, abs_tol=1e-6) or \
                    math.isclose(m.angle_deg % 60.0, 60.0, abs_tol=1e-6)
            assert unbalance_now(app) < 0.1 * before
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_confirm_while_the_rotor_turns_is_refused(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("bench-grinder", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await press(app, pilot, "2")
            await through_hands_on_gates(app, pilot)
            proc = app.procedure
            assert proc is not None and proc.step.kind == "run"
            await press(app, pilot, "enter")  # confirm the forces: the motor starts
            await wait_for(pilot, lambda: len(proc.runs) == 1)
            # The guide now wants the trial mass on; the rotor still turns. Try to skip.
            assert proc.step.kind == "hands-on" and proc.step.phase == "lockout"
            assert "Not at proven standstill" in screen_text(app)
            await press(app, pilot, "space", "space", "enter")
            await shows(app, pilot, "Refused: the tach sees the rotor turning")
            assert proc.step.phase == "lockout"
            assert app.rig.masses()[2:] == []  # nothing was put on the rotor
            # Starting the motor outside a run is refused too.
            await press(app, pilot, "x")
            await wait_for(pilot, lambda: "Standstill proven" in screen_text(app))
            await press(app, pilot, "o")
            await shows(app, pilot, "Refused: start the motor from a run step")
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_key_screens_by_their_text(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("bench-grinder", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await wait_for(pilot, lambda: "Press Enter to start" in screen_text(app), 20)
            text = screen_text(app)
            version = load_catalogue().protocol_version
            assert f"Protocol         v{version}" in text and "simulated board" in text
            await press(app, pilot, "c")
            await shows(app, pilot, "manufacturer")
            assert "licensed" in screen_text(app)
            await press(app, pilot, "escape")
            await press(app, pilot, "enter")
            await wait_for(pilot, lambda: app.bench is not None and app.bench.is_mounted)
            await wait_for(pilot, lambda: "Choose the procedure" in screen_text(app), 5)
            await press(app, pilot, "question_mark")
            await shows(app, pilot, "The mouse works too")
            text = screen_text(app)
            for key, _ in KEYS:
                assert key in text
            await press(app, pilot, "escape")
            app.rig.motor(True)
            await press(app, pilot, "m")
            await wait_for(pilot, lambda: "READY" in widget_text(app, "meter-table") or
                           "settling" in widget_text(app, "meter-table"), 30)
            text = widget_text(app, "meter-table")
            assert "left-bearing" in text and "right-bearing" in text and "rpm" in text
            assert "samples lost" in text
            await press(app, pilot, "s")
            await wait_for(pilot, lambda: "  1x" in widget_text(app, "peaks"), 30)
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_mismatched_firmware_is_refused_naming_both(tmp_path: Path) -> None:
    app = make_app("bench-grinder", tmp_path, source=OtherFirmware.for_machine)
    host = app.session.catalogue

    async def scenario() -> None:
        async with app.run_test(size=SIZE) as pilot:
            await wait_for(pilot, lambda: "Refused" in screen_text(app), 10)
            text = screen_text(app)
            assert "12345678" in text and f"{host.definition_hash:08x}" in text
            await press(app, pilot, "enter")
            assert app.bench is None  # no way past the refusal
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_mode_keys_pick_the_procedure(tmp_path: Path) -> None:
    app = make_app("shop-fan", tmp_path)
    app.choose_mode(Mode.AMPLITUDE_ONLY)
    assert app.procedure is not None and app.procedure.setup.mode is Mode.AMPLITUDE_ONLY


def test_create_a_machine_in_the_app(tmp_path: Path) -> None:
    config = AppConfig("sim://shop-fan?realtime=0&motor=off", scenario_profile("shop-fan"),
                       demo=False, workspace=tmp_path / "ws")
    app = TrueturnApp(config)

    async def scenario() -> None:
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await press(app, pilot, "p")
            await wait_for(pilot, lambda: "n: new machine" in screen_text(app), 5)
            await press(app, pilot, "n")
            await wait_for(pilot, lambda: "Machine name" in screen_text(app), 5)
            fields = {"name": "Lathe 2", "kind": "faceplate", "mass": "12", "speed": "900",
                      "max_speed": "1200", "p1_radius": "150", "p1_positions": "8"}
            for key, text in fields.items():
                field = app.screen.query_one(f"#f-{key}", Input)
                field.value = ""
                if key == "name":  # typed like a person; the rest filled in directly
                    field.focus()
                    await type_text(app, pilot, text)
                else:
                    field.value = text
            await press(app, pilot, "ctrl+s")
            await wait_for(pilot, lambda: app.config.profile.name == "Lathe 2", 5)
            saved = app.keeper.workspace.load_machine("Lathe 2")
            assert saved.rotor_mass_kg == 12.0 and saved.planes[0].layout.positions == 8
            assert "Lathe 2" in screen_text(app)
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_a_pulled_cable_is_reported_and_blocks_the_gates(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("bench-grinder", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await press(app, pilot, "2")
            app.session.rig.unplug()
            await wait_for(pilot, lambda: "LINK LOST" in screen_text(app), 10)
            # No data, no standstill proof: the gate stays shut.
            await press(app, pilot, "space", "space", "enter")
            await shows(app, pilot, "Refused: no fresh data from the board")
            proc = app.procedure
            assert proc is not None and proc.step.phase == "lockout"
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_a_dark_tach_on_a_running_machine_is_a_tach_fault_on_screen(tmp_path: Path) -> None:
    # sim:// with the tach off and the motor on: no STANDSTILL, no tick, a reason in words.
    async def scenario() -> None:
        source = quick_scenario("bench-grinder", tmp_path)
        app = TrueturnApp(AppConfig(f"sim://{source}?realtime=0&tach=off",
                                    scenario_profile(source), demo=True,
                                    workspace=tmp_path / "ws"))
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await press(app, pilot, "2")
            await wait_for(pilot, lambda: "TACH FAULT" in screen_text(app), 30)
            assert "STANDSTILL" not in screen_text(app)
            await press(app, pilot, "space", "space", "enter")
            await shows(app, pilot, "Refused: TACH FAULT")
            proc = app.procedure
            assert proc is not None and proc.ticked == set() and proc.step.phase == "lockout"
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_a_run_is_stopped_with_a_and_q_asks_first(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("bench-grinder", tmp_path)
        app.config.revolutions_per_run = 10**9  # this run never completes by itself
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await press(app, pilot, "2")
            await through_hands_on_gates(app, pilot)
            proc = app.procedure
            assert proc is not None and proc.step.kind == "run"
            await press(app, pilot, "enter")  # forces confirmed: the motor starts
            await wait_for(pilot, lambda: "TURNING" in screen_text(app))
            await press(app, pilot, "q")  # mid-run: asks first
            await shows(app, pilot, "press q again")
            await press(app, pilot, "a")
            await shows(app, pilot, "Run stopped")
            assert proc.step.kind == "hands-on" and proc.runs == []
            job = read_document(app.keeper.path, "job")
            assert job.runs == [] and [e.kind for e in job.pending.events] == ["aborted"]
            # The inspection waits for standstill, then the same run comes again.
            await through_hands_on_gates(app, pilot)
            assert proc.step.kind == "run" and proc.step.run_label == "as found"
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_a_board_gone_quiet_drops_the_ticks_and_shuts_the_gates(tmp_path: Path) -> None:
    # The port stays open but nothing arrives (a hung board or hub): standstill cannot be
    # proven without fresh data (procedure.standstill: data older than 1 s of host time is
    # stale; common practice, no source), so the ticks already given are dropped and Space
    # is refused until data flow again. The host clock is the test's: it moves 2 s at once
    # (stale after 1 s; a lost link only after ui.session.LINK_SILENCE_S, 3 s:
    # tests/test_ui_hardening.py).
    clock = FakeClock()

    async def scenario() -> None:
        app = make_app("bench-grinder", tmp_path, clock=clock, source=HeldBoard.for_machine)
        board = app.session
        assert isinstance(board, HeldBoard)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await press(app, pilot, "2")
            await wait_for(pilot, lambda: "Standstill proven" in screen_text(app), 60)
            await press(app, pilot, "space")
            proc = app.procedure
            await wait_for(pilot, lambda: proc is not None and proc.ticked == {0}, 10)
            assert proc is not None
            board.hold()
            clock.now_s += 2.0
            await wait_for(pilot, lambda: "NO DATA" in widget_text(app, "status"), 5)
            await wait_for(pilot, lambda: "Ticks cleared" in screen_text(app), 5)
            assert proc.ticked == set() and "Standstill proven" not in screen_text(app)
            await press(app, pilot, "space", "space", "enter")
            await shows(app, pilot, "Refused: no fresh data from the board")
            assert proc.ticked == set() and proc.step.phase == "lockout"
            board.hold(False)  # data again: the same rotor, still at rest
            await through_hands_on_gates(app, pilot, 20)
            assert proc.step.kind == "run"
            await press(app, pilot, "q")
    asyncio.run(scenario())
