"""Dataclasses to and from YAML, with one-line errors that name the file, the line and the field.

The job and machine files are written for people as well as for the program, so a mistake in a
hand-edited file must come back as ``machines/grinder.yaml:12: planes[0].radius_mm: must be
greater than 0, got -40`` and nothing more.

How it works: YAML is loaded with a loader that remembers the line of every mapping key and
list item (PyYAML node marks); a dataclass is then filled field by field from its type hints
(str, int, float, bool, ``Literal[...]``, ``list[...]``, ``X | None``, nested dataclasses), with
range limits given in each field's ``metadata`` (see :func:`limits`), and an optional
``_checks()`` method for rules across fields.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import enum
import json
import math
import re
import types
import typing
from collections.abc import Callable
from typing import Any, Literal, Union

import yaml

from trueturn.errors import UserError
from trueturn.model.fields import limits

__all__ = [
    "SchemaError",
    "limits",
    "load_yaml_text",
    "from_data",
    "to_data",
    "dump_yaml_text",
    "Migration",
]

Migration = Callable[[dict[str, Any]], dict[str, Any]]


class SchemaError(UserError):
    """A file that cannot be read as the expected document; the message is one line."""


class LineDict(dict):
    """A YAML mapping that remembers its own line and each key's line (1-based)."""

    line: int = 0
    key_lines: dict[Any, int]

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self.key_lines = {}


class LineList(list):
    """A YAML sequence that remembers its own line and each item's line (1-based)."""

    line: int = 0
    item_lines: list[int]

    def __init__(self, *args: Any) -> None:
        super().__init__(*args)
        self.item_lines = []


class _LineLoader(getattr(yaml, "CSafeLoader", yaml.SafeLoader)):  # type: ignore[misc]
    """Safe loader building :class:`LineDict` / :class:`LineList` so errors can name a line."""


def _construct_mapping(loader: _LineLoader, node: yaml.MappingNode) -> LineDict:
    loader.flatten_mapping(node)
    result = LineDict()
    result.line = node.start_mark.line + 1
    for key_node, value_node in node.value:
        key = loader.construct_object(key_node, deep=True)
        if not isinstance(key, (str, int, float, bool)) and key is not None:
            raise yaml.constructor.ConstructorError(
                None, None, "a key must be plain text", key_node.start_mark)
        if key in result:
            raise yaml.constructor.ConstructorError(
                None, None, f"field '{key}' appears twice", key_node.start_mark)
        result[key] = loader.construct_object(value_node, deep=True)
        result.key_lines[key] = key_node.start_mark.line + 1
    return result


def _construct_sequence(loader: _LineLoader, node: yaml.SequenceNode) -> LineList:
    result = LineList()
    result.line = node.start_mark.line + 1
    for item_node in node.value:
        result.append(loader.construct_object(item_node, deep=True))
        result.item_lines.append(item_node.start_mark.line + 1)
    return result


_LineLoader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG, _construct_mapping)
_LineLoader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_SEQUENCE_TAG, _construct_sequence)


def load_yaml_text(text: str, source: str) -> Any:
    """Parse YAML text; a syntax error becomes one :class:`SchemaError` line."""
    try:
        return yaml.load(text, Loader=_LineLoader)  # noqa: S506 - a SafeLoader subclass
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = mark.line + 1 if mark is not None else 1
        problem = exc.problem or exc.context or "unreadable"
        raise SchemaError(f"{source}:{line}: not valid YAML: {problem}") from None
    except yaml.YAMLError as exc:
        raise SchemaError(f"{source}:1: not valid YAML: {str(exc).splitlines()[0]}") from None


class _Context:
    """Where a value came from: file name, dotted field path, line."""

    def __init__(self, source: str, path: str, line: int) -> None:
        self.source, self.path, self.line = source, path, line

    def fail(self, message: str, line: int | None = None, path: str | None = None) -> typing.NoReturn:
        where = path if path is not None else self.path
        raise SchemaError(f"{self.source}:{line or self.line}: {where or '(top)'}: {message}")

    def child(self, name: str | int, line: int | None) -> _Context:
        if isinstance(name, int):
            path = f"{self.path}[{name}]"
        else:
            path = f"{self.path}.{name}" if self.path else name
        return _Context(self.source, path, line or self.line)


def _describe(value: Any) -> str:
    text = repr(value) if isinstance(value, str) else str(value)
    return text if len(text) <= 40 else text[:37] + "..."


def _check_limits(value: Any, meta: typing.Mapping[str, Any], ctx: _Context) -> None:
    if meta.get("nonempty") and len(value) == 0:
        ctx.fail("must not be empty")
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        if meta.get("above") is not None and not value > meta["above"]:
            ctx.fail(f"must be greater than {meta['above']:g}, got {value:g}")
        if meta.get("below") is not None and not value < meta["below"]:
            ctx.fail(f"must be less than {meta['below']:g}, got {value:g}")
        if meta.get("minimum") is not None and value < meta["minimum"]:
            ctx.fail(f"must be at least {meta['minimum']:g}, got {value:g}")
        if meta.get("maximum") is not None and value > meta["maximum"]:
            ctx.fail(f"must be at most {meta['maximum']:g}, got {value:g}")


_FIELDS: dict[type, dict[str, tuple[Any, typing.Mapping[str, Any], bool]]] = {}


def _field_table(cls: type) -> dict[str, tuple[Any, typing.Mapping[str, Any], bool]]:
    """name -> (type hint, metadata, required) for the init fields of ``cls`` (cached)."""
    table = _FIELDS.get(cls)
    if table is None:
        hints = typing.get_type_hints(cls)
        table = {f.name: (hints[f.name], f.metadata,
                          f.default is dataclasses.MISSING
                          and f.default_factory is dataclasses.MISSING)
                 for f in dataclasses.fields(cls) if f.init}
        _FIELDS[cls] = table
    return table


def _convert(tp: Any, value: Any, ctx: _Context, meta: typing.Mapping[str, Any]) -> Any:
    origin = typing.get_origin(tp)
    if origin is Union or origin is types.UnionType:
        args = [a for a in typing.get_args(tp) if a is not type(None)]
        if value is None:
            return None
        if len(args) != 1:
            raise TypeError(f"unsupported union {tp}")
        return _convert(args[0], value, ctx, meta)
    if value is None:
        ctx.fail("must have a value")
    if isinstance(tp, type) and issubclass(tp, enum.Enum):
        choices = [m.value for m in tp]
        if isinstance(value, bool) or value not in choices:
            ctx.fail(f"{_describe(value)} is not one of: {', '.join(str(c) for c in choices)}")
        return tp(value)
    if origin is Literal:
        choices = typing.get_args(tp)
        if isinstance(value, bool) or value not in choices:
            listed = ", ".join(str(c) for c in choices)
            ctx.fail(f"{_describe(value)} is not one of: {listed}")
        return value
    if origin is list:
        (item_type,) = typing.get_args(tp)
        if not isinstance(value, list):
            ctx.fail(f"must be a list, got {_describe(value)}")
        item_lines = getattr(value, "item_lines", [])
        items = []
        for i, item in enumerate(value):
            line = item_lines[i] if i < len(item_lines) else None
            items.append(_convert(item_type, item, ctx.child(i, line), {}))
        _check_limits(items, meta, ctx)
        return items
    if dataclasses.is_dataclass(tp):
        return _from_mapping(tp, value, ctx)
    if tp is str:
        if isinstance(value, (dt.datetime, dt.date)):
            return value.isoformat()
        if not isinstance(value, str):
            ctx.fail(f"must be text, got {_describe(value)}")
        _check_limits(value, meta, ctx)
        return value
    if tp is bool:
        if not isinstance(value, bool):
            ctx.fail(f"must be true or false, got {_describe(value)}")
        return value
    if tp is int:
        if isinstance(value, bool) or not isinstance(value, int):
            ctx.fail(f"must be a whole number, got {_describe(value)}")
        _check_limits(value, meta, ctx)
        return value
    if tp is float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            ctx.fail(f"must be a number, got {_describe(value)}")
        if not math.isfinite(value):
            ctx.fail(f"must be a finite number, got {value}")
        _check_limits(value, meta, ctx)
        return float(value)
    if tp is Any:
        return value
    raise TypeError(f"unsupported field type {tp}")


def _from_mapping(cls: type, value: Any, ctx: _Context) -> Any:
    if not isinstance(value, dict):
        ctx.fail(f"must be a mapping of fields, got {_describe(value)}")
    own_line = getattr(value, "line", 0) or ctx.line
    key_lines: dict[Any, int] = getattr(value, "key_lines", {})
    fields = _field_table(cls)
    for key in value:
        if key not in fields:
            known = ", ".join(fields)
            ctx.child(str(key), key_lines.get(key, own_line)).fail(
                f"unknown field (known fields: {known})")
    kwargs: dict[str, Any] = {}
    for name, (hint, meta, required) in fields.items():
        if name not in value:
            if required:
                ctx.child(name, own_line).fail("missing field", line=ctx.line or own_line)
            continue
        kwargs[name] = _convert(hint, value[name], ctx.child(name, key_lines.get(name, own_line)),
                                meta)
    obj = cls(**kwargs)
    checks = getattr(obj, "_checks", None)
    if checks is not None:
        for field_name, message in checks():
            name, _, index = field_name.partition("[")
            line = key_lines.get(name, own_line)
            if index:  # "runs[2]": the line of that list item
                item_lines = getattr(value.get(name), "item_lines", [])
                position = int(index.rstrip("]"))
                if position < len(item_lines):
                    line = item_lines[position]
            ctx.child(field_name, line).fail(message)
    return obj


def from_data(cls: type, data: Any, source: str, path: str = "") -> Any:
    """Build dataclass ``cls`` from loaded YAML ``data``; raise :class:`SchemaError` on a mistake."""
    return _convert(cls, data, _Context(source, path, getattr(data, "line", 1) or 1), {})


def to_data(obj: Any) -> Any:
    """Plain dicts/lists/numbers of a dataclass tree, in field order; ``None`` left out where
    the field has a default (a required field that may be null is written as null); an
    enum as its value."""
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        out: dict[str, Any] = {}
        for f in dataclasses.fields(obj):
            value = getattr(obj, f.name)
            required = (f.default is dataclasses.MISSING
                        and f.default_factory is dataclasses.MISSING)
            if value is None and not required:
                continue
            out[f.name] = to_data(value)
        return out
    if isinstance(obj, (list, tuple)):
        return [to_data(v) for v in obj]
    if isinstance(obj, enum.Enum):
        return obj.value
    return obj


# A small block-style YAML writer for the plain data of our documents (dicts with text keys,
# lists, text, numbers, booleans, None). PyYAML's representer is pure Python and took most of
# a save; this writer is several times faster and its output is checked against PyYAML's
# reader (tests/test_jobs_store.py, property test). Text is written plain only when the YAML
# 1.1 resolver cannot read it as anything but text, else as a JSON string (valid YAML).

_PLAIN = re.compile(r"[A-Za-z][A-Za-z0-9 _.,()/+-]*")
_YAML11_WORDS = {"yes", "no", "on", "off", "true", "false", "null", "y", "n"}


# Characters YAML would not read back literally inside double quotes: the C1 controls and
# DEL, which PyYAML's reader refuses, and NEL/LS/PS/BOM, which YAML treats as line breaks.
_ESCAPE = re.compile("[\x7f-\x9f\u2028\u2029\ufeff\ufffe\uffff]")


def _quoted(text: str) -> str:
    """A JSON string is a YAML double-quoted scalar; escape what YAML reads differently."""
    return _ESCAPE.sub(lambda m: f"\\u{ord(m.group()):04x}", json.dumps(text, ensure_ascii=False))


def _scalar(value: Any) -> str:
    if value is None:
        return "null"
    if value is True:
        return "true"
    if value is False:
        return "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return ".nan"
        if math.isinf(value):
            return ".inf" if value > 0 else "-.inf"
        text = repr(value)
        if "." not in text and "e" in text:  # YAML 1.1 floats need a dot: 1e-05 -> 1.0e-05
            text = text.replace("e", ".0e", 1)
        return text
    if isinstance(value, str):
        if (_PLAIN.fullmatch(value) and not value.endswith(" ")
                and value.lower() not in _YAML11_WORDS):
            return value
        return _quoted(value)
    raise TypeError(f"cannot write {type(value).__name__} to YAML")


def _is_scalar(value: Any) -> bool:
    return not isinstance(value, (dict, list, tuple))


def _emit(value: Any, indent: str, out: list[str]) -> None:
    """Lines of a mapping or sequence at ``indent`` (sequences indentless, like PyYAML)."""
    if isinstance(value, dict):
        for key, item in value.items():
            head = f"{indent}{_scalar(str(key))}:"
            if _is_scalar(item):
                out.append(f"{head} {_scalar(item)}")
            elif not item:
                out.append(f"{head} {'{}' if isinstance(item, dict) else '[]'}")
            elif isinstance(item, (list, tuple)) and all(_is_scalar(v) for v in item):
                flow = ", ".join(_quoted(v) if isinstance(v, str)
                                 else _scalar(v) for v in item)
                out.append(f"{head} [{flow}]")
            elif isinstance(item, dict):
                out.append(head)
                _emit(item, indent + "  ", out)
            else:
                out.append(head)
                _emit(item, indent, out)
        return
    for item in value:
        if _is_scalar(item):
            out.append(f"{indent}- {_scalar(item)}")
        elif not item:
            out.append(f"{indent}- {'{}' if isinstance(item, dict) else '[]'}")
        else:
            start = len(out)
            _emit(item, indent + "  ", out)
            out[start] = f"{indent}- " + out[start][len(indent) + 2:]


def dump_yaml_text(data: Any, header: str = "") -> str:
    """YAML text of plain data (keys in insertion order), with an optional comment header."""
    lines = [f"# {line}" if line else "#" for line in header.splitlines()]
    if isinstance(data, (dict, list, tuple)) and data:
        _emit(data, "", lines)
    else:
        lines.append(_scalar(data) if _is_scalar(data) else ("{}" if isinstance(data, dict) else "[]"))
    return "\n".join(lines) + "\n"
