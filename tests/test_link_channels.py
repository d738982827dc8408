"""One pickup, one channel (issue 14, item 5): a stream never carries an input with nothing on
it. An open ADC input next to a connected one reads a copy of its neighbour (the sample-and-hold
capacitor keeps the last conversion's charge; ATmega328P datasheet, "Analog Input Circuitry",
from memory), which would look like a second pickup seeing the same vibration."""

from __future__ import annotations

import pytest

from cli_helpers import run_cli
from firmware_helpers import make, require_tools
from trueturn.link.capture import read_capture
from trueturn.link.catalogue import load_catalogue
from trueturn.link.codec import Message, StreamDecoder


def _stream_channels(path) -> set[int]:
    _, raw = read_capture(path)
    return {m["channels"] for m in StreamDecoder().feed(raw)
            if isinstance(m, Message) and m.name in ("samples", "stream_config")}


def test_record_streams_the_pickups_the_emulated_machine_has(tmp_path) -> None:
    require_tools("avr-gcc", "gcc", "make")
    make("emu")
    one = tmp_path / "one.cap"
    code, _, err = run_cli(["record", "--port", "emu://bench-grinder?realtime=0&channels=1",
                            "--seconds", "0.5", "-o", str(one), "--quiet"])
    assert code == 0, err
    assert _stream_channels(one) == {1}
    meta, _ = read_capture(one)
    assert meta["requested"]["channels"] == 1


def test_record_takes_the_simulated_machines_pickups_and_an_explicit_count(tmp_path) -> None:
    both = tmp_path / "both.cap"
    assert run_cli(["record", "--port", "sim://bench-grinder?realtime=0", "--seconds", "0.3",
                    "-o", str(both), "--quiet"])[0] == 0
    assert _stream_channels(both) == {2}  # the scenario has two pickups
    one = tmp_path / "one.cap"
    assert run_cli(["record", "--port", "sim://bench-grinder?realtime=0", "--seconds", "0.3",
                    "--channels", "1", "-o", str(one), "--quiet"])[0] == 0
    assert _stream_channels(one) == {1}


@pytest.mark.parametrize("option, value", [("--channels", "3"), ("--channels", "0"),
                                           ("--rate-hz", "5001"), ("--rate-hz", "99")])
def test_record_limits_come_from_the_catalogue(tmp_path, option: str, value: str) -> None:
    limit = load_catalogue().limit(option.strip("-").replace("-", "_"))
    code, out, err = run_cli(["record", "--port", "sim://bench-grinder?realtime=0",
                              "--seconds", "0.3", option, value, "-o", str(tmp_path / "x.cap")])
    assert code == 2 and out == "" and err.count("\n") == 1
    assert f"{option} must be {limit.min}..{limit.max}, got {value}" in err


def test_the_app_session_configures_the_profiles_pickups_only() -> None:
    from trueturn.ui.session import LinkSession

    session = LinkSession("sim://bench-grinder?realtime=0", channels=1, rate_hz=2000,
                          sensor_names=("front",))
    try:
        session.open()
        session.start()
        for _ in range(20):
            session.pump()
        assert session.board is not None and session.board.stream_config is not None
        assert session.board.stream_config["channels"] == 1
        assert session.board.stream_config["period_ticks"] == (
            load_catalogue().limit("board_tick_hz").min // 2000)
    finally:
        session.close()
