"""The public math is documented as scipy.signal documents its functions (issue #16 item 8).

Every public function and public method of ``trueturn/dsp`` and ``trueturn/balance`` carries a
numpydoc docstring: a summary line, ``Parameters`` naming every parameter (and nothing else),
``Returns`` (or ``Yields``) unless it is annotated ``-> None``, ``Raises`` naming each
``UserError`` class it raises itself, and ``References`` naming the method, standard or book
it implements ("common practice, no source" where there is none). Properties and dunder
methods are exempt. Section syntax after the numpydoc docstring guide (numpydoc.readthedocs.io,
"Style guide": a section title underlined with hyphens); the checks are our own, read with
:mod:`ast` so nothing is imported.
"""

from __future__ import annotations

import ast
import re
from dataclasses import dataclass
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "host" / "trueturn"
MODULES = sorted([*PACKAGE.glob("dsp/*.py"), *PACKAGE.glob("balance/*.py")])
EXEMPT_DECORATORS = {"property", "cached_property", "functools.cached_property"}
ROOT_ERROR = "UserError"

_SECTION = re.compile(r"^([A-Z][A-Za-z ]+)\n-{3,}[ \t]*$", re.M)


@dataclass(frozen=True)
class Public:
    """One public function or method found in a module."""

    where: str                 # file:line qualified.name
    params: tuple[str, ...]    # without self/cls; *args and **kwargs by their bare names
    returns_none: bool
    raises: tuple[str, ...]    # UserError classes raised directly in the body
    doc: str


def _user_errors(trees: list[ast.Module]) -> set[str]:
    """UserError and every class of the given modules that derives from it."""
    names = {ROOT_ERROR}
    classes = [n for t in trees for n in ast.walk(t) if isinstance(n, ast.ClassDef)]
    changed = True
    while changed:
        changed = False
        for c in classes:
            bases = {ast.unparse(b).split(".")[-1] for b in c.bases}
            if c.name not in names and bases & names:
                names.add(c.name)
                changed = True
    return names


def _raised(fn: ast.FunctionDef | ast.AsyncFunctionDef, errors: set[str]) -> tuple[str, ...]:
    """UserError classes raised by the function's own statements (not nested functions)."""
    found: list[str] = []

    def walk(node: ast.AST) -> None:
        for child in ast.iter_child_nodes(node):
            if isinstance(child, (ast.FunctionDef, ast.AsyncFunctionDef, ast.Lambda,
                                  ast.ClassDef)):
                continue
            if isinstance(child, ast.Raise) and child.exc is not None:
                exc = child.exc.func if isinstance(child.exc, ast.Call) else child.exc
                name = ast.unparse(exc).split(".")[-1]
                if name in errors and name not in found:
                    found.append(name)
            walk(child)

    walk(fn)
    return tuple(found)


def _publics(path: Path, tree: ast.Module, errors: set[str], root: Path = PACKAGE
             ) -> list[Public]:
    out: list[Public] = []

    def add(fn: ast.FunctionDef | ast.AsyncFunctionDef, owner: str | None) -> None:
        if fn.name.startswith("_"):
            return
        decorators = {ast.unparse(d) for d in fn.decorator_list}
        if decorators & EXEMPT_DECORATORS or any(d.endswith((".setter", ".deleter"))
                                                 for d in decorators):
            return
        a = fn.args
        params = [p.arg for p in (*a.posonlyargs, *a.args, *a.kwonlyargs)]
        if owner is not None and params and params[0] in ("self", "cls") \
                and "staticmethod" not in decorators:
            params = params[1:]
        params += [p.arg for p in (a.vararg, a.kwarg) if p is not None]
        returns_none = fn.returns is not None and ast.unparse(fn.returns) == "None"
        qual = f"{owner}.{fn.name}" if owner else fn.name
        out.append(Public(f"{path.relative_to(root)}:{fn.lineno} {qual}", tuple(params),
                          returns_none, _raised(fn, errors), ast.get_docstring(fn) or ""))

    for node in tree.body:
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            add(node, None)
        elif isinstance(node, ast.ClassDef) and not node.name.startswith("_"):
            for sub in node.body:
                if isinstance(sub, (ast.FunctionDef, ast.AsyncFunctionDef)):
                    add(sub, node.name)
    return out


def sections(doc: str) -> dict[str, str]:
    """numpydoc sections of a cleaned docstring: title -> body text."""
    marks = list(_SECTION.finditer(doc))
    return {m.group(1).strip(): doc[m.end():marks[i + 1].start() if i + 1 < len(marks)
                                     else len(doc)]
            for i, m in enumerate(marks)}


def documented_params(body: str) -> list[str]:
    """Names of a Parameters section: its unindented lines, ``name : type`` or ``a, b : t``."""
    names: list[str] = []
    for line in body.splitlines():
        if not line.strip() or line[0].isspace():
            continue
        head = line.split(" : ")[0] if " : " in line else line.rstrip(":")
        names += [n.strip().lstrip("*") for n in head.split(",") if n.strip()]
    return names


def problems(item: Public) -> list[str]:
    """What the docstring of one public function lacks (empty when it is complete)."""
    found: list[str] = []
    doc = item.doc
    if not doc or not doc.splitlines()[0].strip():
        return ["no summary line"]
    parts = sections(doc)
    if item.params and "Parameters" not in parts:
        found.append("no Parameters section")
    elif "Parameters" in parts:
        listed = documented_params(parts["Parameters"])
        missing = [p for p in item.params if p not in listed]
        extra = [p for p in listed if p not in item.params]
        if missing:
            found.append(f"Parameters does not list {', '.join(missing)}")
        if extra:
            found.append(f"Parameters lists {', '.join(extra)}, not parameters")
    if not item.returns_none and "Returns" not in parts and "Yields" not in parts:
        found.append("no Returns section")
    for error in item.raises:
        if error not in parts.get("Raises", ""):
            found.append(f"raises {error} but its Raises section does not say so")
    if not parts.get("References", "").strip():
        found.append("no References section (name the method or standard, or say "
                     "'common practice, no source')")
    return found


def scan(paths: list[Path]) -> list[Public]:
    trees = [ast.parse(p.read_text(encoding="utf-8")) for p in paths]
    errors = _user_errors([ast.parse(p.read_text(encoding="utf-8"))
                           for p in sorted(PACKAGE.rglob("*.py"))])
    return [item for p, t in zip(paths, trees, strict=True) for item in _publics(p, t, errors)]


ITEMS = scan(MODULES)


def test_the_scan_sees_the_public_math() -> None:
    # the scan must not pass by finding nothing: these are known public functions
    names = {i.where.split(" ")[1] for i in ITEMS}
    assert {"split", "fit_influence", "bearing_verdict", "vector_stats", "fit_blocks",
            "LiveAnalyzer.feed", "TachTracker.add_edge"} <= names
    assert len(ITEMS) >= 100


@pytest.mark.parametrize("item", ITEMS, ids=[i.where for i in ITEMS])
def test_public_math_has_numpydoc_sections(item: Public) -> None:
    assert not problems(item), f"{item.where}: " + "; ".join(problems(item))


def test_the_check_fails_on_a_bare_docstring(tmp_path: Path) -> None:
    # the checker itself: an incomplete docstring is reported, a complete one is not
    bad = tmp_path / "bad.py"
    bad.write_text('from trueturn.errors import UserError\n\n'
                   'def f(mass_g: float, *, radius_mm: float = 1.0) -> float:\n'
                   '    """Summary only."""\n'
                   '    if mass_g < 0:\n'
                   '        raise UserError("negative")\n'
                   '    return mass_g\n\n'
                   'def g() -> None:\n'
                   '    """Nothing to return.\n\n'
                   '    Parameters\n    ----------\n    ghost : int\n        Not there.\n\n'
                   '    References\n    ----------\n    Common practice, no source.\n    """\n\n'
                   'def h(x: float) -> float:\n'
                   '    """Complete.\n\n'
                   '    Parameters\n    ----------\n    x : float\n        A value, mm.\n\n'
                   '    Returns\n    -------\n    float\n        The same, mm.\n\n'
                   '    References\n    ----------\n    Common practice, no source.\n    """\n'
                   '    return x\n')
    tree = ast.parse(bad.read_text())
    errors = _user_errors([tree])
    found = {i.where.split(" ")[1]: problems(i) for i in _publics(bad, tree, errors, root=tmp_path)}
    assert found["f"] == ["no Parameters section", "no Returns section",
                          "raises UserError but its Raises section does not say so",
                          "no References section (name the method or standard, or say "
                          "'common practice, no source')"]
    assert found["g"] == ["Parameters lists ghost, not parameters"]
    assert found["h"] == []

