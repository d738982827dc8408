"""`trueturn analyze`: the JSON contract, the table and one-line errors."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from trueturn.cli.main import main
from trueturn.dsp.synthetic import OrderComponent, SyntheticRun, synthesize
from trueturn.link.capture import write_capture_header
from trueturn.link.codec import encode_frame


@pytest.fixture(scope="module")
def capture(tmp_path_factory: pytest.TempPathFactory) -> Path:
    raw, _ = synthesize(SyntheticRun(speed_rpm=1800.0, duration_s=3.0, seed=4,
                                     orders=((OrderComponent(1, 90.0, 10.0),),
                                             (OrderComponent(1, 40.0, 100.0),))))
    path = tmp_path_factory.mktemp("cap") / "grinder.ttcap"
    with open(path, "wb") as f:
        write_capture_header(f, {"pickups": [{"name": "left"}, {"name": "right",
                                                             "sensitivity_v_per_g": 0.3}]})
        f.write(raw)
    return path


def test_json_contract(capture: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["analyze", str(capture), "--json", "--revs", "50", "--unit", "mm/s"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["speed_rpm"] == pytest.approx(1800.0, rel=1e-4)
    assert [p["name"] for p in data["pickups"]] == ["left", "right"]
    for p in data["pickups"]:
        assert {"name", "amplitude", "unit", "phase_deg", "confidence_deg", "revolutions",
                "steady"} <= set(p)
        assert p["revolutions"] == 50
    assert data["pickups"][0]["unit"] == "V pk"
    assert data["pickups"][1]["unit"] == "mm/s rms"
    assert data["pickups"][0]["phase_deg"] == pytest.approx(10.0, abs=0.5)
    assert all({"hz", "amplitude", "label"} <= set(pk) for pk in data["spectrum_peaks"])
    assert any(pk["label"] == "1x" and pk["hz"] == pytest.approx(30.0, abs=0.5)
               for pk in data["spectrum_peaks"])
    assert isinstance(data["warnings"], list)
    # findings as data beside the words (issue #16 item 3): the left pickup has no
    # sensitivity, so it reads in volts although mm/s was asked; the same in words
    assert len(data["findings"]) == len(data["warnings"])
    assert {"code": "uncalibrated", "pickup": "left", "asked_unit": "mm/s rms"} in \
        data["findings"]
    assert all(set(f) >= {"code", "pickup"} for f in data["findings"])
    # what the 95 % circle covers, said in the output (issue #14 item 13)
    assert "tones_within_unresolved_hz_of_an_order" in data["confidence"]["not_covered"]
    for p in data["pickups"]:
        # 50 revolutions at 30 Hz: 1.67 s, so tones closer than 0.6 Hz are not resolved
        assert p["unresolved_hz"] == pytest.approx(30 / 50, rel=1e-3)
        assert p["confidence_radius"] >= p["confidence_random"]


def test_table_and_options(capture: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["analyze", str(capture), "--sensitivity-v-per-g", "0.1,0.3", "--unit", "mils",
                 "--mains-hz", "60", "--names", "inboard,outboard"]) == 0
    out = capsys.readouterr().out
    assert "speed 1800.0 rpm" in out and "inboard" in out and "mil pk-pk" in out
    assert "95% conf:" in out and "not covered" in out


@pytest.mark.parametrize("args, text", [
    (["--revs", "1"], "--revs must be at least 2"),
    (["--sensitivity-v-per-g", "abc"], "must be numbers"),
    (["--sensitivity-v-per-g", "-1"], "must be positive"),
])
def test_bad_options_exit_2(capture: Path, capsys: pytest.CaptureFixture[str],
                            args: list[str], text: str) -> None:
    assert main(["analyze", str(capture), *args]) == 2
    err = capsys.readouterr().err
    assert text in err and len(err.strip().splitlines()) == 1


def test_bad_files_exit_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["analyze", str(tmp_path / "none.ttcap")]) == 2
    junk = tmp_path / "junk.bin"
    junk.write_bytes(bytes(range(1, 200)))
    assert main(["analyze", str(junk)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 2 and "no 1x reading" in err[1]


def test_configure_then_start_is_one_stream(tmp_path: Path,
                                            capsys: pytest.CaptureFixture[str]) -> None:
    # the board answers configure and start each with a stream_config (protocol catalogue);
    # only the second one is followed by samples, so no "several streams" warning
    raw, _ = synthesize(SyntheticRun(speed_rpm=1800.0, duration_s=1.0, seed=2))
    idle = encode_frame("stream_config", 200, {"rate_hz": 4000, "channels": 2,
                                               "period_ticks": 250, "tach_edge": 1,
                                               "start_tick": 0, "adc_reference_mv": 5000})
    path = tmp_path / "two-configs.bin"
    path.write_bytes(idle + raw)
    assert main(["analyze", str(path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert not any("streams" in w for w in data["warnings"])
