"""Issue #18 item 4: a board that stops talking while its port stays open (a hung board, a
stalled USB hub or adapter) is a lost link within ui.session.LINK_SILENCE_S (3 s of host
time; the same bound as `trueturn record`), not a screen that keeps showing the last speed
and readings; `l` reopens the port. Common practice, no source: a stream that should send
every few milliseconds and sends nothing for seconds is gone."""

from __future__ import annotations

import asyncio
from pathlib import Path

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
from trueturn.ui.session import LINK_SILENCE_S


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
