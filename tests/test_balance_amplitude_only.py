"""Amplitude-only (no tach) method checked against the four-run closed form and the sim."""

from __future__ import annotations

import math

import numpy as np
import pytest

from balance_sim_helpers import readings
from trueturn.balance import parse_readings, solve
from trueturn.sim import Mass
from trueturn.sim.scenario import load_scenario


def four_run_doc(v0, trial_g, amps, angles=(0.0, 120.0, 240.0), plane="p", sensor="s"):
    runs = [{"label": "as found", "added": [], "readings": {sensor: {"amp": v0}}}]
    for a, v in zip(angles, amps, strict=True):
        runs.append({"added": [{"plane": plane, "mass_g": trial_g, "angle_deg": a}],
                     "readings": {sensor: {"amp": v}}})
    return {"planes": [{"name": plane, "radius_mm": 100}], "sensors": [{"name": sensor}],
            "runs": runs}


@pytest.mark.parametrize("seed", range(6))
def test_matches_the_four_run_closed_form(seed):
    # from memory: the four-run method (e.g. Wowk, "Machinery Vibration: Balancing"):
    # with trials 120 deg apart, T^2 = (V1^2 + V2^2 + V3^2)/3 - V0^2, correction mass
    # m = m_T * V0 / T, and the heavy spot lies at arg(sum V_k^2 e^{i theta_k}); correction
    # opposite. Amplitudes generated from a random linear single-plane rotor.
    rng = np.random.default_rng(seed)
    alpha = rng.uniform(0.1, 2.0) * np.exp(1j * rng.uniform(0, 2 * np.pi))
    unbalance = rng.uniform(1, 10) * np.exp(1j * rng.uniform(0, 2 * np.pi))
    trial_g = rng.uniform(1, 10)
    angles = (0.0, 120.0, 240.0)
    v0 = abs(alpha * unbalance)
    amps = [abs(alpha * (unbalance + trial_g * np.exp(1j * math.radians(a)))) for a in angles]
    t = math.sqrt(sum(v * v for v in amps) / 3 - v0 * v0)
    mass_ref = trial_g * v0 / t
    heavy = sum(v * v * np.exp(1j * math.radians(a)) for v, a in zip(amps, angles, strict=True))
    angle_ref = (math.degrees(np.angle(heavy)) + 180.0) % 360.0
    sol = solve(parse_readings(four_run_doc(v0, trial_g, amps, angles))).solution
    assert sol.method == "amplitude-only (four-run method)"
    c = sol.corrections[0]
    assert c.mass_g == pytest.approx(mass_ref, rel=1e-6)
    assert abs((c.angle_deg - angle_ref + 180) % 360 - 180) < 1e-4
    assert not sol.ambiguous


@pytest.mark.parametrize("name", ["lathe-faceplate", "shop-fan"])
def test_cuts_modelled_1x_on_sim_rotor(name):
    # physics truth: sim rigid-rotor model; noise-free >= 99 %, with 2 % amplitude noise
    # >= 90 % in most (>= 60 %) of 12 seeded trials
    sc = load_scenario(name)
    rotor, speed, plane = sc.rotor, sc.speed_rpm, sc.rotor.planes[0]
    pickup = rotor.pickups[0].name
    trial_g = 2 * sc.as_found[0].mass_g

    def reduction_with(rng, rel):
        runs = [{"added": [], "readings": {pickup: readings(rotor, speed, sc.as_found, rng, rel,
                                                            0.0, amp_only=True)[pickup]}}]
        for a in (0.0, 120.0, 240.0):
            m = Mass(plane.name, trial_g, a)
            runs.append({"added": [{"plane": plane.name, "mass_g": trial_g, "angle_deg": a}],
                         "readings": {pickup: readings(rotor, speed, sc.as_found + [m], rng, rel,
                                                       0.0, amp_only=True)[pickup]}})
        doc = {"planes": [{"name": plane.name, "radius_mm": plane.radius_mm}],
               "sensors": [{"name": pickup}], "runs": runs}
        c = solve(parse_readings(doc)).solution.corrections[0]
        before = abs(rotor.response_1x(speed, sc.as_found)[pickup])
        after = abs(rotor.response_1x(speed, sc.as_found + [Mass(c.plane, c.mass_g, c.angle_deg)])[pickup])
        return 1 - after / before

    rotor.nonlinearity = 0.0
    assert reduction_with(None, 0.0) >= 0.99
    rng = np.random.default_rng(5)
    results = [reduction_with(rng, 0.02) for _ in range(12)]
    assert np.mean(np.array(results) >= 0.9) >= 0.6, results


def test_three_runs_are_reported_ambiguous():
    # geometry: two circles meet in two points, so two trial positions leave a mirror answer
    unbalance, trial_g = 4.0 * np.exp(1j * math.radians(70)), 3.0
    angles = (0.0, 120.0)
    amps = [abs(unbalance + trial_g * np.exp(1j * math.radians(a))) for a in angles]
    doc = four_run_doc(abs(unbalance), trial_g, amps, angles)
    sol = solve(parse_readings(doc)).solution
    assert sol.ambiguous and sol.candidates
    truth = -unbalance
    options = [sol.corrections[0].vector_g] + [c[0].vector_g for c in sol.candidates]
    assert min(abs(o - truth) for o in options) < 1e-4


def test_least_squares_generalisation_with_unequal_trials():
    # any set of trial positions and sizes: exact recovery of a linear single-plane rotor
    alpha, unbalance = 0.7 * np.exp(1j * 1.1), 5.0 * np.exp(1j * 2.0)
    trials = [(2.0, 10.0), (3.0, 100.0), (2.5, 200.0), (4.0, 300.0), (1.0, 45.0)]
    runs = [{"added": [], "readings": {"s": {"amp": abs(alpha * unbalance)}}}]
    for m, a in trials:
        runs.append({"added": [{"plane": "p", "mass_g": m, "angle_deg": a}],
                     "readings": {"s": {"amp": abs(alpha * (unbalance + m * np.exp(1j * math.radians(a))))}}})
    doc = {"planes": [{"name": "p", "radius_mm": 50}], "sensors": [{"name": "s"}], "runs": runs}
    sol = solve(parse_readings(doc)).solution
    assert sol.method == "amplitude-only (least squares)"
    assert abs(sol.corrections[0].vector_g + unbalance) < 1e-5


def test_amplitude_only_uncertainty_from_confidence():
    unbalance, trial_g = 4.0 * np.exp(1j * math.radians(70)), 3.0
    angles = (0.0, 120.0, 240.0)
    amps = [abs(unbalance + trial_g * np.exp(1j * math.radians(a))) for a in angles]
    doc = four_run_doc(abs(unbalance), trial_g, amps, angles)
    widths = []
    for conf in (0.02, 0.2):
        for run in doc["runs"]:
            run["readings"]["s"]["confidence"] = conf
        widths.append(solve(parse_readings(doc)).solution.corrections[0].mass_g_pm)
    assert 0 < widths[0] < widths[1]
