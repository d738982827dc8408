"""YAML text in and out for the files people edit (job records, machine profiles, readings
files, scenarios): a safe loader that keeps the line of every key and list item, and a small
block-style writer.

The lines let :mod:`trueturn.schema` name where a mistake is (``file:line: field: problem``).
This module only turns text into plain data and back; it reads and writes no files.
"""

from __future__ import annotations

import json
import math
import re
from typing import Any

import yaml

from trueturn.schema import SchemaError

__all__ = ["LineDict", "LineList", "load_yaml_text", "dump_yaml_text"]


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


# Numbers with an exponent as people and JSON write them (1e-3, 2.5E6, 1.5e3): YAML 1.1
# reads a float only with a dot and a signed exponent (1.0e-3, 1.5e+3), so PyYAML's resolver
# took ``1e-3`` for text; YAML 1.2's core schema (section 10.3.2) reads them all as floats.
_LineLoader.add_implicit_resolver(
    "tag:yaml.org,2002:float",
    re.compile(r"^[-+]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)[eE][-+]?[0-9]+$"),
    list("-+0123456789."))

#: Limits on what a document may expand to, checked on the parsed node graph before any
#: Python object is built: a few kilobytes of aliases (``&a [*b, *b, ...]``, the "billion
#: laughs") otherwise expand to gigabytes in whatever walks the data, and an alias to itself
#: never ends. Our largest documents (a job of 1000 runs) are some 10^5 nodes deep 10.
MAX_NODES = 2_000_000
MAX_DEPTH = 64


def _check_graph(node: yaml.Node, source: str) -> None:
    """Refuse a node graph that expands past :data:`MAX_NODES` nodes or :data:`MAX_DEPTH`
    levels, or that contains itself (an alias inside its own anchor); one line each."""
    size: dict[int, int] = {}
    depth: dict[int, int] = {}
    on_path: set[int] = set()
    stack: list[tuple[yaml.Node, bool]] = [(node, False)]

    def children(n: yaml.Node) -> list[yaml.Node]:
        if isinstance(n, yaml.SequenceNode):
            return list(n.value)
        if isinstance(n, yaml.MappingNode):
            return [part for pair in n.value for part in pair]
        return []

    while stack:
        current, done = stack.pop()
        key = id(current)
        if done:
            on_path.discard(key)
            kids = children(current)
            size[key] = 1 + sum(size[id(k)] for k in kids)
            depth[key] = 1 + max((depth[id(k)] for k in kids), default=0)
            line = current.start_mark.line + 1
            if size[key] > MAX_NODES:
                raise SchemaError(f"{source}:{line}: expands to more than {MAX_NODES:,} values "
                                  "(aliases repeating aliases?); not a document trueturn reads")
            if depth[key] > MAX_DEPTH:
                raise SchemaError(f"{source}:{line}: nested more than {MAX_DEPTH} levels deep")
            continue
        if key in size:
            continue
        if key in on_path:
            raise SchemaError(f"{source}:{current.start_mark.line + 1}: an alias refers to "
                              "the value that contains it (a loop)")
        on_path.add(key)
        stack.append((current, True))
        stack.extend((k, False) for k in children(current) if id(k) not in size)
        if len(on_path) > MAX_DEPTH:
            raise SchemaError(f"{source}:{current.start_mark.line + 1}: nested more than "
                              f"{MAX_DEPTH} levels deep")


def load_yaml_text(text: str, source: str) -> Any:
    """Parse YAML (or JSON) text; a syntax error, a document nested too deep or expanding
    too far through aliases becomes one :class:`SchemaError` line."""
    try:
        loader = _LineLoader(text)
        try:
            node = loader.get_single_node()
            if node is None:
                return None
            _check_graph(node, source)
            return loader.construct_document(node)
        finally:
            loader.dispose()
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = mark.line + 1 if mark is not None else 1
        problem = exc.problem or exc.context or "unreadable"
        raise SchemaError(f"{source}:{line}: not valid YAML: {problem}") from None
    except yaml.YAMLError as exc:
        raise SchemaError(f"{source}:1: not valid YAML: {str(exc).splitlines()[0]}") from None
    except RecursionError:
        raise SchemaError(f"{source}:1: not valid YAML: nested too deeply") from None


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
