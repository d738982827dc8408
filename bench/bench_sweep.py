#!/usr/bin/env python3
"""Sweep figures (#20 items 1 and 2): resonances found on simulated coast-downs against the
model, the half-power method against Rao's SDOF, and runs a fraction of a percent apart
normalised with the measured slope.

Run alone with ``.venv/bin/python bench/bench_sweep.py`` or through ``make bench``.
``BENCH_SWEEP_SEEDS`` sets how many simulated coast-downs (default 5).
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import os
import sys
import tempfile
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from common import Row, format_table  # noqa: E402
from trueturn.cli.main import main as cli  # noqa: E402
from trueturn.dsp.sweep import analyse_sweep  # noqa: E402
from trueturn.sim.board import run_times  # noqa: E402
from trueturn.sim.scenario import load_scenario  # noqa: E402


def _quiet(argv: list[str]) -> str:
    out = io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(io.StringIO()):
        code = cli(argv)
    if code != 0:
        raise RuntimeError(f"trueturn {' '.join(argv)} exited {code}")
    return out.getvalue()


def _modal_damping(critical_rpm: float) -> float:
    """-Re(s)/|s| of the grinder's state-space eigenvalue nearest the critical speed."""
    rotor = load_scenario("bench-grinder").rotor
    w = critical_rpm * 2 * math.pi / 60
    dyn, _ = rotor._matrices(w)
    m = np.diag([rotor.mass_kg, rotor.transverse_inertia_kg_m2] * 2)
    a = np.block([[np.zeros((4, 4)), np.eye(4)],
                  [-np.linalg.solve(m, dyn.real + w * w * m), -np.linalg.solve(m, dyn.imag / w)]])
    s = np.linalg.eigvals(a)
    s = s[s.imag > 0]
    nearest = s[np.argmin(np.abs(s.imag - w))]
    return float(-nearest.real / abs(nearest))


def coastdown_rows(seeds: int) -> list[Row]:
    sc = load_scenario("bench-grinder")
    first = sc.rotor.critical_speeds_rpm()[0]
    zeta = _modal_damping(first)
    speed_errors, damping_errors, points, fit_errors = [], [], [], []
    resolved, covered = 0, 0
    with tempfile.TemporaryDirectory() as folder:
        for seed in range(1, seeds + 1):
            cap = str(Path(folder) / f"cd{seed}.cap")
            _quiet(["record", "--port", f"sim://bench-grinder?realtime=0&seed={seed}&run=coastdown",
                    "--seconds", f"{run_times(sc, 'coastdown')['record_s']:g}", "-o", cap,
                    "--quiet"])
            data = json.loads(_quiet(["analyze", cap, "--sweep", "--json"]))
            points.append(len(data["sweep"]))
            found = [r for r in data["resonances"] if abs(r["speed_rpm"] / first - 1) <= 0.2]
            if not found:
                speed_errors.append(math.inf)
                continue
            speed_errors += [abs(r["speed_rpm"] / first - 1) for r in found]
            damping_errors += [abs(r["half_power_damping_ratio"] / zeta - 1)
                               if r["half_power_damping_ratio"] else math.inf for r in found]
            fit_errors += [abs(r["sdof_fit"]["damping_ratio"] / zeta - 1) if r["sdof_fit"]
                           else math.inf for r in found]
            for r in found:
                if r["damping_ratio"] is not None:
                    resolved += 1
                    covered += r["damping_ratio_95"][0] <= zeta <= r["damping_ratio_95"][1]
    worst_speed = max(speed_errors)
    return [
        Row(f"sweep [coast-down]: bench-grinder rocking mode ({first:.0f} rpm) speed error, "
            f"worst of {seeds} seeds x 2 pickups", f"{100 * worst_speed:.2f} %", "<= 5 %",
            worst_speed <= 0.05),
        Row(f"sweep [coast-down]: its half-power damping against the modal {100 * zeta:.1f} %, "
            "worst", f"{100 * max(damping_errors):.0f} %", "-", None),
        Row("sweep [coast-down]: its SDOF-fit damping against the modal, worst",
            f"{100 * max(fit_errors):.0f} %", "<= 20 %", max(fit_errors) <= 0.20),
        Row("sweep [coast-down]: rocking-mode damping resolved (SDOF fit, 95 % interval "
            "within 1.5x), of seeds x pickups", f"{resolved}/{len(fit_errors)}", ">= 80 %",
            resolved >= 0.8 * len(fit_errors)),
        Row("sweep [coast-down]: resolved damping's 95 % interval holds the modal damping",
            f"{covered}/{resolved}", ">= 80 %", resolved > 0 and covered >= 0.8 * resolved),
        Row("sweep [coast-down]: points on a full bench-grinder coast-down (fewest)",
            f"{min(points)}", ">= 20", min(points) >= 20),
    ]


def sdof_rows(trials: int = 50) -> list[Row]:
    """Rao's rotating-unbalance SDOF, random natural speed 600-3000 rpm and damping 2-10 %,
    points 0.5 % apart, noise 1 % of the response at the natural speed."""
    rng = np.random.default_rng(20)
    speed_err, damping_err, fit_err = [], [], []
    for _ in range(trials):
        natural = rng.uniform(600, 3000)
        zeta = rng.uniform(0.02, 0.10)
        n = natural * 0.3 * np.exp(np.arange(0.0, math.log(12.0), 0.005))
        r = n / natural
        a = np.conj(-(n / 1000) ** 2 * r ** 2 / ((1 - r ** 2) + 2j * zeta * r))
        noise = 0.01 * (natural / 1000) ** 2 / (2 * zeta)
        a = a + noise * (rng.normal(size=n.size) + 1j * rng.normal(size=n.size))
        sweep = analyse_sweep(n, {"p": a}, {"p": np.full(n.size, noise)}, "g pk")
        near = [x for x in sweep.resonances if abs(x.speed_rpm / natural - 1) < 0.2]
        fit_err.append(abs(near[0].damping_ratio / zeta - 1) if near and
                       near[0].damping_ratio is not None else math.inf)
        if not near or near[0].half_power_damping_ratio is None:
            speed_err.append(math.inf)
            damping_err.append(math.inf)
            continue
        speed_err.append(abs(near[0].speed_rpm / natural - 1))
        damping_err.append(abs(near[0].half_power_damping_ratio / zeta - 1))
    return [
        Row(f"sweep [SDOF, Rao]: half-power natural speed error, zeta 2-10 %, 0.5 % points, "
            f"worst of {trials}", f"{100 * max(speed_err):.2f} %", "<= 2 %",
            max(speed_err) <= 0.02),
        Row(f"sweep [SDOF, Rao]: half-power damping error, worst of {trials}",
            f"{100 * max(damping_err):.1f} %", "<= 20 %", max(damping_err) <= 0.20),
        Row(f"sweep [SDOF, Rao]: SDOF-fit damping error (resolved or not), worst of {trials}",
            f"{100 * max(fit_err):.1f} %", "<= 20 %", max(fit_err) <= 0.20),
    ]


def slope_rows() -> list[Row]:
    import test_balance_speed_slopes as case  # the constructed rotor of the test
    p, q = case.measured_slope()
    errors = {}
    for label, extra in (("none", {}), ("exponent 2", {"speed_exponent": 2.0}),
                         ("measured slope", {"speed_slopes": [
                             {"sensor": s, "amplitude_exponent": p,
                              "phase_deg_per_ln_speed": q} for s in ("left", "right")]})):
        doc = case.document()
        doc.update(extra)
        errors[label] = case.correction_error(doc)
    return [Row("speed normalisation: correction error, runs 0.4-0.5 % apart 8 % above a "
                "resonance (none / exponent 2 / measured slope)",
                " / ".join(f"{errors[k]:.3f} g" for k in errors), "-", None)]


def bump_rows(seeds: int) -> list[Row]:
    """Bump tests (``sim://NAME?run=bump``, ``analyze --bump``) on every packaged scenario
    against the model's damped modes at standstill (RigidRotor.modes_at_rest). A model mode
    counts as seen by a pickup as in tests/test_sim_bump.py (a tap starts it there with at
    least 5 % of the tap's summed envelopes)."""
    from test_sim_bump import seen_modes
    from trueturn.sim.scenario import list_scenarios

    errors: list[float] = []
    missed: list[str] = []
    seen_total = found_total = 0
    with tempfile.TemporaryDirectory() as folder:
        for name in list_scenarios():
            sc = load_scenario(name)
            model = [m.natural_frequency_hz for m in sc.rotor.modes_at_rest()]
            seen = seen_modes(name)
            for seed in range(1, seeds + 1):
                cap = str(Path(folder) / f"{name}-{seed}.cap")
                _quiet(["record", "--port", f"sim://{name}?realtime=0&seed={seed}&run=bump",
                        "--seconds", f"{run_times(sc, 'bump')['record_s']:g}", "-o", cap,
                        "--quiet"])
                modes = json.loads(_quiet(["analyze", cap, "--bump", "--json"]))["bump"]["modes"]
                errors += [min(abs(m["frequency_hz"] / f - 1) for f in model) for m in modes]
                for pickup, frequencies in seen.items():
                    for f in frequencies:
                        seen_total += 1
                        if any(m["pickup"] == pickup and abs(m["frequency_hz"] / f - 1) <= 0.03
                               for m in modes):
                            found_total += 1
                        elif f"{name} {f:.0f} Hz" not in missed:
                            missed.append(f"{name} {f:.0f} Hz")
    worst = max(errors) if errors else math.inf
    return [
        Row(f"bump test: natural frequency error on the simulator's scenarios (max), "
            f"{len(errors)} modes found over {seeds} seeds", f"{100 * worst:.2f} %", "<= 3 %",
            worst <= 0.03),
        Row("bump test: modes the pickups see that were found (within 3 %)"
            + (f"; missed: {', '.join(missed)}" if missed else ""),
            f"{found_total}/{seen_total}", "-", None),
    ]


def rows() -> list[Row]:
    seeds = int(os.environ.get("BENCH_SWEEP_SEEDS", "5"))
    return coastdown_rows(seeds) + sdof_rows() + slope_rows() + bump_rows(seeds)


if __name__ == "__main__":
    print(format_table(rows()))
