"""Trials sized to be seen (trueturn.balance.trial_mass.size_trial_for_effect /
suggest_trial) and the effect checked right after each trial run (the procedure)."""

from __future__ import annotations

import math
import sys
from pathlib import Path

import pytest

from trueturn.balance.influence import trial_size_factor
from trueturn.balance.model_first import free_rotor_prediction, predict_influence
from trueturn.balance.trial_mass import (
    MAX_FORCE_RATIO,
    TARGET_CHANGE,
    size_trial_for_effect,
    size_trial_mass,
    suggest_trial,
    trial_after_runaway,
)
from trueturn.constants import STANDARD_GRAVITY_M_S2
from trueturn.errors import UserError
from trueturn.procedure.guide import DEFAULT_RUNAWAY_FACTOR, Mode

sys.path.insert(0, str(Path(__file__).resolve().parent))
from test_ui_procedure import Rig  # noqa: E402


def test_free_rotor_trial_moves_the_1x_by_the_target() -> None:
    # Newton's second law for a free rigid body pushed through its centre of mass: the
    # trial's force m r w^2 accelerates the rotor by F / M; sized for 50 % of the as-found
    # acceleration, F / M must be half of it (independent of the sizing code)
    mass_kg, radius_mm, speed = 8.0, 90.0, 2400.0
    omega = speed * math.pi / 30
    as_found = 3.2     # m/s^2
    sens = 1e-6 * radius_mm * omega**2 / mass_kg           # m/s^2 per gram
    t = size_trial_for_effect([as_found], [sens], mass_kg, radius_mm, speed)
    force = t.mass_g * 1e-3 * radius_mm * 1e-3 * omega**2
    assert force / mass_kg == pytest.approx(TARGET_CHANGE * as_found, rel=1e-12)
    assert not t.capped


def test_the_most_telling_pickup_decides() -> None:
    # two pickups: the trial needs only be seen on one of them (the one it moves most
    # relative to its level), as trueturn.balance.influence.trial_size_factor judges it
    t = size_trial_for_effect([1.0, 4.0], [1.0, 1.0], 5.0, 50.0, 3000.0)
    assert t.mass_g == pytest.approx(TARGET_CHANGE * 1.0 / 1.0)
    before = {"a": 1.0 + 0j, "b": 4.0 + 0j}
    after = {"a": 1.0 + 1.0 * t.mass_g, "b": 4.0 + 1.0 * t.mass_g}
    assert trial_size_factor(before, after) == 1.0


def test_scatter_makes_the_trial_bigger() -> None:
    quiet = size_trial_for_effect([1.0], [1.0], 5.0, 50.0, 3000.0, [0.01])
    noisy = size_trial_for_effect([1.0], [1.0], 5.0, 50.0, 3000.0, [0.2])
    assert noisy.mass_g == pytest.approx(6 * 0.2 / 1.0) and noisy.mass_g > quiet.mass_g


def test_force_cap_and_plane_limit() -> None:
    # the cap: the trial's force m r w^2 at most MAX_FORCE_RATIO of the rotor's weight
    mass_kg, radius_mm, speed = 2.0, 100.0, 3000.0
    t = size_trial_for_effect([50.0], [0.001], mass_kg, radius_mm, speed)
    assert t.capped and t.warnings
    assert t.force_n == pytest.approx(MAX_FORCE_RATIO * mass_kg * STANDARD_GRAVITY_M_S2)
    limited = size_trial_for_effect([50.0], [0.001], mass_kg, radius_mm, speed, max_mass_g=0.5)
    assert limited.mass_g == 0.5 and "plane's limit" in limited.warnings[0]


@pytest.mark.parametrize("bad", [dict(as_found_amplitudes=[]), dict(sensitivities_per_g=[0.0]),
                                 dict(speed_rpm=math.inf), dict(rotor_mass_kg=-1.0)])
def test_bad_input_is_one_user_error(bad: dict) -> None:
    args = dict(as_found_amplitudes=[1.0], sensitivities_per_g=[0.01], rotor_mass_kg=5.0,
                radius_mm=50.0, speed_rpm=3000.0)
    args.update(bad)
    with pytest.raises(UserError):
        size_trial_for_effect(**args)  # type: ignore[arg-type]


def test_suggest_trial_prefers_saved_coefficients_then_what_a_trial_showed() -> None:
    pred = free_rotor_prediction(("a",), 5.0, [50.0], 3000.0)
    saved = suggest_trial([1.0], [None], pred, 0, 5.0, 50.0, 3000.0,
                          saved_sensitivities_per_g=[0.5])
    assert saved.mass_g == pytest.approx(TARGET_CHANGE / 0.5)
    scaled = suggest_trial([1.0], [None], pred, 0, 5.0, 50.0, 3000.0, measured_scale=0.5)
    assert scaled.mass_g == pytest.approx(TARGET_CHANGE / (0.5 * pred.magnitude[0, 0]))


def test_a_stiff_mounting_gets_at_least_the_force_floor() -> None:
    # a sweep that found no resonance below the speed: the free rotor overstates the
    # response, the trial is at least the 30 % force rule's
    from trueturn.balance.model_first import PickupPlacement, RotorLayout
    layout = RotorLayout(5.0, (-80.0, 80.0), (-100.0, 100.0), (50.0, 50.0))
    pred = predict_influence(layout, [PickupPlacement("a", 0, 0.0)], 3000.0, {"a": []})
    t = suggest_trial([1.0], [None], pred, 0, 5.0, 50.0, 3000.0)
    assert t.mass_g >= size_trial_mass(5.0, 50.0, 3000.0, 0.30).mass_g * (1 - 1e-9)


@pytest.mark.parametrize(("scenario", "mode"), [("bench-grinder", Mode.TWO_PLANE),
                                                 ("lathe-faceplate", Mode.ONE_PLANE)])
def test_the_demo_machines_default_trials_are_seen(scenario: str, mode: Mode) -> None:
    # issue #20: every default trial used to end with "changed the 1x by only 22 %" (12 %
    # on the lathe); now each trial moves the 1x by >= 25 % (common practice, no source)
    # on the simulated rotor, and no redo is asked for
    rig = Rig(scenario, mode)
    proc = rig.proc
    while proc.step.kind != "correction":
        rig.hands_on()
        rig.run()
    assert not proc.problem and proc.too_small_trial is None
    assert proc.solution is not None
    assert not [w for w in proc.solution.warnings if "changed the 1x by only" in w]
    as_found = proc.runs[0].readings
    for run in proc.runs[1:]:
        before = {n: r.vector for n, r in as_found.items()}
        after = {n: r.vector for n, r in run.readings.items()}
        assert trial_size_factor(before, after) == 1.0


@pytest.mark.parametrize("unit", ["mm/s rms", "in/s pk", "g pk", "um pk-pk"])
def test_the_trial_is_the_same_in_every_unit_the_readings_come_in(unit: str) -> None:
    # the app's readings come in the profile's unit (mm/s rms on the demo machines); the
    # predicted sensitivity is acceleration per gram. The same as-found 1x read in another
    # unit (sinusoidal kinematics, dsp.units.from_acceleration_factor) must give the same
    # trial: it once compared mm/s with m/s^2 (on the grinder 1.58 g for 0.84 g, 2.64 g
    # for 1.90 g) - within the force cap, but not the trial the sizing rule asks for
    from dataclasses import replace

    from trueturn.dsp.units import from_acceleration_factor
    from trueturn.procedure.engine import BalanceEngine

    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.hands_on()
    rig.run()
    as_found = rig.proc.runs[0]
    assert {r.unit for r in as_found.readings.values()} == {"m/s2 pk"}
    engine = BalanceEngine()
    sizes = set()
    for scale in (0.2, 1.0, 2.0):   # quieter and louder rotors: floor, sizing and cap
        loud = replace(as_found, readings={
            n: replace(r, amplitude=r.amplitude * scale,
                       confidence_radius=r.confidence_radius * scale)
            for n, r in as_found.readings.items()})
        factor = abs(from_acceleration_factor(unit, (loud.speed_rpm or 0.0) / 60.0) or 0.0)
        other = replace(loud, readings={
            n: replace(r, unit=unit, amplitude=r.amplitude * factor,
                       confidence_radius=r.confidence_radius * factor)
            for n, r in loud.readings.items()})
        for plane in rig.setup.planes:
            in_m_s2 = engine.trial_mass(rig.setup, plane, [loud]).mass_g
            assert engine.trial_mass(rig.setup, plane, [other]).mass_g == pytest.approx(
                in_m_s2, rel=1e-9)
            sizes.add(round(in_m_s2, 6))
    assert len(sizes) >= 3   # the sizing decided some of them, not only a floor or a cap


def test_the_apps_trials_are_sized_with_the_coast_downs_resonances() -> None:
    # issue #20 item 3: the trial is sized from the predicted sensitivity, with the sweep's
    # resonances when the job kept a coast-down (bench/bench_balance.py sizes its trials so).
    # A coast-down that found no resonance below the speed says the mount is stiff, where
    # the free rotor overstates the sensitivity: the force floor holds; one that found the
    # grinder's rubber-feet modes gives the rotor on its supports (the same trial whether
    # the readings are in m/s^2 or mm/s: the unit fix above)
    from dataclasses import replace

    from trueturn.balance.model_first import SupportResonance
    from trueturn.procedure.engine import BalanceEngine

    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.hands_on()
    rig.run()
    runs = list(rig.proc.runs)
    engine = BalanceEngine()
    setup = rig.setup
    plane = setup.planes[0]
    quiet = replace(runs[0], readings={n: replace(r, amplitude=r.amplitude * 0.2,
                                                  confidence_radius=r.confidence_radius * 0.2)
                                       for n, r in runs[0].readings.items()})
    none = engine.trial_mass(setup, plane, [quiet]).mass_g
    stiff = replace(setup, support_resonances={n: [] for n in setup.sensors})
    floor = size_trial_mass(setup.rotor_mass_kg, plane.radius_mm, setup.speed_rpm, 0.30).mass_g
    assert engine.trial_mass(stiff, plane, [quiet]).mass_g >= floor * (1 - 1e-9) > none
    soft = replace(setup, support_resonances={
        n: [SupportResonance(823.0, 0.03), SupportResonance(1230.0, 0.03)]
        for n in setup.sensors})
    assert engine.trial_mass(soft, plane, [quiet]).mass_g != pytest.approx(none)


@pytest.mark.parametrize("level_ratio", [3.01, 3.5, 5.0, 12.0])
def test_a_trial_after_a_runaway_is_seen_and_stays_under_the_alarm(level_ratio: float) -> None:
    # Whatever the phases: a run that read |R0 + dR| = level_ratio |R0| bounds the trial's
    # effect by the triangle inequality, (level_ratio - 1)|R0| <= |dR| <= (level_ratio + 1)
    # |R0| (from memory). Every phase of the trial's effect against the as-found 1x is tried;
    # the smaller trial (the 1x linear in the mass: Thearle 1934, from memory) then changes
    # the 1x by at least the 25 % a trial must (balance.influence) and, even added in phase,
    # leaves the run under the runaway alarm's factor.
    r0 = 1.0
    trial_g = 10.0
    smaller_g = trial_after_runaway(trial_g, level_ratio)
    for k in range(360):
        phi = math.radians(k)
        # |r0 + e^{i phi} d| = level_ratio: d = -cos(phi) + sqrt(level_ratio^2 - sin(phi)^2)
        d = -math.cos(phi) + math.sqrt(level_ratio**2 - math.sin(phi) ** 2)
        assert abs(r0 + d * complex(math.cos(phi), math.sin(phi))) == pytest.approx(level_ratio)
        change = d * smaller_g / trial_g
        assert change >= 0.25 * 1.5, (k, change)   # seen, with a margin
        assert r0 + change < DEFAULT_RUNAWAY_FACTOR, (k, change)
    # the geometric middle of the changes it can make is the target
    low, high = (level_ratio - 1) * smaller_g / trial_g, (level_ratio + 1) * smaller_g / trial_g
    assert math.sqrt(low * high) == pytest.approx(TARGET_CHANGE)


@pytest.mark.parametrize("level_ratio", [1.0, 0.5, math.inf, math.nan])
def test_a_trial_after_a_runaway_needs_a_level_over_the_as_found(level_ratio: float) -> None:
    with pytest.raises(UserError):
        trial_after_runaway(10.0, level_ratio)


def test_on_a_magnitude_only_prediction_a_later_trial_keeps_the_seen_unbalance() -> None:
    # a stiff mount: the free rotor says a magnitude per plane but not how the planes
    # differ, so a later trial scaled by what the first one showed can come out short
    # where the first trial's unbalance was seen; that unbalance is its floor (the same
    # trial unbalance in each plane: common practice, from memory). Saved coefficients
    # (exact) and a prediction with a phase size without it.
    from dataclasses import replace

    from trueturn.balance.model_first import PickupPlacement, RotorLayout
    layout = RotorLayout(5.0, (-80.0, 80.0), (-100.0, 100.0), (50.0, 60.0))
    stiff = predict_influence(layout, [PickupPlacement("a", 0, 0.0), PickupPlacement("b", 1, 0.0)],
                              3000.0, {"a": [], "b": []})
    assert stiff.magnitude_only
    seen_gmm = 4.0 * 50.0          # the first trial: 4 g at 50 mm, seen
    args = ([1.0, 1.0], [None, None])
    rest = (1, 5.0, 60.0, 3000.0)
    alone = suggest_trial(*args, stiff, *rest, measured_scale=20.0).mass_g
    floored = suggest_trial(*args, stiff, *rest, measured_scale=20.0,
                            seen_unbalance_gmm=seen_gmm).mass_g
    assert alone < seen_gmm / 60.0
    assert floored == pytest.approx(seen_gmm / 60.0)
    phased = replace(stiff, magnitude_only=False)
    assert suggest_trial(*args, phased, *rest, measured_scale=20.0,
                         seen_unbalance_gmm=seen_gmm).mass_g == pytest.approx(alone)
    assert suggest_trial(*args, stiff, *rest, saved_sensitivities_per_g=[0.5, 0.5],
                         seen_unbalance_gmm=seen_gmm).mass_g == pytest.approx(TARGET_CHANGE / 0.5)


def test_the_apps_second_trial_on_a_stiff_mount_is_not_under_the_first() -> None:
    # the grinder as if stiffly mounted (its coast-down found no resonance below the
    # speed): the second trial's unbalance is at least the first one's, which was seen
    from dataclasses import replace

    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.proc.setup = replace(rig.proc.setup,
                             support_resonances={n: [] for n in rig.setup.sensors})
    rig.hands_on()
    rig.run()
    rig.hands_on()   # the first trial on
    rig.run()
    first = next(m for m in rig.proc.runs[1].masses if m.kind == "trial")
    step = rig.proc.step
    assert step.kind == "hands-on"
    second = next(c.mass for c in step.changes if c.action == "attach" and c.mass is not None)
    r1 = rig.proc.plane(first.plane).radius_mm
    r2 = rig.proc.plane(second.plane).radius_mm
    assert second.mass_g * r2 >= first.mass_g * r1 * (1 - 1e-9)
