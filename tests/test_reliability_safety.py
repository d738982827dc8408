"""Safe defaults (issue: reliability), kept true by reading the source tree:

* YAML only through safe loading (yaml.safe_load or a SafeLoader/CSafeLoader), never
  yaml.load with a full/unsafe loader, never yaml.unsafe_load/full_load;
* no eval/exec/compile of text, no pickle/marshal/shelve;
* no network at all: no sockets, servers or HTTP clients;
* no shell=True in subprocess calls;
* files are written by two helpers only (the atomic writer of trueturn/files.py and the capture
  writer of link/capture.py; emu:// keeps its harness log in a private temporary folder), and a run of the writing commands leaves files only where the
  person pointed or in the workspace.

PyYAML's own documentation is the source for which loaders are safe (common practice: the
SafeLoader family constructs plain data only).
"""

from __future__ import annotations

import ast
import contextlib
import io
import os
from pathlib import Path

import pytest
import yaml

ROOT = Path(__file__).resolve().parents[1]
HOST = ROOT / "host" / "trueturn"
PYTHON_TREES = [ROOT / "host", ROOT / "bench", ROOT / "tests", ROOT / "firmware"]

SAFE_LOADERS = {"SafeLoader", "CSafeLoader", "_LineLoader"}
BANNED_CALLS = {"eval", "exec", "compile", "__import__"}
BANNED_MODULES = {"pickle", "cPickle", "marshal", "shelve", "socket", "socketserver",
                  "http", "urllib.request", "xmlrpc", "ftplib", "smtplib", "telnetlib",
                  "requests", "httpx", "aiohttp", "asyncio.base_events"}
# Modules allowed to write files, and what they write.
WRITERS = {
    HOST / "files.py": "atomic_write_bytes: temp file beside the target, fsync, rename",
    HOST / "link" / "capture.py": "CaptureWriter: the capture file named by record -o",
    HOST / "sim" / "handlers" / "protocol_emu.py": "the emulator's log, in its own "
                                                    "tempfile.TemporaryDirectory (removed)",
}


def _python_files(trees: list[Path]) -> list[Path]:
    files = []
    for tree in trees:
        files += [p for p in tree.rglob("*.py")
                  if ".venv" not in p.parts and "build" not in p.parts]
    return sorted(files)


def _parsed(trees: list[Path]) -> list[tuple[Path, ast.AST]]:
    return [(p, ast.parse(p.read_text(encoding="utf-8"), str(p))) for p in _python_files(trees)]


def _name(node: ast.AST) -> str:
    if isinstance(node, ast.Name):
        return node.id
    if isinstance(node, ast.Attribute):
        return f"{_name(node.value)}.{node.attr}"
    return ""


def test_the_line_keeping_loader_is_a_safe_loader() -> None:
    from trueturn.yamltext import _LineLoader

    safe = (yaml.SafeLoader,) + ((yaml.CSafeLoader,) if hasattr(yaml, "CSafeLoader") else ())
    assert issubclass(_LineLoader, safe)
    # a Python object tag is refused, not constructed
    from trueturn.errors import UserError
    from trueturn.yamltext import load_yaml_text
    with pytest.raises(UserError):
        load_yaml_text("!!python/object/apply:os.system ['echo hi']\n", "x.yaml")


def test_yaml_is_only_loaded_safely() -> None:
    problems = []
    for path, tree in _parsed(PYTHON_TREES):
        for node in ast.walk(tree):
            if not isinstance(node, ast.Call):
                continue
            name = _name(node.func)
            if name in ("yaml.unsafe_load", "yaml.full_load", "yaml.unsafe_load_all",
                        "yaml.full_load_all"):
                problems.append(f"{path}:{node.lineno}: {name}")
            if name in ("yaml.load", "yaml.load_all"):
                loader = [k.value for k in node.keywords if k.arg == "Loader"]
                if len(node.args) > 1:
                    loader.append(node.args[1])
                if not loader or _name(loader[0]).split(".")[-1] not in SAFE_LOADERS:
                    problems.append(f"{path}:{node.lineno}: {name} without a safe Loader")
    assert not problems, problems


def test_no_eval_exec_pickle_or_network_in_the_package_and_bench() -> None:
    problems = []
    for path, tree in _parsed([ROOT / "host", ROOT / "bench"]):
        for node in ast.walk(tree):
            if isinstance(node, ast.Call):
                name = _name(node.func)
                if name in BANNED_CALLS:
                    problems.append(f"{path}:{node.lineno}: {name}()")
                if name.startswith("subprocess.") and any(
                        k.arg == "shell" and not (isinstance(k.value, ast.Constant)
                                                  and k.value.value is False)
                        for k in node.keywords):
                    problems.append(f"{path}:{node.lineno}: subprocess with shell=")
            elif isinstance(node, ast.Import):
                for alias in node.names:
                    if alias.name in BANNED_MODULES or alias.name.split(".")[0] in BANNED_MODULES:
                        problems.append(f"{path}:{node.lineno}: import {alias.name}")
            elif isinstance(node, ast.ImportFrom) and node.module:
                if node.module in BANNED_MODULES or node.module.split(".")[0] in BANNED_MODULES:
                    problems.append(f"{path}:{node.lineno}: from {node.module} import")
    assert not problems, problems


def _writes(node: ast.Call) -> bool:
    name = _name(node.func)
    if name.endswith((".write_text", ".write_bytes")) or name in ("tempfile.mkstemp",
                                                                  "os.mkfifo", "shutil.copy",
                                                                  "shutil.copyfile", "shutil.move"):
        return True
    if name in ("open", "io.open", "builtins.open") or name.endswith(".open") and name != "os.open":
        mode = node.args[1] if len(node.args) > 1 else next(
            (k.value for k in node.keywords if k.arg == "mode"), None)
        return isinstance(mode, ast.Constant) and isinstance(mode.value, str) and any(
            c in mode.value for c in "wax+")
    if name == "os.open":
        return any("O_WRONLY" in ast.dump(a) or "O_RDWR" in ast.dump(a) or "O_CREAT" in ast.dump(a)
                   for a in node.args[1:])
    return False


def test_only_the_two_writers_write_files() -> None:
    found = {}
    for path, tree in _parsed([ROOT / "host"]):
        for node in ast.walk(tree):
            if isinstance(node, ast.Call) and _writes(node):
                found.setdefault(path, []).append(node.lineno)
    assert found, "the check found no writer at all: it is not looking"
    assert set(found) <= set(WRITERS), {str(p): lines for p, lines in found.items()
                                        if p not in WRITERS}


def _tree(folder: Path) -> set[str]:
    return {str(p.relative_to(folder)) for p in folder.rglob("*")}


def test_writing_commands_leave_files_only_where_pointed(tmp_path, monkeypatch) -> None:
    from trueturn.cli.main import main

    home, work, ws, out = (tmp_path / n for n in ("home", "work", "ws", "out"))
    for d in (home, work, out):
        d.mkdir()
    monkeypatch.setenv("HOME", str(home))
    monkeypatch.setenv("XDG_DATA_HOME", str(home / ".local" / "share"))
    monkeypatch.setenv("TRUETURN_WORKSPACE", str(ws))
    monkeypatch.chdir(work)
    job = ROOT / "tests" / "data" / "demo_bench_grinder_job.yaml"
    runs = [
        ["ring", "--diameter-mm", "150", "--positions", "6", "-o", str(out / "ring.svg")],
        ["report", str(job), "-o", str(out / "job.html"), "--csv", str(out / "job.csv")],
        ["record", "--port", "sim://shop-fan?realtime=0", "--seconds", "0.5",
         "-o", str(out / "fan.cap"), "--quiet"],
        ["analyze", str(out / "fan.cap"), "--json"],
        ["solve", str(ROOT / "tests" / "data" / "demo_bench_grinder_job.yaml")],
        ["sim", "describe", "bench-grinder"],
        ["grade", "--rotor-mass-kg", "3", "--speed-rpm", "3000", "--grade", "G6.3"],
    ]
    for argv in runs:
        with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
            try:
                main(argv)
            except SystemExit:
                pass
    assert _tree(out) == {"ring.svg", "job.html", "job.csv", "fan.cap"}
    assert _tree(work) == set() and _tree(home) == set()
    assert not ws.exists() or all(not name.startswith(".tt-") for name in _tree(ws))
    assert not [n for n in os.listdir(tmp_path) if n not in ("home", "work", "ws", "out")]
