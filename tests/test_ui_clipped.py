"""The app's meter says which pickup clipped (issue #20): a capture whose first pickup goes
beyond the ADC's 0..1023 (ATmega328P datasheet, "ADC Conversion Result") through the app's
meter adapter, its readings as the procedure records them, and the live table at 80x24."""

from __future__ import annotations

import asyncio

from textual.app import App, ComposeResult

from trueturn.dsp.synthetic import OrderComponent, SyntheticRun, synthesize
from trueturn.link.codec import Message, StreamDecoder
from trueturn.ui.meter import MeterAdapter
from trueturn.ui.session import Snapshot
from trueturn.ui.views import MeterView
from trueturn.ui.widgets import MarkupText

LOUD = SyntheticRun(speed_rpm=2400.0, duration_s=3.0, channels=2, noise_counts=1.0,
                    orders=((OrderComponent(1, 600.0, 30.0),),   # beyond both rails
                            (OrderComponent(1, 100.0, 200.0),)), seed=3)


class _Meter(App[None]):
    def compose(self) -> ComposeResult:
        yield MeterView(id="meter-view")


def test_the_live_table_marks_the_clipped_pickup_only() -> None:
    adapter = MeterAdapter(["left", "right"], 50.0)
    for item in StreamDecoder().feed(synthesize(LOUD)[0]):
        if isinstance(item, Message):
            adapter.feed(item)
    view = adapter.view()
    # what Procedure.record keeps (and the job file stores) is this reading, flag and all
    assert view.readings["left"].clipped and not view.readings["right"].clipped

    async def draw() -> str:
        app = _Meter()
        async with app.run_test(size=(80, 24)) as pilot:
            app.query_one(MeterView).show(Snapshot(meter=view), [], "cw")
            await pilot.pause()
            return app.query_one("#meter-table", MarkupText).text

    text = asyncio.run(draw())
    lines = text.splitlines()
    left = next(i for i, ln in enumerate(lines) if "left" in ln)
    right = next(i for i, ln in enumerate(lines) if "right" in ln)
    assert "CLIPPED" in lines[left] and "CLIPPED" not in lines[right]
