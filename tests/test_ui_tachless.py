"""The amplitude-only procedure with no tach at all, driven headless with Pilot (#17 item 6).

The rig is ``sim://...?tach=off``: no tach edge ever. Speed and the 1x amplitude come from the
spectrum (trueturn.dsp.tachless), standstill from the pickups alone (live and quiet for the
long hold) plus the person's confirmations. Truth for the honest residual: the rig's exact
1x response (physics, trueturn.sim board.exact_response_1x) with the weights the app put on
it, independent of the estimator.
"""

from __future__ import annotations

import asyncio
from pathlib import Path

from test_ui_app import (
    SIZE,
    connect,
    follow_the_screens,
    press,
    quick_scenario,
    screen_text,
    unbalance_now,
    wait_for,
)
from trueturn.jobs.store import read_document
from trueturn.procedure.standstill import Basis
from trueturn.ui.app import AppConfig, TrueturnApp
from trueturn.ui.launch import scenario_profile


def make_tachless_app(scenario: str, tmp_path: Path) -> TrueturnApp:
    path = quick_scenario(scenario, tmp_path)
    config = AppConfig(f"sim://{path}?realtime=0&motor=off&tach=off", scenario_profile(path),
                       demo=True, workspace=tmp_path / "ws")
    return TrueturnApp(config)


def test_amplitude_only_with_no_tach_reaches_a_correction_that_cuts_the_1x(tmp_path: Path
                                                                          ) -> None:
    async def scenario() -> None:
        app = make_tachless_app("shop-fan", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            before = unbalance_now(app)
            await press(app, pilot, "3")
            # the guide says the tach is absent, and on what standstill rests
            await wait_for(pilot, lambda: "Standstill proven: no tach on this machine"
                           in screen_text(app), 90)
            assert "no tach is needed" in screen_text(app)
            assert "STANDSTILL (no tach; pickups quiet" in screen_text(app)
            await follow_the_screens(app, pilot, "3")  # (3 again: ignored, chosen already)
            proc = app.procedure
            assert proc is not None and proc.verdict is not None
            job = read_document(app.keeper.path, "job")
            # as found + three trial positions + at least one check; every reading without
            # phase, with its speed and its 95 % uncertainty
            assert [r.kind for r in job.runs][:4] == ["initial", "trial", "trial", "trial"]
            for run in job.runs:
                assert run.speed_rpm > 0
                for r in run.readings:
                    assert r.phase_deg is None and r.confidence_radius is not None
                    assert 0 < r.confidence_radius < 0.2 * r.amplitude or \
                        run.kind == "check"
            # the fan runs at about 1737 rpm (scenario): the spectrum found it
            assert abs(job.runs[0].speed_rpm - 1737) < 30
            # Honest residual: the weights the app placed cut the physics' 1x

            assert unbalance_now(app) < 0.1 * before
            # the overall level is measured at the spectrum's speed (no tach needed)
            first = job.runs[0]
            assert all(s.velocity_rms_mm_s and s.zone for s in first.severity)
            # every confirmation rests on the pickups, the tach absent
            assert all(c.basis == Basis.PICKUPS_NO_TACH.value and not c.standstill_by_tach
                       for r in job.runs for c in r.confirmations)
            await press(app, pilot, "q")
    asyncio.run(scenario())
