"""The guide's step panels (trueturn.ui.steps) through the public Pilot API, fed by the pure
procedure driven on the demo rotors' physics (test_ui_procedure.Rig): the branches a demo
balance seldom reaches (an alarm, a trial too small, an off-speed run, removal, a verdict
that withholds the pass, a lost link) say what the procedure will do.

What counts as right is the procedure's own answer (the mass it will ask for, the angle it
will drill at), read back from the procedure, never re-typed; common practice, no source.
"""

from __future__ import annotations

import asyncio
import re
from dataclasses import replace

from textual.app import App, ComposeResult
from textual.widgets import ContentSwitcher

from test_ui_meter_widen import _at_the_check_run
from test_ui_procedure import Rig, _HugeTrialEngine, _TinyTrialEngine
from test_ui_resume_model_first import (
    _shake_at_the_model_check,
    _WrongModelEngine,
    model_correction_on,
)
from trueturn.angles import wrap_deg
from trueturn.dsp.findings import Code, Finding
from trueturn.model import VerdictFlag
from trueturn.procedure.engine import BalanceEngine
from trueturn.procedure.guide import Mode, Procedure, RunPhase, Widened
from trueturn.ui.machine import setup_from_profile
from trueturn.ui.meter import MeterView as MeterReadings
from trueturn.ui.session import Snapshot
from trueturn.ui.steps import GuideContext, GuideView, MessageLine, StepPanel, panel_for
from trueturn.ui.texts import VERDICT_FLAG_WORDS, WIDENED_WHY

SIZE = (80, 24)


class GuideApp(App):
    """Only the guide, as the bench screen holds it."""

    def compose(self) -> ComposeResult:
        yield GuideView(id="guide-view")


def snapshot(rig: Rig, meter: MeterReadings | None = None) -> Snapshot:
    ev = rig.proc.watch.evidence()
    return Snapshot(meter=meter or MeterReadings(rig.setup.sensors), standstill=ev.proven,
                    evidence=ev, quiet_s=ev.tach_silent_s, board_time_s=rig.t)


def shown(rig: Rig, meter: MeterReadings | None = None, **context: object) -> dict[str, str]:
    """Show the procedure's step in a fresh guide (the meter as given, else empty); what
    is on screen, by part."""

    async def look() -> dict[str, str]:
        app = GuideApp()
        async with app.run_test(size=SIZE) as pilot:
            guide = app.query_one(GuideView)
            ctx = GuideContext(rig.profile, BalanceEngine(), demo=True, **context)  # type: ignore[arg-type]
            guide.show(rig.proc, snapshot(rig, meter), ctx)
            await pilot.pause()
            drawn = [p for p in app.query(StepPanel) if str(p.render())]
            msg = app.query_one(MessageLine)
            return {"current": app.query_one(ContentSwitcher).current or "",
                    "drawn": ",".join(p.id or "" for p in drawn),
                    "text": "\n".join(str(p.render()) for p in drawn),
                    "message": str(msg.render()),
                    "alarm": "yes" if msg.has_class("alarm") else "no"}
    return asyncio.run(look())


def test_an_alarm_stops_the_run_in_red_until_acknowledged() -> None:
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.trial_armed()
    over = rig.setup.max_speed_rpm + 50
    (alarm, *_) = rig.proc.observe(rig.readings(), over, rig.t)
    seen = shown(rig, alarm=alarm.detail)
    assert seen["current"] == seen["drawn"] == "run-panel"
    assert f"STOPPED: {alarm.detail}" in seen["text"]
    assert "Nothing of this run is kept." in seen["text"]
    assert "I have seen the alarm" in seen["text"]
    assert seen["message"] == alarm.detail and seen["alarm"] == "yes"
    rig.proc.acknowledge_alarm()
    seen = shown(rig)
    assert seen["drawn"] == "hands-on-panel" and seen["alarm"] == "no"
    assert "Stopped (overspeed): inspect the rotor" in seen["text"]


def test_a_runaway_on_a_trial_shows_the_smaller_trial_that_goes_on() -> None:
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.proc = Procedure(rig.setup, _HugeTrialEngine())
    rig.trial_armed()
    rig.spin(2.0, rig.setup.speed_rpm)
    assert rig.proc.observe(rig.readings(), rig.setup.speed_rpm, rig.t)  # the simulator's 1x
    rig.proc.acknowledge_alarm()
    shrunk = rig.proc.shrunk_trial
    assert shrunk is not None
    text = shown(rig)["text"]
    line = re.search(r"The trial on (\S+) \(([\d.]+) g\) moved the 1x to ([\d.]+) times its "
                     r"as-found level:.*fit ([\d.]+) g at the same place", text, re.S)
    assert line is not None, text
    assert line[1] == shrunk.plane and float(line[2]) == round(shrunk.trial_g, 2)
    assert float(line[3]) == round(shrunk.level_ratio, 1)
    assert float(line[4]) == round(shrunk.smaller_g, 2)
    assert "Stopped (vibration too high): a smaller trial on" in text


def test_a_runaway_on_the_model_check_says_the_model_is_refuted_and_trials_follow() -> None:
    rig = Rig("bench-grinder", Mode.MODEL_FIRST)
    rig.proc = Procedure(rig.setup, _WrongModelEngine())
    model_correction_on(rig)
    _shake_at_the_model_check(rig)
    shook = rig.proc.model_shook
    assert shook is not None
    text = shown(rig)["text"]
    line = re.search(r"The model's correction moved the 1x at (\S+) to ([\d.]+) times its "
                     r"as-found level:.*model is not trusted.*trial run per plane",
                     text, re.S)
    assert line is not None, text
    assert line[1] == shook.sensor and float(line[2]) == round(shook.level_ratio, 1)
    assert "Stopped (vibration too high): the model's correction comes off" in text


def _amplitude_only_run_text(*findings: Finding) -> str:
    """The guide of an amplitude-only run under way, the meter at 3541 rpm with
    ``findings``."""
    rig = Rig("bench-grinder", Mode.AMPLITUDE_ONLY)
    rig.hands_on()
    rig.proc.arm_run(True, rig.t)
    meter = MeterReadings(rig.setup.sensors, speed_rpm=3541.0, findings=list(findings))
    return shown(rig, meter)["text"]


def test_a_tachless_run_says_when_its_speed_comes_from_a_harmonic() -> None:
    # the meter's finding (dsp.tachless: the 1x lost in the noise, the speed from the 2x)
    # reaches the run panel's first line; without it the plain spectrum line stays
    text = _amplitude_only_run_text(
        Finding(Code.SPEED_FROM_ORDER, details={"order": 2, "speed_rpm": 3541.0}))
    assert "No tach: speed from the 2x line (about 3541 rpm), the 1x being lost" in text
    plain = _amplitude_only_run_text()
    assert "No tach: speed from the spectrum (about 3541 rpm)" in plain


def test_an_amplitude_only_run_says_when_a_tach_reads_its_1x() -> None:
    # a tach fitted after all (ui.meter: finding tach_reads_1x): the run panel says the 1x
    # is read locked to it and that the method takes its amplitude, not "no tach"
    text = _amplitude_only_run_text(Finding(Code.TACH_READS_1X, details={"speed_rpm": 3541.0}))
    assert "Tach seen: speed 3541 rpm from it, the 1x read locked to it" in text
    assert "No tach" not in text


def test_a_trial_too_small_offers_the_mass_the_procedure_will_ask_for() -> None:
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.proc = Procedure(rig.setup, _TinyTrialEngine())
    for _ in range(2):  # set-up, as found, trial left: checked right after its run
        rig.hands_on()
        rig.run()
    small = rig.proc.too_small_trial
    assert small is not None
    text = shown(rig)["text"]
    assert "No correction from these runs:" in text
    offer = re.search(r"Enter: redo the trial on (\S+) with ([\d.]+) g instead of ([\d.]+) g",
                      text)
    assert offer is not None, text
    larger = rig.proc.redo_trial_larger()
    assert offer[1] == larger.plane
    assert float(offer[2]) == larger.mass_g and float(offer[3]) == round(small.trial_g, 2)


def test_an_off_speed_run_is_named_and_can_be_run_again() -> None:
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.hands_on()
    rig.run()  # as found
    rig.hands_on()
    rig.proc.arm_run(True, rig.t)
    rig.spin(2.0, rig.setup.speed_rpm * 0.98)
    rig.proc.record(rig.readings(scale=0.98 ** 2), rig.setup.speed_rpm * 0.98, rig.t)
    rig.coast(rig.setup.speed_rpm)
    rig.hands_on()
    rig.run()
    text = shown(rig)["text"]
    assert "Run 'trial left-wheel' was 2.0 % slow" in text
    assert "e: run it again at the usual speed first" in text
    assert "removing material is not allowed on this rotor" in text


def test_removal_is_shown_opposite_the_addition_where_the_profile_allows_it() -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    # a plane whose maker allows drilling (invented)
    rig.profile.planes[0] = replace(rig.profile.planes[0], removal_allowed=True)
    rig.setup = setup_from_profile(rig.profile, Mode.ONE_PLANE)
    rig.proc = Procedure(rig.setup, BalanceEngine())
    for _ in range(2):
        rig.hands_on()
        rig.run()
    assert "r: remove material instead (drill/grind)" in shown(rig)["text"]
    rig.proc.set_removal(True)
    text = shown(rig)["text"]
    assert "r: add mass instead" in text
    (c,) = rig.proc.solution.corrections
    # the one removal rule (PlacedMass.as_addition): removing at theta = adding at theta+180
    assert f"{c.plane}: remove {c.mass_g:.2f} g at {wrap_deg(c.angle_deg + 180):.0f}°" in text
    assert all(f"{p.plane}: remove {p.mass_g:.2f} g" in text for p in rig.proc.solution.parts)


def test_a_verdict_that_withholds_the_pass_says_why() -> None:
    rig = Rig("bench-grinder", Mode.ONE_PLANE)  # one plane of a two-plane rotor
    rig.complete()
    text = shown(rig)["text"]
    assert "NOT YET: ISO 21940-11" in text and "PASS" not in text
    assert VERDICT_FLAG_WORDS[VerdictFlag.PARTIAL_PLANES] in text
    assert "Enter: close the job and write the report" in text


def test_a_lost_link_mid_run_says_nothing_of_the_run_is_kept() -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    rig.hands_on()
    rig.proc.arm_run(True, rig.t)
    assert rig.proc.interrupt_run("link-lost", "cable pulled", rig.t)
    assert rig.proc.step.phase is RunPhase.INTERRUPTED
    seen = shown(rig, link_error="the port vanished")
    assert seen["drawn"] == "link-panel" and panel_for(rig.proc.step) == "run-panel"
    assert "LINK LOST: the port vanished" in seen["text"]
    assert "Run 1 (as found) is incomplete: nothing of it was kept" in seen["text"]


def test_the_status_strip_names_a_fitted_tach_in_an_amplitude_only_job() -> None:
    # The amplitude-only job's watch does not rely on the tach, but a fitted tach's edges
    # say the rotor turns: the strip says so with the tach's speed, not "(pickups, no
    # tach)"; stopped and proven on the pickups it says the tach is not relied on
    from trueturn.procedure.standstill import UNTRUSTED_TACH_HOLD_S
    from trueturn.ui.views import StatusStrip

    rig = Rig("shop-fan", Mode.AMPLITUDE_ONLY)
    assert rig.proc.watch.tach_absent
    rig.spin(5.0, 1740.0)  # a tach edge each turn, the pickups seeing the 1x

    def strip() -> str:
        s = StatusStrip()
        s.show(snapshot(rig, MeterReadings(rig.setup.sensors, speed_rpm=1740.0)),
               machine="fan", demo=True, identity=None, link_error="", reconnecting=False)
        return str(s.text)

    assert "TURNING 1740 rpm" in strip() and "no tach" not in strip()
    rig.coast(1740.0)
    rig.rest(UNTRUSTED_TACH_HOLD_S + 5.0)
    assert "STANDSTILL[/] (tach not relied on; pickups quiet" in strip()


def test_a_run_that_averages_longer_says_how_long_and_why() -> None:
    # an undecided check run the longest average would decide (procedure.guide.widen_to):
    # the run panel counts to the wider window and names why, in the words of
    # texts.WIDENED_WHY; before it widens, neither
    rig, check = _at_the_check_run(0.2)
    proc = rig.proc
    wanted = proc.revolutions_wanted
    meter = MeterReadings(rig.setup.sensors, speed_rpm=rig.setup.speed_rpm, readings=check)
    before = " ".join(shown(rig, meter)["text"].split())
    assert f"averaging {wanted} steady revolutions." in before
    assert proc.widen_to(check, wanted, wanted, 600) == 2 * wanted
    after = " ".join(shown(rig, meter)["text"].split())
    why = WIDENED_WHY[Widened.VERDICT_UNDECIDED]
    assert f"averaging {2 * wanted} steady revolutions ({why})." in after
