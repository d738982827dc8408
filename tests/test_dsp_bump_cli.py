"""`trueturn analyze FILE --bump` end to end on the virtual rig's recordings.

A bump test recorded from ``sim://NAME?run=bump`` (the rotor at standstill, its housings
struck in turn) must give, per pickup, the model's damped modes at standstill (the
eigenvalues of its state matrix, RigidRotor.modes_at_rest; Rao, *Mechanical Vibrations*,
free vibration with viscous damping, from memory) within 3 %, in the JSON contract of the
README. The usual 15 % separation of a running speed from a natural frequency is common
practice, no source. A person's mistakes are one line and a non-zero exit.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from cli_helpers import run_cli
from trueturn.sim.board import BUMP_TAPS, run_times
from trueturn.sim.scenario import load_scenario


def record(tmp_path: Path, url: str, seconds: float, name: str) -> Path:
    out = tmp_path / name
    code, _, err = run_cli(["record", "--port", url, "--seconds", f"{seconds:g}", "-o",
                            str(out), "--quiet"])
    assert code == 0, err
    return out


@pytest.fixture(scope="module")
def grinder_bump(tmp_path_factory: pytest.TempPathFactory) -> Path:
    seconds = run_times(load_scenario("bench-grinder"), "bump")["record_s"]
    return record(tmp_path_factory.mktemp("bump"), "sim://bench-grinder?realtime=0&run=bump",
                  seconds, "grinder-bump.cap")


def test_bump_json_gives_the_models_modes(grinder_bump: Path) -> None:
    code, stdout, err = run_cli(["analyze", str(grinder_bump), "--bump", "--json"])
    assert code == 0, err
    bump = json.loads(stdout)["bump"]
    assert bump["taps"] == BUMP_TAPS
    model = [m.natural_frequency_hz for m in load_scenario("bench-grinder").rotor.modes_at_rest()]
    assert bump["modes"]
    for mode in bump["modes"]:
        assert {"pickup", "frequency_hz", "frequency_se_hz", "speed_rpm", "damping_ratio",
                "taps"} <= set(mode)
        assert any(abs(mode["frequency_hz"] / f - 1.0) <= 0.03 for f in model), mode
        assert mode["speed_rpm"] == pytest.approx(60.0 * mode["frequency_hz"], abs=0.1)
        assert mode["taps"] >= 2
    # the rubber feet's horizontal modes (13.8 and 25.5 Hz) at both horizontal pickups
    for pickup in ("left-bearing", "right-bearing"):
        mine = sorted(m["frequency_hz"] for m in bump["modes"] if m["pickup"] == pickup)
        assert [round(f) for f in mine] == [14, 25]
    assert bump["findings"] == []


def test_running_speed_near_a_mode_is_warned(grinder_bump: Path) -> None:
    first = load_scenario("bench-grinder").rotor.modes_at_rest()[0].natural_frequency_hz
    near = 60.0 * first * 1.10  # 10 % above the rubber feet's first mode
    code, stdout, err = run_cli(["analyze", str(grinder_bump), "--bump", "--json",
                                 "--speed-rpm", f"{near:.0f}"])
    assert code == 0, err
    codes = [f["code"] for f in json.loads(stdout)["bump"]["findings"]]
    assert codes.count("speed_near_mode") == 2  # at each pickup
    code, stdout, _ = run_cli(["analyze", str(grinder_bump), "--bump", "--json",
                               "--speed-rpm", "3540"])  # the grinder's own speed: far above
    assert code == 0 and json.loads(stdout)["bump"]["findings"] == []
    code, text, _ = run_cli(["analyze", str(grinder_bump), "--bump", "--speed-rpm",
                             f"{near:.0f}"])
    assert code == 0
    assert "natural frequency" in text and "within 15 %" in text
    assert "never the rotor" in text and "locked out" in text


def one_line_refusal(argv: list[str]) -> str:
    code, stdout, err = run_cli(argv)
    assert code != 0 and stdout == ""
    assert err.count("\n") <= 1 and "Traceback" not in err, err
    return err


def test_mistakes_are_one_line(tmp_path: Path, grinder_bump: Path) -> None:
    err = one_line_refusal(["analyze", str(tmp_path / "missing.cap"), "--bump"])
    assert "missing.cap" in err
    # a recording of the machine running: tach edges
    running = record(tmp_path, "sim://bench-grinder?realtime=0", 2, "running.cap")
    assert "tach edges" in one_line_refusal(["analyze", str(running), "--bump"])
    # running behind a dark tach: its 1x stands in the spectrum and does not decay
    dark = record(tmp_path, "sim://bench-grinder?realtime=0&tach=off", 3, "dark.cap")
    assert "does not decay" in one_line_refusal(["analyze", str(dark), "--bump"])
    # standing still, nobody tapped
    still = record(tmp_path, "sim://bench-grinder?realtime=0&motor=off", 3, "still.cap")
    assert "no tap found" in one_line_refusal(["analyze", str(still), "--bump"])
    # options that do not go together
    assert "--bump" in one_line_refusal(["analyze", str(grinder_bump), "--speed-rpm", "900"])
    assert "--sweep" in one_line_refusal(["analyze", str(grinder_bump), "--bump", "--sweep"])
