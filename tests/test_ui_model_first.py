"""Model-first in the app (issue #20 item 4), on the simulated bench grinder at 80x24: the
as-found run, its coast-down (the app's own sweep finds the supports' resonances), then a
first correction from the model with its 95 % +/- and no trial run; the check run refines
the coefficients and the verdict is judged as in every mode. Without a pickup angle in the
profile the model says why it cannot be trusted and a trial run per plane follows.

Checked against the simulator's physics (the exact 1x of the virtual rotor with the masses
the app placed, ``exact_response_1x``; not our estimator), and the run count against the
two-plane procedure's on the same rig. No timing: the test waits for what the app shows.
"""

from __future__ import annotations

import asyncio
from dataclasses import replace
from pathlib import Path

import yaml

from test_ui_app import SIZE, connect, follow_the_screens, press, screen_text, unbalance_now
from trueturn.jobs.store import read_document
from trueturn.sim.scenario import scenario_dir
from trueturn.ui.app import AppConfig, TrueturnApp
from trueturn.ui.launch import scenario_profile


def grinder_app(tmp_path: Path, angles: bool = True,
                angle_error_deg: float = 0.0) -> TrueturnApp:
    """The demo grinder as shipped, its spin-up shortened (the coast-down kept: the sweep)."""
    raw = yaml.safe_load((scenario_dir() / "bench-grinder.yaml").read_text(encoding="utf-8"))
    raw["motor"]["spin_up_s"] = 1.0
    path = tmp_path / "bench-grinder.yaml"
    path.write_text(yaml.safe_dump(raw), encoding="utf-8")
    profile = scenario_profile(str(path))
    if not angles:
        profile = replace(profile, pickups=[replace(k, angle_from_tach_deg=None)
                                            for k in profile.pickups])
    if angle_error_deg:
        profile = replace(profile, pickups=[
            replace(k, angle_from_tach_deg=((k.angle_from_tach_deg or 0.0) + angle_error_deg)
                    % 360.0) for k in profile.pickups])
    config = AppConfig(f"sim://{path}?realtime=0&motor=off", profile, demo=True,
                       workspace=tmp_path / "ws")
    return TrueturnApp(config)


def test_model_first_on_the_grinder_needs_no_trial_run(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = grinder_app(tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            assert "model first" in screen_text(app)
            before = unbalance_now(app)
            seen: list[str] = []
            await follow_the_screens(app, pilot, "5", seen)
            proc = app.procedure
            assert proc is not None and proc.model is not None
            assert proc.model.trusted, proc.model
            assert any("From the model, no trial run" in s and "(95 %)" in s for s in seen)
            assert proc.verdict is not None and proc.verdict.passed
            # physics: the parts the app placed cut the virtual rotor's exact 1x by 90 %
            assert unbalance_now(app) < 0.1 * before
            labels = [r.label for r in proc.runs]
            assert not any(lb.startswith("trial") for lb in labels)
            # the two-plane procedure needs as found + 2 trials + a check at the least
            assert len(labels) < 4, labels
            job = read_document(app.keeper.path, "job")
            assert job.method == "model-first" and job.verdict.passed
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_without_pickup_angles_the_app_says_why_and_runs_trials(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = grinder_app(tmp_path, angles=False)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            before = unbalance_now(app)
            seen: list[str] = []
            await follow_the_screens(app, pilot, "5", seen)
            proc = app.procedure
            assert proc is not None and proc.model is not None and not proc.model.trusted
            assert any("Model not trusted (a pickup's angle from the tach is not in the "
                       "machine profile)" in s for s in seen)
            assert [r.label for r in proc.runs][:3] == ["as found", "trial left-wheel",
                                                        "trial right-wheel"]
            assert proc.verdict is not None and proc.verdict.passed
            assert unbalance_now(app) < 0.1 * before
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_the_model_first_screens_fit_80x24(tmp_path: Path) -> None:
    # the wait for the coast-down fits whole; the model's correction is laid out whole and
    # scrolls to its last line, nothing cut off (assert_fits, tests/test_ui_resume_app.py)
    from test_ui_app import through_hands_on_gates, wait_for
    from test_ui_resume_app import assert_fits

    async def scenario() -> None:
        app = grinder_app(tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await assert_fits(app, pilot)   # the set-up with five procedures
            await press(app, pilot, "5")
            await through_hands_on_gates(app, pilot)
            await press(app, pilot, "enter")   # the as-found run
            proc = app.procedure
            assert proc is not None
            await wait_for(pilot, lambda: len(proc.runs) == 1, 120)
            await wait_for(pilot, lambda: "needs this run's coast-down" in screen_text(app))
            await assert_fits(app, pilot, whole=True)
            await press(app, pilot, "x")
            await wait_for(pilot, lambda: not proc.awaiting_sweep, 180)
            await wait_for(pilot, lambda: "(95 %)" in screen_text(app))
            await assert_fits(app, pilot)
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_every_reason_the_model_is_not_trusted_has_words() -> None:
    # facts travel as codes (balance.model_first.Distrust); the app words each one
    from trueturn.balance.model_first import Distrust
    from trueturn.ui import texts

    assert {d.value for d in Distrust} <= set(texts.DISTRUST_WORDS)
    line = texts.model_refused(("refuted",))
    assert "masses come off" in line and "trial run" in line


def test_a_check_run_that_refutes_the_model_in_the_app(tmp_path: Path) -> None:
    # the profile's pickup angles mis-measured by 150 deg: the model is sure of a wrong
    # correction; the check run's 1x falls far outside its prediction, the app says the
    # model is dropped and why, the next hands-on step takes the model's parts off with
    # the trial, and trials lead to a PASS the physics agrees with
    async def scenario() -> None:
        app = grinder_app(tmp_path, angle_error_deg=150.0)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            before = unbalance_now(app)
            seen: list[str] = []
            await follow_the_screens(app, pilot, "5", seen)
            proc = app.procedure
            assert proc is not None and proc.model is not None
            assert proc.model.refuted_at is not None and not proc.model.trusted
            assert any("From the model, no trial run" in s for s in seen)
            assert any("check run's 1x fell far outside its prediction" in s for s in seen)
            assert [r.label for r in proc.runs][:3] == ["as found", "trial left-wheel",
                                                        "trial right-wheel"]
            assert proc.verdict is not None and proc.verdict.passed
            assert unbalance_now(app) < 0.1 * before
            job = read_document(app.keeper.path, "job")
            assert job.verdict.passed and len(job.runs) > len(proc.runs)   # the record keeps it
            await press(app, pilot, "q")
    asyncio.run(scenario())
