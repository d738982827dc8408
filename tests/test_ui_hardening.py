"""Issue #18 items 3 and 4. A workspace that cannot be written (a file where its folder
should be, a full disk) is said on screen, the job kept in memory, another folder offered
(w), and quitting without saving exits with status 1. A board that stops talking while its port stays open (a hung board, a
stalled USB hub or adapter) is a lost link within ui.session.LINK_SILENCE_S (3 s of host
time; the same bound as `trueturn record`), not a screen that keeps showing the last speed
and readings; `l` reopens the port. Common practice, no source: a stream that should send
every few milliseconds and sends nothing for seconds is gone."""

from __future__ import annotations

import asyncio
from pathlib import Path

from textual.widgets import Input

from test_ui_app import (
    SIZE,
    FakeClock,
    HeldBoard,
    connect,
    make_app,
    press,
    screen_text,
    wait_for,
    widget_text,
)
from trueturn.jobs.store import read_document
from trueturn.ui.app import AppConfig, LinkLost, TrueturnApp
from trueturn.ui.launch import scenario_profile
from trueturn.ui.session import LINK_SILENCE_S


def test_an_unwritable_workspace_is_said_and_the_job_saved_elsewhere(tmp_path: Path) -> None:
    (tmp_path / "ws").write_text("a file where the workspace folder should be\n")
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()

    async def scenario() -> None:
        app = make_app("bench-grinder", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await press(app, pilot, "2")
            await wait_for(pilot, lambda: "NOT SAVED" in screen_text(app), 20)
            assert app.keeper.job is not None and app.keeper.unsaved
            await press(app, pilot, "q")  # the first q warns: the job is not saved
            await wait_for(pilot, lambda: "q again to quit without saving" in
                           screen_text(app), 10)
            await press(app, pilot, "w")
            await wait_for(pilot, lambda: len(app.screen.query(Input)) == 1, 10)
            app.screen.query_one(Input).value = str(elsewhere)
            await press(app, pilot, "enter")
            await wait_for(pilot, lambda: "Saved in" in screen_text(app), 10)
            assert app.keeper.unsaved is None
            await press(app, pilot, "q")
        assert app.return_code == 0
    asyncio.run(scenario())
    (job,) = (elsewhere / "jobs").glob("*.yaml")
    assert read_document(job, "job").machine.name


def test_quitting_with_the_job_unsaved_is_not_a_success(tmp_path: Path) -> None:
    (tmp_path / "ws").write_text("a file where the workspace folder should be\n")

    async def scenario() -> None:
        app = make_app("bench-grinder", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await press(app, pilot, "2")
            await wait_for(pilot, lambda: "NOT SAVED" in screen_text(app), 20)
            await press(app, pilot, "q")
            await wait_for(pilot, lambda: "q again" in screen_text(app), 10)
            await press(app, pilot, "q")
            await wait_for(pilot, lambda: app.return_code is not None, 10)
        assert app.return_code == 1
    asyncio.run(scenario())


def test_a_silent_board_is_a_lost_link_and_l_reconnects(tmp_path: Path) -> None:
    clock = FakeClock()

    async def scenario() -> None:
        app = make_app("bench-grinder", tmp_path, clock=clock, source=HeldBoard.for_machine)
        board = app.session
        assert isinstance(board, HeldBoard)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            assert board.silence() is None
            board.hold()
            clock.now_s += LINK_SILENCE_S - 0.5  # stale, not yet lost
            await wait_for(pilot, lambda: "NO DATA" in widget_text(app, "status"), 10)
            assert not app.link_error and board.silence() is None
            clock.now_s += 1.0
            await wait_for(pilot, lambda: "LINK LOST" in widget_text(app, "status"), 10)
            assert "nothing from the board" in app.link_error and "port open" in app.link_error
            board.hold(False)
            await press(app, pilot, "l")
            await wait_for(pilot, lambda: not app.link_error, 30)
            await wait_for(pilot, lambda: "Reconnected" in screen_text(app), 10)
            assert "LINK LOST" not in widget_text(app, "status")
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_a_refusal_with_brackets_is_shown_as_text(tmp_path: Path) -> None:
    # the port's refusal repeats the URL form "sim://NAME[?realtime=0|1&...]": shown as
    # words, not read as Rich markup (a MarkupError closed the app before)
    config = AppConfig("sim://bench-grinder?pace=abc", scenario_profile("bench-grinder"),
                       demo=True, workspace=tmp_path / "ws")

    async def scenario() -> None:
        app = TrueturnApp(config)
        async with app.run_test(size=SIZE) as pilot:
            await wait_for(pilot, lambda: "pace must be a number" in screen_text(app), 20)
            assert "Cannot use sim://bench-grinder?pace=abc" in screen_text(app)
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_a_lost_link_with_brackets_in_its_words_is_shown_as_text(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("bench-grinder", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            app.post_message(LinkLost("[Errno 5] Input/output error on sim://x[?pace=F|1]"))
            await wait_for(pilot, lambda: "[Errno 5] Input/output error on sim://x[?pace=F|1]"
                           in screen_text(app), 10)
            await press(app, pilot, "q")
    asyncio.run(scenario())
