"""First contact with a board (issue #23): reset on open, the bootloader's window, greeting.

Opening a Uno's or Nano's port resets it; its bootloader listens for a while before our
firmware starts, and bytes sent into that window are lost and make it wait longer
(trueturn.link.boards.BOOTLOADER_WAIT_S, from memory). The rigs model it
(``reset_on_open=1&bootloader=old|new``); the host must send nothing before the board has
started, work with boards that do not reset, and never call the power-up a restart.
"""

from __future__ import annotations

import pytest

import trueturn.cli.cmd_record as rec
from cli_helpers import run_cli
from firmware_helpers import make, require_tools
from trueturn.dsp.analysis import analyze_capture
from trueturn.link.capture import read_capture
from trueturn.link.codec import Message, StreamDecoder, encode_frame
from trueturn.link.ports import open_port
from trueturn.link.problems import ProblemCode
from trueturn.link.session import BoardProblem, BoardSession, Greeting, GreetPhase
from trueturn.sim.board import TICK_HZ

WAIT_S = {"new": 0.5, "old": 1.5}  # trueturn.link.boards.BOOTLOADER_WAIT_S (from memory)


def _first_identity_tick(port) -> tuple[Message, float]:  # type: ignore[no-untyped-def]
    """Read a realtime=0 sim port until the identity; its board time in seconds."""
    decoder = StreamDecoder()
    while True:
        for item in decoder.feed(port.read(max(1, port.in_waiting))):
            if isinstance(item, Message) and item.name == "identity":
                return item, port.rig.tick / TICK_HZ


@pytest.mark.parametrize("bootloader", ["new", "old"])
def test_sim_bootloader_holds_the_firmware_for_its_wait(bootloader: str) -> None:
    port = open_port(f"sim://bench-grinder?realtime=0&reset_on_open=1&bootloader={bootloader}")
    try:
        assert port.rig.in_bootloader
        ident, at_s = _first_identity_tick(port)
        assert ident.seq == 0 and not port.rig.in_bootloader
        # the firmware starts when the bootloader's wait ends, not before
        assert WAIT_S[bootloader] <= at_s <= WAIT_S[bootloader] + 0.06
    finally:
        port.close()


def test_bytes_into_the_bootloader_window_make_it_wait_longer() -> None:
    port = open_port("sim://bench-grinder?realtime=0&reset_on_open=1&bootloader=new")
    try:
        port.rig.advance_s(0.4)
        port.write(encode_frame("identify", 0))  # a host that talks too soon
        assert port.rig.bootloader_bytes > 0
        ident, at_s = _first_identity_tick(port)
        assert ident.seq == 0  # the identify was lost: no reply, only the power-up identity
        assert at_s >= 0.4 + WAIT_S["new"]  # the wait started again from that byte
    finally:
        port.close()


@pytest.mark.parametrize("bootloader", ["new", "old"])
def test_greet_sends_nothing_before_the_boot_identity(bootloader: str) -> None:
    port = open_port(f"sim://bench-grinder?realtime=0&reset_on_open=1&bootloader={bootloader}")
    phases: list[GreetPhase] = []
    try:
        session = BoardSession(port)
        identity = session.greet(on_phase=phases.append)
        assert session.greeting is Greeting.POWER_UP
        assert phases == [GreetPhase.WAITING_FOR_START]  # never asked: the board introduced itself
        assert port.rig.bootloader_bytes == 0
        assert identity["protocol_version"] == session.catalogue.protocol_version
        session.configure(4000, 2)
        session.start()
        session.stop()
        assert session.decoder.counters.board_resets == 0
    finally:
        port.close()


def test_a_board_that_does_not_reset_is_asked_and_no_restart_is_seen() -> None:
    port = open_port("sim://bench-grinder?realtime=0&reset_on_open=0")
    phases: list[GreetPhase] = []
    try:
        session = BoardSession(port)
        identity = session.greet(on_phase=phases.append)
        assert session.greeting is Greeting.RUNNING
        assert phases == [GreetPhase.WAITING_FOR_START, GreetPhase.ASKING]
        assert identity["board_id"] == 2
        session.configure(4000, 2)
        session.start()
        session.stop()
        assert session.decoder.counters.board_resets == 0
    finally:
        port.close()


def test_a_stream_left_running_is_stopped_before_the_new_conversation() -> None:
    port = open_port("sim://bench-grinder?realtime=0&reset_on_open=0")
    try:
        first = BoardSession(port)
        first.greet()
        first.configure(4000, 2)
        first.start()  # the first host goes away with the board streaming
        second = BoardSession(port)  # a new host on a board that does not reset
        second.greet()
        assert second.greeting is Greeting.RUNNING
        second.configure(2000, 1)  # would be refused (busy) while it streamed
        assert second.start()["channels"] == 1
        second.stop()
    finally:
        port.close()


class _FakePort:
    """A port with something else behind it: silence, or another sketch's text."""

    def __init__(self, talk: bytes = b"") -> None:
        self.port = "/dev/ttyFAKE0"
        self.talk = talk
        self.written = b""
        self.timeout = 0.01

    @property
    def in_waiting(self) -> int:
        return len(self.talk)

    def read(self, size: int = 1) -> bytes:
        return self.talk[:size] if self.talk else b""

    def write(self, data: bytes) -> int:
        self.written += data
        return len(data)


def test_a_silent_board_is_one_line_suggesting_flash() -> None:
    session = BoardSession(_FakePort())
    with pytest.raises(BoardProblem) as err:
        session.greet(quiet_s=0.05, answer_s=0.05)
    assert err.value.problem.code is ProblemCode.SILENT_BOARD
    text = str(err.value)
    assert "\n" not in text and "trueturn flash --port /dev/ttyFAKE0" in text


def test_another_sketch_is_named_as_not_trueturn() -> None:
    session = BoardSession(_FakePort(b"temperature: 21.5 C\r\n" * 10))
    with pytest.raises(BoardProblem) as err:
        session.greet(quiet_s=5.0, answer_s=5.0)
    assert err.value.problem.code is ProblemCode.NOT_TRUETURN
    assert "not trueturn frames" in str(err.value) and "trueturn flash" in str(err.value)
    assert err.value.problem.bytes_heard >= 2048  # refused on the bytes, before any wait


def _record_and_analyze(url: str, tmp_path, monkeypatch):  # type: ignore[no-untyped-def]
    opened = []
    real_open = rec.open_port

    def spy(u: str):  # type: ignore[no-untyped-def]
        port = real_open(u)
        opened.append(port)
        written = []
        real_write = port.write

        def write(data: bytes) -> int:
            # what the host sent while the board had not introduced itself yet
            written.append((port.in_bootloader, bytes(data)))
            return real_write(data)

        port.write = write
        port.written_log = written
        return port

    monkeypatch.setattr(rec, "open_port", spy)
    out = tmp_path / "x.cap"
    code, _, err = run_cli(["record", "--port", url, "--seconds", "5", "-o", str(out), "--quiet"])
    assert code == 0, err
    metadata, raw = read_capture(out)
    first = StreamDecoder().feed(raw)[0]
    assert isinstance(first, Message) and first.name == "identity" and first.seq == 0
    analysis = analyze_capture(raw, mains_hz=60.0)
    assert analysis.link["board_resets"] == 0
    code, text, err = run_cli(["analyze", str(out)])
    assert code == 0, err
    assert "restart" not in text + err
    return opened[0]


def test_record_on_a_resetting_sim_board_sends_nothing_before_the_boot_identity(
        tmp_path, monkeypatch) -> None:  # type: ignore[no-untyped-def]
    port = _record_and_analyze(
        "sim://bench-grinder?realtime=0&reset_on_open=1&bootloader=old", tmp_path, monkeypatch)
    assert port.rig.bootloader_bytes == 0
    assert port.written_log and not any(in_boot for in_boot, _ in port.written_log)


def test_record_on_a_resetting_emu_board_sends_nothing_before_the_boot_identity(
        tmp_path, monkeypatch) -> None:  # type: ignore[no-untyped-def]
    require_tools("avr-gcc", "gcc", "make")
    make("emu")
    port = _record_and_analyze(
        "emu://bench-grinder?realtime=0&reset_on_open=1&bootloader=old", tmp_path, monkeypatch)
    assert port.bootloader_bytes == 0
    assert port.written_log and not any(in_boot for in_boot, _ in port.written_log)


def test_emu_bootloader_swallows_bytes_and_the_firmware_then_starts() -> None:
    require_tools("avr-gcc", "gcc", "make")
    make("emu")
    port = open_port("emu://bench-grinder?realtime=0&reset_on_open=1&bootloader=new",
                     timeout_s=0.05)
    try:
        assert port.in_bootloader
        port.write(encode_frame("identify", 0))
        assert port.bootloader_bytes > 0
        decoder = StreamDecoder()
        seen: list[Message] = []
        while not seen:
            seen = [m for m in decoder.feed(port.read(4096))
                    if isinstance(m, Message) and m.name in ("identity", "reply")]
        # the identify went to the bootloader: the first word is the power-up identity
        assert seen[0].name == "identity" and seen[0].seq == 0
    finally:
        port.close()


def test_record_on_an_emu_board_that_does_not_reset(tmp_path, monkeypatch) -> None:  # type: ignore[no-untyped-def]
    require_tools("avr-gcc", "gcc", "make")
    make("emu")
    opened = []
    real_open = rec.open_port
    monkeypatch.setattr(rec, "open_port", lambda u: opened.append(real_open(u)) or opened[-1])
    out = tmp_path / "y.cap"
    code, _, err = run_cli(["record", "--port", "emu://bench-grinder?realtime=0&reset_on_open=0",
                            "--seconds", "2", "-o", str(out), "--quiet"])
    assert code == 0, err
    _, raw = read_capture(out)
    first = StreamDecoder().feed(raw)[0]
    assert isinstance(first, Message) and first.name == "identity" and first.seq != 0
    assert analyze_capture(raw, mains_hz=60.0).link["board_resets"] == 0


def test_the_app_connects_to_a_resetting_rig_and_says_it_waits(tmp_path) -> None:  # type: ignore[no-untyped-def]
    import asyncio
    import threading

    from test_ui_app import SIZE, quick_scenario, screen_text, wait_for
    from trueturn.ui.app import AppConfig, TrueturnApp
    from trueturn.ui.launch import scenario_profile

    source = quick_scenario("bench-grinder", tmp_path)
    app = TrueturnApp(AppConfig(f"sim://{source}?realtime=0&reset_on_open=1&bootloader=old",
                                scenario_profile(source), demo=True, workspace=tmp_path / "ws"))
    phases: list[GreetPhase] = []
    real_open = app.session.open
    go_on = threading.Event()

    def open_and_watch(timeout_s: float = 3.0, on_phase=None):  # type: ignore[no-untyped-def]
        def heard(phase: GreetPhase) -> None:
            phases.append(phase)
            on_phase(phase)
            go_on.wait(30)  # hold the wait on screen until the test has seen it
        return real_open(timeout_s, heard)

    app.session.open = open_and_watch  # type: ignore[method-assign]

    async def scenario() -> None:
        async with app.run_test(size=SIZE) as pilot:
            await wait_for(pilot, lambda: "waiting for the board to start…" in screen_text(app),
                           20)
            go_on.set()
            await wait_for(pilot, lambda: "Press Enter to start" in screen_text(app), 20)
            assert phases == [GreetPhase.WAITING_FOR_START]  # the board introduced itself
            assert app.session.port.rig.bootloader_bytes == 0
            assert app.session.board.decoder.counters.board_resets == 0
            assert app.session.restarts == 0

    asyncio.run(scenario())
