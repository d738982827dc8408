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


@pytest.mark.parametrize("bootloader, flags", [("old", ["external"]),
                                               ("new", ["external", "from_bootloader"])])
@pytest.mark.parametrize("scheme", ["sim", "emu"])
def test_a_port_that_resets_the_board_says_why_it_started(scheme: str, bootloader: str,
                                                          flags: list[str]) -> None:
    # Opening a Uno/Nano port pulls the reset pin (EXTRF); the old Nano bootloader leaves
    # MCUSR to the firmware, optiboot clears it and passes it in r2 (from memory): either way
    # the identity's reset_flags say external (firmware/README.md, "Watchdog and bootloaders").
    from trueturn.link.ports import open_port

    if scheme == "emu":
        require_tools("avr-gcc", "gcc", "make")
        make("emu")
    bits = {name: 1 << bit for bit, name in load_catalogue().reset_flags.items()}
    port = open_port(f"{scheme}://bench-grinder?realtime=1&reset_on_open=1&bootloader={bootloader}",
                     timeout_s=0.05)
    try:
        decoder = StreamDecoder()
        identity = None
        for _ in range(800):
            for m in decoder.feed(port.read(4096)):
                if isinstance(m, Message) and m.name == "identity":
                    identity = m
            if identity is not None:
                break
        assert identity is not None
        assert identity["reset_flags"] == sum(bits[f] for f in flags)
    finally:
        port.close()


def test_a_simulated_board_restart_reports_a_brown_out() -> None:
    from trueturn.link.ports import open_port

    port = open_port("sim://bench-grinder?realtime=0", timeout_s=0.05)
    try:
        port.rig.reset()
        items = StreamDecoder().feed(port.read(20000))
        idents = [m for m in items if isinstance(m, Message) and m.name == "identity"]
        brown_out = next(b for b, n in load_catalogue().reset_flags.items() if n == "brown_out")
        assert idents[-1]["reset_flags"] == 1 << brown_out
    finally:
        port.close()
