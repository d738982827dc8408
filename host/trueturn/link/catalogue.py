"""The protocol v1 message catalogue (protocol/catalogue.yaml) as Python objects.

This module is the only place that reads the catalogue; the codec, the simulated board and
the C header generator all use it, so the wire format is defined exactly once.
"""

from __future__ import annotations

import hashlib
import json
import struct
from dataclasses import dataclass, field
from functools import cached_property, lru_cache
from importlib import resources
from typing import Any

import yaml

FIELD_FORMATS = {"u8": "B", "u16": "H", "u32": "I", "i16": "h", "i32": "i"}


@dataclass(frozen=True)
class FieldDef:
    """One payload field: fixed scalar, or an array filling the rest of the payload."""

    name: str
    type: str
    is_rest_array: bool = False
    unit: str | None = None
    doc: str = ""

    @property
    def size_bytes(self) -> int:
        return struct.calcsize("<" + FIELD_FORMATS[self.type])


@dataclass(frozen=True)
class MessageDef:
    """One message type of the catalogue."""

    type_id: int
    name: str
    direction: str  # "device" (board -> host) or "host" (host -> board)
    fields: tuple[FieldDef, ...]
    doc: str = ""

    @cached_property
    def fixed_fields(self) -> tuple[FieldDef, ...]:
        return tuple(f for f in self.fields if not f.is_rest_array)

    @cached_property
    def rest_field(self) -> FieldDef | None:
        rest = [f for f in self.fields if f.is_rest_array]
        return rest[0] if rest else None

    @cached_property
    def fixed_struct(self) -> struct.Struct:
        return struct.Struct("<" + "".join(FIELD_FORMATS[f.type] for f in self.fixed_fields))


@dataclass(frozen=True)
class Catalogue:
    """The parsed catalogue: constants, code tables and message definitions."""

    protocol_version: int
    max_frame_bytes: int
    header_bytes: int
    crc: dict[str, Any]
    error_codes: dict[int, str]
    device_states: dict[int, str]
    last_errors: dict[int, str]
    messages: tuple[MessageDef, ...]
    definition_hash: int
    _by_id: dict[int, MessageDef] = field(init=False, repr=False, compare=False)
    _by_name: dict[str, MessageDef] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "_by_id", {m.type_id: m for m in self.messages})
        object.__setattr__(self, "_by_name", {m.name: m for m in self.messages})

    def by_id(self, type_id: int) -> MessageDef | None:
        return self._by_id.get(type_id)

    def by_name(self, name: str) -> MessageDef:
        try:
            return self._by_name[name]
        except KeyError:
            raise KeyError(f"no message named {name!r} in the protocol catalogue") from None

    @property
    def crc_bytes(self) -> int:
        return int(self.crc["width"]) // 8

    @property
    def overhead_bytes(self) -> int:
        """Header plus CRC: the unencoded frame length minus the payload length."""
        return self.header_bytes + self.crc_bytes



def definition_hash(raw: dict[str, Any]) -> int:
    """Hash of everything in the catalogue that shapes the bytes on the wire.

    Canonical form (protocol/SPEC.md, "Definition hash"): JSON with sorted keys and no
    spaces of ``{"protocol_version", "max_frame_bytes", "header_bytes", "crc": {width, poly,
    init, refin, refout, xorout}, "messages": [{"id", "name", "direction", "fields":
    [{"name", "type", "count"}]}]}`` where ``count`` is ``"rest"`` or ``1``; the hash is the
    first four bytes of its SHA-256 read as a little-endian u32.
    """
    crc = raw["crc"]
    canonical = {
        "protocol_version": raw["protocol_version"],
        "max_frame_bytes": raw["max_frame_bytes"],
        "header_bytes": raw["header_bytes"],
        "crc": {k: crc[k] for k in ("width", "poly", "init", "refin", "refout", "xorout")},
        "messages": [
            {
                "id": m["id"],
                "name": m["name"],
                "direction": m["direction"],
                "fields": [
                    {"name": f["name"], "type": f["type"], "count": f.get("count", 1)}
                    for f in m["fields"]
                ],
            }
            for m in raw["messages"]
        ],
    }
    text = json.dumps(canonical, sort_keys=True, separators=(",", ":"))
    digest = hashlib.sha256(text.encode("utf-8")).digest()
    return int.from_bytes(digest[:4], "little")


def parse_catalogue(raw: dict[str, Any]) -> Catalogue:
    """Build a :class:`Catalogue` from the YAML mapping, checking its own rules."""
    messages = []
    seen: set[int] = set()
    for m in raw["messages"]:
        fields = []
        for i, f in enumerate(m["fields"]):
            if f["type"] not in FIELD_FORMATS:
                raise ValueError(f"message {m['name']}: unknown field type {f['type']!r}")
            rest = f.get("count", 1) == "rest"
            if rest and i != len(m["fields"]) - 1:
                raise ValueError(f"message {m['name']}: a 'rest' array must be the last field")
            fields.append(FieldDef(f["name"], f["type"], rest, f.get("unit"), f.get("doc", "")))
        if m["id"] in seen:
            raise ValueError(f"duplicate message id {m['id']:#04x}")
        seen.add(m["id"])
        messages.append(MessageDef(m["id"], m["name"], m["direction"], tuple(fields), m.get("doc", "")))
    return Catalogue(
        protocol_version=raw["protocol_version"],
        max_frame_bytes=raw["max_frame_bytes"],
        header_bytes=raw["header_bytes"],
        crc=dict(raw["crc"]),
        error_codes={k: v["name"] for k, v in raw["error_codes"].items()},
        device_states=dict(raw["device_states"]),
        last_errors={k: v["name"] for k, v in raw["last_errors"].items()},
        messages=tuple(messages),
        definition_hash=definition_hash(raw),
    )


def catalogue_text() -> str:
    """The catalogue YAML as shipped with the package."""
    return resources.files("trueturn.link").joinpath("catalogue.yaml").read_text(encoding="utf-8")


@lru_cache(maxsize=1)
def load_catalogue() -> Catalogue:
    """The protocol v1 catalogue (cached)."""
    return parse_catalogue(yaml.safe_load(catalogue_text()))
