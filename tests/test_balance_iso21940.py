"""ISO 21940-11:2016 tolerance values checked against the standard's formulas."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from cli_helpers import run_cli
from trueturn.balance.iso21940 import (
    GRADES,
    allocate_two_planes,
    permissible_eccentricity_um,
    permissible_unbalance_gmm,
    verdict,
)
from trueturn.errors import UserError


def test_g63_at_3000_rpm_is_about_20_um():
    # ISO 21940-11:2016, e_per = G / omega: 6.3 mm/s / (2 pi 3000/60 rad/s) = 20.05 um
    assert permissible_eccentricity_um(6.3, 3000) == pytest.approx(20.05, abs=0.01)


@pytest.mark.parametrize(("grade", "rpm", "mass_kg", "u_gmm"), [
    # ISO 21940-11:2016, U_per = 1000 G m / omega (g mm, with G in mm/s, m in kg), hand-computed
    (6.3, 3000, 5.0, 100.27),      # 20.05 um x 5 kg
    (2.5, 3600, 10.0, 66.31),      # 2500 / 376.99 = 6.631 um x 10 kg
    (1.0, 10000, 0.5, 0.4775),     # 1000 / 1047.2 = 0.9549 um x 0.5 kg
    (16, 1000, 2.0, 305.58),       # 16000 / 104.72 = 152.79 um x 2 kg
])
def test_permissible_unbalance_formula(grade, rpm, mass_kg, u_gmm):
    assert permissible_unbalance_gmm(grade, rpm, mass_kg) == pytest.approx(u_gmm, rel=1e-3)


def test_grade_table_spans_0_4_to_4000_in_steps_of_2_5():
    # ISO 21940-11 grades: G 0.4 ... G 4000, neighbours a factor of 2.5 apart (rounded)
    values = sorted(g.grade_mm_s for g in GRADES)
    assert values[0] == 0.4 and values[-1] == 4000 and len(values) == 11
    for low, high in zip(values, values[1:], strict=False):
        assert 2.4 <= high / low <= 2.6
    assert all(g.examples for g in GRADES)


def test_two_plane_allocation_lever_rule_and_limits():
    # ISO 21940-11:2016 clause 7 (from memory): U_A = U L_B / L, U_B = U L_A / L, each
    # within 0.3 ... 0.7 of U_per; symmetric rotor: half each
    assert allocate_two_planes(100.0) == (50.0, 50.0)
    a, b = allocate_two_planes(100.0, 200.0, 80.0)
    assert (a, b) == pytest.approx((60.0, 40.0))
    a, b = allocate_two_planes(100.0, 200.0, 10.0)
    assert (a, b) == pytest.approx((70.0, 30.0))
    with pytest.raises(UserError):
        allocate_two_planes(100.0, 200.0, 250.0)


def test_verdict():
    assert verdict([10, 20], [15, 25]).passed
    v = verdict([10, 30], [15, 25])
    assert not v.passed and v.worst_ratio == pytest.approx(1.2)
    assert math.isclose(verdict([5], [10]).worst_ratio, 0.5)


@pytest.mark.parametrize(("grade", "rotor_type"), [
    # from memory: ISO 21940-11:2016 Table 1 (same as ISO 1940-1:2003 Table 1 as recalled)
    (6.3, "fans"), (6.3, "pumps"), (6.3, "machine-tools"), (2.5, "machine-tool drives"),
    (2.5, "compressors"), (1, "grinding machine drives"), (0.4, "gyroscopes"),
    (40, "cars: wheels, wheel rims, wheel sets, drive shafts"), (16, "crushing machines"),
])
def test_grade_table_rotor_types(grade, rotor_type):
    by_grade = {g.grade_mm_s: g.rotor_types for g in GRADES}
    assert rotor_type in by_grade[grade]
    # each type is listed under one grade only
    assert sum(rotor_type in types for types in by_grade.values()) == 1


def test_grade_list_marks_its_source():
    code, out, _ = run_cli(["grade", "--list"])
    assert code == 0 and "ISO 21940-11:2016, Table 1" in out and "from memory" in out
    rows = json.loads(run_cli(["grade", "--list", "--json"])[1])
    assert [r["grade_mm_s"] for r in rows] == [g.grade_mm_s for g in GRADES]
    assert all("from memory" in r["source"] for r in rows)


def test_readme_worked_example_matches_the_table_and_the_cli():
    # the README's example names a rotor type that the table puts under the grade it uses,
    # and its printed figures are what the command prints
    readme = (Path(__file__).parents[1] / "README.md").read_text(encoding="utf-8")
    assert "G 6.3 (fans, in the example table of ISO 21940-11)" in readme
    assert "fans" in {g.grade_mm_s: g.rotor_types for g in GRADES}[6.3]
    code, out, _ = run_cli(["grade", "--rotor-mass-kg", "4", "--speed-rpm", "3450", "--grade",
                            "G6.3"])
    assert code == 0
    for line in ("permissible specific unbalance e_per: 17.44 µm",
                 "permissible residual unbalance U_per: 69.75 g·mm",
                 "  plane 1: 34.88 g·mm"):
        assert line in out and line in readme
