"""Is it unbalance? in the app, through the public Pilot API (issue #22): the offer to stop
when balancing may not help, and the optional second start as found.

Invented demo scenarios: the misaligned belt drive (a strong 2x) and the saw arbor whose
flange is loose on its key (``loose-hub``: the 1x moves between starts). The rules are common
practice, no source (dsp/unbalance.py). Every screen is looked at in 80x24: the guide's
panel must hold all its lines (nothing cut off at the bottom).
"""

from __future__ import annotations

import asyncio
from pathlib import Path

from textual.content import Content
from textual.widgets import ContentSwitcher

from test_ui_app import (
    SIZE,
    connect,
    make_app,
    press,
    screen_text,
    through_hands_on_gates,
    wait_for,
)
from trueturn.jobs.store import read_document
from trueturn.procedure.guide import HandsOn, Measure, ShowDoubt, Stopped
from trueturn.ui.app import TrueturnApp
from trueturn.ui.steps import StepPanel


def panel_fits(app: TrueturnApp, seen: str | None = None) -> None:
    """The shown panel's lines fit its place on an 80x24 screen (wrapped at its width). A
    hands-on step draws the placement pictures above its text, which then scrolls
    (PgDn/PgUp) by design: there the line holding ``seen`` must be in the first screenful."""
    current = app.screen.query_one("#step-panels", ContentSwitcher).current
    panel = app.screen.query_one(f"#{current}", StepPanel)
    region = panel.content_region
    needed = panel.get_content_height(region.size, app.size, region.width)
    if current == "hands-on-panel" and seen is not None:
        text = str(panel.render())
        before = text[:text.index(seen)]  # the lines above it, and its own start
        above = len(Content(before).wrap(region.width)) if before else 1
        assert above <= region.height, (current, above, region.height, "\n" + text)
        return
    assert 0 < needed <= region.height, (current, needed, region.height,
                                         "\n" + str(panel.render()))


async def as_found_run(app: TrueturnApp, pilot) -> None:  # type: ignore[no-untyped-def]
    """One plane; the set-up gates; the as-found run recorded; the motor switched off."""
    await press(app, pilot, "1")
    await through_hands_on_gates(app, pilot)
    await press(app, pilot, "enter")  # the forces: start the run
    proc = app.procedure
    assert proc is not None
    await wait_for(pilot, lambda: len(proc.runs) == 1, 90)
    await press(app, pilot, "x")


def test_belt_drive_is_asked_first_and_stopping_keeps_why(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("belt-misaligned", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await as_found_run(app, pilot)
            proc = app.procedure
            assert proc is not None
            await wait_for(pilot, lambda: isinstance(proc.step, ShowDoubt), 10)
            await wait_for(pilot, lambda: "Balancing may not help" in screen_text(app), 10)
            text = screen_text(app)
            assert "k: stop the job here" in text and "go on with the balancing anyway" in text
            assert "2x is" in text and "check alignment and mounting bolts" in text
            panel_fits(app)
            await press(app, pilot, "k")
            await wait_for(pilot, lambda: isinstance(proc.step, Stopped)
                           and "Report:" in screen_text(app), 10)
            text = screen_text(app)
            assert "Stopped after the as-found run by your choice" in text and "strong 2x" in text
            panel_fits(app)
            job = read_document(app.keeper.path, "job")
            assert job.status == "closed" and job.verdict is None
            assert job.stopped is not None and job.stopped.reason == "balancing_may_not_help"
            assert job.stopped.because == ["two_x_ratio"] and job.stopped.after_run == 1
            report = app.keeper.report_path.read_text(encoding="utf-8")
            assert "Stopped after run 1 by the person&#x27;s choice" in report or \
                "Stopped after run 1 by the person's choice" in report
            assert "No balance verdict" in report
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_belt_drive_going_on_anyway_reaches_the_trial(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("belt-misaligned", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await as_found_run(app, pilot)
            proc = app.procedure
            assert proc is not None
            await wait_for(pilot, lambda: isinstance(proc.step, ShowDoubt), 10)
            await press(app, pilot, "enter")
            await wait_for(pilot, lambda: isinstance(proc.step, HandsOn), 10)
            # its size once the coast-down is fitted (issue #20 item 3: seconds of work)
            await wait_for(pilot, lambda: "Attach trial mass" in screen_text(app), 60)
            assert "balancing may not help" in screen_text(app)  # still said below the step
            panel_fits(app, "Attach the trial mass")
            job = read_document(app.keeper.path, "job")
            assert job.status == "open" and job.stopped is None
            await press(app, pilot, "q", "q")
    asyncio.run(scenario())


def test_a_second_start_of_the_loose_flange_shows_the_1x_moved(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("loose-hub", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await as_found_run(app, pilot)
            proc = app.procedure
            assert proc is not None
            # one start looks like unbalance: the trial comes next, the second start offered
            # (once the rotor stands still: a second start needs a stop)
            await wait_for(pilot, lambda: "balancing should help" in screen_text(app), 10)
            assert isinstance(proc.step, HandsOn)
            assert "balancing should help" in screen_text(app)
            panel_fits(app, "Attach the trial mass")
            await wait_for(pilot, lambda: "Standstill proven" in screen_text(app), 60)
            await wait_for(pilot, lambda: "n: optional: start it again" in screen_text(app), 10)
            panel_fits(app, "n: optional: start")
            await press(app, pilot, "n")
            await wait_for(pilot, lambda: isinstance(proc.step, Measure), 10)
            await press(app, pilot, "enter")  # the forces: start the second run
            await wait_for(pilot, lambda: proc.second_start is not None, 90)
            await press(app, pilot, "x")
            await wait_for(pilot, lambda: isinstance(proc.step, ShowDoubt)
                           and "moved between starts" in screen_text(app), 10)
            assert "Not only unbalance" in screen_text(app)
            panel_fits(app)
            assert len(proc.runs) == 1
            job = read_document(app.keeper.path, "job")
            first = job.runs[0]
            assert len(job.runs) == 1 and first.second_start is not None
            assert first.unbalance is not None
            assert first.unbalance.verdict == "balancing_may_not_help"
            moved = [e for e in first.unbalance.evidence if e.code == "phase_repeatable"]
            assert moved and not moved[0].ok
            await press(app, pilot, "q", "q")
    asyncio.run(scenario())


def test_a_second_start_of_the_grinder_repeats_and_the_trial_follows(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = make_app("bench-grinder", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await press(app, pilot, "2")  # two planes, two pickups: the fullest screens
            await through_hands_on_gates(app, pilot)
            await press(app, pilot, "enter")
            proc = app.procedure
            assert proc is not None
            await wait_for(pilot, lambda: len(proc.runs) == 1, 90)
            await press(app, pilot, "x")
            await wait_for(pilot, lambda: "n: optional: start it again" in screen_text(app), 60)
            panel_fits(app, "n: optional: start")
            # the trial as sized from the coast-down (issue #20 item 3), which the second
            # start comes back to
            await wait_for(pilot, lambda: not proc.sizing_trial, 60)
            trial_step = proc.step
            await press(app, pilot, "n")
            await wait_for(pilot, lambda: isinstance(proc.step, Measure), 10)
            panel_fits(app)
            await press(app, pilot, "enter")
            await wait_for(pilot, lambda: proc.second_start is not None, 90)
            await press(app, pilot, "x")
            await wait_for(pilot, lambda: "1x repeats after a restart" in screen_text(app), 10)
            assert proc.step == trial_step and "balancing should help" in screen_text(app)
            assert "n: optional: start" not in screen_text(app)  # once
            panel_fits(app, "Attach the trial mass")
            await wait_for(pilot, lambda: "Standstill proven" in screen_text(app), 60)
            panel_fits(app, "Attach the trial mass")
            job = read_document(app.keeper.path, "job")
            first = job.runs[0]
            assert len(job.runs) == 1 and first.second_start is not None
            assert first.unbalance is not None and first.unbalance.verdict == "unbalance_likely"
            assert [e.ok for e in first.unbalance.evidence if e.code == "phase_repeatable"] \
                == [True, True]
            assert {s.sensor for s in first.second_start.severity} == set(proc.setup.sensors)
            await press(app, pilot, "q", "q")
    asyncio.run(scenario())
