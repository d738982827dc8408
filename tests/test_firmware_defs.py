"""The committed C header firmware/core/tt_protocol_defs.h equals a fresh generation from the
protocol catalogue, so the firmware cannot drift from the wire format the host speaks."""

from __future__ import annotations

import importlib.util
import re

from firmware_helpers import FIRMWARE
from trueturn.link.catalogue import load_catalogue


def _generator():
    spec = importlib.util.spec_from_file_location("gen_defs", FIRMWARE / "tools" / "gen_defs.py")
    assert spec and spec.loader
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_committed_header_equals_fresh_generation() -> None:
    committed = (FIRMWARE / "core" / "tt_protocol_defs.h").read_text(encoding="utf-8")
    assert committed == _generator().generate(), (
        "firmware/core/tt_protocol_defs.h is stale: run `make -C firmware defs` and commit it")


def test_header_carries_the_definition_hash_and_every_message() -> None:
    text = _generator().generate()
    cat = load_catalogue()
    assert f"#define TT_DEFINITION_HASH 0x{cat.definition_hash:08X}UL" in text
    assert f"#define TT_PROTOCOL_VERSION {cat.protocol_version}u" in text
    for m in cat.messages:
        name = m.name.upper()
        assert f"#define TT_MSG_{name} 0x{m.type_id:02X}u" in text
        fixed = sum(f.size_bytes for f in m.fixed_fields)
        assert f"#define TT_MSG_{name}_FIXED_BYTES {fixed}u" in text
    for code, name in cat.error_codes.items():
        assert re.search(rf"#define TT_ERR_{name.upper()} {code}u\b", text)
