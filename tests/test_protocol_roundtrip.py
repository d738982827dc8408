"""Codec round trip for every message type with arbitrary field values (hypothesis)."""

from __future__ import annotations

from hypothesis import given
from hypothesis import strategies as st

from trueturn.link.catalogue import load_catalogue
from trueturn.link.codec import decode_frame, encode_frame

CAT = load_catalogue()
LIMITS = {"u8": (0, 0xFF), "u16": (0, 0xFFFF), "u32": (0, 0xFFFFFFFF),
          "i16": (-0x8000, 0x7FFF), "i32": (-0x80000000, 0x7FFFFFFF)}


@st.composite
def messages(draw: st.DrawFn) -> tuple[str, int, dict]:
    mdef = draw(st.sampled_from(CAT.messages))
    values = {f.name: draw(st.integers(*LIMITS[f.type])) for f in mdef.fixed_fields}
    if mdef.name == "samples":
        channels = draw(st.integers(1, 2))
        sets = draw(st.integers(1, 118 // channels))
        values["channels"] = channels
        values["first_index"] = draw(st.integers(0, 0xFFFFFFFF // channels)) * channels
        values["samples"] = draw(st.lists(st.integers(0, 0xFFFF), min_size=sets * channels,
                                          max_size=sets * channels))
    return mdef.name, draw(st.integers(0, 255)), values


@given(messages())
def test_encode_decode_round_trip(case: tuple[str, int, dict]) -> None:
    name, seq, values = case
    wire = encode_frame(name, seq, values)
    assert wire[-1] == 0 and 0 not in wire[:-1]
    assert len(wire) <= CAT.max_frame_bytes + 2
    msg = decode_frame(wire[:-1])
    assert (msg.name, msg.seq, msg.values) == (name, seq, values)
