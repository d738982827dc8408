"""The math commands in imperial units: inputs in lb, in, oz; answers in the same units
(issue #17 item 3), and small CLI wording fixes (item 10)."""

from __future__ import annotations

import json
import math
import re

import pytest

from cli_helpers import run_cli
from trueturn.cli.main import COMMANDS

# NIST SP 811 (2008), Appendix B (exact): 1 lb = 0.45359237 kg, 1 in = 25.4 mm,
# 1 oz = 28.349523125 g, 1 lbf = 4.4482216152605 N (1 lb under 9.80665 m/s²).
OZ_G, IN_MM, LB_KG, LBF_N = 28.349523125, 25.4, 0.45359237, 4.4482216152605


def test_trial_mass_in_imperial_answers_in_oz_and_lbf():
    code, out, err = run_cli(["trial-mass", "--rotor-mass-lb", "10", "--radius-in", "3",
                              "--speed-rpm", "3450", "--json"])
    assert code == 0, err
    data = json.loads(out)
    assert "mass_g" not in data and data["radius_in"] == 3.0
    # 10 % of a 10 lb rotor's weight is 1 lbf by the definition of the pound-force
    assert data["force_lbf"] == pytest.approx(1.0, abs=1e-6)
    # m = F / (r omega²): closed form, computed here in SI independently of the command
    omega = 3450 * 2 * math.pi / 60
    mass_kg = LBF_N / (3 * IN_MM / 1000 * omega**2)
    assert data["mass_oz"] == pytest.approx(mass_kg * 1000 / OZ_G, rel=1e-5)
    code, text, _ = run_cli(["trial-mass", "--rotor-mass-lb", "10", "--radius-in", "3",
                             "--speed-rpm", "3450"])
    first = text.splitlines()[0]
    assert first == f"trial mass: {mass_kg * 1000 / OZ_G:.3f} oz at 3.000 in"
    assert "1.00 lbf" in text and " g " not in text


def test_metric_and_imperial_answers_agree():
    _, metric, _ = run_cli(["trial-mass", "--rotor-mass-kg", str(10 * LB_KG), "--radius-mm",
                            str(3 * IN_MM), "--speed-rpm", "3450", "--json"])
    _, imperial, _ = run_cli(["trial-mass", "--rotor-mass-lb", "10", "--radius-in", "3",
                              "--speed-rpm", "3450", "--json"])
    m, i = json.loads(metric), json.loads(imperial)
    assert i["mass_oz"] * OZ_G == pytest.approx(m["mass_g"], rel=1e-5)
    assert i["force_n"] == pytest.approx(m["force_n"])


@pytest.mark.parametrize("argv", [
    ["trial-mass", "--rotor-mass-lb", "10", "--rotor-mass-kg", "4", "--radius-in", "3",
     "--speed-rpm", "3450"],
    ["split", "--mass-g", "1", "--mass-oz", "0.1", "--angle-deg", "0", "--positions", "4"],
    ["grade", "--rotor-mass-lb", "10", "--speed-rpm", "3450", "--grade", "6.3",
     "--residual-gmm", "1", "1", "--residual-ozin", "1", "1"],
    ["split", "--mass-g", "7.7", "--angle-deg", "77", "--positions", "12", "--radius-mm", "40",
     "--have-g", "1", "2", "--within-gmm", "20", "--within-ozin", "0.03"],
])
def test_metric_and_imperial_of_one_quantity_is_one_line(argv):
    code, out, err = run_cli(argv)
    assert code == 2 and out == "" and len(err.strip().splitlines()) == 1
    assert "not allowed with" in err


def test_grade_in_imperial_gives_oz_in():
    # ISO 21940-11:2016: U_per = G m / omega; the same rotor in kg and lb, U_per in g·mm and
    # oz·in agree through 1 oz·in = 28.349523125 × 25.4 g·mm
    _, metric, _ = run_cli(["grade", "--rotor-mass-kg", str(10 * LB_KG), "--speed-rpm", "3450",
                            "--grade", "6.3", "--json"])
    code, imperial, err = run_cli(["grade", "--rotor-mass-lb", "10", "--speed-rpm", "3450",
                                   "--grade", "6.3", "--json"])
    assert code == 0, err
    m, i = json.loads(metric), json.loads(imperial)
    assert i["U_per_ozin"] == pytest.approx(m["U_per_gmm"] / (OZ_G * IN_MM), abs=1e-6)
    assert i["per_plane_ozin"][0] == pytest.approx(m["per_plane_gmm"][0] / (OZ_G * IN_MM),
                                                   abs=1e-6)
    _, text, _ = run_cli(["grade", "--rotor-mass-lb", "10", "--speed-rpm", "3450", "--grade",
                          "6.3", "--residual-ozin", "0.01", "0.01"])
    assert "rotor 10 lb" in text and "oz·in" in text and "g·mm" not in text
    assert "verdict: PASS" in text


def test_split_rounds_to_the_scale_and_cautions_fit_the_work():
    # a pocket scale reads 0.01 g (common practice, no source): 0.7375 g shows as 0.74 g
    code, out, _ = run_cli(["split", "--mass-g", "0.7375", "--angle-deg", "0", "--positions",
                            "4"])
    assert code == 0 and "add 0.74 g" in out and "0.7375" not in out
    assert "drill" not in out and "fasten" in out  # adding: no drilling caution
    _, out, _ = run_cli(["split", "--mass-g", "0.7375", "--angle-deg", "0", "--positions", "4",
                         "--remove", "--drill-mm", "5"])
    assert "drilling does not weaken" in out


def test_split_leaves_out_a_part_below_the_scale():
    # 1 g at 0.2° between 0° and 90°: the part at 90° is 1 g sin(0.2°)/sin(90°) = 0.0035 g
    # (law of sines), below the 0.01 g a pocket scale weighs
    code, out, _ = run_cli(["split", "--mass-g", "1", "--angle-deg", "0.2", "--positions", "4"])
    assert code == 0
    assert "add 1.00 g" in out and "add 0.00 g" not in out
    assert "nothing to place" in out
    _, data, _ = run_cli(["split", "--mass-g", "1", "--angle-deg", "0.2", "--positions", "4",
                          "--json"])
    parts = json.loads(data)["parts"]
    assert [p["negligible"] for p in parts] == [False, True]
    assert parts[1]["mass_g"] == pytest.approx(math.sin(math.radians(0.2)), abs=1e-6)


def test_split_in_ounces_and_inches():
    code, out, err = run_cli(["split", "--mass-oz", "0.05", "--angle-deg", "45", "--positions",
                              "4", "--remove", "--drill-in", "0.25", "--json"])
    assert code == 0, err
    data = json.loads(out)
    assert data["correction"]["mass_oz"] == pytest.approx(0.05)
    # 45° between 0° and 90°: two equal parts of m sin 45° / sin 90° (law of sines)
    assert [p["mass_oz"] for p in data["parts"]] == pytest.approx([0.05 / math.sqrt(2)] * 2,
                                                                  abs=1e-6)
    assert all("depth_to_tip_in" in p for p in data["parts"])


@pytest.mark.parametrize("command", sorted(COMMANDS))
def test_help_never_shows_a_doubled_percent(command):
    # argparse formats help= strings with %, but a description only when it holds %(prog)
    code, out, _ = run_cli([command, "--help"])
    assert code == 0 and "%%" not in out


ONE_TRIAL_LEFT_ON = """
planes: [{name: rotor, radius_mm: 75}]
sensors: [{name: motor}]
runs:
  - label: as found
    added: []
    readings: {motor: {amp: 4.0, phase_deg: 30}}
  - label: trial
    added: [{plane: rotor, mass_g: 5, angle_deg: 0}]
    readings: {motor: {amp: 6.0, phase_deg: 80}}
"""


def test_solve_says_the_trial_was_left_on_and_an_exact_fit_predicts_zero(tmp_path):
    # one plane, one pickup, one trial: two readings, one unknown coefficient and one
    # correction - the fit is exact, so the predicted 1x is 0 (influence-coefficient method,
    # any balancing text); the trial is on the rotor in the last run: left on
    path = tmp_path / "readings.yaml"
    path.write_text(ONE_TRIAL_LEFT_ON, encoding="utf-8")
    code, out, err = run_cli(["solve", str(path)])
    assert code == 0, err
    assert "(trial masses between runs: left on)" in out
    predicted = out.split("Predicted 1x after the correction:")[1].splitlines()[1]
    assert predicted.split() == ["motor", "0", "(numerically", "zero)"]
    assert "e-1" not in out
    data = json.loads(run_cli(["solve", str(path), "--json"])[1])
    assert data["trial_masses"] == "left on"
    assert data["predicted_residual"]["motor"] == {"amp": 0.0, "phase_deg": None}


TWO_TRIALS = """
planes: [{name: rotor, radius_%(r)s: %(radius)s}]
sensors: [{name: motor}, {name: fan}]
runs:
  - label: as found
    added: []
    readings: {motor: {amp: 4.0, phase_deg: 30}, fan: {amp: 3.0, phase_deg: 100}}
  - label: trial
    added: [{plane: rotor, mass_%(m)s: %(mass)s, angle_deg: 0}]
    readings: {motor: {amp: 6.0, phase_deg: 80}, fan: {amp: 2.5, phase_deg: 160}}
tolerance: {rotor_mass_%(w)s: %(rotor)s, grade: 6.3, speed_rpm: 3450}
"""


def test_solve_reads_an_imperial_file_and_answers_in_oz(tmp_path):
    # the same runs in metric and in imperial units (NIST SP 811 factors, exact) give the same
    # correction: converted back, the oz answer equals the g answer
    metric = tmp_path / "metric.yaml"
    metric.write_text(TWO_TRIALS % {"r": "mm", "radius": 76.2, "m": "g", "mass": 5.0,
                                    "w": "kg", "rotor": 4.5359237}, encoding="utf-8")
    imperial = tmp_path / "imperial.yaml"
    imperial.write_text(TWO_TRIALS % {"r": "in", "radius": 3, "m": "oz", "mass": 5.0 / OZ_G,
                                      "w": "lb", "rotor": 10}, encoding="utf-8")
    m = json.loads(run_cli(["solve", str(metric), "--json"])[1])
    code, out, err = run_cli(["solve", str(imperial), "--json"])
    assert code == 0, err
    i = json.loads(out)
    assert i["corrections"][0]["mass_oz"] * OZ_G == pytest.approx(
        m["corrections"][0]["mass_g"], rel=1e-3)
    assert "mass_g" not in i["corrections"][0]
    assert i["tolerance"]["U_per_ozin"] * OZ_G * IN_MM == pytest.approx(
        m["tolerance"]["U_per_gmm"], rel=1e-3)
    _, text, _ = run_cli(["solve", str(imperial)])
    assert " oz at " in text and "oz·in" in text and " g at " not in text and "g·mm" not in text


def test_solve_refuses_a_field_given_both_ways(tmp_path):
    path = tmp_path / "both.yaml"
    path.write_text(ONE_TRIAL_LEFT_ON.replace("radius_mm: 75", "radius_mm: 75, radius_in: 3"),
                    encoding="utf-8")
    code, out, err = run_cli(["solve", str(path)])
    assert code == 2 and out == ""
    assert err.strip() == f"trueturn solve: {path}:2: radius_in: give radius_mm or radius_in, " \
        "not both"


def test_solve_warns_of_a_large_correction_in_the_units_of_the_file(tmp_path):
    # a 0.5 lb rotor asking for about 9 g (0.3 oz): over 1 % of the rotor's mass (common
    # practice, no source) is flagged, in oz for an imperial file
    path = tmp_path / "large.yaml"
    path.write_text(TWO_TRIALS % {"r": "in", "radius": 3, "m": "oz", "mass": 0.2,
                                  "w": "lb", "rotor": 0.5}, encoding="utf-8")
    code, out, err = run_cli(["solve", str(path)])
    assert code == 0, err
    large = [line for line in out.splitlines() if "LARGE CORRECTION" in line]
    assert large and re.search(r"\d oz is", large[0]) and " g is" not in large[0]


def test_split_combines_masses_given_in_oz():
    # two equal masses 90° apart add to m√2 at 45° (vector sum)
    code, out, err = run_cli(["split", "--combine-oz", "0.1@0", "0.1@90", "--positions", "4",
                              "--json"])
    assert code == 0, err
    data = json.loads(out)
    assert data["correction"] == {"mass_oz": pytest.approx(0.1 * math.sqrt(2)),
                                  "angle_deg": pytest.approx(45.0)}
    _, text, _ = run_cli(["split", "--combine-oz", "0.1@0", "0.1@90", "--positions", "4"])
    assert "correction to add: 0.141 oz at 45°" in text


#: `split` from the parts you own: 7.7 g at 77° onto 12 positions at r = 40 mm, a kit of
#: 0.5 ... 5 g parts stacked up to 3 (tests/test_balance_parts.py's case), in both units
_KIT_G = ["0.5", "0.5", "1", "1", "2", "2", "5"]


def _kit_argv(imperial: bool, within: float) -> list[str]:
    if not imperial:
        return ["split", "--mass-g", "7.7", "--angle-deg", "77", "--positions", "12",
                "--radius-mm", "40", "--have-g", *_KIT_G, "--stack", "3",
                "--within-gmm", repr(within), "--json"]
    return ["split", "--mass-oz", repr(7.7 / OZ_G), "--angle-deg", "77", "--positions", "12",
            "--radius-in", repr(40 / IN_MM), "--have-oz", *(repr(float(m) / OZ_G) for m in _KIT_G),
            "--stack", "3", "--within-ozin", repr(within / (OZ_G * IN_MM)), "--json"]


@pytest.mark.parametrize("within_gmm", [20.0, 45.0])
def test_split_within_ozin_is_the_imperial_twin_of_within_gmm(within_gmm):
    # 1 oz·in = 28.349523125 g x 25.4 mm = 720.077887375 g·mm exactly (NIST SP 811, B.8)
    code, metric, err = run_cli(_kit_argv(False, within_gmm))
    assert code == 0, err
    code, imperial, err = run_cli(_kit_argv(True, within_gmm))
    assert code == 0, err
    m, i = json.loads(metric), json.loads(imperial)
    assert "within_gmm" not in i and "residual_gmm" not in i  # answered in the units typed
    assert i["within_ozin"] * OZ_G * IN_MM == pytest.approx(within_gmm, rel=1e-6)
    assert i["residual_ozin"] * OZ_G * IN_MM == pytest.approx(m["residual_gmm"], rel=1e-6)
    # the same parts on the same positions: the same good-enough rule in either unit
    assert [(p["position"], len(p["masses_oz"])) for p in i["parts"]] == \
        [(p["position"], len(p["masses_g"])) for p in m["parts"]]
    assert m["residual_gmm"] <= within_gmm
    code, text, _ = run_cli(_kit_argv(True, within_gmm)[:-1])
    assert code == 0 and "oz·in" in text and "g·mm" not in text and " g " not in text


def test_split_within_ozin_alone_is_one_line_naming_it():
    code, out, err = run_cli(["split", "--mass-oz", "0.27", "--angle-deg", "77",
                              "--positions", "12", "--within-ozin", "0.03"])
    assert code == 2 and out == "" and len(err.strip().splitlines()) == 1
    assert "--within-ozin goes with --have-g or --have-oz" in err
    code, out, err = run_cli(["split", "--mass-oz", "0.27", "--angle-deg", "77", "--positions",
                              "12", "--radius-in", "1.5", "--have-oz", "0.1", "--within-ozin",
                              "-0.5"])
    assert code == 2 and len(err.strip().splitlines()) == 1 and "--within-ozin" in err
