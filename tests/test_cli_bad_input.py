"""Bad input everywhere: every CLI command, fed nonsense, answers with one line and exit 2.

Property under test (issue: reliability): no traceback ever reaches the person; the exit code
is 0 (accepted) or 2 (refused with one line on stderr).
"""

from __future__ import annotations

import json

import pytest
import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from cli_helpers import run_cli
from trueturn.cli.main import COMMANDS

# Commands that open the app or a port run elsewhere (test_ui_*, test_sim_*); not fuzzed here.
SKIP = {"demo", "ui", "record"}
FUZZED = [name for name in COMMANDS if name not in SKIP]

WORDS = st.sampled_from(["--json", "--mass-g", "--angle-deg", "--positions", "--first-deg",
                         "--rotor-mass-kg", "--radius-mm", "--speed-rpm", "--grade",
                         "--diameter-mm", "--rotation", "-o", "--revs", "--format", "list",
                         "describe", "bench-grinder", "no-such-rig", "cw", "ccw", "html",
                         "nosuchfile.yaml", "readings.yaml", "-1", "0", "nan", "inf", "1e309",
                         "3000", "6.3", "abc", "", "--", "-"])
ARGS = st.lists(st.one_of(WORDS, st.text(max_size=6), st.floats(allow_nan=True).map(str)),
                max_size=8)



@pytest.mark.parametrize("command", FUZZED)
@settings(max_examples=40, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(args=ARGS)
def test_random_arguments_give_one_line_or_success(command: str, args: list[str],
                                                   tmp_path, monkeypatch) -> None:
    monkeypatch.chdir(tmp_path)
    code, _out, err = run_cli([command, *args])
    assert code in (0, 2), (command, args, err)
    assert "Traceback" not in err
    if code == 2:
        assert len(err.strip().splitlines()) == 1, err


@pytest.mark.parametrize("command", [*FUZZED, *sorted(SKIP)])
def test_every_command_has_help(command: str) -> None:
    code, out, _ = run_cli([command, "--help"])
    assert code == 0 and "usage:" in out


YAML_VALUES = st.recursive(
    st.one_of(st.none(), st.booleans(), st.floats(allow_nan=True), st.integers(-10, 10**6),
              st.text(max_size=8)),
    lambda inner: st.one_of(st.lists(inner, max_size=4),
                            st.dictionaries(st.sampled_from(
                                ["planes", "sensors", "runs", "name", "radius_mm", "label",
                                 "added", "readings", "plane", "mass_g", "angle_deg", "amp",
                                 "phase_deg", "weights", "max_mass_g", "inboard", "left"]),
                                inner, max_size=5)),
    max_leaves=25)


@settings(max_examples=150, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(doc=YAML_VALUES)
def test_solve_with_random_readings_files(doc, tmp_path) -> None:
    path = tmp_path / "readings.yaml"
    path.write_text(yaml.safe_dump(doc) if doc is not None else "")
    code, out, err = run_cli(["solve", str(path), "--json"])
    assert code in (0, 2), err
    assert "Traceback" not in err
    if code == 0:
        json.loads(out)
    else:
        assert len(err.strip().splitlines()) == 1, err


def test_unreadable_yaml_is_one_line(tmp_path) -> None:
    path = tmp_path / "broken.yaml"
    path.write_text("planes: [unclosed\n  - : :\n")
    code, _, err = run_cli(["solve", str(path)])
    assert code == 2 and len(err.strip().splitlines()) == 1
