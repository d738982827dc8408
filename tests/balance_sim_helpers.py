"""Shared helpers for the balance tests: balancing runs taken on the sim's rigid-rotor model."""

from __future__ import annotations

import numpy as np

from trueturn.angles import amplitude_phase
from trueturn.sim import Mass
from trueturn.sim.scenario import load_scenario

SCENARIOS = ["bench-grinder", "jointer-head", "lathe-faceplate", "shop-fan"]


def readings(rotor, speed_rpm, masses, rng=None, rel_noise=0.0, floor=0.0, amp_only=False):
    """1x readings of every pickup, optionally with complex Gaussian noise (rel + floor)."""
    out = {}
    for name, value in rotor.response_1x(speed_rpm, masses).items():
        if rng is not None:
            sigma = rel_noise * abs(value) + floor
            value = value + sigma * complex(rng.normal(), rng.normal())
        amp, phase = amplitude_phase(value)
        out[name] = {"amp": amp} if amp_only else {"amp": amp, "phase_deg": phase}
    return out


def classic_document(scenario_name, trial_g=None, rng=None, rel_noise=0.0, floor=0.0,
                     placement_error=False, left_on=False, linear=False):
    """READINGS for as-found + one trial per plane (removed, or left on) from a scenario."""
    sc = load_scenario(scenario_name)
    rotor, speed = sc.rotor, sc.speed_rpm
    if linear:
        rotor.nonlinearity = 0.0
    planes = [p.name for p in rotor.planes]

    def placed(m: Mass) -> Mass:
        if not placement_error or rng is None:
            return m
        return Mass(m.plane, m.mass_g * (1 + 0.02 * rng.normal()), m.angle_deg + 3.0 * rng.normal())

    size = trial_g or max(2.0 * max(m.mass_g for m in sc.as_found), 0.5)
    runs = [{"label": "as found", "added": [],
             "readings": readings(rotor, speed, sc.as_found, rng, rel_noise, floor)}]
    on: list[Mass] = []
    for j, plane in enumerate(planes):
        trial = Mass(plane, size, 60.0 * j)
        on = [*on, trial] if left_on else [trial]
        runs.append({"label": f"trial {plane}",
                     "added": [{"plane": m.plane, "mass_g": m.mass_g, "angle_deg": m.angle_deg}
                               for m in on],
                     "readings": readings(rotor, speed, sc.as_found + [placed(m) for m in on],
                                          rng, rel_noise, floor)})
    doc = {"planes": [{"name": p.name, "radius_mm": p.radius_mm} for p in rotor.planes],
           "sensors": [{"name": p.name} for p in rotor.pickups], "runs": runs}
    return sc, doc


def reduction(sc, corrections, rng=None) -> float:
    """Fraction by which the corrections cut the modelled 1x (RMS over pickups)."""
    rotor, speed = sc.rotor, sc.speed_rpm
    added = [Mass(c.plane, c.mass_g, c.angle_deg) for c in corrections]
    before = np.linalg.norm(list(rotor.response_1x(speed, sc.as_found).values()))
    after = np.linalg.norm(list(rotor.response_1x(speed, sc.as_found + added).values()))
    return 1.0 - after / before
