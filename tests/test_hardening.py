"""Issue #18, "How we will know": every command, fed the bad-input corpus
(tests/hardening_corpus.py: generated files plus tests/data/hardening/), answers with exit
status 2 and exactly one line on stderr: no traceback, no warning leaking from numpy, and
every file it was pointed at left as it was (a FIFO stays a FIFO, a link stays a link, its
target keeps its bytes, no folder is created). Common practice, no source: a command-line
tool refuses bad input with a message and a non-zero status (POSIX utility conventions)."""

from __future__ import annotations

import tempfile
import warnings
from pathlib import Path

import pytest

from cli_helpers import run_cli
from hardening_corpus import Case, build, fingerprint


@pytest.fixture(scope="module")
def corpus(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Case]:
    folder = tmp_path_factory.mktemp("hardening")
    return {case.name: case for case in build(folder)}


def _cases() -> list[Case]:
    with tempfile.TemporaryDirectory() as folder:
        return build(Path(folder))


CASES = _cases()
NAMES = [case.name for case in CASES]


def test_the_corpus_reaches_every_command() -> None:
    from trueturn.cli.main import COMMANDS

    used = {case.argv[0] for case in CASES}
    assert used >= set(COMMANDS) - {"ports"}, set(COMMANDS) - used  # ports takes no input
    assert len(NAMES) >= 200 and len(set(NAMES)) == len(NAMES)


@pytest.mark.parametrize("name", NAMES)
def test_bad_input_gives_one_line_and_exit_2(name: str, corpus: dict[str, Case],
                                              tmp_path: Path,
                                              monkeypatch: pytest.MonkeyPatch) -> None:
    case = corpus[name]
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("TRUETURN_WORKSPACE", str(tmp_path / "ws"))
    before = {p: fingerprint(p) for p in case.untouched}
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        code, _out, err = run_cli(list(case.argv))
    assert code == 2, (case.argv, code, err)
    assert "Traceback" not in err and "Warning" not in err, err
    assert len(err.strip().splitlines()) == 1, err
    assert not [w for w in caught if issubclass(w.category, RuntimeWarning)], \
        [str(w.message) for w in caught]
    assert {p: fingerprint(p) for p in case.untouched} == before
    assert sorted(p.name for p in tmp_path.iterdir()) == [], "wrote in the current folder"
