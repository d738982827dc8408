"""Runs at different speeds: warned above 0.3 % with an estimated error, normalised when the
local slope is known.

Sources: the 1x response to unbalance scales as (n/n_ref)**p with p between about 2 and 4
(centrifugal force ~ omega^2 times the mounting's omega^0...omega^2; forced response of a
single-degree-of-freedom system to a rotating unbalance, from memory: Thomson, Theory of
Vibration with Applications). The rotor below is a constructed linear model, so the true
correction is known exactly (LINEAR_TRUE_CORRECTION_G).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import yaml

from balance_sim_helpers import LINEAR_TRUE_CORRECTION_G, linear_document
from cli_helpers import run_cli
from trueturn.angles import phasor
from trueturn.balance import parse_readings, solve
from trueturn.balance.speed import off_speed_runs

RESIDUAL = (phasor(0.05, 10), phasor(0.05, 200))
TRIAL_2PCT_SLOW = (1500.0, 1470.0, 1500.0)


def _doc(speeds, **kw):
    doc = linear_document(RESIDUAL, bearings=False, speeds_rpm=speeds, exponent=3.0,
                          check_run=False, **kw)
    doc.pop("tolerance")
    return doc


def test_trial_two_percent_slow_is_warned_with_the_reading_error():
    off = off_speed_runs(parse_readings(_doc(TRIAL_2PCT_SLOW)).runs)
    assert [r.index for r in off] == [1]
    assert off[0].deviation == pytest.approx(-0.02)
    # (n/n_ref)**p - 1 for p = 2 and 4: 0.98**2 - 1 = -3.96 %, 0.98**4 - 1 = -7.76 %
    assert off[0].amplitude_error_range == pytest.approx((-0.0396, -0.07763184))


def test_runs_within_0_3_percent_are_not_warned():
    assert off_speed_runs(parse_readings(_doc((1500.0, 1496.0, 1503.0))).runs) == []


def test_error_estimate_covers_the_actual_error_and_normalising_removes_it(tmp_path):
    # a small trial (1 g against a 3 g / 2 g as-found) makes the speed error count
    doc = _doc(TRIAL_2PCT_SLOW, trial_g=1.0)
    report = solve(parse_readings(doc))
    est = report.speed
    assert est is not None and est.normalised_with_exponent is None
    given = np.array([c.vector_g for c in report.solution.corrections])
    actual = np.abs(given - np.array(LINEAR_TRUE_CORRECTION_G))
    assert actual.max() > 0.05  # the speed difference really moved the answer
    # the true slope p = 3 lies inside 2...4: the estimate bounds the actual error
    assert np.all(actual <= np.array(est.correction_change_g) + 1e-9)
    assert 0 <= est.worst_cut_fraction < 1
    # known slope: readings normalised, the exact correction comes back
    doc["speed_exponent"] = 3.0
    fixed = solve(parse_readings(doc))
    vectors = np.array([c.vector_g for c in fixed.solution.corrections])
    assert np.allclose(vectors, LINEAR_TRUE_CORRECTION_G, atol=1e-9)
    assert fixed.speed is not None and fixed.speed.normalised_with_exponent == 3.0


def test_solve_cli_names_the_off_speed_run(tmp_path):
    path = tmp_path / "r.yaml"
    path.write_text(yaml.safe_dump(_doc(TRIAL_2PCT_SLOW, trial_g=1.0)))
    code, out, err = run_cli(["solve", str(path), "--json"])
    assert code == 0, err
    data = json.loads(out)
    assert data["off_speed"]["runs"][0]["label"] == "run 1"
    assert data["off_speed"]["runs"][0]["deviation"] == pytest.approx(-0.02)
    assert any("2.0 % below" in w for w in data["warnings"])
    assert any("may be off by up to" in w for w in data["warnings"])


def test_speed_exponent_out_of_range_is_one_line(tmp_path):
    doc = _doc(TRIAL_2PCT_SLOW)
    doc["speed_exponent"] = 40
    path = tmp_path / "r.yaml"
    path.write_text(yaml.safe_dump(doc))
    code, out, err = run_cli(["solve", str(path)])
    assert code == 2 and "speed_exponent" in err and len(err.strip().splitlines()) == 1
