"""sim://NAME?run=coastdown|runup, and the model's support resonances (critical speeds).

Sources: the synchronous critical speed of a rigid rotor on flexible supports is where the
undamped 1x response grows without bound (from memory: Vance, *Rotordynamics of
Turbomachinery*), so the exact response with very light damping must peak there -- an
independent check of the eigenvalue computation; for a symmetric rotor with no gyroscopic
coupling the translation critical speed is sqrt(k_total / M) (Den Hartog, *Mechanical
Vibrations*, rotating unbalance; from memory).
"""

from __future__ import annotations

import json
import math
from dataclasses import replace

import numpy as np
import pytest

from cli_helpers import run_cli
from trueturn.link.ports import open_port
from trueturn.sim.board import RUNS, BoardOptions, VirtualBoard, coast_stop_s, run_times
from trueturn.sim.rotor import CorrectionPlane, Mass, PickupMount, RigidRotor, Support
from trueturn.sim.scenario import load_scenario


def test_critical_speed_of_a_symmetric_rotor_is_the_closed_form() -> None:
    # sqrt(k_total / M) for translation, sqrt(k_total d^2 / It) for the tilt (no Ip)
    k, m, it, d = 2e5, 5.0, 0.02, 0.1
    rotor = RigidRotor(m, it, 0.0, 0.0, [Support(-100, k, k, 1, 1), Support(100, k, k, 1, 1)],
                       [CorrectionPlane("mid", 0.0, 80.0)], [PickupMount("h", 0, 0.0)])
    to_rpm = 60.0 / (2 * math.pi)
    expected = sorted([math.sqrt(2 * k / m) * to_rpm] * 2 + [math.sqrt(2 * k * d * d / it) * to_rpm] * 2)
    assert rotor.critical_speeds_rpm() == pytest.approx(expected, rel=1e-9)


@pytest.mark.parametrize("name", ["bench-grinder", "shop-fan", "lathe-faceplate"])
def test_each_critical_speed_is_a_peak_of_the_lightly_damped_response(name: str) -> None:
    # independent of the eigenvalue solve: scan the exact 1x response (per unit force, so
    # divided by n^4 for acceleration) of the same rotor with its damping cut 100 times and
    # look for a peak within 1 % of every critical speed a pickup can see
    rotor = load_scenario(name).rotor
    light = replace(rotor, bearings=[replace(b, damping_h_ns_per_m=b.damping_h_ns_per_m / 100,
                                             damping_v_ns_per_m=b.damping_v_ns_per_m / 100)
                                     for b in rotor.bearings],
                    pickups=[PickupMount("h", 0, 0.0), PickupMount("v", 0, 90.0),
                             PickupMount("h2", len(rotor.bearings) - 1, 0.0),
                             PickupMount("v2", len(rotor.bearings) - 1, 90.0)], nonlinearity=0.0)
    speeds = np.linspace(100.0, 6000.0, 11801)  # 0.5 rpm apart
    masses = [Mass(p.name, 10.0, 0.0) for p in rotor.planes] + \
        [Mass(rotor.planes[0].name, 10.0, 90.0)]
    response = np.array([max(abs(v) for v in light.response_1x(s, masses).values())
                         for s in speeds]) / speeds ** 4
    inner = (response[1:-1] > response[:-2]) & (response[1:-1] > response[2:])
    peaks = speeds[1:-1][inner]
    for critical in rotor.critical_speeds_rpm():
        if critical < 6000:
            assert np.min(np.abs(peaks - critical)) < 0.01 * critical, (name, critical, peaks)


def _speeds(run: str, seconds: float, step_s: float = 0.1) -> list[float]:
    board = VirtualBoard(load_scenario("bench-grinder"), BoardOptions(run=run))
    out = []
    for _ in range(int(seconds / step_s)):
        board.advance_s(step_s)
        out.append(board.speed_rpm)
    return out


def test_coastdown_runs_at_speed_then_coasts_to_a_stop() -> None:
    sc = load_scenario("bench-grinder")
    times = run_times(sc, "coastdown")
    speeds = _speeds("coastdown", times["record_s"])
    switch = int(times["switch_s"] / 0.1)
    assert min(speeds[5:switch - 1]) > 0.97 * sc.speed_rpm  # at speed until the switch
    assert all(b <= a for a, b in zip(speeds[switch:], speeds[switch + 1:], strict=False))
    assert speeds[-1] == 0.0
    # stops after tau ln 5 (the model's closed form, coast_stop_s), within a step
    stopped = next(i for i, s in enumerate(speeds) if s == 0.0) * 0.1 + 0.1
    assert stopped - times["switch_s"] == pytest.approx(coast_stop_s(sc.motor.coast_down_s),
                                                        abs=0.3)
    # at speed for about a quarter of the recording
    assert times["switch_s"] / times["record_s"] == pytest.approx(0.25, abs=0.04)


def test_runup_stands_still_then_reaches_speed() -> None:
    sc = load_scenario("bench-grinder")
    times = run_times(sc, "runup")
    speeds = _speeds("runup", times["record_s"])
    assert speeds[int(times["switch_s"] / 0.1) - 2] == 0.0
    assert speeds[-1] > 0.99 * sc.speed_rpm * 0.98


def test_run_options_in_the_url() -> None:
    port = open_port("sim://bench-grinder?realtime=0&run=runup")
    try:
        assert port.rig.standstill
    finally:
        port.close()
    assert set(RUNS) == {"steady", "coastdown", "runup", "bump"}
    for bad, needle in (("run=sideways", "run must be one of"),
                        ("run=coastdown&motor=off", "not both")):
        with pytest.raises(Exception, match=needle):
            open_port(f"sim://bench-grinder?realtime=0&{bad}")


def test_describe_lists_the_resonances_and_the_runs() -> None:
    code, out, err = run_cli(["sim", "describe", "bench-grinder", "--json"])
    assert code == 0, err
    data = json.loads(out)
    model = load_scenario("bench-grinder").rotor.critical_speeds_rpm()
    assert data["resonances_rpm"] == pytest.approx(model, abs=0.06)
    # the rubber feet: a rocking mode of the grinder well below its running speed
    assert 700 < data["resonances_rpm"][0] < 1100
    assert data["runs"]["coastdown"]["record_s"] > data["runs"]["coastdown"]["switch_s"] > 0
