"""Golden vectors of protocol v1: byte-exact both ways, every invalid frame rejected as named."""

from __future__ import annotations

import json
import struct
import subprocess
import sys
from pathlib import Path

import pytest
import yaml
from cobs import cobs as reference_cobs  # reference library: cobs (PyPI)
from crccheck.crc import Crc16Ibm3740  # reference library: crccheck (PyPI)

from trueturn.link.catalogue import FIELD_FORMATS, load_catalogue
from trueturn.link.codec import FrameError, decode_frame, encode_frame

VECTORS = Path(__file__).resolve().parent.parent / "protocol" / "vectors"
INDEX = yaml.safe_load((VECTORS / "vectors.yaml").read_text())
VALID = INDEX["valid"]
INVALID = INDEX["invalid"]


def test_every_message_type_has_a_vector() -> None:
    names = {m.name for m in load_catalogue().messages}
    assert names == {v["type"] for v in VALID}


def test_vectors_carry_the_current_definition_hash() -> None:
    assert INDEX["definition_hash"] == f"{load_catalogue().definition_hash:#010x}"


@pytest.mark.parametrize("vec", VALID, ids=[v["name"] for v in VALID])
def test_valid_vector_encodes_byte_exact(vec: dict) -> None:
    wire = encode_frame(vec["type"], vec["seq"], vec["values"])
    assert wire.hex() == vec["hex"]
    assert (VECTORS / vec["file"]).read_bytes() == wire


@pytest.mark.parametrize("vec", VALID, ids=[v["name"] for v in VALID])
def test_valid_vector_decodes(vec: dict) -> None:
    wire = bytes.fromhex(vec["hex"])
    assert wire.endswith(b"\x00") and wire.count(0) == 1
    msg = decode_frame(wire[:-1])
    assert (msg.name, msg.seq, msg.values) == (vec["type"], vec["seq"], vec["values"])


@pytest.mark.parametrize("vec", INVALID, ids=[v["name"] for v in INVALID])
def test_invalid_vector_rejected_with_named_error(vec: dict) -> None:
    wire = (VECTORS / vec["file"]).read_bytes()
    assert wire.hex() == vec["hex"]
    with pytest.raises(FrameError) as err:
        decode_frame(wire[:-1])
    assert err.value.kind == vec["error"]


def _independent_decode(wire: bytes) -> tuple[int, int, bytes]:
    """A decoder written from protocol/SPEC.md alone, on reference libraries (cobs, crccheck)."""
    frame = reference_cobs.decode(wire[:-1])
    body, crc = frame[:-2], struct.unpack(">H", frame[-2:])[0]
    assert Crc16Ibm3740.calc(body) == crc
    return body[0], body[1], body[2:]


@pytest.mark.parametrize("vec", VALID, ids=[v["name"] for v in VALID])
def test_valid_vectors_agree_with_an_independent_decoder(vec: dict) -> None:
    # reference libraries: cobs + crccheck (PyPI); layout per protocol/SPEC.md, little-endian
    type_id, seq, payload = _independent_decode(bytes.fromhex(vec["hex"]))
    mdef = load_catalogue().by_name(vec["type"])
    assert (type_id, seq) == (mdef.type_id, vec["seq"])
    fixed = "<" + "".join(FIELD_FORMATS[f.type] for f in mdef.fixed_fields)
    values = dict(zip([f.name for f in mdef.fixed_fields], struct.unpack_from(fixed, payload),
                      strict=True))
    if mdef.rest_field is not None:
        rest = payload[struct.calcsize(fixed):]
        values[mdef.rest_field.name] = list(struct.unpack(f"<{len(rest) // 2}H", rest))
    assert values == vec["values"]


def _dump(path: Path) -> list[dict]:
    out = subprocess.run([sys.executable, "-m", "trueturn.cli.main", "dump", str(path)],
                         check=True, capture_output=True, text=True).stdout
    return [json.loads(line) for line in out.splitlines()]


def test_dump_decodes_every_valid_vector() -> None:
    for vec in VALID:
        lines = _dump(VECTORS / vec["file"])
        # a samples block alone is also noted as a stream seen without its stream_config
        assert [x["event"] for x in lines if "event" in x] == (
            ["stream_config_missing"] if vec["type"] == "samples" else [])
        assert next(x for x in lines if "type" in x)["type"] == vec["type"]
        assert lines[-1]["summary"]["frames_ok"] == 1
        assert lines[-1]["summary"]["crc_errors"] == 0


def test_dump_reports_every_invalid_vector() -> None:
    for vec in INVALID:
        lines = _dump(VECTORS / vec["file"])
        assert lines[0]["event"] == vec["error"], vec["name"]
        assert lines[-1]["summary"]["frames_bad"] == 1
        assert lines[-1]["summary"]["crc_errors"] == (1 if vec["error"] == "crc" else 0)


def test_spec_message_table_matches_catalogue() -> None:
    """protocol/SPEC.md's message table (id, name, payload size) stays in step with the catalogue."""
    import re

    spec = (VECTORS.parent / "SPEC.md").read_text()
    rows = re.findall(r"^\| (0x[0-9a-f]{2}) \| `(\w+)` \| [^|]+ \| ([0-9+ ·n]+) \|", spec, re.M)
    table = {name: (int(type_id, 16), size.strip()) for type_id, name, size in rows}
    cat = load_catalogue()
    assert set(table) == {m.name for m in cat.messages}
    for m in cat.messages:
        size = str(m.fixed_struct.size) + (" + 2·n" if m.rest_field else "")
        assert table[m.name] == (m.type_id, size), m.name
