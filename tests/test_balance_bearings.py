"""ISO 21940-11 verdict at the bearing planes: residuals referred by rigid-rotor statics.

Sources: the referral is rigid-body statics (force and moment balance of the rotating
centrifugal forces, all proportional to omega^2, so unbalance units carry through); the
bearing planes as tolerance planes are ISO 21940-11:2016 clause 4 (sentence checked against
a public excerpt, clause number from memory); the lever-rule allocation with its 0.3...0.7
limits is ISO 21940-11:2016 clause 7, from memory.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import yaml

from balance_sim_helpers import linear_document
from cli_helpers import run_cli
from trueturn.angles import phasor
from trueturn.balance import parse_readings, solve
from trueturn.balance.iso21940 import (
    PlaneArrangement,
    TolerancePlanes,
    VerdictFlag,
    allocate_to_bearings,
    bearing_verdict,
    permissible_unbalance_gmm,
    plane_arrangement,
    refer_to_bearings,
    worst_case_at_bearings,
)

GRADE_EXAMPLE = ["grade", "--rotor-mass-kg", "4.5", "--speed-rpm", "3538.8", "--grade", "G6.3",
                 "--residual-gmm", "37@0", "37@180", "--plane-axial-mm", "-150", "150",
                 "--bearing-axial-mm", "-60", "60", "--json"]


def test_issue_example_couple_in_wide_planes_fails_at_the_bearings():
    code, out, err = run_cli(GRADE_EXAMPLE)
    assert code == 0, err
    data = json.loads(out)
    # ISO 21940-11:2016: U_per = 1000 G m / omega = 1000*6.3*4.5 / (2 pi 3538.8/60) = 76.50 g mm,
    # half per bearing for a centre of mass midway (clause 7, from memory): 38.25 g mm
    assert data["U_per_gmm"] == pytest.approx(76.50, abs=0.01)
    assert data["per_bearing_permissible_gmm"] == pytest.approx([38.25, 38.25], abs=0.01)
    # rigid-body statics: a couple of 37 g mm x 300 mm span carried by bearings 120 mm apart
    # -> 37 * 300 / 120 = 92.5 g mm at each bearing
    assert data["per_bearing_gmm"] == pytest.approx([92.5, 92.5], abs=1e-6)
    assert data["pass"] is False
    assert data["tolerance_planes"] == "bearings" and data["plane_arrangement"] == "outboard"
    # the same residuals judged in the correction planes would (wrongly) pass: 37 < 38.25
    old = run_cli(GRADE_EXAMPLE[:GRADE_EXAMPLE.index("--plane-axial-mm")] + ["--json"])
    assert json.loads(old[1])["pass"] is True


def test_static_unbalance_midway_splits_half_and_half():
    # rigid-body statics: a static unbalance midway between the bearings loads each by half
    a, b = refer_to_bearings([100 + 0j], [50.0], [0.0, 100.0])
    assert (a, b) == (pytest.approx(50), pytest.approx(50))


def test_unbalance_at_a_bearing_goes_wholly_to_it():
    # rigid-body statics: a force acting at a support is carried by that support alone
    a, b = refer_to_bearings([phasor(10, 30)], [0.0], [0.0, 250.0])
    assert abs(a - phasor(10, 30)) < 1e-12 and abs(b) < 1e-12


def test_overhung_disc_lever():
    # rigid-body statics (lever): a disc 100 mm beyond bearing B of a 100 mm span pulls
    # bearing B with twice its force and bearing A the other way with once its force
    a, b = refer_to_bearings([phasor(20, 90)], [200.0], [0.0, 100.0])
    assert abs(b - phasor(40, 90)) < 1e-12
    assert abs(a - phasor(20, 270)) < 1e-12
    assert plane_arrangement([200.0], [0.0, 100.0]) is PlaneArrangement.OVERHUNG


@pytest.mark.parametrize("seed", range(5))
def test_referral_satisfies_force_and_moment_balance(seed):
    # rigid-body statics: sum of bearing reactions = sum of the plane unbalances (forces) and
    # their moments about the origin agree; solved independently here as a 2x2 linear system
    rng = np.random.default_rng(seed)
    n = int(rng.integers(1, 4))
    u = rng.normal(size=n) + 1j * rng.normal(size=n)
    z = rng.uniform(-300, 300, size=n)
    zb = np.sort(rng.uniform(-200, 200, size=2))
    if zb[1] - zb[0] < 10:
        zb[1] += 10
    a, b = refer_to_bearings(list(u), list(z), list(zb))
    system = np.array([[1.0, 1.0], [zb[0], zb[1]]])
    expected = np.linalg.solve(system, np.array([u.sum(), (u * z).sum()]))
    assert np.allclose([a, b], expected, atol=1e-9)


@pytest.mark.parametrize("seed", range(5))
def test_worst_case_bounds_every_phasing(seed):
    # triangle inequality on the statics: magnitudes added with |lever arm| bound any phasing,
    # and are reached when the contributions line up
    rng = np.random.default_rng(100 + seed)
    mags = rng.uniform(1, 50, size=2)
    z = [-150.0, 150.0]
    bound = worst_case_at_bearings(list(mags), z, [-60.0, 60.0])
    for angle in np.linspace(0, 360, 13):
        a, b = refer_to_bearings([phasor(mags[0], 0), phasor(mags[1], angle)], z, [-60.0, 60.0])
        assert abs(a) <= bound[0] + 1e-9 and abs(b) <= bound[1] + 1e-9
    a, b = refer_to_bearings([phasor(mags[0], 0), phasor(mags[1], 180)], z, [-60.0, 60.0])
    assert (abs(a), abs(b)) == pytest.approx(bound)


def test_arrangements():
    bearings = [0.0, 300.0]
    assert plane_arrangement([50.0, 250.0], bearings) is PlaneArrangement.INBOARD
    assert plane_arrangement([-50.0, 350.0], bearings) is PlaneArrangement.OUTBOARD
    assert plane_arrangement([320.0, 400.0], bearings) is PlaneArrangement.OVERHUNG
    assert plane_arrangement([100.0, 400.0], bearings) is PlaneArrangement.MIXED


def test_allocation_to_bearings_lever_rule_and_limits():
    # ISO 21940-11:2016 clause 7 (from memory): U_A = U L_B / L, U_B = U L_A / L, within 0.3..0.7
    (a, b), flags = allocate_to_bearings(100.0, [0.0, 200.0], 80.0)
    assert (a, b) == pytest.approx((60.0, 40.0)) and flags == ()
    (a, b), _ = allocate_to_bearings(100.0, [0.0, 200.0], 10.0)
    assert (a, b) == pytest.approx((70.0, 30.0))
    (a, b), flags = allocate_to_bearings(100.0, [0.0, 200.0])
    assert (a, b) == (50.0, 50.0) and flags == (VerdictFlag.CG_ASSUMED_MIDWAY,)
    (a, b), flags = allocate_to_bearings(100.0, [0.0, 200.0], 260.0)
    assert (a, b) == pytest.approx((30.0, 70.0)) and flags == (VerdictFlag.CG_OUTSIDE_BEARINGS,)


def test_inboard_planes_at_the_bearings_agree_with_the_plane_verdict():
    # planes at the bearings: referral is the identity (statics), so the two verdicts agree
    v = bearing_verdict([phasor(30, 10), phasor(45, 200)], [0.0, 400.0], [0.0, 400.0], 100.0)
    assert v.residual_gmm == pytest.approx((30.0, 45.0))
    assert v.passed is True and v.tolerance_planes is TolerancePlanes.BEARINGS
    v = bearing_verdict([phasor(30, 10), phasor(55, 200)], [0.0, 400.0], [0.0, 400.0], 100.0)
    assert v.passed is False


def test_solve_judges_the_last_run_at_the_bearings(tmp_path):
    e = 37.0 / 75.0  # grams at 75 mm -> 37 g mm, a pure couple
    doc = linear_document((phasor(e, 0), phasor(e, 180)))
    report = solve(parse_readings(doc))
    v = report.verdict
    assert v is not None and v.tolerance_planes is TolerancePlanes.BEARINGS
    assert v.labels == ("motor end", "free end")
    # rigid-body statics as in the issue example: 92.5 g mm at each bearing, against 38.25
    assert v.residual_gmm == pytest.approx((92.5, 92.5), rel=1e-6)
    assert v.permissible_gmm == pytest.approx((38.25, 38.25), abs=0.01)
    assert v.passed is False and v.arrangement is PlaneArrangement.OUTBOARD
    # without bearings: judged in the planes (37 of 38.25 each: pass), flagged as such
    plain = solve(parse_readings(linear_document((phasor(e, 0), phasor(e, 180)), bearings=False)))
    assert plain.verdict.passed is True
    assert VerdictFlag.NOT_AT_BEARINGS in plain.verdict.flags
    # the JSON names the bearing fields
    path = tmp_path / "r.yaml"
    path.write_text(yaml.safe_dump(doc))
    code, out, err = run_cli(["solve", str(path), "--json"])
    assert code == 0, err
    tol = json.loads(out)["tolerance"]
    assert tol["tolerance_planes"] == "bearings" and tol["pass"] is False
    assert tol["per_bearing_gmm"] == pytest.approx([92.5, 92.5], rel=1e-4)
    assert tol["residual_in_correction_planes_gmm"] == pytest.approx([37, 37], rel=1e-4)
    code, out, _ = run_cli(["solve", str(path)])
    assert "at the bearings" in out and "motor end" in out


def test_solve_static_residual_midway_passes_at_the_bearings():
    # statics: a static residual of 2 x 30 g mm in phase is 30 g mm per bearing when the
    # planes are symmetric about the bearings' midpoint: within 38.25
    e = 30.0 / 75.0
    report = solve(parse_readings(linear_document((phasor(e, 45), phasor(e, 45)))))
    assert report.verdict.residual_gmm == pytest.approx((30.0, 30.0), rel=1e-6)
    assert report.verdict.passed is True
    assert report.u_per_gmm == pytest.approx(permissible_unbalance_gmm(6.3, 3538.8, 4.5))


@pytest.mark.parametrize(("change", "needle"), [
    (lambda d: d["planes"][0].pop("axial_mm"), "axial_mm"),
    (lambda d: d["bearings"].pop(), "two bearings"),
    (lambda d: d["bearings"][1].__setitem__("axial_mm", -60), "different axial_mm"),
    (lambda d: d["bearings"][1].__setitem__("axial_mm", "far"), "axial_mm"),
])
def test_bad_bearing_input_is_one_line(tmp_path, change, needle):
    doc = linear_document((0.1 + 0j, 0.1 + 0j))
    change(doc)
    path = tmp_path / "bad.yaml"
    path.write_text(yaml.safe_dump(doc))
    code, out, err = run_cli(["solve", str(path), "--json"])
    assert code == 2 and out == "" and needle in err and len(err.strip().splitlines()) == 1


@pytest.mark.parametrize("extra", [
    ["--residual-gmm", "37@0", "37", "--plane-axial-mm", "-150", "150"],     # angles mixed
    ["--residual-gmm", "37@0", "37@180"],                                     # no plane positions
    ["--residual-gmm", "37@0", "37@180", "--plane-axial-mm", "1"],            # count mismatch
    ["--residual-gmm", "37@x", "37@180", "--plane-axial-mm", "-150", "150"],  # not a number
])
def test_grade_bearing_mistakes_are_one_line(extra):
    argv = ["grade", "--rotor-mass-kg", "4.5", "--speed-rpm", "3538.8", "--grade", "6.3",
            "--bearing-axial-mm", "-60", "60", *extra]
    code, _, err = run_cli(argv)
    assert code == 2 and len(err.strip().splitlines()) == 1
