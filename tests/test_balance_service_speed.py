"""The grade is judged at the maximum service speed, never silently at the last run's.

Source: ISO 21940-11:2016, e_per = G / omega with omega the maximum service speed, so
U_per = 1000 G m / omega scales as 1 / speed (formula; "maximum service speed" from the
standard's definitions, from memory)."""

from __future__ import annotations

import json

import pytest
import yaml

from balance_sim_helpers import linear_document
from cli_helpers import run_cli
from trueturn.angles import phasor
from trueturn.balance import parse_readings, solve
from trueturn.balance.iso21940 import VerdictFlag, permissible_unbalance_gmm

RESIDUAL = (phasor(0.3, 10), phasor(0.3, 200))


def test_given_service_speed_is_used_not_the_run_speed():
    doc = linear_document(RESIDUAL, speeds_rpm=(1140, 1140, 1140, 1140))
    doc["tolerance"] = {"rotor_mass_kg": 12.0, "grade": 6.3, "speed_rpm": 1500}
    report = solve(parse_readings(doc))
    # ISO 21940-11:2016: U_per = 1000 * 6.3 * 12 / (2 pi 1500 / 60) = 481.3 g mm
    assert report.u_per_gmm == pytest.approx(481.3, abs=0.1)
    assert report.verdict.speed_rpm == 1500
    assert VerdictFlag.SPEED_FROM_LAST_RUN not in report.verdict.flags
    # at the run speed it would have allowed 1500/1140 times more (U_per ~ 1/omega): 633 g mm
    assert permissible_unbalance_gmm(6.3, 1140, 12.0) == pytest.approx(481.3 * 1500 / 1140,
                                                                       rel=1e-4)
    assert permissible_unbalance_gmm(6.3, 1140, 12.0) == pytest.approx(633.3, abs=0.1)


def test_missing_service_speed_is_flagged_and_named(tmp_path):
    doc = linear_document(RESIDUAL, speeds_rpm=(1140, 1140, 1140, 1141))
    doc["tolerance"] = {"rotor_mass_kg": 12.0, "grade": 6.3}
    report = solve(parse_readings(doc))
    assert report.verdict.speed_rpm == 1141
    assert VerdictFlag.SPEED_FROM_LAST_RUN in report.verdict.flags
    path = tmp_path / "r.yaml"
    path.write_text(yaml.safe_dump(doc))
    code, out, err = run_cli(["solve", str(path), "--json"])
    assert code == 0, err
    data = json.loads(out)
    assert "speed_from_last_run" in data["tolerance"]["flags"]
    assert data["tolerance"]["speed_rpm"] == 1141
    assert any("1141 rpm" in w and "maximum service speed" in w for w in data["warnings"])
    code, out, _ = run_cli(["solve", str(path)])
    assert "judged at the last run's speed, 1141 rpm" in out


def test_no_speed_anywhere_is_refused(tmp_path):
    doc = linear_document(RESIDUAL)
    doc["tolerance"] = {"rotor_mass_kg": 12.0, "grade": 6.3}
    path = tmp_path / "r.yaml"
    path.write_text(yaml.safe_dump(doc))
    code, out, err = run_cli(["solve", str(path)])
    assert code == 2 and out == "" and "maximum service speed" in err
