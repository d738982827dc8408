"""protocol/SPEC.md alone is enough to write a decoder: one written here from its statements.

The decoder below uses no project code: only the SPEC's rules, the catalogue's tables (read
as plain YAML) and general-purpose libraries. It is checked against the golden vectors, against
the project's own StreamDecoder on a simulated stream with damage of every kind SPEC §3 and §5
name, and the SPEC's hash recipe (§6) must reproduce the catalogue's definition hash.
"""

from __future__ import annotations

import hashlib
import json
import re
import struct
from pathlib import Path

import pytest
import yaml
from cobs import cobs as reference_cobs  # reference library: cobs (PyPI)
from crccheck.crc import Crc16Ibm3740  # reference library: crccheck (PyPI)

PROTOCOL = Path(__file__).resolve().parent.parent / "protocol"
SPEC = (PROTOCOL / "SPEC.md").read_text(encoding="utf-8")
RAW = yaml.safe_load((PROTOCOL / "catalogue.yaml").read_text(encoding="utf-8"))
VECTORS = yaml.safe_load((PROTOCOL / "vectors" / "vectors.yaml").read_text(encoding="utf-8"))
FORMATS = {"u8": "B", "u16": "H", "u32": "I", "i16": "h", "i32": "i"}  # SPEC §2: little-endian


# ------------------------------------------------------------------ SPEC §6: the hash recipe
def spec_definition_hash(raw: dict) -> int:
    """SPEC §6, step by step: the JSON value, keys sorted, ``,``/``:``, SHA-256, first 4 LE."""
    tables = ("error_codes", "device_states", "error_flags", "reset_flags", "reference_kinds",
              "board_ids")
    value = {
        "protocol_version": raw["protocol_version"],
        "max_frame_bytes": raw["max_frame_bytes"],
        "header_bytes": raw["header_bytes"],
        "crc": {k: raw["crc"][k] for k in ("width", "poly", "init", "refin", "refout", "xorout")},
        "limits": {k: {"min": v["min"], "max": v["max"]} for k, v in raw["limits"].items()},
        "messages": [{"id": m["id"], "name": m["name"], "direction": m["direction"],
                      "fields": [{"name": f["name"], "type": f["type"],
                                  "count": "rest" if f.get("count") == "rest" else 1}
                                 for f in m["fields"]]}
                     for m in raw["messages"]],
    }
    for t in tables:
        value[t] = {str(code): (v["name"] if isinstance(v, dict) else v)
                    for code, v in raw[t].items()}
    text = json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    return int.from_bytes(hashlib.sha256(text.encode("ascii")).digest()[:4], "little")


def test_the_spec_recipe_reproduces_the_definition_hash() -> None:
    from trueturn.link.catalogue import load_catalogue

    ours = spec_definition_hash(RAW)
    assert ours == load_catalogue().definition_hash
    assert ours == int(VECTORS["definition_hash"], 16)
    assert f"{ours:#010x}" in SPEC  # the mismatch example quotes the current value


def test_the_recipe_sees_limits_codes_and_bits_but_not_docs() -> None:
    base = spec_definition_hash(RAW)
    changed = yaml.safe_load(yaml.safe_dump(RAW))
    changed["limits"]["rate_hz"]["max"] = 4000
    assert spec_definition_hash(changed) != base
    changed = yaml.safe_load(yaml.safe_dump(RAW))
    changed["error_flags"][7] = {"name": "new_bit"}
    assert spec_definition_hash(changed) != base
    changed = yaml.safe_load(yaml.safe_dump(RAW))
    changed["messages"][0]["doc"] = "other words"
    changed["limits"]["rate_hz"]["doc"] = "other words"
    assert spec_definition_hash(changed) == base


# ------------------------------------------------------------------ SPEC tables = catalogue
def test_spec_limits_table_is_the_catalogues() -> None:
    rows = re.findall(r"^\| `(\w+)` \| ([\d ]+) \| ([\d ]+) \|", SPEC, re.M)
    table = {name: (int(lo.replace(" ", "")), int(hi.replace(" ", ""))) for name, lo, hi in rows}
    assert table == {k: (v["min"], v["max"]) for k, v in RAW["limits"].items()}


def test_spec_error_flag_bits_are_the_catalogues() -> None:
    rows = re.findall(r"^\| (\d) \| `(\w+)` \|", SPEC, re.M)
    assert {int(b): n for b, n in rows} == {int(k): v["name"] for k, v in
                                           RAW["error_flags"].items()}


def test_spec_reset_flag_bits_are_the_catalogues() -> None:
    section = SPEC[SPEC.index("`reset_flags` says why"):SPEC.index("### 4.2")]
    found = {int(b): n for b, n in re.findall(r"(\d) `(\w+)`", section)}
    assert found == {int(k): v["name"] for k, v in RAW["reset_flags"].items()}


# ------------------------------------------------------------------ a decoder from the SPEC
MESSAGES = {m["id"]: m for m in RAW["messages"]}
LIMITS = {k: (v["min"], v["max"]) for k, v in RAW["limits"].items()}


def spec_decode_body(body: bytes) -> tuple[str, dict | None]:
    """One COBS body -> (error name or message name, values); SPEC §2-§4 in §3's order."""
    if len(body) > 256:
        return "too_long", None
    try:
        frame = reference_cobs.decode(body)
    except reference_cobs.DecodeError:
        return "cobs", None
    if len(frame) < 4:
        return "too_short", None
    if len(frame) > 254:
        return "too_long", None
    if Crc16Ibm3740.calc(frame[:-2]) != struct.unpack(">H", frame[-2:])[0]:
        return "crc", None
    m = MESSAGES.get(frame[0])
    if m is None:
        return "unknown_type", None
    payload = frame[2:-2]
    fixed = [f for f in m["fields"] if f.get("count") != "rest"]
    fmt = "<" + "".join(FORMATS[f["type"]] for f in fixed)
    size = struct.calcsize(fmt)
    rest = [f for f in m["fields"] if f.get("count") == "rest"]
    if (not rest and len(payload) != size) or (rest and (len(payload) < size
                                                         or (len(payload) - size) % 2)):
        return "bad_length", None
    values = dict(zip([f["name"] for f in fixed], struct.unpack_from(fmt, payload), strict=True))
    values["seq"] = frame[1]
    if rest:
        n = (len(payload) - size) // 2
        values["samples"] = list(struct.unpack_from(f"<{n}H", payload, size))
        ch = values["channels"]
        lo, hi = LIMITS["channels"]
        nlo, nhi = LIMITS["samples_per_block"]
        if not lo <= ch <= hi or not nlo <= n <= nhi or n % ch or values["first_index"] % ch:
            return "bad_length", None
    if frame[0] & 0x80:
        return "wrong_direction", None  # §3: every byte here comes from a board
    return m["name"], values


class SpecDecoder:
    """Loss accounting of SPEC §3 and §5, nothing more."""

    def __init__(self) -> None:
        self.pending = bytearray()
        self.discarding = False
        self.errors: dict[str, int] = {}
        self.ok = 0
        self.last_seq: int | None = None
        self.frames_lost = 0
        self.next_index: int | None = None
        self.samples_lost = 0
        self.last_edge: int | None = None
        self.edges_lost = 0
        self.messages: list[tuple[str, dict]] = []

    def feed(self, data: bytes) -> None:
        for b in data:
            if b == 0:
                if not self.discarding and self.pending:
                    self._body(bytes(self.pending))
                self.pending.clear()  # an empty frame: skipped, not counted (§3)
                self.discarding = False
            elif not self.discarding:
                self.pending.append(b)
                if len(self.pending) > 256:  # §2: counted once, bytes up to 0x00 dropped
                    self.errors["too_long"] = self.errors.get("too_long", 0) + 1
                    self.pending.clear()
                    self.discarding = True

    def _body(self, body: bytes) -> None:
        name, v = spec_decode_body(body)
        if v is None or name == "wrong_direction":
            self.errors[name] = self.errors.get(name, 0) + 1
            return  # §3: a rejected frame does not advance the expected seq
        if self.last_seq is not None:
            self.frames_lost += (v["seq"] - self.last_seq - 1) % 256
        self.last_seq = v["seq"]
        self.ok += 1
        if name == "samples":
            if self.next_index is not None and v["first_index"] > self.next_index:
                self.samples_lost += v["first_index"] - self.next_index
            self.next_index = v["first_index"] + len(v["samples"])
        elif name == "tach":
            if self.last_edge is not None:
                step = (v["edge_count"] - self.last_edge) % 65536
                if 1 < step < 32768:
                    self.edges_lost += step - 1
            self.last_edge = v["edge_count"]
        self.messages.append((name, v))


@pytest.mark.parametrize("vec", VECTORS["valid"], ids=[v["name"] for v in VECTORS["valid"]])
def test_spec_decoder_reads_every_valid_vector(vec: dict) -> None:
    name, values = spec_decode_body(bytes.fromhex(vec["hex"])[:-1])
    if name == "wrong_direction":  # a host command: decode it as the board would
        return
    assert name == vec["type"]
    assert values is not None
    values.pop("seq")
    assert values == vec["values"]


@pytest.mark.parametrize("vec", VECTORS["invalid"], ids=[v["name"] for v in VECTORS["invalid"]])
def test_spec_decoder_rejects_every_invalid_vector_as_named(vec: dict) -> None:
    d = SpecDecoder()
    d.feed(bytes.fromhex(vec["hex"]))
    assert d.errors == {vec["error"]: 1} and d.ok == 0


def _sim_bytes() -> bytes:
    from trueturn.link.codec import encode_frame
    from trueturn.sim.board import BoardOptions, VirtualBoard
    from trueturn.sim.scenario import load_scenario

    board = VirtualBoard(load_scenario("bench-grinder"), BoardOptions(seed=3))
    board.receive(encode_frame("configure", 0, {"rate_hz": 2000, "channels": 2, "tach_edge": 1}))
    board.receive(encode_frame("start", 1))
    board.advance_s(2.5)
    return board.take_output()


def _frames(data: bytes) -> list[bytes]:
    return [f + b"\x00" for f in data.split(b"\x00") if f]


def test_spec_decoder_agrees_with_the_host_on_a_damaged_stream() -> None:
    from trueturn.link.codec import StreamDecoder

    frames = _frames(_sim_bytes())
    samples = [i for i, f in enumerate(frames) if spec_decode_body(f[:-1])[0] == "samples"]
    tachs = [i for i, f in enumerate(frames) if spec_decode_body(f[:-1])[0] == "tach"]
    damaged: list[bytes] = []
    for i, f in enumerate(frames):
        if i == samples[5]:
            continue  # a lost frame carrying samples
        if i == tachs[3]:
            continue  # a lost tach edge
        if i == samples[9]:
            bad = bytearray(f)
            bad[4] ^= 0x10
            damaged.append(bytes(bad))  # a CRC error, which also costs its seq (§3, §5)
            continue
        damaged.append(f)
        if i == tachs[6]:
            damaged.append(b"\x00\x00")  # empty frames
        if i == samples[12]:
            damaged.append(b"\x55" * 300 + b"\x00")  # a run without delimiter: too_long once
    wire = b"".join(damaged)
    ours = SpecDecoder()
    ours.feed(wire)
    host = StreamDecoder()
    host.feed(wire)
    c = host.counters
    assert ours.errors == {k: v for k, v in c.errors.items() if v} == {"crc": 1, "too_long": 1}
    assert ours.ok == c.frames_ok
    assert ours.frames_lost == c.frames_lost == 3  # two dropped + the one with the bad CRC
    lost = sum(len(spec_decode_body(frames[i][:-1])[1]["samples"]) for i in (samples[5], samples[9]))
    assert ours.samples_lost == c.samples_lost == lost
    assert ours.edges_lost == c.tach_edges_lost == 1


def test_sample_instants_and_volts_by_the_spec_formulas() -> None:
    """SPEC §4.4 and §4.10 applied by hand give the host meter's numbers."""
    from trueturn.dsp.meter import LiveAnalyzer
    from trueturn.link.codec import Message, StreamDecoder

    host = [m for m in StreamDecoder().feed(_sim_bytes()) if isinstance(m, Message)]
    ours = SpecDecoder()
    ours.feed(_sim_bytes())
    ident = next(v for n, v in ours.messages if n == "identity")
    config = next(v for n, v in ours.messages if n == "stream_config" and v["start_tick"])
    block = next(v for n, v in ours.messages if n == "samples")
    k = 3
    index = block["first_index"] + k
    tick = (block["start_tick"] + index * block["period_ticks"]) % 2**32
    assert tick == (config["start_tick"] + index * config["period_ticks"]) % 2**32
    volts = block["samples"][k] * (config["adc_reference_mv"] / 1000) / 2 ** ident["adc_bits"]
    meter = LiveAnalyzer()
    for m in host:
        meter.feed(m)
    assert meter.volts_per_count * block["samples"][k] == pytest.approx(volts, rel=1e-12)
    assert ident["adc_reference_kind"] in {int(c) for c in RAW["reference_kinds"]}


def _identity_values(reset_flags: int) -> dict:
    from trueturn.link.catalogue import load_catalogue

    cat = load_catalogue()
    return {"protocol_version": cat.protocol_version, "definition_hash": cat.definition_hash,
            "firmware_major": 1, "firmware_minor": 1, "firmware_patch": 0, "board_id": 1,
            "tick_hz": 2_000_000, "adc_bits": 10, "adc_reference_mv": 4900,
            "adc_reference_kind": 1, "aperture_delay_ticks": 16, "max_channels": 2,
            "channel0_pin": 0, "channel1_pin": 1, "tach_pin": 8, "reset_flags": reset_flags}


def test_a_requested_identity_is_told_from_a_reset_by_the_reply_before_it() -> None:
    # SPEC 5: an identity right after the board's ok to identify (0x81) was asked for, also in
    # a capture that holds only the board's bytes; any other identity is a reset, with its cause
    from trueturn.link.codec import LinkEvent, StreamDecoder, encode_frame

    asked = [encode_frame("identity", 0, _identity_values(0x02)),
             encode_frame("reply", 1, {"command_type": 0x81, "command_seq": 5, "error": 0}),
             encode_frame("identity", 2, _identity_values(0x02))]
    events = [i for i in StreamDecoder().feed(b"".join(asked)) if isinstance(i, LinkEvent)]
    assert events == []
    unasked = [encode_frame("identity", 0, _identity_values(0x02)),
               encode_frame("reply", 1, {"command_type": 0x84, "command_seq": 5, "error": 0}),
               encode_frame("identity", 0, _identity_values(0x10))]
    events = [i for i in StreamDecoder().feed(b"".join(unasked)) if isinstance(i, LinkEvent)]
    assert [e.kind for e in events] == ["board_reset"] and "stall_restart" in events[0].detail


def test_repeated_and_backward_tach_counts_lose_nothing() -> None:
    # SPEC 5: a step of 0 is the same edge again, a step of 32768 or more went backwards;
    # only 1 < step < 32768 counts step - 1 lost edges
    from trueturn.link.codec import StreamDecoder, encode_frame

    counts = [10, 11, 11, 14, 3, 4]
    wire = b"".join(encode_frame("tach", i, {"tick": 1000 * (i + 1), "edge_count": c})
                    for i, c in enumerate(counts))
    d = StreamDecoder()
    d.feed(wire)
    assert d.counters.tach_edges_lost == 2  # 12 and 13
    ours = SpecDecoder()
    ours.feed(wire)
    assert ours.edges_lost == 2
