"""The app when the link or the tach misbehaves (issue: reliability), driven with Pilot at
80x24 on sim:// rigs: a pulled cable and a board restart in the middle of a run, tach faults
in plain words, and the procedure's own rules for interrupted runs and a silent tach.

What counts as right here is common practice, no source: a run's reading is an average over
whole steady revolutions taken under one stream, so a run cut by a lost link or a restarted
board is dropped and measured again from zero, and a 1x phase without a working
once-per-rev reference is not kept. Scenarios and numbers are the project's demo rigs.
"""

from __future__ import annotations

import asyncio
from collections.abc import Callable
from dataclasses import replace
from pathlib import Path

from textual.pilot import Pilot

from test_ui_app import (
    SIZE,
    OtherFirmware,
    connect,
    make_app,
    press,
    screen_text,
    through_hands_on_gates,
    wait_for,
    widget_text,
)
from test_ui_procedure import Rig, tick_all
from trueturn.dsp.findings import Code, Finding, describe
from trueturn.jobs.store import read_document
from trueturn.procedure.guide import GateRefused, Mode
from trueturn.ui.app import TrueturnApp
from trueturn.ui.meter import tach_faults


def said_by(app: TrueturnApp, method: str) -> list[str]:
    """The messages the app showed right after each call of ``method`` (a run can complete,
    and its message replace this one, between two looks at the screen)."""
    said: list[str] = []
    real = getattr(app, method)

    def wrapper(*args: object) -> None:
        real(*args)
        said.append(app.message)

    setattr(app, method, wrapper)
    return said


def fault_while_spinning_up(app: TrueturnApp, fault: Callable[[], None]) -> dict[str, bool]:
    """Pull the fault (from the reader thread, between two reads) as soon as the as-found
    run is running and the rotor is turning but not yet at speed: the run is certainly
    partial then (the meter needs steady speed over 30 revolutions)."""
    port = app.session.port
    real_read = port.read
    fired = {"done": False}

    def read(size: int = 1) -> bytes:
        proc = app.procedure
        if (not fired["done"] and proc is not None and proc.step.kind == "run"
                and proc.step.phase == "running"
                and 0.1 < port.rig.speed_rpm / proc.setup.speed_rpm < 0.8):
            fired["done"] = True
            fault()
        return real_read(size)

    port.read = read
    return fired


async def to_the_as_found_run(app: TrueturnApp, pilot: Pilot, mode_key: str = "1") -> None:
    """The procedure of ``mode_key`` (default: one plane), its set-up step through both
    gates: the as-found run waits for its forces to be confirmed."""
    await press(app, pilot, mode_key)
    await through_hands_on_gates(app, pilot, 20)
    proc = app.procedure
    assert proc is not None and proc.step.kind == "run" and proc.step.phase == "arming"


def test_unplug_mid_run_keeps_the_job_and_reconnect_resumes_the_run(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("shop-fan", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await to_the_as_found_run(app, pilot)
            proc = app.procedure
            assert proc is not None and app.keeper.path is not None
            await press(app, pilot, "enter")
            await wait_for(pilot, lambda: len(proc.runs) == 1, 30)
            # the trial mass goes on, then its run is cut by the pulled cable
            await press(app, pilot, "x")
            await through_hands_on_gates(app, pilot, 20)
            assert proc.step.kind == "run" and proc.step.phase == "arming"
            saved_before = app.keeper.path.read_bytes()
            old_rig = app.session.rig
            assert len(old_rig.masses) == 1  # the trial mass
            fired = fault_while_spinning_up(app, old_rig.unplug)
            await press(app, pilot, "enter")  # forces confirmed: the run starts
            await wait_for(pilot, lambda: "LINK LOST" in screen_text(app), 20)
            assert fired["done"]
            text = screen_text(app)
            assert "is incomplete: nothing of it was kept" in text and "press l" in text
            assert proc.step.phase == "interrupted" and len(proc.runs) == 1
            # nothing was stored from the partial average, and the job file is untouched
            assert app.keeper.path.read_bytes() == saved_before
            job = read_document(app.keeper.path, "job")
            assert job.status == "open" and len(job.runs) == 1
            assert app.keeper.workspace.resume_job(app.keeper.path).job_id == job.job_id
            await press(app, pilot, "enter")  # confirming does nothing but say why
            await wait_for(pilot, lambda: "The run was interrupted: press l" in
                           screen_text(app), 10)
            assert proc.step.phase == "interrupted"
            # the reconnect key reopens the same port and the same run starts over
            said = said_by(app, "reconnected")
            await press(app, pilot, "l")
            await wait_for(pilot, lambda: not app.link_error, 20)
            assert "Reconnected" in said[0] and "Run 2 (trial blades) starts over" in said[0]
            new_rig = app.session.rig
            assert new_rig is not old_rig  # a freshly opened port
            # demo: the fresh virtual board carries the rotor as it was (weights, motor)
            assert new_rig.masses == old_rig.masses and new_rig.running
            await wait_for(pilot, lambda: len(proc.runs) == 2, 60)
            run = proc.runs[1]
            assert run.label.startswith("trial")
            assert all(r.revolutions >= 30 and r.steady for r in run.readings.values())
            assert [e.kind for e in run.events] == ["link-lost"]
            assert "started over after a lost link" in screen_text(app)
            job = read_document(app.keeper.path, "job")
            assert [r.kind for r in job.runs] == ["initial", "trial"]
            assert [e.kind for e in job.runs[1].events] == ["link-lost"]
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_board_restart_mid_run_restarts_the_stream_and_the_run(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("shop-fan", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await to_the_as_found_run(app, pilot)
            proc = app.procedure
            assert proc is not None
            said = said_by(app, "board_restarted")
            fired = fault_while_spinning_up(app, app.session.rig.reset)
            await press(app, pilot, "enter")
            await wait_for(pilot, lambda: bool(said), 20)
            assert fired["done"]
            assert "board restarted (power dip or loose cable?)" in said[0]
            assert "run 1 (as found) starts over" in said[0]
            snap = app.session.snapshot()
            assert snap.restarts == 1 and snap.counters["board_resets"] == 1
            await wait_for(pilot, lambda: len(proc.runs) == 1, 60)
            snap = app.session.snapshot()
            assert snap.streaming  # configured and started again without the person
            assert [e.kind for e in proc.runs[0].events] == ["board-restart"]
            # the run's average holds only revolutions after the restart: the meter was
            # fresh from it (its first revolution is after the new stream_config)
            assert all(r.revolutions >= 30 for r in proc.runs[0].readings.values())
            text = screen_text(app)
            assert "board restarts: 1" in text and "started over after a board restart" in text
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_reconnect_to_a_mismatched_firmware_is_refused_naming_both(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("bench-grinder", tmp_path, source=OtherFirmware.for_machine)
        session = app.session
        assert isinstance(session, OtherFirmware)
        session.other = False  # the board we started with
        host = session.catalogue
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            session.rig.unplug()
            await wait_for(pilot, lambda: "LINK LOST" in screen_text(app), 10)
            session.other = True  # another firmware answers on the same port
            await press(app, pilot, "l")
            await wait_for(pilot, lambda: "Refused" in screen_text(app), 10)
            text = screen_text(app)
            assert "12345678" in text and f"{host.definition_hash:08x}" in text
            assert app.link_error and not session.snapshot().streaming
            session.other = False
            await press(app, pilot, "l")
            await wait_for(pilot, lambda: "Reconnected" in screen_text(app), 20)
            assert session.snapshot().streaming
            await press(app, pilot, "q")
    asyncio.run(scenario())


def _meter_tach_text(tmp_path: Path, tach: str, expect: str) -> str:
    tmp_path.mkdir()

    async def scenario() -> str:
        app = make_app("bench-grinder", tmp_path)
        app.config.url += f"&tach={tach}"
        app.session.url = app.config.url
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            app.rig.motor(True)
            await press(app, pilot, "m")
            await wait_for(pilot, lambda: app.session.rig.speed_rpm > 1000.0 and
                           expect in widget_text(app, "meter-table"), 30)
            text = widget_text(app, "meter-table")
            await press(app, pilot, "q")
            return text
    return asyncio.run(scenario())


def test_knocked_and_missing_tach_edges_are_named_on_the_meter(tmp_path: Path) -> None:
    # sim:// tach=knocked: about one edge in ten 5-15 degrees early or late
    text = _meter_tach_text(tmp_path / "k", "knocked", "Tach: uneven tach edges")
    assert "missed" not in text
    # sim:// tach=missing: about one edge in ten never seen
    assert "Tach: missed tach edges (" in _meter_tach_text(tmp_path / "m", "missing",
                                                          "Tach: missed tach edges")


def test_no_tach_run_is_never_accepted_and_says_why(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("shop-fan", tmp_path)
        app.config.url += "&tach=off"
        app.session.url = app.config.url
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await to_the_as_found_run(app, pilot)
            proc = app.procedure
            assert proc is not None
            await press(app, pilot, "enter")  # the motor runs, the tach sees nothing
            await wait_for(pilot, lambda: app.session.rig.speed_rpm >
                           0.95 * proc.setup.speed_rpm, 20)
            await wait_for(pilot, lambda: "No tach edge for" in screen_text(app), 10)
            await wait_for(pilot, lambda: app.session.snapshot().board_time_s > 8.0, 20)
            # the screen is drawn on the app's next refresh after the meter has judged: wait
            # for that drawing (reading it at once raced the refresh and failed under load)
            await wait_for(pilot, lambda: "Tach: no tach edges" in screen_text(app), 10)
            # the rotor turns: the status line never says standstill, the tach is at fault
            await wait_for(pilot, lambda: "TACH FAULT" in screen_text(app), 10)
            assert "STANDSTILL" not in screen_text(app)
            assert proc.runs == [] and proc.step.phase == "running"
            await press(app, pilot, "q")
    asyncio.run(scenario())


# ---- the same rules in the pure procedure (no Textual) -----------------------------------

def test_interrupted_run_keeps_nothing_until_resumed() -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    rig.hands_on()
    proc = rig.proc
    proc.arm_run(True, rig.t)
    rig.spin(1.0, rig.setup.speed_rpm)
    assert proc.interrupt_run("link-lost", "cable pulled", rig.t)
    full = rig.readings()
    assert not proc.ready(full)
    try:
        proc.record(full, rig.setup.speed_rpm, rig.t)
        raise AssertionError("an interrupted run was recorded")
    except GateRefused as exc:
        assert "reconnect" in str(exc)
    proc.resume_run()
    assert proc.ready(full)
    # a silent tach, or a reading that says there is no tach, keeps nothing
    assert not proc.ready(full, tach_live=False)
    no_tach = {k: replace(r, no_tach=True)
               for k, r in full.items()}
    assert not proc.ready(no_tach)
    run = proc.record(full, rig.setup.speed_rpm, rig.t)
    assert [e.kind for e in run.events] == ["link-lost"]


def test_done_gate_after_a_reopened_link_needs_the_long_quiet() -> None:
    # The link was lost and reopened while the person worked (power locked out): the tach
    # has not been seen working on the new link, so its silence alone proves nothing; the
    # done gate waits for the long quiet of pickups and tach (procedure.standstill).
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    rig.hands_on()
    rig.run()
    proc = rig.proc
    rig.settle()
    tick_all(proc)
    proc.lock_out(rig.t)
    proc.watch.reset()
    rig.rest(3.5)
    try:
        tick_all(proc)
        raise AssertionError("done gate opened on an unproven tach after 3.5 s")
    except GateRefused as exc:
        assert "checking standstill" in str(exc)
    rig.settle()
    assert proc.watch.evidence().basis.value == "pickups-long-hold"
    tick_all(proc)
    proc.hands_on_done(rig.t)
    assert proc.step.kind == "run"


def test_lock_out_after_a_restart_needs_the_tach_seen_working_again() -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    rig.hands_on()
    rig.run()
    proc = rig.proc
    proc.watch.reset()  # the board restarted: its tach edges so far prove nothing
    rig.rest(3.5)
    try:
        tick_all(proc)
        raise AssertionError("tick allowed with an unproven tach after 3.5 s")
    except GateRefused as exc:
        assert "checking standstill" in str(exc)
    rig.spin(1.0, rig.setup.speed_rpm)  # seen working again, coasting down, then quiet
    rig.coast(rig.setup.speed_rpm)
    rig.settle()
    assert proc.watch.evidence().basis.value == "tach-and-pickups"
    tick_all(proc)
    proc.lock_out(rig.t)
    assert proc.step.phase == "working"


def test_tach_warnings_in_plain_words() -> None:
    # the DSP's findings (trueturn.dsp.meter.LiveAnalyzer.stream_findings), chosen by code
    found = [Finding(Code.TACH_MISSED_EDGES, count=3), Finding(Code.TACH_EXTRA_EDGES, count=17),
             Finding(Code.TACH_UNEVEN, count=4, details={"scatter_deg": 2.1}),
             Finding(Code.NO_TACH), Finding(Code.LINK_TACH_LOST, count=2),
             Finding(Code.ORDER_ON_MAINS, "left", details={"order": 1, "hum_hz": 60.0})]
    words = [describe(f, brief=True) for f in tach_faults(found)]
    assert words[0].startswith("no tach edges")
    assert "missed tach edges (3)" in words[1] and "the mark was not seen" in words[1]
    # edges lost on the USB link are said as link loss, not as a mark the sensor missed
    assert "lost on the USB link (2)" in words[2] and "mark" not in words[2]
    assert "extra tach edges (17)" in words[3]
    assert "uneven tach edges" in words[4] and len(words) == 5
    assert tach_faults(found[-1:]) == ()
