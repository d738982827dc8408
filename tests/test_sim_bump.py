"""sim://NAME?run=bump: the virtual rig struck at standstill, and the bump test reading it.

The rig's pickups record the rotor-on-supports model's free response to a tap on a pickup's
housing along its direction (trueturn.sim.transient.RotorMotion.strike); the model's own
damped modes at standstill are the eigenvalues of its state matrix
(RigidRotor.modes_at_rest; Rao, *Mechanical Vibrations*, free vibration with viscous
damping, from memory). Recorded through the board's protocol and read back by
trueturn.dsp.bump, every mode the pickups see must come out within 3 % in frequency (the
brief's bound; the model's amplitude-dependent mount, `nonlinearity`, moves it a little
beyond the noise-only standard error) and every mode found must be one of the model's.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from cli_helpers import run_cli
from trueturn.cli.common import open_capture
from trueturn.dsp.bump import analyze_bump_capture
from trueturn.dsp.units import PickupProfile
from trueturn.sim.board import BUMP_TAPS, run_times
from trueturn.sim.scenario import load_scenario

#: a model mode counts as seen by a pickup when a tap on some pickup starts it there with at
#: least this share of the largest pickup's summed envelopes for that tap (the board sizes
#: each tap by that sum; weaker ones sink into the noise)
SEEN_SHARE = 0.05


def record_bump(tmp_path: Path, name: str, seed: int = 1) -> Path:
    seconds = run_times(load_scenario(name), "bump")["record_s"]
    out = tmp_path / f"{name}-bump.cap"
    code, _, err = run_cli(["record", "--port", f"sim://{name}?realtime=0&run=bump&seed={seed}",
                            "--seconds", f"{seconds:g}", "-o", str(out), "--quiet"])
    assert code == 0, err
    return out


def seen_modes(name: str) -> dict[str, list[float]]:
    """Per pickup, the model's natural frequencies a tap shows there."""
    rotor = load_scenario(name).rotor
    seen: dict[str, list[float]] = {p.name: [] for p in rotor.pickups}
    for struck in rotor.pickups:
        modes = rotor.modes_at_rest(struck.name)
        total = max(sum(m.accel_per_impulse[p.name] for m in modes) for p in rotor.pickups)
        for p in rotor.pickups:
            for m in modes:
                if total > 0 and m.accel_per_impulse[p.name] >= SEEN_SHARE * total \
                        and m.natural_frequency_hz not in seen[p.name]:
                    seen[p.name].append(m.natural_frequency_hz)
    return seen


@pytest.mark.parametrize("name", ["bench-grinder", "lathe-faceplate"])
def test_bump_recording_finds_the_models_modes(tmp_path: Path, name: str) -> None:
    sc = load_scenario(name)
    capture = record_bump(tmp_path, name)
    profiles = [PickupProfile(p.name, sc.electrical[i].sensitivity_v_per_g)
                for i, p in enumerate(sc.rotor.pickups)]
    with open_capture(str(capture)) as reader:
        found = analyze_bump_capture(reader.chunks(), profiles, sc.motor.mains_hz,
                                     reader.metadata.get("identity"))
    assert found.tach_edges == 0  # the rotor stands still: the tach stays dark
    assert found.result is not None and len(found.result.taps) == BUMP_TAPS
    model = {m.natural_frequency_hz: m.damping_ratio for m in sc.rotor.modes_at_rest()}
    seen = seen_modes(name)
    assert sum(len(v) for v in seen.values()) >= 2
    for pickup, frequencies in seen.items():
        mine = [m for m in found.result.modes if m.pickup == pickup]
        for f in frequencies:  # every mode the pickup sees is found, within 3 %
            near = [m for m in mine if abs(m.frequency_hz / f - 1.0) <= 0.03]
            assert len(near) == 1, (pickup, f, mine)
            # the damping as well, within 10 % of the model's (its mount is mildly nonlinear)
            assert near[0].damping_ratio == pytest.approx(model[f], rel=0.10)
            # and the stated standard errors hold the model's mode (3 of them: the
            # floors, bump.FREQUENCY_REL_FLOOR and DAMPING_REL_FLOOR, cover what the taps'
            # scatter cannot: a mount whose stiffness moves with how hard it rings)
            assert abs(near[0].frequency_hz - f) <= 3 * near[0].frequency_se_hz, near[0]
        for m in mine:  # and every mode found is one of the model's
            assert any(abs(m.frequency_hz / f - 1.0) <= 0.03 for f in model), m


def test_stiff_scenario_has_every_mode_above_its_running_speed() -> None:
    """Why the lathe is the stiff case: a coast-down from its running speed cannot reach
    any of its modes; only a bump test shows them."""
    sc = load_scenario("lathe-faceplate")
    assert min(m.natural_frequency_hz for m in sc.rotor.modes_at_rest()) > sc.speed_rpm / 60


def test_describe_lists_the_bump_run_and_the_standstill_modes() -> None:
    code, stdout, err = run_cli(["sim", "describe", "bench-grinder", "--json"])
    assert code == 0, err
    data = json.loads(stdout)
    assert data["runs"]["bump"]["record_s"] > 0
    assert set(data["runs"]) >= {"coastdown", "runup", "bump"}
    modes = data["standstill_modes"]
    assert len(modes) == 4 and all(0 < m["damping_ratio"] < 1 for m in modes)
    # undamped natural frequencies (rigid_body_modes_hz, kept as they were) lie within the
    # damping's small shift of the damped modes' |lambda| / 2 pi
    for m, undamped in zip(modes, data["rotor"]["rigid_body_modes_hz"], strict=True):
        assert m["natural_frequency_hz"] == pytest.approx(undamped, rel=0.01)
