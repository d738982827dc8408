"""The protocol message catalogue (protocol/catalogue.yaml) as Python objects.

This module is the only place that reads the catalogue; the codec, the simulated board, the
session, the CLI and the C header generator all use it, so the wire format and its limits
(rate range, channel count, board ids, code tables) are defined exactly once.
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
class Limit:
    """A protocol limit: whole numbers from ``min`` to ``max``, both included."""

    name: str
    min: int
    max: int
    doc: str = ""

    def __contains__(self, value: object) -> bool:
        return isinstance(value, (int, float)) and self.min <= value <= self.max

    def span(self) -> str:
        """The range as written in messages: ``100..5000``."""
        return f"{self.min}..{self.max}"


@dataclass(frozen=True)
class Catalogue:
    """The parsed catalogue: constants, code tables and message definitions."""

    protocol_version: int
    max_frame_bytes: int
    header_bytes: int
    crc: dict[str, Any]
    error_codes: dict[int, str]
    device_states: dict[int, str]
    error_flags: dict[int, str]  # bit number -> name (status.error_flags)
    reset_flags: dict[int, str]  # bit number -> name (identity.reset_flags)
    reference_kinds: dict[int, str]
    board_ids: dict[int, str]
    limits: dict[str, Limit]
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

    def limit(self, name: str) -> Limit:
        """One of the catalogue's ``limits`` (KeyError naming it if absent)."""
        try:
            return self.limits[name]
        except KeyError:
            raise KeyError(f"no limit named {name!r} in the protocol catalogue") from None

    def flag_names(self, table: str, value: int) -> list[str]:
        """Names of the bits set in ``value`` (``table``: error_flags or reset_flags), low bit
        first; a bit the table does not name reads ``bitN``."""
        names: dict[int, str] = getattr(self, table)
        return [names.get(bit, f"bit{bit}") for bit in range(8) if value >> bit & 1]

    @property
    def crc_bytes(self) -> int:
        return int(self.crc["width"]) // 8

    @property
    def overhead_bytes(self) -> int:
        """Header plus CRC: the unencoded frame length minus the payload length."""
        return self.header_bytes + self.crc_bytes



#: Code tables of the catalogue that enter the definition hash (number -> name).
CODE_TABLES = ("error_codes", "device_states", "error_flags", "reset_flags", "reference_kinds",
               "board_ids")


def _table_names(table: dict[int, Any]) -> dict[str, str]:
    """A code table as the hash sees it: decimal code as a string -> name."""
    return {str(int(k)): (v["name"] if isinstance(v, dict) else str(v)) for k, v in table.items()}


def canonical_definition(raw: dict[str, Any]) -> str:
    """The canonical JSON text whose SHA-256 gives the definition hash (SPEC.md section 6).

    ``{"protocol_version", "max_frame_bytes", "header_bytes", "crc": {width, poly, init, refin,
    refout, xorout}, "limits": {name: {"min", "max"}}, <each of CODE_TABLES>: {"code": name},
    "messages": [{"id", "name", "direction", "fields": [{"name", "type", "count"}]}]}`` with
    ``count`` 1 or ``"rest"``, keys sorted, separators ``,`` and ``:``, ASCII only.
    """
    crc = raw["crc"]
    canonical: dict[str, Any] = {
        "protocol_version": raw["protocol_version"],
        "max_frame_bytes": raw["max_frame_bytes"],
        "header_bytes": raw["header_bytes"],
        "crc": {k: crc[k] for k in ("width", "poly", "init", "refin", "refout", "xorout")},
        "limits": {name: {"min": int(v["min"]), "max": int(v["max"])}
                   for name, v in raw["limits"].items()},
        **{table: _table_names(raw[table]) for table in CODE_TABLES},
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
    return json.dumps(canonical, sort_keys=True, separators=(",", ":"))


def definition_hash(raw: dict[str, Any]) -> int:
    """Hash of everything in the catalogue that shapes the bytes on the wire and their
    meaning: the first four bytes of the SHA-256 of :func:`canonical_definition`, read as a
    little-endian u32 (protocol/SPEC.md section 6)."""
    digest = hashlib.sha256(canonical_definition(raw).encode("ascii")).digest()
    return int.from_bytes(digest[:4], "little")


def _bits(raw: dict[str, Any], table: str) -> dict[int, str]:
    bits = {int(k): v["name"] for k, v in raw[table].items()}
    if any(not 0 <= b <= 7 for b in bits):
        raise ValueError(f"{table}: bit numbers are 0..7 (the field is a u8)")
    return bits


def parse_catalogue(raw: dict[str, Any]) -> Catalogue:
    """Build a :class:`Catalogue` from the YAML mapping, checking its own rules."""
    limits = {}
    for name, v in raw["limits"].items():
        if not isinstance(v["min"], int) or not isinstance(v["max"], int) or v["min"] > v["max"]:
            raise ValueError(f"limit {name}: min and max must be whole numbers, min <= max")
        limits[name] = Limit(name, v["min"], v["max"], v.get("doc", ""))
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
        error_flags=_bits(raw, "error_flags"),
        reset_flags=_bits(raw, "reset_flags"),
        reference_kinds={k: v["name"] for k, v in raw["reference_kinds"].items()},
        board_ids={k: v["name"] for k, v in raw["board_ids"].items()},
        limits=limits,
        messages=tuple(messages),
        definition_hash=definition_hash(raw),
    )


def catalogue_text() -> str:
    """The catalogue YAML as shipped with the package."""
    return resources.files("trueturn.link").joinpath("catalogue.yaml").read_text(encoding="utf-8")


@lru_cache(maxsize=1)
def load_catalogue() -> Catalogue:
    """The protocol catalogue (cached)."""
    return parse_catalogue(yaml.safe_load(catalogue_text()))
