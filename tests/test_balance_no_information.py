"""No information, no answer: unresolved trials refused, absurd corrections refused or
flagged, amplitude-only readings that are zero, inconsistent or ambiguous never passed.

Sources named per check. Two independent 95 % circles of a reading's change add in
quadrature (JCGM 100:2008, GUM, law of propagation of uncertainty for uncorrelated inputs).
The thresholds (1 % repeatability without confidence radii, 1 % / 10 % of the rotor mass,
10 % fit scatter) are common practice, no source.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import yaml

from balance_sim_helpers import linear_document
from cli_helpers import run_cli
from test_balance_amplitude_only import four_run_doc
from trueturn.angles import angle_difference_deg, phasor
from trueturn.balance import parse_readings, solve
from trueturn.balance.sanity import AbsurdCorrectionError, CorrectionFlag, NoInformationError
from trueturn.model import VerdictFlag


def _write(tmp_path, doc):
    path = tmp_path / "r.yaml"
    path.write_text(yaml.safe_dump(doc))
    return path


def test_trial_with_no_effect_exits_2(tmp_path):
    doc = linear_document((0j, 0j), bearings=False, check_run=False)
    # trial on plane 2: no change beyond rounding (1e-9), which would divide into ~1e9 g
    doc["runs"][2]["readings"] = {k: {"amp": v["amp"] * (1 + 1e-9), "phase_deg": v["phase_deg"]}
                                  for k, v in doc["runs"][0]["readings"].items()}
    code, out, err = run_cli(["solve", str(_write(tmp_path, doc)), "--json"])
    assert code == 2 and out == "" and len(err.strip().splitlines()) == 1
    assert "wheel R" in err and "did not change the 1x" in err
    with pytest.raises(NoInformationError) as info:
        solve(parse_readings(doc))
    assert info.value.plane == "wheel R" and info.value.suggested_g is None


def test_trial_effect_under_its_uncertainty_is_refused_with_a_larger_mass():
    doc = linear_document((0j, 0j), bearings=False, check_run=False, trial_g=0.05)
    for run in doc["runs"]:
        for r in run["readings"].values():
            r["confidence"] = 0.05
    # effect of 0.05 g: |A| * 0.05 <= 0.015 on each pickup, under sqrt(2) * 0.05 = 0.071 (GUM)
    with pytest.raises(NoInformationError) as info:
        solve(parse_readings(doc))
    assert info.value.trial_g == pytest.approx(0.05)
    assert info.value.suggested_g is not None and info.value.suggested_g > 0.05 * 3
    # the same trial with tight circles (0.001) is resolved: an answer, no refusal
    for run in doc["runs"]:
        for r in run["readings"].values():
            r["confidence"] = 0.001
    assert solve(parse_readings(doc)).solution.corrections


def test_saved_coefficient_too_small_to_be_physical_is_refused(tmp_path):
    doc = {"planes": [{"name": "p", "radius_mm": 50}], "sensors": [{"name": "s"}],
           "runs": [{"label": "now", "added": [], "readings": {"s": {"amp": 4.0, "phase_deg": 10}}}],
           "influence": [{"sensor": "s", "plane": "p", "amp_per_g": 1e-300, "phase_deg": 0}]}
    with pytest.raises(AbsurdCorrectionError):
        solve(parse_readings(doc))  # 4 / 1e-300 = 4e300 g
    code, out, err = run_cli(["solve", str(_write(tmp_path, doc))])
    assert code == 2 and "beyond any sanity limit" in err
    doc["influence"][0]["amp_per_g"] = 0
    code, _, err = run_cli(["solve", str(_write(tmp_path, doc))])
    assert code == 2 and "amp_per_g" in err


def test_corrections_against_the_rotor_mass(tmp_path):
    # saved coefficient 0.01 per g, reading 4 -> 400 g correction (rigid linear model)
    doc = {"planes": [{"name": "p", "radius_mm": 50}], "sensors": [{"name": "s"}],
           "runs": [{"label": "now", "added": [], "readings": {"s": {"amp": 4.0, "phase_deg": 10}}}],
           "influence": [{"sensor": "s", "plane": "p", "amp_per_g": 0.01, "phase_deg": 0}],
           "tolerance": {"rotor_mass_kg": 20.0, "grade": 6.3, "speed_rpm": 1500}}
    report = solve(parse_readings(doc))  # 400 g of 20 kg = 2 %: allowed, flagged
    assert report.solution.corrections[0].mass_g == pytest.approx(400)
    assert [f.flag for f in report.correction_findings] == [CorrectionFlag.LARGE_SHARE_OF_ROTOR]
    data = json.loads(run_cli(["solve", str(_write(tmp_path, doc)), "--json"])[1])
    assert data["large_corrections"][0]["share_of_rotor"] == pytest.approx(0.02)
    assert any(w.startswith("LARGE CORRECTION") for w in data["warnings"])
    doc["tolerance"]["rotor_mass_kg"] = 3.0  # 400 g of 3 kg = 13 %: refused
    code, _, err = run_cli(["solve", str(_write(tmp_path, doc))])
    assert code == 2 and "13.3 % of the rotor's mass" in err


def test_amplitude_only_all_zero_is_refused(tmp_path):
    code, _, err = run_cli(["solve", str(_write(tmp_path, four_run_doc(0.0, 2.0, [0.0] * 3)))])
    assert code == 2 and "every reading is zero" in err


def test_amplitude_only_no_change_is_refused():
    with pytest.raises(NoInformationError):
        solve(parse_readings(four_run_doc(5.0, 2.0, [5.0, 5.0, 5.0])))


def test_inconsistent_amplitudes_are_warned_and_never_pass(tmp_path):
    doc = four_run_doc(4.0, 2.0, [100.0, 60.0, 5.0], angles=(0, 120, 240))
    doc["runs"].append({"added": [{"plane": "p", "mass_g": 2.0, "angle_deg": 60}],
                        "readings": {"s": {"amp": 4.5}}})
    doc["tolerance"] = {"rotor_mass_kg": 1000, "grade": 4000, "speed_rpm": 100}
    report = solve(parse_readings(doc))
    assert report.solution.inconsistent
    assert VerdictFlag.INCONSISTENT in report.verdict.flags and report.verdict.passed is False
    data = json.loads(run_cli(["solve", str(_write(tmp_path, doc)), "--json"])[1])
    # item 6: the amplitude-only JSON names its fit scatter as such, not as a prediction
    assert data["predicted_residual"] == {} and data["fit_scatter"]["s"] > 0.1 * 4.0
    assert data["inconsistent"] is True
    assert any("inconsistent amplitudes" in w for w in data["warnings"])


def test_consistent_four_run_has_a_near_zero_fit_scatter(tmp_path):
    # from memory: four-run method (Wowk): amplitudes of a linear rotor fit exactly
    u, t = 4.0 * np.exp(1j * 0.3), 3.0
    amps = [float(abs(u + t * np.exp(1j * math.radians(a)))) for a in (0, 120, 240)]
    data = json.loads(run_cli(["solve", str(_write(tmp_path, four_run_doc(float(abs(u)), t, amps))),
                               "--json"])[1])
    assert data["fit_scatter"]["s"] < 1e-6 and data["inconsistent"] is False


def test_ambiguous_answer_never_passes_and_its_pm_covers_the_other_answer():
    # geometry: two trial positions leave a mirror answer (two circles meet twice)
    unbalance, trial_g = phasor(4.0, 70), 3.0
    angles = (0.0, 120.0)
    amps = [abs(unbalance + phasor(trial_g, a)) for a in angles]
    doc = four_run_doc(abs(unbalance), trial_g, amps, angles)
    doc["tolerance"] = {"rotor_mass_kg": 1000, "grade": 4000, "speed_rpm": 100}  # lenient
    report = solve(parse_readings(doc))
    sol = report.solution
    assert sol.ambiguous
    assert report.verdict.passed is False and VerdictFlag.AMBIGUOUS in report.verdict.flags
    c, other = sol.corrections[0], sol.candidates[0][0]
    assert c.mass_g_pm >= abs(other.mass_g - c.mass_g) - 1e-9
    assert c.angle_deg_pm >= abs(angle_difference_deg(other.angle_deg, c.angle_deg)) - 1e-9
