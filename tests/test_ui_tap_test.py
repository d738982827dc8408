"""The tap test's screen in the app (model first on a stiff mount), at 80x24 on the simulated
lathe faceplate: its supports' modes (29-70 Hz) lie above the balancing speed, so the
coast-down finds none; with a noisy coast-down the model alone is not trusted and the
optional tap test is offered behind its checklist gate. While it is recorded the demo rig
strikes the housings and the status strip says the ringing is expected (no TACH FAULT);
Enter analyses the taps and the modes found are shown with the model's answer; t skips.

The coast-down is run and recorded by the app, but its evidence is stood in for by the
simulator's own 1x curve with a fixed scatter (tests/test_procedure_tap_test.py
``stiff_sweep``, seed 0): the DSP's fit to one noisy coast-down trusts the model on some
noise draws and not on others, and the draw depended on when the key was pressed (CI,
2026-12-03: no tap offered). What is tested here is the screen, the gate, the recording and
the tap's analysis; the coast-down's own analysis is tested in tests/test_ui_model_first.py.

Checked against the simulator's physics: the tapped modes lie at the model's own natural
frequencies at rest (the eigenproblem of K and M, Rao, *Mechanical Vibrations*, from
memory; tests/test_balance_support_fit_tap.py). No timing: the test waits for what the app
shows.
"""

from __future__ import annotations

import asyncio
import re
from pathlib import Path

import numpy as np
import pytest
import scipy.linalg
import yaml

from test_procedure_tap_test import stiff_sweep
from test_ui_app import SIZE, connect, press, screen_text, through_hands_on_gates, wait_for
from test_ui_procedure import Rig
from trueturn.procedure.engine import SweepEvidence
from trueturn.procedure.guide import TAP_CHECKLIST, Mode, TapPhase, TapTest
from trueturn.sim.scenario import load_scenario, scenario_dir
from trueturn.ui.app import AppConfig, TrueturnApp
from trueturn.ui.launch import scenario_profile


def coast_down_evidence(monkeypatch: pytest.MonkeyPatch, **scatter: float) -> None:
    """The app's coast-down evidence: the lathe's own curve, by default too noisy for the
    model alone (a fixed draw; see the module's docstring)."""
    evidence, _ = stiff_sweep(Rig("lathe-faceplate", Mode.MODEL_FIRST), **scatter)

    def stand_in(outcome: object, sensors: object, speed_rpm: float) -> SweepEvidence | None:
        return None if outcome is None else evidence

    monkeypatch.setattr("trueturn.ui.app.sweep_evidence", stand_in)


@pytest.fixture(autouse=True)
def noisy_coast_down(monkeypatch: pytest.MonkeyPatch) -> None:
    coast_down_evidence(monkeypatch)


def lathe_app(tmp_path: Path) -> tuple[TrueturnApp, str]:
    """The demo lathe, its spin-up shortened."""
    raw = yaml.safe_load((scenario_dir() / "lathe-faceplate.yaml").read_text(encoding="utf-8"))
    raw["motor"]["spin_up_s"] = 1.0
    path = tmp_path / "lathe-faceplate.yaml"
    path.write_text(yaml.safe_dump(raw), encoding="utf-8")
    config = AppConfig(f"sim://{path}?realtime=0&motor=off", scenario_profile(str(path)),
                       demo=True, workspace=tmp_path / "ws")
    return TrueturnApp(config), str(path)


def natural_hz(path: str) -> np.ndarray:
    """The undamped natural frequencies of the scenario's rotor at rest, Hz (K and M)."""
    mass, _, stiff, _ = load_scenario(path).rotor.equations_of_motion(0.0)
    return np.sqrt(np.abs(scipy.linalg.eigvals(stiff, mass).real)) / (2.0 * np.pi)


def status(app: TrueturnApp) -> str:
    return screen_text(app).splitlines()[1] if screen_text(app) else ""


async def offered(app: TrueturnApp, pilot) -> None:  # type: ignore[no-untyped-def]
    await connect(app, pilot)
    await press(app, pilot, "5")
    await through_hands_on_gates(app, pilot)
    await press(app, pilot, "enter")   # the as-found run
    proc = app.procedure
    assert proc is not None
    await wait_for(pilot, lambda: len(proc.runs) == 1, 120)
    await wait_for(pilot, lambda: "needs this run's coast-down" in screen_text(app))
    await press(app, pilot, "x")
    await wait_for(pilot, lambda: not proc.awaiting_sweep, 180)
    await wait_for(pilot, lambda: isinstance(proc.step, TapTest), 30)


def test_the_tap_test_screen_gate_recording_and_modes(tmp_path: Path) -> None:
    async def scenario() -> None:
        app, path = lathe_app(tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await offered(app, pilot)
            proc = app.procedure
            assert proc is not None and proc.model is not None
            assert not proc.model.trusted and proc.model.tap_may_help
            text = screen_text(app)
            assert "Tap test at standstill (optional)" in text
            # the gate: every item, not ticked; Enter refused until they are
            await wait_for(pilot, lambda: "Standstill proven" in screen_text(app), 60)
            assert all(item[:30] in re.sub(r"\s+", " ", screen_text(app))
                       for item in TAP_CHECKLIST[-2:])
            await press(app, pilot, "enter")
            await wait_for(pilot, lambda: "tick every item" in screen_text(app), 10)
            assert isinstance(proc.step, TapTest) and proc.step.phase is TapPhase.OFFERED
            await press(app, pilot, *["space"] * len(TAP_CHECKLIST), "enter")
            await wait_for(pilot, lambda: isinstance(proc.step, TapTest)
                           and proc.step.phase is TapPhase.TAPPING, 10)
            # recording: the rig's mallet strikes; the ringing is expected, no fault
            strips: list[str] = []

            def recorded() -> bool:
                strips.append(status(app))
                seconds = app.session.tap_recording_s
                return seconds is not None and seconds >= 11.0

            await wait_for(pilot, recorded, 120)
            assert any("TAP TEST: ringing expected" in s for s in strips), strips
            assert not any("TACH FAULT" in s for s in strips), strips
            assert "Recording:" in screen_text(app)
            await press(app, pilot, "enter")   # taps done: analyse
            await wait_for(pilot, lambda: proc.tap is not None
                           or proc.step.phase is TapPhase.REFUSED, 120)  # type: ignore[union-attr]
            assert proc.tap is not None, proc.step
            # the modes shown lie at the rotor's natural frequencies at rest (physics)
            truth = natural_hz(path)
            found = [m.frequency_hz for modes in proc.tap.modes.values() for m in modes]
            assert found and all(np.min(np.abs(truth - f)) / f < 0.05 for f in found), (
                found, truth)
            shown = re.sub(r"\s+", " ", screen_text(app))
            assert "tap test" in shown.lower() and "Hz" in shown
            assert proc.model is not None and proc.model.tapped
            # held to the tapped modes the model is trusted (test_procedure_tap_test.py);
            # its correction says what made it so
            assert proc.model.trusted, proc.model
            assert "the tap test's modes pinned the supports' stiffness" in shown
            assert "the coast-down fits," not in shown
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_t_skips_the_tap_test_and_trials_follow(tmp_path: Path) -> None:
    async def scenario() -> None:
        app, _ = lathe_app(tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await offered(app, pilot)
            proc = app.procedure
            assert proc is not None
            await press(app, pilot, "t")
            await wait_for(pilot, lambda: not isinstance(proc.step, TapTest), 10)
            assert proc.fallback and proc.tap is None
            assert "trial" in proc.step.title  # type: ignore[union-attr]
            assert "trial" in screen_text(app).lower()
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_a_trusted_model_short_of_the_grade_offers_the_tap_and_t_keeps_its_correction(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # a clean coast-down: the model is trusted, but its correction may leave more than the
    # grade permits (procedure.engine.short_of_grade): the tap is offered to narrow it,
    # and skipping it goes on with the model's correction, not trials
    coast_down_evidence(monkeypatch, scatter_m_s2=0.1)

    async def scenario() -> None:
        app, _ = lathe_app(tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await offered(app, pilot)
            proc = app.procedure
            assert proc is not None and proc.model is not None and proc.model.trusted
            left = proc.model.residual_fraction_95
            assert left is not None
            shown = re.sub(r"\s+", " ", screen_text(app))
            assert f"may leave up to {100 * left:.0f} % of the 1x" in shown, shown
            assert "skip, use the model's correction" in shown
            await press(app, pilot, "t")
            await wait_for(pilot, lambda: not isinstance(proc.step, TapTest), 10)
            assert not proc.fallback and proc.tap is None
            assert proc.solution is not None and proc.solution is proc.model.solution
            await wait_for(pilot, lambda: "Correction from the model" in screen_text(app), 10)
            assert "the model's correction follows" in screen_text(app)
            await press(app, pilot, "q")
    asyncio.run(scenario())
