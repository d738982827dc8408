"""The layers of ARCHITECTURE.md as rules on the import graph, read from the source (ast).

* The math and the procedure are pure: ``model``, ``dsp``, ``balance`` and ``procedure``
  (with the one-module conventions ``angles``, ``positions``, ``errors``, ``constants``,
  ``schema``) import no I/O layer (``link``, ``sim``, ``jobs``, ``ui``, ``cli``) and no
  Textual, pyserial or YAML - except the wire format's definition, ``link.catalogue`` and
  its pure ``link.codec`` (bytes in, messages out), which dsp measures from.
* No package reaches into another's internals: no ``_private`` name is imported across
  packages.
* No import cycle between the packages of ``trueturn``.
* Each core noun is defined once: one class of each name in ``trueturn.model`` and none of
  that name elsewhere (a layer may specialise one, e.g. dsp's ``PickupReading(Reading)``).

Common practice, no source: layering rules checked by reading the import statements.
"""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "host" / "trueturn"

PURE = {"model", "dsp", "balance", "procedure", "angles", "positions", "errors", "constants",
        "schema"}
PROTOCOL_DEFINITION = {"trueturn.link.catalogue", "trueturn.link.codec"}
IO_LAYERS = {"link", "sim", "jobs", "ui", "cli"}
IO_LIBRARIES = {"textual", "serial", "yaml", "socket", "subprocess"}
MODEL_NOUNS = {"Reading", "PlacedMass", "Correction", "Verdict", "Run", "RunKind",
               "MassKind", "Bearing", "SafetyEvent", "Phasor", "Plane", "PlaneLayout", "Pickup"}


def _modules() -> list[tuple[str, Path, ast.Module]]:
    out = []
    for path in sorted(PACKAGE.rglob("*.py")):
        rel = path.relative_to(PACKAGE)
        top = rel.parts[0].removesuffix(".py")
        out.append((top, path, ast.parse(path.read_text(encoding="utf-8"), str(path))))
    return out


def _imports(tree: ast.Module) -> list[tuple[str, list[str], int]]:
    """(module imported, names imported, line) for every import, at any depth."""
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(a.name, [], node.lineno) for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            found.append((node.module, [a.name for a in node.names], node.lineno))
    return found


def _package_of(module: str) -> str | None:
    parts = module.split(".")
    return parts[1] if parts[0] == "trueturn" and len(parts) > 1 else None


def test_math_and_procedure_import_no_io_layer_and_no_io_library() -> None:
    bad = []
    for top, path, tree in _modules():
        if top not in PURE:
            continue
        for module, _, line in _imports(tree):
            target = _package_of(module)
            if module in PROTOCOL_DEFINITION:
                continue  # the wire format's definition and its pure codec: data, not I/O
            if target in IO_LAYERS or module.split(".")[0] in IO_LIBRARIES:
                bad.append(f"{path.relative_to(PACKAGE)}:{line}: imports {module}")
    assert not bad, "\n".join(bad)


def test_no_private_name_is_imported_across_packages() -> None:
    bad = []
    for top, path, tree in _modules():
        for module, names, line in _imports(tree):
            target = _package_of(module)
            if target is None or target == top:
                continue
            private = [n for n in names if n.startswith("_")]
            private += [p for p in module.split(".") if p.startswith("_")]
            if private:
                bad.append(f"{path.relative_to(PACKAGE)}:{line}: {module} {private}")
    assert not bad, "\n".join(bad)


def _graph() -> dict[str, set[str]]:
    graph: dict[str, set[str]] = {}
    for top, _, tree in _modules():
        for module, _, _ in _imports(tree):
            target = _package_of(module)
            if target is not None and target != top:
                graph.setdefault(top, set()).add(target)
    return graph


def _cycle(graph: dict[str, set[str]]) -> list[str] | None:
    """One cycle of the graph, or None (depth-first search with colours)."""
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(node: str) -> list[str] | None:
        state[node] = 1
        stack.append(node)
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == 1:
                return stack[stack.index(nxt):] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        stack.pop()
        state[node] = 2
        return None

    for node in sorted(graph):
        if node not in state:
            found = visit(node)
            if found:
                return found
    return None


def test_the_cycle_finder_finds_a_cycle() -> None:
    assert _cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert _cycle({"a": {"b"}, "b": {"c"}}) is None


def test_no_import_cycle_between_packages() -> None:
    cycle = _cycle(_graph())
    assert cycle is None, " -> ".join(cycle or [])


def test_each_core_noun_is_defined_once_in_the_model() -> None:
    where: dict[str, list[str]] = {}
    for _, path, tree in _modules():
        for node in ast.walk(tree):
            if isinstance(node, ast.ClassDef) and node.name in MODEL_NOUNS:
                where.setdefault(node.name, []).append(str(path.relative_to(PACKAGE)))
    twice = {name: paths for name, paths in where.items()
             if len(paths) != 1 or not paths[0].startswith("model/")}
    assert not twice, twice
