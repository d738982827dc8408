"""The pickup's angle from the tach in the machine profile (issue #20 item 4): counted
against rotation (trueturn/angles.py), it turns the model's predicted phase the way the
simulator's physics does.

Checked against the simulator's 4-DOF rotor (its own influence matrix, sim/rotor.py, not our
estimator), on the invented demo scenarios; the model itself: rigid rotor on flexible
supports (Vance, *Rotordynamics of Turbomachinery*, 1988, ch. 2; from memory).
"""

from __future__ import annotations

import numpy as np
import pytest

from trueturn.balance.model_first import (
    PickupPlacement,
    RotorLayout,
    SupportResonance,
    predict_influence,
)
from trueturn.jobs.profiles import MachineProfile
from trueturn.schema import SchemaError, from_data, to_data
from trueturn.sim.scenario import load_scenario
from trueturn.sim.spec import describe
from trueturn.ui.machine import profile_from_scenario


# the rigs on soft mounts (support resonances below the running speed)
@pytest.mark.parametrize("name", ["shop-fan", "bench-grinder"])
def test_profile_angle_gives_the_simulators_phase(name: str) -> None:
    scenario = load_scenario(name)
    profile = profile_from_scenario(scenario)
    rotor = scenario.rotor
    speed = scenario.speed_rpm
    layout = RotorLayout(rotor.mass_kg, tuple(b.axial_mm for b in rotor.bearings),  # type: ignore[arg-type]
                         tuple(p.axial_mm for p in rotor.planes),
                         tuple(p.radius_mm for p in rotor.planes),
                         rotor.centre_of_mass_axial_mm, rotor.transverse_inertia_kg_m2,
                       mounted_mass_kg=rotor.mounted_mass_kg)
    modes = [m for m in rotor.critical_speeds_rpm() if m < speed]
    placements = [PickupPlacement.from_profile(k.name, m.bearing, k.angle_from_tach_deg)
                  for k, m in zip(profile.pickups, rotor.pickups, strict=True)]
    sweep = {p.name: [SupportResonance(m, 0.03) for m in modes] for p in placements}
    pred = predict_influence(layout, placements, speed, sweep)
    truth = rotor.influence_matrix(speed)
    phase_error = np.abs(np.degrees(np.angle(truth / pred.matrix)))
    # the band the prediction states for itself (95 %) plus the damping we assumed
    assert np.all(phase_error <= pred.phase_95_deg + 10.0), (phase_error, pred.phase_95_deg)
    # the wrong sense (with rotation) is far off where the angle is not 0 or 180
    wrong = [PickupPlacement(k.name, m.bearing, k.angle_from_tach_deg)
             for k, m in zip(profile.pickups, rotor.pickups, strict=True)]
    if any(w.angle_from_tach_deg not in (0.0, 180.0) for w in wrong):
        bad = predict_influence(layout, wrong, speed, sweep)
        assert np.max(np.abs(np.degrees(np.angle(truth / bad.matrix)))) > 90.0


def test_shop_fans_angles_are_the_scenarios_and_described() -> None:
    # shop-fan.yaml: tach looking down from above (90 deg, angles growing with rotation in
    # the simulator), pickups horizontal (0) and vertical (90): against rotation 90 and 0
    scenario = load_scenario("shop-fan")
    assert [k.angle_from_tach_deg for k in profile_from_scenario(scenario).pickups] == [90.0, 0.0]
    assert [p["angle_from_tach_deg"] for p in describe(scenario)["pickups"]] == [90.0, 0.0]


def test_the_angle_is_optional_and_checked_by_the_one_validator() -> None:
    data = to_data(profile_from_scenario(load_scenario("bench-grinder")))
    del data["pickups"][0]["angle_from_tach_deg"]
    assert from_data(MachineProfile, data, "old.yaml").pickups[0].angle_from_tach_deg is None
    data["pickups"][0]["angle_from_tach_deg"] = -90
    assert from_data(MachineProfile, data, "m.yaml").pickups[0].angle_from_tach_deg == 270.0
    data["pickups"][0]["angle_from_tach_deg"] = 400
    with pytest.raises(SchemaError, match=r"pickups\[0\].angle_from_tach_deg"):
        from_data(MachineProfile, data, "m.yaml")
