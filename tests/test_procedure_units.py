"""The procedure's and the engine's own sentences in the machine's units (issue #17 item 3).

A machine profile in ounces must never hear about grams: the redo of a trial too small to be
seen, the forces confirmed before a run (kept in the job), a fitted mass over the plane's
limit, and the engine's warnings and refusals all name masses in ounces and forces in
pound-force. The facts stay in grams and newtons (the job file, the math).

Conversion factors: exact by definition (NIST SP 811, 2008, appendix B: 1 oz = 28.349523125 g,
1 lbf = 4.4482216152605 N).
"""

from __future__ import annotations

import math
import re
from dataclasses import replace

import pytest

from test_ui_procedure import Rig, _TinyTrialEngine
from trueturn.balance import parse_readings, solve
from trueturn.balance.sanity import NoInformationError
from trueturn.jobs.profiles import Units
from trueturn.model.units import MASS_DECIMALS
from trueturn.procedure.guide import GateRefused, Mode, Procedure
from trueturn.ui.machine import setup_from_profile

G_PER_OZ = 28.349523125  # NIST SP 811, exact
N_PER_LBF = 4.4482216152605  # NIST SP 811, exact

#: a mass or a force written in metric units (grams, newtons, g·mm)
METRIC_WORD = re.compile(r"\d (g|N|g·mm)\b")


def imperial_rig(engine: object | None = None) -> Rig:
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.profile.units = Units(mass="oz", length="in", vibration="in/s")
    rig.setup = setup_from_profile(rig.profile, Mode.TWO_PLANE, standstill_s=3.0,
                                   revolutions_per_run=30)
    rig.proc = Procedure(rig.setup, engine or _TinyTrialEngine())  # type: ignore[arg-type]
    return rig


def test_the_redo_of_a_small_trial_and_the_forces_speak_ounces_and_pound_force() -> None:
    rig = imperial_rig()
    for _ in range(2):  # set-up, as found, the trial on the left wheel (a fiftieth: unseen)
        rig.hands_on()
        rig.run()
    proc = rig.proc
    small = proc.too_small_trial
    assert small is not None and small.suggested_g is not None
    assert "oz" in proc.problem and not METRIC_WORD.search(proc.problem), proc.problem
    # the redo in words is the suggestion in grams converted exactly, rounded up to the
    # scale's step (0.001 oz), and it is the mass the redo then uses
    said = float(re.search(r"redo it with (\d+\.\d+) oz", proc.problem)[1])  # type: ignore[index]
    assert said == math.ceil(small.suggested_g / G_PER_OZ * 1000 - 1e-9) / 1000
    larger = proc.redo_trial_larger()
    assert larger.mass_g / G_PER_OZ == pytest.approx(said, abs=1e-12)
    assert "oz" in proc.step.title and not METRIC_WORD.search(proc.step.title)
    # never lighter than suggested, and a whole number of the scale's steps (0.001 oz)
    assert larger.mass_g >= small.suggested_g
    steps = larger.mass_g / G_PER_OZ * 10 ** MASS_DECIMALS["oz"]
    assert steps == pytest.approx(round(steps), abs=1e-6)
    rig.hands_on()
    rig.run()
    confirmed = proc.runs[-1].forces_confirmed
    assert confirmed and all("lbf" in line and " oz on " in line for line in confirmed)
    assert not any(METRIC_WORD.search(line) for line in confirmed), confirmed


def test_a_fitted_mass_over_the_limit_is_refused_in_ounces() -> None:
    rig = imperial_rig()
    plane = rig.setup.planes[0]
    limited = replace(plane, max_mass_g=5.0)
    rig.setup = replace(rig.setup, planes=(limited, *rig.setup.planes[1:]))
    rig.proc = Procedure(rig.setup, _TinyTrialEngine())
    rig.hands_on()
    rig.run()  # as found; now the trial's hands-on step
    rig.settle()
    with pytest.raises(GateRefused) as refused:
        rig.proc.fit(rig.proc.fittable()[0], mass_g=10.0)
    text = str(refused.value)
    assert f"{10.0 / G_PER_OZ:.3f} oz" in text and f"{5.0 / G_PER_OZ:.3f} oz" in text
    assert not METRIC_WORD.search(text), text


def _unseen_trial_document(mass_unit_doc: dict[str, object]) -> dict[str, object]:
    # one plane, one pickup: a 0.05 g trial whose effect (0.001) is far under the readings'
    # 95 % circles (0.05 each; their difference's radius sqrt(2) x 0.05, GUM)
    doc: dict[str, object] = {
        "planes": [{"name": "p", "radius_mm": 50}], "sensors": [{"name": "s"}],
        "runs": [
            {"label": "as found", "added": [],
             "readings": {"s": {"amp": 1.0, "phase_deg": 0, "confidence": 0.05}}},
            {"label": "trial", "added": [{"plane": "p", "mass_g": 0.05, "angle_deg": 0}],
             "readings": {"s": {"amp": 1.001, "phase_deg": 0, "confidence": 0.05}}},
        ]}
    doc.update(mass_unit_doc)
    return doc


def test_the_engine_refuses_an_unseen_trial_in_the_persons_unit() -> None:
    inp = parse_readings(_unseen_trial_document({}))
    with pytest.raises(NoInformationError) as grams:
        solve(inp)
    assert re.search(r"\(0\.05 g\)", str(grams.value))
    with pytest.raises(NoInformationError) as ounces:
        solve(replace(inp, mass_unit="oz"))
    text = str(ounces.value)
    assert f"({0.05 / G_PER_OZ:.3f} oz)" in text and not METRIC_WORD.search(text), text
    # the facts stay in grams
    assert ounces.value.trial_g == pytest.approx(0.05)
    assert ounces.value.suggested_g == pytest.approx(grams.value.suggested_g)
    said = float(re.search(r"with about (\d+\.\d+) oz", text)[1])  # type: ignore[index]
    assert said == pytest.approx(grams.value.suggested_g / G_PER_OZ, abs=0.0006)
    assert math.isclose(N_PER_LBF, 0.45359237 * 9.80665, rel_tol=1e-15)  # lbf = lb x g_n


def test_trial_mass_warns_of_its_cap_in_the_units_typed() -> None:
    from cli_helpers import run_cli

    code, out, _ = run_cli(["trial-mass", "--rotor-mass-lb", "10", "--radius-in", "3",
                            "--speed-rpm", "3450", "--max-mass-oz", "0.005"])
    (warning,) = [line for line in out.splitlines() if line.startswith("warning:")]
    assert code == 0 and "capped at 0.005 oz" in warning and not METRIC_WORD.search(warning)
