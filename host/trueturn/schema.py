"""The one input validator: plain data (as loaded from YAML or JSON) to dataclasses, with
one-line errors that name the file, the line and the field.

Every file a person edits is read through it: job records and machine profiles
(:mod:`trueturn.jobs`), READINGS documents (:mod:`trueturn.balance.readings`) and scenarios
(:mod:`trueturn.sim.scenario`). A mistake comes back as
``machines/grinder.yaml:12: planes[0].radius_mm: must be greater than 0, got -40`` and
nothing more.

How it works: a document's shape is declared as dataclasses; :func:`from_data` fills one
field by field from its type hints (str, int, float, bool, enums, ``Literal[...]``,
``list[...]``, ``tuple[...]``, ``dict[str, ...]`` keyed by name, ``X | None``, nested
dataclasses), with range limits given in each field's ``metadata`` (see :func:`limits` and
:func:`angle_limits`), and an optional ``_checks()`` method for rules across fields that
returns ``(field path, problem)`` pairs. Lines come from the mappings of
:mod:`trueturn.yamltext` (their ``line``/``key_lines``/``item_lines``); plain dicts have
none, and the message then names the file and the field only.

Pure: no file access, no YAML here (ARCHITECTURE.md: balance/ may use it).
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import enum
import math
import re
import types
import typing
from collections.abc import Callable
from enum import Enum
from typing import Any, Literal, Union

from trueturn.angles import wrap_deg
from trueturn.errors import UserError
from trueturn.model.fields import ANGLE_WITHIN_TURN_KEY as _TURN_KEY
from trueturn.model.fields import Rule, angle_limits, limits

__all__ = [
    "SchemaError",
    "Problem",
    "limits",
    "angle_limits",
    "from_data",
    "to_data",
    "Migration",
]

Migration = Callable[[dict[str, Any]], dict[str, Any]]

class Problem(str, Enum):
    """What is wrong with a value, as data (a screen words it; a file error says it in
    :attr:`SchemaError.args`)."""

    MISSING = "missing"  # a required field is not there, or null
    UNKNOWN_FIELD = "unknown-field"
    EMPTY = "empty"  # text or list that must not be empty
    NOT_A_NUMBER = "not-a-number"
    NOT_FINITE = "not-finite"
    NOT_WHOLE = "not-whole"  # a whole number was expected
    NOT_TEXT = "not-text"
    NOT_YES_NO = "not-yes-no"  # true or false
    NOT_ONE_OF = "not-one-of"  # values["choices"]
    NOT_A_LIST = "not-a-list"
    WRONG_LENGTH = "wrong-length"
    NOT_A_MAPPING = "not-a-mapping"
    NOT_A_NAME = "not-a-name"
    TWICE = "twice"  # a key given twice
    NOT_ABOVE = "not-above"  # values["limit"], values["got"]
    NOT_BELOW = "not-below"
    UNDER_MINIMUM = "under-minimum"
    NEGATIVE = "negative"
    OVER_MAXIMUM = "over-maximum"
    OUTSIDE_TURN = "outside-turn"  # an angle beyond -360..360
    RULE = "rule"  # a rule across fields: :attr:`SchemaError.rule` (None: no code given)


class SchemaError(UserError):
    """A file that cannot be read as the expected document; the message is one line.

    The same fact as data, for a screen to put into its own words: ``path`` (the dotted
    field path, ``planes[0].radius_mm``), ``problem`` (a :class:`Problem`), ``values``
    (``got``, ``limit``, ``choices``...), for a rule across fields ``rule``, and ``detail``,
    the file's wording of the problem alone.
    """

    def __init__(self, message: str, path: str = "", problem: Problem | None = None,
                 values: dict[str, Any] | None = None, rule: Rule | None = None,
                 detail: str = "") -> None:
        super().__init__(message)
        self.detail = detail or message  # the problem alone, without file, line and field
        self.path = path
        self.problem = problem
        self.values = values or {}
        self.rule = rule


class _Context:
    """Where a value came from: file name, dotted field path, line (0: not known)."""

    def __init__(self, source: str, path: str, line: int) -> None:
        self.source, self.path, self.line = source, path, line

    def fail(self, message: str, problem: Problem, line: int | None = None,
             path: str | None = None, rule: Rule | None = None,
             **values: Any) -> typing.NoReturn:
        where = path if path is not None else self.path
        at = line or self.line
        place = f"{self.source}:{at}" if at else self.source
        raise SchemaError(f"{place}: {where or '(top)'}: {message}", where, problem, values,
                          rule, message)

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
        ctx.fail("must not be empty", Problem.EMPTY)
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        if meta.get("above") is not None and not value > meta["above"]:
            ctx.fail(f"must be greater than {meta['above']:g}, got {value:g}", Problem.NOT_ABOVE,
                     limit=meta["above"], got=value)
        if meta.get("below") is not None and not value < meta["below"]:
            ctx.fail(f"must be less than {meta['below']:g}, got {value:g}", Problem.NOT_BELOW,
                     limit=meta["below"], got=value)
        if meta.get("minimum") is not None and value < meta["minimum"]:
            if meta["minimum"] == 0:
                ctx.fail(f"must not be negative, got {value:g}", Problem.NEGATIVE, limit=0,
                         got=value)
            ctx.fail(f"must be at least {meta['minimum']:g}, got {value:g}",
                     Problem.UNDER_MINIMUM, limit=meta["minimum"], got=value)
        if meta.get("maximum") is not None and value > meta["maximum"]:
            ctx.fail(f"must be at most {meta['maximum']:g}, got {value:g}", Problem.OVER_MAXIMUM,
                     limit=meta["maximum"], got=value)


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


def _name_of(key: Any) -> str | None:
    """A mapping key or a name as text: YAML reads ``1:`` or ``name: 2`` as a number."""
    if isinstance(key, str):
        return key
    if isinstance(key, int) and not isinstance(key, bool):
        return str(key)
    return None


def _items(tp: Any, value: Any, ctx: _Context) -> list[Any]:
    item_lines = getattr(value, "item_lines", [])
    return [_convert(tp, item, ctx.child(i, item_lines[i] if i < len(item_lines) else None), {})
            for i, item in enumerate(value)]


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
        ctx.fail("must have a value", Problem.MISSING)
    if isinstance(tp, type) and issubclass(tp, enum.Enum):
        choices = [m.value for m in tp]
        if isinstance(value, bool) or value not in choices:
            ctx.fail(f"{_describe(value)} is not one of: {', '.join(str(c) for c in choices)}",
                     Problem.NOT_ONE_OF, got=value, choices=tuple(choices))
        return tp(value)
    if origin is Literal:
        allowed = typing.get_args(tp)
        if isinstance(value, bool) or value not in allowed:
            listed = ", ".join(str(c) for c in allowed)
            ctx.fail(f"{_describe(value)} is not one of: {listed}", Problem.NOT_ONE_OF,
                     got=value, choices=tuple(allowed))
        return value
    if origin is list:
        (item_type,) = typing.get_args(tp)
        if not isinstance(value, list):
            ctx.fail(f"must be a list, got {_describe(value)}", Problem.NOT_A_LIST, got=value)
        items = _items(item_type, value, ctx)
        _check_limits(items, meta, ctx)
        return items
    if origin is tuple:
        fields = typing.get_args(tp)
        if not isinstance(value, list):
            ctx.fail(f"must be a list, got {_describe(value)}", Problem.NOT_A_LIST, got=value)
        if len(fields) == 2 and fields[1] is Ellipsis:
            items = _items(fields[0], value, ctx)
        else:
            if len(value) != len(fields):
                ctx.fail(f"must be a list of {len(fields)} values, got {len(value)}",
                         Problem.WRONG_LENGTH, limit=len(fields), got=len(value))
            item_lines = getattr(value, "item_lines", [])
            items = [_convert(a, v, ctx.child(i, item_lines[i] if i < len(item_lines) else None),
                              {}) for i, (a, v) in enumerate(zip(fields, value, strict=True))]
        _check_limits(items, meta, ctx)
        return tuple(items)
    if origin is dict:
        key_type, item_type = typing.get_args(tp)
        if key_type is not str:
            raise TypeError(f"unsupported mapping {tp}")
        if not isinstance(value, dict):
            ctx.fail(f"must be a mapping of names to values, got {_describe(value)}",
                     Problem.NOT_A_MAPPING, got=value)
        key_lines: dict[Any, int] = getattr(value, "key_lines", {})
        out: dict[str, Any] = {}
        for key, item in value.items():
            name = _name_of(key)
            if name is None or not name.strip():
                ctx.fail(f"{_describe(key)} is not a name", Problem.NOT_A_NAME,
                         line=key_lines.get(key), got=key)
            if name in out:
                ctx.fail(f"'{name}' appears twice", Problem.TWICE, line=key_lines.get(key),
                         got=name)
            out[name] = _convert(item_type, item, ctx.child(name, key_lines.get(key)), {})
        _check_limits(out, meta, ctx)
        return out
    if isinstance(tp, type) and dataclasses.is_dataclass(tp):
        return _from_mapping(tp, value, ctx)
    if tp is str:
        if isinstance(value, (dt.datetime, dt.date)):
            return value.isoformat()
        text = _name_of(value)
        if text is None:
            ctx.fail(f"must be text, got {_describe(value)}", Problem.NOT_TEXT, got=value)
        _check_limits(text.strip() if meta.get("nonempty") else text, meta, ctx)
        return text
    if tp is bool:
        if not isinstance(value, bool):
            ctx.fail(f"must be true or false, got {_describe(value)}", Problem.NOT_YES_NO,
                     got=value)
        return value
    if tp is int:
        if isinstance(value, bool) or not isinstance(value, int):
            ctx.fail(f"must be a whole number, got {_describe(value)}", Problem.NOT_WHOLE,
                     got=value)
        _check_limits(value, meta, ctx)
        return value
    if tp is float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            ctx.fail(f"must be a number, got {_describe(value)}", Problem.NOT_A_NUMBER,
                     got=value)
        if not math.isfinite(value):
            ctx.fail(f"must be a finite number, got {value}", Problem.NOT_FINITE, got=value)
        _check_limits(value, meta, ctx)
        if meta.get(_TURN_KEY):
            if not -360.0 <= value <= 360.0:
                ctx.fail(f"must be within -360..360 degrees (counted against rotation), "
                         f"got {value:g}", Problem.OUTSIDE_TURN, got=value)
            return wrap_deg(float(value))
        return float(value)
    if tp is Any:
        return value
    raise TypeError(f"unsupported field type {tp}")


_STEP = re.compile(r"\.?([^.\[\]]+)|\[(\d+)\]")


def _line_of(value: Any, path: str, line: int) -> int:
    """The line of ``path`` (``runs[2].readings.left``) inside the loaded ``value``: as deep
    as the loaded data goes and remembers lines."""
    node = value
    for name, index in _STEP.findall(path):
        if index:
            lines = getattr(node, "item_lines", None)
            position = int(index)
            if not isinstance(node, list) or position >= len(node):
                break
            if lines and position < len(lines):
                line = lines[position]
            node = node[position]
        else:
            if not isinstance(node, dict):
                break
            key = next((k for k in node if _name_of(k) == name), None)
            if key is None:
                break
            line = getattr(node, "key_lines", {}).get(key, line)
            node = node[key]
    return line


def _from_mapping(cls: type, value: Any, ctx: _Context) -> Any:
    if not isinstance(value, dict):
        ctx.fail(f"must be a mapping of fields, got {_describe(value)}", Problem.NOT_A_MAPPING,
                 got=value)
    own_line = getattr(value, "line", 0) or ctx.line
    key_lines: dict[Any, int] = getattr(value, "key_lines", {})
    fields = _field_table(cls)
    for key in value:
        if key not in fields:
            known = ", ".join(fields)
            ctx.child(str(key), key_lines.get(key, own_line)).fail(
                f"unknown field (known fields: {known})", Problem.UNKNOWN_FIELD)
    kwargs: dict[str, Any] = {}
    for name, (hint, meta, required) in fields.items():
        if name not in value:
            if required:
                ctx.child(name, own_line).fail("missing field", Problem.MISSING,
                                               line=ctx.line or own_line)
            continue
        kwargs[name] = _convert(hint, value[name], ctx.child(name, key_lines.get(name, own_line)),
                                meta)
    obj = cls(**kwargs)
    checks = getattr(obj, "_checks", None)
    if checks is not None:
        for field_path, message in checks():
            ctx.child(field_path, _line_of(value, field_path, own_line)).fail(
                str(message), Problem.RULE, rule=message if isinstance(message, Rule) else None)
    return obj


def from_data(cls: type, data: Any, source: str, path: str = "") -> Any:
    """Build dataclass ``cls`` from loaded ``data``; raise :class:`SchemaError` on a mistake.

    ``source`` names the file in messages; ``path`` is the field path of ``data`` inside it.
    """
    return _convert(cls, data, _Context(source, path, getattr(data, "line", 0)), {})


def to_data(obj: Any) -> Any:
    """Plain dicts/lists/numbers of a dataclass tree, in field order; ``None`` left out where
    the field has a default (a required field that may be null is written as null); an
    enum as its value; a field marked ``metadata={"transient": True}`` (known in memory
    only) left out."""
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        out: dict[str, Any] = {}
        for f in dataclasses.fields(obj):
            if f.metadata.get("transient"):
                continue
            value = getattr(obj, f.name)
            required = (f.default is dataclasses.MISSING
                        and f.default_factory is dataclasses.MISSING)
            if value is None and not required:
                continue
            out[f.name] = to_data(value)
        return out
    if isinstance(obj, (list, tuple)):
        return [to_data(v) for v in obj]
    if isinstance(obj, dict):
        return {k: to_data(v) for k, v in obj.items()}
    if isinstance(obj, enum.Enum):
        return obj.value
    return obj
