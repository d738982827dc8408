"""The decoded samples array the measurement reads without copying: a read-only sequence
equal to the list the codec always gave, and the stream decoder's bulk delimiter split."""

from __future__ import annotations

import json

import numpy as np
import pytest

from trueturn.link.codec import Message, RestArray, StreamDecoder, decode_frame, encode_frame

SAMPLES = [0, 1, 511, 512, 1023, 65535, 7, 0]


def _block() -> Message:
    wire = encode_frame("samples", 3, {"first_index": 40, "channels": 2, "start_tick": 400,
                                             "period_ticks": 250, "samples": SAMPLES})
    return decode_frame(wire[:-1])


def test_samples_behave_as_the_list_they_were() -> None:
    msg = _block()
    got = msg["samples"]
    assert isinstance(got, RestArray)
    assert got == SAMPLES and SAMPLES == got and got != SAMPLES[:-1]
    assert list(got) == SAMPLES and len(got) == 8
    assert got[2] == 511 and isinstance(got[2], int) and got[-2:] == [7, 0]
    assert repr(got) == repr(SAMPLES)
    # JSON of a message (trueturn dump) carries a plain list
    assert json.loads(json.dumps(msg.to_json()))["samples"] == SAMPLES
    with pytest.raises(TypeError):
        hash(got)


def test_numpy_view_without_copy_and_read_only() -> None:
    got = _block()["samples"]
    arr = np.asarray(got)
    assert arr.dtype == np.dtype("<u2") and arr.tolist() == SAMPLES
    assert np.shares_memory(arr, np.asarray(got))
    assert not arr.flags.writeable
    np.testing.assert_array_equal(np.asarray(got, dtype=float), np.array(SAMPLES, dtype=float))


def test_reencoding_a_decoded_block_gives_the_same_bytes() -> None:
    wire = encode_frame("samples", 3, {"first_index": 40, "channels": 2, "start_tick": 400,
                                             "period_ticks": 250, "samples": SAMPLES})
    msg = decode_frame(wire[:-1])
    assert encode_frame("samples", msg.seq, msg.values) == wire


@pytest.mark.parametrize("chunk", [1, 5, 64, 100_000])
def test_split_stream_in_any_chunks_gives_the_same_messages(chunk: int) -> None:
    wire = b"\x00\x00" + b"".join(
        encode_frame("samples", s, {"first_index": 8 * s, "channels": 2, "start_tick": 400,
                                    "period_ticks": 250, "samples": list(range(s, s + 8))}) for s in range(40))
    whole = StreamDecoder().feed(wire)
    dec = StreamDecoder()
    parts = []
    for i in range(0, len(wire), chunk):
        parts += dec.feed(wire[i:i + chunk])
    assert parts == whole
    assert [m["first_index"] for m in parts if isinstance(m, Message)] == [8 * s for s in range(40)]
    assert dec.counters.frames_ok == 40 and dec.counters.frames_bad == 0
