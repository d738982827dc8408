"""End to end: `trueturn analyze` of a short sim:// capture against `trueturn sim describe`.

The simulated board (host/trueturn/sim) computes the rotor's exact steady 1x response; the
analyser sees only the bytes. They must agree within the analyser's stated 95 % confidence
(with the SLACK of test_dsp_meter.py: 1.5 times the radius, a 0.1 % tail)."""

from __future__ import annotations

import cmath
import json
import math
from pathlib import Path

import pytest

from trueturn.cli.main import main
from trueturn.link.capture import write_capture_header
from trueturn.link.codec import encode_frame
from trueturn.link.ports import open_port

SLACK = 1.5


def _record(url: str, size_bytes: int) -> bytes:
    port = open_port(url)
    try:
        port.write(encode_frame("start", 1))
        raw = bytearray()
        while len(raw) < size_bytes:
            raw += port.read(8192)
    finally:
        port.close()
    return bytes(raw)


def _run_json(capsys: pytest.CaptureFixture[str], argv: list[str]) -> dict:
    assert main(argv) == 0
    return json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("scenario", ["bench-grinder", "jointer-head"])
def test_analyze_agrees_with_describe(scenario: str, tmp_path: Path,
                                      capsys: pytest.CaptureFixture[str]) -> None:
    # the clock starts just before its 32-bit wrap, so the capture crosses it
    raw = _record(f"sim://{scenario}?realtime=0&seed=2&tick0=4290000000", 60_000)
    path = tmp_path / f"{scenario}.ttcap"
    with open(path, "wb") as f:
        write_capture_header(f, {"scenario": scenario})
        f.write(raw)
    model = _run_json(capsys, ["sim", "describe", scenario, "--json"])
    sens = ",".join(str(p["sensitivity_v_per_g"]) for p in model["pickups"])
    got = _run_json(capsys, ["analyze", str(path), "--json", "--unit", "g",
                             "--sensitivity-v-per-g", sens,
                             "--mains-hz", str(int(model["motor"]["mains_hz"]))])
    # the motor's speed wanders a little; compare with the model at the measured speed
    exact = _run_json(capsys, ["sim", "describe", scenario, "--json",
                               "--rpm", str(got["speed_rpm"])])["exact_1x"]
    assert got["speed_rpm"] == pytest.approx(model["speed_rpm"], rel=0.01)
    assert len(got["pickups"]) == len(exact) == 2
    for pickup, want in zip(got["pickups"], exact, strict=True):
        assert pickup["unit"] == "g pk" and pickup["steady"]
        measured = pickup["amplitude"] * cmath.exp(1j * math.radians(pickup["phase_deg"]))
        truth = want["amplitude_g"] * cmath.exp(1j * math.radians(want["phase_deg"]))
        assert abs(measured - truth) <= SLACK * pickup["confidence_radius"]
        assert abs(math.remainder(pickup["phase_deg"] - want["phase_deg"], 360)) \
            <= SLACK * pickup["confidence_deg"]
