"""Shared helpers for the balance tests: balancing runs taken on the sim's rigid-rotor model."""

from __future__ import annotations

import numpy as np

from trueturn.angles import amplitude_phase, phasor
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


def linear_document(residual_g: tuple[complex, complex], bearings: bool = True,
                    speeds_rpm: tuple[float, ...] | None = None, exponent: float = 0.0,
                    trial_g: float = 5.0, check_run: bool = True) -> dict:
    """READINGS from a known linear two-plane rotor (R = A (U0 + W)); the check run leaves
    ``residual_g`` (grams at 75 mm) in the planes; ``speeds_rpm``: one per run (4 runs), the
    1x scaled by ``(n / n_first) ** exponent``; the correction that zeroes it is ``-U0``.
    Constructed numbers: the tests check the engine against formulas (statics, ISO
    21940-11), not against these values."""
    a = np.array([[phasor(0.30, 40), phasor(0.12, 300)], [phasor(0.10, 110), phasor(0.28, 20)]])
    u0 = np.array([phasor(3.0, 70), phasor(2.0, 250)])
    runs_w = [np.zeros(2, complex), np.array([phasor(trial_g, 0), 0]),
              np.array([0, phasor(trial_g, 90)]), np.array(residual_g) - u0][:4 if check_run else 3]
    speeds = speeds_rpm or (1.0,) * len(runs_w)

    def reading(w, speed=1.0):
        r = a @ (u0 + w) * (speed / speeds[0]) ** exponent
        return {s: {"amp": float(abs(v)), "phase_deg": float(np.degrees(np.angle(v)) % 360)}
                for s, v in zip(("left", "right"), r, strict=True)}

    def added(w):
        return [{"plane": p, "mass_g": float(abs(x)), "angle_deg": float(np.degrees(np.angle(x)) % 360)}
                for p, x in zip(("wheel L", "wheel R"), w, strict=True) if abs(x) > 0]

    doc = {"planes": [{"name": "wheel L", "radius_mm": 75, "axial_mm": -150},
                      {"name": "wheel R", "radius_mm": 75, "axial_mm": 150}],
           "sensors": [{"name": "left"}, {"name": "right"}],
           "runs": [{"label": f"run {k}", "added": added(w), "readings": reading(w, n)}
                    for k, (w, n) in enumerate(zip(runs_w, speeds, strict=True))],
           "tolerance": {"rotor_mass_kg": 4.5, "grade": 6.3, "speed_rpm": 3538.8}}
    if speeds_rpm is not None:
        for run, speed in zip(doc["runs"], speeds_rpm, strict=True):
            run["speed_rpm"] = speed
    if bearings:
        doc["bearings"] = [{"name": "motor end", "axial_mm": -60}, {"name": "free end", "axial_mm": 60}]
    return doc


#: the correction that zeroes the 1x of :func:`linear_document`'s rotor: minus its U0
LINEAR_TRUE_CORRECTION_G = (-phasor(3.0, 70), -phasor(2.0, 250))
