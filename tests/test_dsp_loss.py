"""Loss said where it happened (issue #14 item 10), end to end through `analyze`.

A capture of the simulated board (sim://, with its status frames) is cut at the frame level
the way a USB link loses data: frames that held no samples, a tach frame, exactly 256 frames
(the 8-bit sequence number comes round to the same value), and a capture that starts with a
requested identity. Each must be said as what it is, by code (trueturn.dsp.findings) and in
words. The rules come from protocol/SPEC.md section 5 (loss detection) and 4.8 (a reply
comes before the data it asks for).
"""

from __future__ import annotations

import pytest

from cli_helpers import run_cli
from trueturn.dsp.analysis import analyze_capture
from trueturn.link.capture import read_capture
from trueturn.link.catalogue import load_catalogue
from trueturn.link.codec import Message, StreamDecoder, encode_frame


@pytest.fixture(scope="module")
def capture(tmp_path_factory: pytest.TempPathFactory) -> tuple[dict, list[bytes], list]:
    path = tmp_path_factory.mktemp("loss") / "grinder.cap"
    code, _, err = run_cli(["record", "--port", "sim://bench-grinder?realtime=0&seed=5",
                            "--seconds", "8", "-o", str(path), "--quiet"])
    assert code == 0, err
    metadata, raw = read_capture(path)
    bodies = raw.split(b"\x00")[:-1]
    messages = StreamDecoder().feed(raw)
    assert all(isinstance(m, Message) for m in messages) and len(messages) == len(bodies)
    return metadata, bodies, messages


def _analyze(metadata: dict, bodies: list[bytes]):
    return analyze_capture(b"".join(b + b"\x00" for b in bodies), mains_hz=60,
                           identity=metadata["identity"])


def _codes(result) -> dict[str, object]:
    return {f.code.value: f for f in result.findings}


def test_the_whole_capture_has_no_loss(capture) -> None:
    metadata, bodies, _ = capture
    codes = _codes(_analyze(metadata, bodies))
    assert not [c for c in codes if c.startswith("link_") or c == "board_restart"]


def test_lost_frames_without_samples_are_not_sample_loss(capture) -> None:
    metadata, bodies, messages = capture
    status = [i for i, m in enumerate(messages) if m.name == "status"]
    drop = {status[2], status[4]}
    result = _analyze(metadata, [b for i, b in enumerate(bodies) if i not in drop])
    codes = _codes(result)
    lost = codes["link_frames_lost"]
    assert lost.count == 2 and lost.details["samples"] == 0 and lost.details["tach_edges"] == 0
    assert "link_samples_lost" not in codes and "link_tach_lost" not in codes
    assert any("2 frame(s) lost on the USB link" in w and "readings are unaffected" in w
               for w in result.warnings)
    assert not any("lost samples" in w for w in result.warnings)


def test_a_tach_edge_lost_on_the_link_is_link_loss_not_a_missed_mark(capture) -> None:
    metadata, bodies, messages = capture
    tach = [i for i, m in enumerate(messages) if m.name == "tach"]
    drop = {tach[100], tach[200], tach[201]}
    result = _analyze(metadata, [b for i, b in enumerate(bodies) if i not in drop])
    codes = _codes(result)
    # the board counted those edges (edge_count jumps, SPEC 4.5): the link lost them
    assert codes["link_tach_lost"].count == 3
    assert "tach_missed_edges" not in codes
    assert codes["link_frames_lost"].details["tach_edges"] == 3
    assert not any("tach edge(s) missed" in w for w in result.warnings)


def test_exactly_256_lost_frames_are_found_by_index_and_edge_count(capture) -> None:
    metadata, bodies, messages = capture
    start = 300
    cut = [b for i, b in enumerate(bodies) if not start <= i < start + 256]
    # the frame sequence number shows no gap: 256 frames later it has the same value
    assert messages[start + 256].seq == messages[start].seq
    result = _analyze(metadata, cut)
    assert result.link["frames_lost"] == 0 and result.link["seq_gaps"] == 0
    codes = _codes(result)
    unseen = codes["link_unseen_loss"]
    assert unseen.count == 256
    lost_tach = sum(1 for m in messages[start:start + 256] if m.name == "tach")
    lost_samples = sum(len(m["samples"]) for m in messages[start:start + 256]
                       if m.name == "samples")
    assert unseen.details["tach_edges"] == lost_tach
    assert unseen.details["samples"] == lost_samples
    assert codes["link_tach_lost"].count == lost_tach and "tach_missed_edges" not in codes
    assert any("at least 256 frames lost at once" in w for w in result.warnings)


def test_a_capture_that_starts_with_a_requested_identity_is_no_restart(capture) -> None:
    metadata, bodies, messages = capture
    cat = load_catalogue()
    start = 40  # a capture begun after the stream started, with the answer to identify
    seq = messages[start].seq
    identity = next(m for m in messages if m.name == "identity").values
    head = [encode_frame("reply", (seq - 2) & 0xFF, {
        "command_type": cat.by_name("identify").type_id, "command_seq": 7, "error": 0}),
        encode_frame("identity", (seq - 1) & 0xFF, identity)]
    raw = b"".join(head) + b"".join(b + b"\x00" for b in bodies[start:])
    result = analyze_capture(raw, mains_hz=60)
    assert "board_restart" not in _codes(result) and result.link["board_resets"] == 0
    assert result.readings
    # the same identity without the reply before it, mid-stream, is a restart (SPEC 5)
    unasked = b"".join(b + b"\x00" for b in bodies[start:start + 100]) + encode_frame(
        "identity", (messages[start + 100].seq) & 0xFF, identity) + \
        b"".join(b + b"\x00" for b in bodies[start + 101:])
    assert "board_restart" in _codes(analyze_capture(unasked, mains_hz=60))


def test_lost_frames_do_not_make_a_whole_capture_incomplete(capture, tmp_path) -> None:
    # `record` was asked for 8 s and got them; frames lost on the way are link loss, said
    # as such, not "incomplete capture" (that is for a stream that stopped early)
    import json

    from trueturn.link.capture import CaptureWriter

    metadata, bodies, _ = capture
    path = tmp_path / "lossy.cap"
    with CaptureWriter(path, {k: v for k, v in metadata.items() if k != "format_version"}) as w:
        w.write(b"".join(b + b"\x00" for i, b in enumerate(bodies) if not 300 <= i < 556))
    code, out, err = run_cli(["analyze", str(path), "--json"])
    assert code == 0, err
    data = json.loads(out)
    codes = {f["code"] for f in data["findings"]}
    assert "link_unseen_loss" in codes and "incomplete_capture" not in codes
    # the same capture cut short is incomplete, and says so
    short = tmp_path / "short.cap"
    with CaptureWriter(short, {k: v for k, v in metadata.items() if k != "format_version"}) as w:
        w.write(b"".join(b + b"\x00" for b in bodies[:len(bodies) // 2]))
    code, out, err = run_cli(["analyze", str(short), "--json"])
    assert code == 0, err
    assert "incomplete_capture" in {f["code"] for f in json.loads(out)["findings"]}
