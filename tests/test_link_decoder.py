"""Stream decoder: resynchronisation, loss accounting, reset detection, never raising."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from trueturn.link.capture import CaptureWriter, read_capture
from trueturn.link.codec import LinkEvent, Message, StreamDecoder, encode_frame


def _samples(seq: int, first: int, n: int = 8) -> bytes:
    return encode_frame("samples", seq, {"first_index": first, "channels": 2,
                                         "start_tick": 400, "period_ticks": 250,
                                         "samples": list(range(n))})


def _messages(items: list) -> list[Message]:
    return [i for i in items if isinstance(i, Message)]


def _events(items: list, kind: str) -> list[LinkEvent]:
    return [i for i in items if isinstance(i, LinkEvent) and i.kind == kind]


def test_clean_stream_in_arbitrary_chunks_decodes_without_loss() -> None:
    wire = b"".join(_samples(s, s * 8) for s in range(300))  # seq wraps past 255
    dec = StreamDecoder()
    got = []
    for i in range(0, len(wire), 7):
        got += dec.feed(wire[i:i + 7])
    assert len(_messages(got)) == 300
    c = dec.counters
    assert (c.frames_ok, c.frames_bad, c.seq_gaps, c.sample_gaps) == (300, 0, 0, 0)


def test_lost_frame_counted_as_sequence_and_sample_gap() -> None:
    wire = _samples(0, 0) + _samples(2, 16) + _samples(3, 24)
    dec = StreamDecoder()
    items = dec.feed(wire)
    assert [e.count for e in _events(items, "seq_gap")] == [1]
    assert [e.count for e in _events(items, "sample_gap")] == [8]
    assert (dec.counters.frames_lost, dec.counters.samples_lost) == (1, 8)


def test_garbage_between_frames_resynchronises_at_next_delimiter() -> None:
    wire = _samples(0, 0) + b"\x13\x37\xff\xfe" + b"\x00" + _samples(1, 8)
    dec = StreamDecoder()
    items = dec.feed(wire)
    assert len(_messages(items)) == 2
    assert dec.counters.frames_bad == 1
    assert dec.counters.seq_gaps == 0


def test_corrupted_frame_counted_and_next_frame_decodes() -> None:
    bad = bytearray(_samples(1, 8))
    bad[5] ^= 0x40
    dec = StreamDecoder()
    items = dec.feed(_samples(0, 0) + bytes(bad) + _samples(2, 16))
    assert len(_messages(items)) == 2
    assert dec.counters.frames_bad == 1
    assert dec.counters.frames_lost == 1 and dec.counters.samples_lost == 8


def test_overlong_run_without_delimiter_is_dropped_and_recovered() -> None:
    dec = StreamDecoder()
    items = dec.feed(b"\x01" * 1000 + b"\x00" + _samples(0, 0))
    assert dec.counters.errors["too_long"] == 1
    assert len(_messages(items)) == 1


def test_duplicated_frame_is_dropped_not_counted_as_gap() -> None:
    frame = _samples(5, 40)
    dec = StreamDecoder()
    items = dec.feed(frame + frame + _samples(6, 48))
    assert len(_messages(items)) == 2
    assert dec.counters.duplicates == 1
    assert dec.counters.seq_gaps == 0 and dec.counters.sample_gaps == 0


def test_board_reset_detected_from_uptime_going_back() -> None:
    def status(seq: int, uptime_ms: int) -> bytes:
        return encode_frame("status", seq, dict(uptime_ms=uptime_ms, state=1, samples_dropped=0,
                                                frames_dropped=0, adc_overruns=0, tach_edges=0,
                                                rx_bad_frames=0, tach_suppressed=0, capture_overwrites=0,
                                                error_flags=0))
    dec = StreamDecoder()
    items = dec.feed(status(10, 50_000) + status(11, 51_000) + status(3, 900))
    assert len(_events(items, "board_reset")) == 1
    assert dec.counters.board_resets == 1
    assert dec.counters.seq_gaps == 0  # the sequence restarts with the board


def test_unsolicited_identity_is_a_reset_but_a_requested_one_is_not() -> None:
    ident = dict(protocol_version=1, definition_hash=0, firmware_major=1, firmware_minor=0,
                 firmware_patch=0, board_id=1, tick_hz=2_000_000, adc_bits=10,
                 adc_reference_mv=5000, aperture_delay_ticks=16, max_channels=2,
                 channel0_pin=0, channel1_pin=1, tach_pin=8,
                 adc_reference_kind=1, reset_flags=1)
    dec = StreamDecoder()
    dec.feed(_samples(0, 0))
    dec.expect_identity()
    dec.feed(encode_frame("identity", 1, ident))
    assert dec.counters.board_resets == 0
    dec.feed(encode_frame("identity", 0, ident))
    assert dec.counters.board_resets == 1


def test_tach_edge_count_gap_counted() -> None:
    dec = StreamDecoder()
    dec.feed(encode_frame("tach", 0, {"tick": 100, "edge_count": 65534})
             + encode_frame("tach", 1, {"tick": 200, "edge_count": 1}))  # 65535 and 0 missing
    assert dec.counters.tach_edges_lost == 2


@settings(max_examples=300, deadline=None)
@given(st.lists(st.binary(max_size=80), max_size=20))
def test_random_bytes_never_raise(chunks: list[bytes]) -> None:
    dec = StreamDecoder()
    for chunk in chunks:
        for item in dec.feed(chunk):
            assert isinstance(item, (Message, LinkEvent))


@settings(max_examples=200, deadline=None)
@given(st.binary(max_size=60), st.integers(0, 255))
def test_decoder_recovers_after_any_garbage(garbage: bytes, seq: int) -> None:
    dec = StreamDecoder()
    frame = _samples(seq, 0)
    items = dec.feed(garbage + b"\x00" + frame)
    assert _messages(items)[-1].values["first_index"] == 0


def test_capture_round_trip(tmp_path) -> None:
    path = tmp_path / "run.cap"
    wire = b"".join(_samples(s, s * 8) for s in range(5))
    with CaptureWriter(path, {"port": "sim://bench-grinder"}) as cap:
        cap.write(wire[:10])
        cap.write(wire[10:])
    meta, raw = read_capture(path)
    assert meta["port"] == "sim://bench-grinder" and meta["format_version"] == 1
    assert raw == wire


def test_power_up_identity_then_requested_identity_is_not_a_reset() -> None:
    # Opening a real Nano's port resets it: identity (seq 0) arrives before our identify's answer.
    ident = dict(protocol_version=1, definition_hash=0, firmware_major=1, firmware_minor=0,
                 firmware_patch=0, board_id=1, tick_hz=2_000_000, adc_bits=10,
                 adc_reference_mv=5000, aperture_delay_ticks=16, max_channels=2,
                 channel0_pin=0, channel1_pin=1, tach_pin=8,
                 adc_reference_kind=1, reset_flags=1)
    dec = StreamDecoder()
    dec.expect_identity()
    dec.feed(encode_frame("identity", 0, ident))
    dec.feed(encode_frame("reply", 1, {"command_type": 0x81, "command_seq": 0, "error": 0})
             + encode_frame("identity", 2, ident))
    assert dec.counters.board_resets == 0
    dec.feed(encode_frame("identity", 0, ident))  # now unasked: the board restarted
    assert dec.counters.board_resets == 1


IDENTITY = {"protocol_version": 2, "definition_hash": 0, "firmware_major": 1,
            "firmware_minor": 0, "firmware_patch": 0, "board_id": 1, "tick_hz": 2_000_000,
            "adc_bits": 10, "adc_reference_mv": 5000, "aperture_delay_ticks": 16,
            "max_channels": 2, "channel0_pin": 0, "channel1_pin": 1, "tach_pin": 8,
            "adc_reference_kind": 1, "reset_flags": 1}
CONFIG = {"rate_hz": 4000, "channels": 2, "period_ticks": 250, "tach_edge": 1,
          "start_tick": 400, "adc_reference_mv": 4950}


def _rejected(frames: list[bytes]) -> tuple[list[Message], list[LinkEvent]]:
    items = StreamDecoder().feed(b"".join(frames))
    return _messages(items), [i for i in items if isinstance(i, LinkEvent)]


@pytest.mark.parametrize(("field", "value"), [
    # issue 14, item 9: values no board of ours sends (SPEC 4.9); each refused by name
    ("adc_bits", 0), ("adc_bits", 255), ("tick_hz", 0), ("tick_hz", 1),
    ("tick_hz", 0xFFFFFFFF), ("adc_reference_mv", 0), ("max_channels", 0)])
def test_identity_out_of_range_is_refused_naming_the_field(field: str, value: int) -> None:
    msgs, events = _rejected([encode_frame("identity", 0, {**IDENTITY, field: value})])
    assert msgs == [] and [e.kind for e in events] == ["bad_value"]
    assert f"identity {field} {value}" in events[0].detail


@pytest.mark.parametrize(("field", "value"), [
    ("rate_hz", 0), ("period_ticks", 0), ("channels", 0), ("channels", 9), ("tach_edge", 2),
    ("period_ticks", 251)])  # 251 x 4000 x 2 is not tick_hz (SPEC 4.3)
def test_stream_config_out_of_range_is_refused(field: str, value: int) -> None:
    msgs, events = _rejected([encode_frame("identity", 0, IDENTITY),
                              encode_frame("stream_config", 1, {**CONFIG, field: value})])
    assert [m.name for m in msgs] == ["identity"]
    assert [e.kind for e in events] == ["bad_value"] and field in events[0].detail


def test_sample_above_the_adc_range_and_wrong_channels_are_refused() -> None:
    def block(seq: int, first: int, channels: int, values: list[int]) -> bytes:
        return encode_frame("samples", seq, {"first_index": first, "channels": channels,
                                             "start_tick": 400, "period_ticks": 250,
                                             "samples": values})
    msgs, events = _rejected([
        encode_frame("identity", 0, IDENTITY), encode_frame("stream_config", 1, CONFIG),
        block(2, 0, 2, [1, 2, 3, 1023]),
        block(3, 4, 2, [1, 2, 1024, 4]),   # 1024 > 2^10 - 1: a corrupt value
        block(4, 8, 1, [1, 2, 3, 4]),      # one channel in a two-channel stream: bad_length
        block(5, 12, 2, [5, 6, 7, 8])])
    assert [m["first_index"] for m in msgs if m.name == "samples"] == [0, 12]
    kinds = [(e.kind, e.detail) for e in events if e.kind in ("bad_value", "bad_length")]
    assert kinds[0][0] == "bad_value" and "samples value 1024 above 1023" in kinds[0][1]
    assert kinds[1][0] == "bad_length" and "1 channels in a stream of 2" in kinds[1][1]


def test_host_commands_from_the_board_are_refused() -> None:
    msgs, events = _rejected([encode_frame("start", 0), encode_frame("configure", 1, {
        "rate_hz": 4000, "channels": 2, "tach_edge": 1})])
    assert msgs == [] and [e.kind for e in events] == ["wrong_direction"] * 2
    # a frame file may hold both directions (golden vectors): then they decode
    both = StreamDecoder(from_board=False).feed(encode_frame("start", 0))
    assert [m.name for m in _messages(both)] == ["start"]


def test_samples_of_a_stream_whose_config_was_lost_are_placed_by_their_own_fields() -> None:
    # issue 14, item 8: the configure-time stream_config (start_tick 0) is the last one seen
    items = StreamDecoder().feed(b"".join([
        encode_frame("stream_config", 0, {**CONFIG, "start_tick": 0}),
        encode_frame("samples", 2, {"first_index": 0, "channels": 2, "start_tick": 98_765,
                                    "period_ticks": 250, "samples": [1, 2]}),
        encode_frame("samples", 3, {"first_index": 2, "channels": 2, "start_tick": 98_765,
                                    "period_ticks": 250, "samples": [3, 4]})]))
    missing = [i for i in items if isinstance(i, LinkEvent)
               and i.kind == "stream_config_missing"]
    assert len(missing) == 1 and "98765" in missing[0].detail
    assert len([m for m in _messages(items) if m.name == "samples"]) == 2
