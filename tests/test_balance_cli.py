"""`solve`, `grade`, `split`, `trial-mass`: the JSON contract and one-line refusals."""

from __future__ import annotations

import json
import math

import pytest
import yaml

from balance_sim_helpers import classic_document, reduction
from cli_helpers import run_cli
from trueturn.balance.influence import Correction


@pytest.fixture
def readings_file(tmp_path):
    sc, doc = classic_document("bench-grinder", linear=True)
    path = tmp_path / "readings.yaml"
    path.write_text(yaml.safe_dump(doc))
    return sc, doc, path


def test_solve_json_contract_and_physics(readings_file):
    sc, _, path = readings_file
    code, out, err = run_cli(["solve", str(path), "--json"])
    assert code == 0, err
    data = json.loads(out)
    for key in ("method", "corrections", "predicted_residual", "condition_number", "warnings"):
        assert key in data
    assert all({"plane", "mass_g", "angle_deg"} <= set(c) for c in data["corrections"])
    assert len(data["corrections"]) == 2
    assert set(data["predicted_residual"]) == {p.name for p in sc.rotor.pickups}
    for v in data["predicted_residual"].values():
        assert set(v) == {"amp", "phase_deg"}
    # physics truth (sim rigid rotor, linear): the printed corrections cut the 1x by >= 99 %
    corr = [Correction(c["plane"], c["mass_g"], c["angle_deg"], 1.0) for c in data["corrections"]]
    assert reduction(sc, corr) >= 0.99


def test_solve_readable_output_states_the_left_on_variant(readings_file):
    _, _, path = readings_file
    code, out, _ = run_cli(["solve", str(path)])
    assert code == 0
    assert "leaving the trial masses" in out and "Caution" in out


def test_solve_json_accepts_json_file(tmp_path, readings_file):
    _, doc, _ = readings_file
    path = tmp_path / "r.json"
    path.write_text(json.dumps(doc))
    assert run_cli(["solve", str(path), "--json"])[0] == 0


@pytest.mark.parametrize(("change", "needle"), [
    (lambda d: d["planes"][0].pop("radius_mm"), "radius_mm"),
    (lambda d: d["runs"][1]["added"][0].__setitem__("mass_g", -3), "mass_g"),
    (lambda d: d["runs"][1]["added"][0].__setitem__("plane", "nowhere"), "unknown plane"),
    (lambda d: d["runs"][0]["readings"].__setitem__("ghost", {"amp": 1}), "unknown sensor"),
    (lambda d: d["runs"][2].__setitem__("added", d["runs"][1]["added"]), "singular"),
    (lambda d: next(iter(d["runs"][0]["readings"].values())).pop("phase_deg"), "phase_deg"),
    (lambda d: d.pop("runs"), "runs"),
])
def test_solve_bad_input_is_one_line_exit_2(tmp_path, readings_file, change, needle):
    _, doc, _ = readings_file
    change(doc)
    path = tmp_path / "bad.yaml"
    path.write_text(yaml.safe_dump(doc))
    code, out, err = run_cli(["solve", str(path), "--json"])
    assert code == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and needle in err and "bad.yaml" in err


def test_grade_json():
    # ISO 21940-11:2016: G 6.3 at 3000 rpm -> e_per = 20.05 um; 5 kg -> U_per = 100.3 g mm
    code, out, _ = run_cli(["grade", "--rotor-mass-kg", "5", "--speed-rpm", "3000",
                            "--grade", "G6.3", "--json"])
    data = json.loads(out)
    assert code == 0
    assert data["e_per_um"] == pytest.approx(20.05, abs=0.01)
    assert data["U_per_gmm"] == pytest.approx(100.27, abs=0.01)
    assert sum(data["per_plane_gmm"]) == pytest.approx(data["U_per_gmm"])


def test_split_json_vector_sum():
    code, out, _ = run_cli(["split", "--mass-g", "10", "--angle-deg", "50", "--positions", "6",
                            "--first-deg", "10", "--json"])
    assert code == 0
    parts = json.loads(out)["parts"]
    assert [p["position"] for p in parts] == [1, 2]  # numbered from 1, like the ring
    x = sum(p["mass_g"] * math.cos(math.radians(p["angle_deg"])) for p in parts)
    y = sum(p["mass_g"] * math.sin(math.radians(p["angle_deg"])) for p in parts)
    assert math.hypot(x, y) == pytest.approx(10, abs=1e-4)
    assert math.degrees(math.atan2(y, x)) == pytest.approx(50, abs=1e-3)


def test_trial_mass_json():
    # common practice, no source: force about 10 % of the rotor weight
    code, out, _ = run_cli(["trial-mass", "--rotor-mass-kg", "5", "--radius-mm", "50",
                            "--speed-rpm", "3450", "--json"])
    data = json.loads(out)
    assert code == 0 and set(data) >= {"mass_g", "force_n", "force_ratio"}
    assert data["force_ratio"] == pytest.approx(0.1)
    assert data["force_n"] == pytest.approx(0.1 * 5 * 9.80665, rel=1e-5)


@pytest.mark.parametrize("argv", [
    ["trial-mass", "--rotor-mass-kg", "-5", "--radius-mm", "50", "--speed-rpm", "3450"],
    ["split", "--mass-g", "-1", "--angle-deg", "10", "--positions", "4"],
    ["split", "--mass-g", "1", "--angle-deg", "10", "--positions", "2"],
    ["grade", "--rotor-mass-kg", "5", "--speed-rpm", "0", "--grade", "6.3"],
    ["grade", "--rotor-mass-kg", "5", "--speed-rpm", "3000"],
    ["solve", "no-such-file.yaml"],
])
def test_other_bad_input_is_one_line_exit_2(argv):
    code, _, err = run_cli(argv)
    assert code == 2 and len(err.strip().splitlines()) == 1


# -- READINGS through the one validator (trueturn.schema): file:line: field.path: problem ----

def _line_of(text: str, needle: str, after: int = 0) -> int:
    """1-based line of the first line containing ``needle`` after line ``after``."""
    for number, line in enumerate(text.splitlines(), start=1):
        if number > after and needle in line:
            return number
    raise AssertionError(needle)


@pytest.mark.parametrize(("change", "path", "key", "problem"), [
    (lambda d: d["runs"][1]["added"][0].__setitem__("angle_deg", 400),
     "runs[1].added[0].angle_deg", "angle_deg: 400", "must be within -360..360"),
    (lambda d: d["runs"][1]["added"][0].__setitem__("plane", "flywheel"),
     "runs[1].added[0].plane", "plane: flywheel", "unknown plane 'flywheel'"),
    (lambda d: d["planes"][1].__setitem__("radius_mm", -40),
     "planes[1].radius_mm", "radius_mm: -40", "must be greater than 0, got -40"),
    (lambda d: d["planes"][0].__setitem__("radius_m", 5),
     "planes[0].radius_m", "radius_m: 5", "unknown field"),
    (lambda d: d["runs"][2]["readings"]["right-bearing"].pop("phase_deg"),
     "runs[2].readings.right-bearing", "right-bearing:", "phase_deg is missing here"),
    (lambda d: d.__setitem__("speed_exponent", 9), "speed_exponent", "speed_exponent: 9",
     "expected 0...6"),
])
def test_readings_mistakes_name_file_line_and_field(tmp_path, readings_file, change, path,
                                                     key, problem):
    _, doc, _ = readings_file
    change(doc)
    text = yaml.safe_dump(doc, sort_keys=False)
    file = tmp_path / "bad.yaml"
    file.write_text(text)
    code, out, err = run_cli(["solve", str(file)])
    assert code == 2 and out == "" and err.count("\n") == 1
    # the line of the key: after the run or plane it belongs to
    owner = {"runs": "- label: trial right" if "runs[2]" in path else "- label: trial left",
             "plan": "- name: left" if "[0]" in path else "- name: right",
             "spee": "speed_exponent"}[path[:4]]
    line = _line_of(text, key, _line_of(text, owner) - 1)
    assert f"bad.yaml:{line}: {path}: {problem}" in err, err


def test_readings_bearings_must_be_two_at_different_positions(tmp_path, readings_file):
    _, doc, _ = readings_file
    for i, plane in enumerate(doc["planes"]):
        plane["axial_mm"] = -150.0 + 300.0 * i
    cases = [([{"axial_mm": -60}], "bearings: exactly two bearings are needed, got 1"),
             ([{"axial_mm": 5}, {"axial_mm": 5}],
              "bearings[1].axial_mm: the two bearings must be at different axial_mm"),
             ([{"name": "x", "axial_mm": -60}, {"name": "x", "axial_mm": 60}],
              "bearings[1].name: bearing 'x' given twice"),
             ([{"axial_mm": -60}, {"axial_mm": 60}], None)]
    for bearings, problem in cases:
        doc["bearings"] = bearings
        path = tmp_path / "b.yaml"
        path.write_text(yaml.safe_dump(doc))
        code, _, err = run_cli(["solve", str(path)])
        if problem is None:
            assert code == 0, err
        else:
            assert code == 2 and problem in err and err.count("\n") == 1, err


def test_numbered_planes_and_pickups_still_read(tmp_path):
    # names a person may write as bare numbers (YAML reads them as integers)
    doc = {"planes": [{"name": 1, "radius_mm": 50}], "sensors": [{"name": 1}],
           "runs": [{"readings": {1: {"amp": 4.0, "phase_deg": 30}}},
                    {"added": [{"plane": 1, "mass_g": 5, "angle_deg": -90}],
                     "readings": {1: {"amp": 6.0, "phase_deg": 80}}}]}
    path = tmp_path / "n.yaml"
    path.write_text(yaml.safe_dump(doc))
    code, out, err = run_cli(["solve", str(path), "--json"])
    assert code == 0, err
    assert json.loads(out)["corrections"][0]["plane"] == "1"
