"""Coast-downs recorded from the simulator with ``trueturn record`` and read back with
``trueturn analyze --sweep --json``, as a person would (tests/test_dsp_sweep_cli.py,
tests/test_sim_transient.py), and the model's numbers they are checked against.

A check that compares a sweep with the model's steady response records with
``response="quasi-static"`` (the 1x is the steady one at each speed), one about the rotor's
motion in time with ``"transient"`` (trueturn.sim.board.RESPONSES); ``None`` is the
simulator's default, for checks that hold under either.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import yaml

from cli_helpers import run_cli
from trueturn.sim.board import run_times
from trueturn.sim.scenario import load_scenario, scenario_dir


def record_run(tmp_path: Path, scenario: str, run: str, response: str | None,
               name: str = "run", seed: int = 5, seconds: float | None = None) -> Path:
    """``trueturn record`` of ``sim://SCENARIO`` with ``run=`` (``steady``: none) and
    ``response=`` (None: the default) for the recording time ``sim.board.run_times`` gives
    (or ``seconds``); the capture's path."""
    seconds = seconds or run_times(load_scenario(scenario), run)["record_s"]
    out = tmp_path / f"{name}.cap"
    query = f"realtime=0&seed={seed}" + (f"&response={response}" if response else "") + (
        f"&run={run}" if run != "steady" else "")
    code, _, err = run_cli(["record", "--port", f"sim://{scenario}?{query}", "--seconds",
                            f"{seconds:g}", "-o", str(out), "--quiet"])
    assert code == 0, err
    return out


def analyze_sweep(path: Path, *extra: str) -> dict:
    """``trueturn analyze PATH --sweep --json`` (plus ``extra``), parsed."""
    code, out, err = run_cli(["analyze", str(path), "--sweep", "--json", *extra])
    assert code == 0, err
    return json.loads(out)


def modal_damping(scenario: str, critical_rpm: float) -> float:
    """-Re(s)/|s| of the rotor's state-space eigenvalue nearest the critical speed
    (textbook definition, from memory: Ewins, *Modal Testing*, sec. 2.2), computed here
    independently of dsp/sweep.py."""
    rotor = load_scenario(scenario).rotor
    w = critical_rpm * 2 * math.pi / 60
    dyn, _ = rotor._matrices(w)  # K + i w (C + G) - w^2 M
    m = np.diag([rotor.mass_kg, rotor.transverse_inertia_kg_m2] * 2)
    k = dyn.real + w * w * m
    cg = dyn.imag / w
    a = np.block([[np.zeros((4, 4)), np.eye(4)],
                  [-np.linalg.solve(m, k), -np.linalg.solve(m, cg)]])
    s = np.linalg.eigvals(a)
    s = s[s.imag > 0]
    nearest = s[np.argmin(np.abs(s.imag - w))]
    return float(-nearest.real / abs(nearest))


def stiff_grinder(tmp_path: Path) -> Path:
    """The grinder on stiffer feet: its rocking mode near 3000 rpm, 15 % below the running
    speed, inside the 20 % margin; a quarter of the unbalance, so the pickups stay inside
    +/-3 g at resonance (an invented variant for the tests)."""
    raw = yaml.safe_load((scenario_dir() / "bench-grinder.yaml").read_text(encoding="utf-8"))
    for b in raw["bearings"]:
        for key in ("stiffness_h_n_per_m", "stiffness_v_n_per_m"):
            b[key] *= (3000.0 / 823.2) ** 2
    raw["name"] = "stiff-grinder"
    for m in raw["as_found"]:
        m["mass_g"] *= 0.25
    path = tmp_path / "stiff-grinder.yaml"
    path.write_text(yaml.safe_dump(raw), encoding="utf-8")
    return path


def first_mode_over_seeds(tmp_path: Path, scenario: str, response: str | None,
                          seeds: tuple[int, ...], *analyze_extra: str
                          ) -> list[tuple[int, list[dict]]]:
    """Per seed, the resonances a coast-down reports within 5 % of the model's first
    critical speed (``analyze --sweep`` with ``analyze_extra``); every resonance reported
    must lie within 5 % of some critical speed (no ringing or noise peak reported as a
    resonance)."""
    criticals = load_scenario(scenario).rotor.critical_speeds_rpm()
    out = []
    for seed in seeds:
        data = analyze_sweep(record_run(tmp_path, scenario, "coastdown", response,
                                        f"cd{seed}", seed=seed), *analyze_extra)
        for r in data["resonances"]:
            assert min(abs(r["speed_rpm"] / m - 1) for m in criticals) <= 0.05, (seed, r)
        out.append((seed, [r for r in data["resonances"]
                           if abs(r["speed_rpm"] / criticals[0] - 1) <= 0.05]))
    return out
