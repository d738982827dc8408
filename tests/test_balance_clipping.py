"""A reading from a clipped capture carries its flag into solve: never used for coefficients,
no PASS on it. Checked on a constructed linear rotor whose exact correction is known
(rigid linear influence model, R = A (U0 + W)), so any use of the distorted reading shows."""

from __future__ import annotations

import json

import numpy as np
import yaml

from balance_sim_helpers import LINEAR_TRUE_CORRECTION_G, linear_document
from cli_helpers import run_cli
from test_balance_amplitude_only import four_run_doc
from trueturn.angles import phasor
from trueturn.balance import parse_readings, solve
from trueturn.model import VerdictFlag


def _clip(reading: dict) -> None:
    reading["amp"] *= 0.6  # a clipped waveform's 1x reads low
    reading["clipped"] = True


def test_clipped_reading_is_left_out_of_the_coefficients():
    doc = linear_document((phasor(0.05, 10), phasor(0.05, 200)), bearings=False)
    _clip(doc["runs"][3]["readings"]["left"])  # the check run, 4 runs for 3 unknowns
    report = solve(parse_readings(doc))
    got = np.array([c.vector_g for c in report.solution.corrections])
    assert np.allclose(got, LINEAR_TRUE_CORRECTION_G, atol=1e-9)
    assert report.solution.clipped == [("run 3", "left")]
    # the same distorted reading without its flag moves the answer
    doc["runs"][3]["readings"]["left"].pop("clipped")
    bad = np.array([c.vector_g for c in solve(parse_readings(doc)).solution.corrections])
    assert np.max(np.abs(bad - np.array(LINEAR_TRUE_CORRECTION_G))) > 0.01


def test_clipped_last_run_never_passes(tmp_path):
    doc = linear_document((phasor(0.05, 10), phasor(0.05, 200)), bearings=False)
    doc["tolerance"] = {"rotor_mass_kg": 100.0, "grade": 40, "speed_rpm": 1000}  # lenient
    assert solve(parse_readings(doc)).verdict.passed is True
    _clip(doc["runs"][3]["readings"]["right"])
    report = solve(parse_readings(doc))
    assert report.verdict.passed is False and VerdictFlag.CLIPPED in report.verdict.flags
    path = tmp_path / "r.yaml"
    path.write_text(yaml.safe_dump(doc))
    data = json.loads(run_cli(["solve", str(path), "--json"])[1])
    assert data["clipped"] == [{"run": "run 3", "sensor": "right"}]
    assert "clipped" in data["tolerance"]["flags"] and data["tolerance"]["pass"] is False


def test_clipped_trial_without_a_spare_run_is_one_line(tmp_path):
    doc = linear_document((0j, 0j), bearings=False, check_run=False)
    _clip(doc["runs"][1]["readings"]["left"])
    path = tmp_path / "r.yaml"
    path.write_text(yaml.safe_dump(doc))
    code, out, err = run_cli(["solve", str(path)])
    assert code == 2 and out == "" and "clipped" in err and len(err.strip().splitlines()) == 1


def test_amplitude_only_leaves_the_clipped_run_out():
    # from memory: four-run method (Wowk): exact amplitudes of a linear rotor fit exactly
    u, t = phasor(4.0, 50), 3.0
    angles = (0.0, 120.0, 240.0, 60.0)
    amps = [abs(u + phasor(t, a)) for a in angles]
    doc = four_run_doc(abs(u), t, amps[:3], angles[:3])
    doc["runs"].append({"label": "extra", "added": [{"plane": "p", "mass_g": t, "angle_deg": 60.0}],
                        "readings": {"s": {"amp": amps[3] * 0.6, "clipped": True}}})
    sol = solve(parse_readings(doc)).solution
    assert abs(sol.corrections[0].vector_g - (-u)) < 1e-6
    assert sol.clipped == [("extra", "s")] and sol.clipped_last_run


def test_clipped_must_be_a_boolean(tmp_path):
    doc = four_run_doc(4.0, 3.0, [5.0, 6.0, 3.0])
    doc["runs"][1]["readings"]["s"]["clipped"] = "yes"
    path = tmp_path / "r.yaml"
    path.write_text(yaml.safe_dump(doc))
    code, _, err = run_cli(["solve", str(path)])
    assert code == 2 and "clipped" in err
