"""The link in use (issue: reliability): unplug, board reset and protocol mismatch, end to end
through `trueturn record` and `trueturn analyze` on the simulated rig (sim://).

Every fault must be said at once on one line, exit 2, and leave a valid capture behind.
"""

from __future__ import annotations

import json
import re

import pytest

import trueturn.cli.cmd_record as rec
from cli_helpers import run_cli
from trueturn.dsp.analysis import analyze_capture
from trueturn.link.capture import read_capture
from trueturn.link.catalogue import load_catalogue
from trueturn.link.codec import LinkEvent, Message
from trueturn.link.ports import open_port
from trueturn.link.session import BoardSession, LinkLost
from trueturn.sim.board import VirtualBoard


def _schedule(monkeypatch: pytest.MonkeyPatch, at_s: float, action: str) -> None:
    """Make the next sim:// port opened by record pull its cable or reset its board at
    ``at_s`` seconds of simulated time."""
    real_open = rec.open_port

    def open_with_fault(url: str):
        port = real_open(url)
        real_read = port.read
        done = {"fired": False}

        def read(size: int = 1) -> bytes:
            if not done["fired"] and port.rig.time_s > at_s:
                done["fired"] = True
                getattr(port.rig, action)()
            return real_read(size)

        port.read = read
        return port

    monkeypatch.setattr(rec, "open_port", open_with_fault)


def test_unplug_mid_recording_says_so_keeps_a_valid_capture_and_a_new_recording_works(
        tmp_path, monkeypatch: pytest.MonkeyPatch) -> None:
    _schedule(monkeypatch, 2.0, "unplug")
    cut = tmp_path / "cut.cap"
    code, _, err = run_cli(["record", "--port", "sim://bench-grinder?realtime=0", "--seconds",
                            "20", "-o", str(cut), "--quiet"])
    assert code == 2 and err.count("\n") == 1 and "Traceback" not in err
    assert "lost the board" in err and "incomplete capture" in err and "of 20 s" in err
    metadata, raw = read_capture(cut)
    analysis = analyze_capture(raw, mains_hz=60.0)
    assert analysis.readings and analysis.link["frames_bad"] <= 1  # at most the cut frame
    # the run stays marked incomplete when it is analysed later
    code, text, err = run_cli(["analyze", str(cut)])
    assert code == 0, err
    # unplugged at 2 s: the samples up to the last whole block (14.75 ms) before it
    assert re.search(r"incomplete capture: (1\.9[89]|2\.00) of the 20 s asked for", text)
    # plugged back in: the next recording goes through, and is complete
    monkeypatch.undo()
    again = tmp_path / "again.cap"
    code, _, err = run_cli(["record", "--port", "sim://bench-grinder?realtime=0", "--seconds",
                            "1", "-o", str(again), "--quiet"])
    assert code == 0, err
    code, text, err = run_cli(["analyze", str(again)])
    assert code == 0 and "incomplete" not in text, err


def test_board_reset_mid_recording_is_detected_at_once(tmp_path,
                                                       monkeypatch: pytest.MonkeyPatch) -> None:
    _schedule(monkeypatch, 2.0, "reset")
    out = tmp_path / "reset.cap"
    code, _, err = run_cli(["record", "--port", "sim://shop-fan?realtime=0", "--seconds", "20",
                            "-o", str(out), "--quiet"])
    assert code == 2 and err.count("\n") == 1
    assert "board reset detected" in err and "incomplete capture" in err
    # at once: the reset is seen within a read or two, not after the 3 s stall timeout
    _, raw = read_capture(out)
    kept_s = float(err.split("incomplete capture (")[1].split(" of")[0])
    assert 1.5 < kept_s < 2.5
    # analyze says so too, and still reads the stream before the reset
    code, text, err = run_cli(["analyze", str(out), "--mains-hz", "60"])
    assert code == 0, err
    assert "board restarted during the capture" in text and "incomplete capture" in text
    assert analyze_capture(raw, mains_hz=60.0).link["board_resets"] == 1


def test_session_sees_a_reset_and_carries_on_after_it() -> None:
    port = open_port("sim://bench-grinder?realtime=0")
    try:
        session = BoardSession(port)
        session.identify()
        session.configure(2000, 2)
        session.start()
        for _ in range(5):
            session.read()
        port.rig.reset()
        events = []
        for _ in range(5):
            events += [i for i in session.read() if isinstance(i, LinkEvent)]
        assert [e.kind for e in events if e.kind == "board_reset"] == ["board_reset"]
        # reconnecting after a reset: identify and stream again, no further loss counted
        lost_before = session.decoder.counters.frames_lost
        session.identify()
        session.configure(2000, 2)
        session.start()
        blocks = sum(1 for _ in range(50) for m in session.read()
                     if isinstance(m, Message) and m.name == "samples")
        assert blocks > 0
        assert session.decoder.counters.frames_lost == lost_before
        assert session.decoder.counters.board_resets == 1
    finally:
        port.close()


def test_pulled_cable_is_one_line_link_lost() -> None:
    port = open_port("sim://shop-fan?realtime=0")
    try:
        session = BoardSession(port)
        session.identify()
        port.rig.unplug()
        with pytest.raises(LinkLost) as err:
            session.read()
        assert "\n" not in str(err.value) and "disconnected" in str(err.value)
        with pytest.raises(LinkLost):
            session.send("ping", {"token": 1})
    finally:
        port.close()


@pytest.mark.parametrize(("field", "value", "needles"), [
    ("definition_hash", 0xDEADBEEF, ("0xdeadbeef", f"{load_catalogue().definition_hash:#010x}")),
    ("protocol_version", 7, ("protocol 7", f"speaks {load_catalogue().protocol_version} (")),
])
def test_record_refuses_a_mismatched_board_naming_both(tmp_path, monkeypatch: pytest.MonkeyPatch,
                                                       field: str, value: int,
                                                       needles: tuple[str, str]) -> None:
    real_identity = VirtualBoard._identity_values

    def other_firmware(self: VirtualBoard) -> dict:
        return {**real_identity(self), field: value}

    monkeypatch.setattr(VirtualBoard, "_identity_values", other_firmware)
    out = tmp_path / "x.cap"
    code, _, err = run_cli(["record", "--port", "sim://bench-grinder?realtime=0", "--seconds",
                            "1", "-o", str(out), "--quiet"])
    assert code == 2 and err.count("\n") == 1
    for needle in needles:
        assert needle in err, err
    assert not out.exists()  # nothing recorded from a board we cannot read


def test_analyze_refuses_a_capture_from_other_definitions_naming_both(tmp_path) -> None:
    from trueturn.dsp.synthetic import SyntheticRun, synthesize
    from trueturn.link.capture import CaptureWriter
    from trueturn.link.codec import StreamDecoder, encode_frame

    ours = load_catalogue().definition_hash
    raw, _ = synthesize(SyntheticRun(speed_rpm=2700.0, duration_s=1.0, send_identity=False))
    header = tmp_path / "header.cap"
    with CaptureWriter(header, {"identity": {"protocol_version": 2,
                                             "definition_hash": 0x0BADF00D}}) as cap:
        cap.write(raw)
    # and one whose own identity message says so, in a plain frame file
    with_identity, _ = synthesize(SyntheticRun(speed_rpm=2700.0, duration_s=1.0))
    out = bytearray()
    for msg in StreamDecoder().feed(with_identity):
        values = dict(msg.values)
        if msg.name == "identity":
            values["protocol_version"] = load_catalogue().protocol_version - 1
        out += encode_frame(msg.name, msg.seq, values)
    plain = tmp_path / "old.frames"
    plain.write_bytes(bytes(out))
    for path, needles in ((header, ("0x0badf00d", f"{ours:#010x}")),
                          (plain, (f"protocol {load_catalogue().protocol_version - 1}", f"reads protocol {load_catalogue().protocol_version}"))):
        code, text, err = run_cli(["analyze", str(path)])
        assert code == 2 and text == "" and err.count("\n") == 1, err
        for needle in needles:
            assert needle in err, err
    good = tmp_path / "good.frames"
    good.write_bytes(with_identity)
    assert run_cli(["analyze", str(good)])[0] == 0


def _without_started_stream_config(raw: bytes) -> bytes:
    """The capture bytes with the stream_config sent after ``start`` (start_tick != 0)
    removed, every other frame byte for byte as received."""
    from trueturn.link.codec import decode_frame

    kept = []
    removed = 0
    for body in raw.split(b"\x00")[:-1]:
        try:
            msg = decode_frame(body)
        except ValueError:
            kept.append(body)
            continue
        if msg.name == "stream_config" and msg["start_tick"] != 0:
            removed += 1
            continue
        kept.append(body)
    assert removed == 1
    return b"".join(b + b"\x00" for b in kept)


def test_a_lost_stream_config_does_not_move_the_phase(tmp_path) -> None:
    # Issue 14, item 8: on protocol 1 losing this one frame made analyze use the
    # configure-time copy (start_tick 0) and give a confidently wrong phase (137.4 deg became
    # 31.3 deg). Every sample block now carries its stream's timebase (SPEC 4.4), so the
    # capture without it must give the same reading, and say what was missing.
    from trueturn.link.capture import CaptureWriter

    whole = tmp_path / "whole.cap"
    code, _, err = run_cli(["record", "--port", "sim://bench-grinder?realtime=0&tick0=9800",
                            "--seconds", "3", "-o", str(whole), "--quiet"])
    assert code == 0, err
    metadata, raw = read_capture(whole)
    cut = tmp_path / "cut.cap"
    with CaptureWriter(cut, {k: v for k, v in metadata.items()
                             if k not in ("format_version",)}) as cap:
        cap.write(_without_started_stream_config(raw))
    readings = {}
    for path in (whole, cut):
        code, text, err = run_cli(["analyze", "--json", str(path)])
        assert code == 0, err
        readings[path.name] = json.loads(text)
    for a, b in zip(readings["whole.cap"]["pickups"], readings["cut.cap"]["pickups"],
                    strict=True):
        assert abs(a["phase_deg"] - b["phase_deg"]) < 0.5
        assert b["amplitude"] == pytest.approx(a["amplitude"], rel=0.01)
    assert any("stream_config" in w for w in readings["cut.cap"]["warnings"])
    assert not any("stream_config" in w for w in readings["whole.cap"]["warnings"])
