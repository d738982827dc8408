"""The command line's frame: help lists every command; only the chosen command is imported."""

from __future__ import annotations

import subprocess
import sys

from trueturn.cli.main import COMMANDS, build_parser


def test_full_parser_builds_with_every_command() -> None:
    parser = build_parser()
    text = parser.format_help()
    for name in COMMANDS:
        assert name in text


def test_dump_does_not_import_scipy_or_textual() -> None:
    code = ("import sys; from trueturn.cli.main import main; "
            "main(['dump', 'protocol/vectors/valid/ping.bin']); "
            "print(sorted(m for m in sys.modules if m.split('.')[0] in ('scipy', 'textual')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert out.strip().splitlines()[-1] == "[]"


def test_top_level_help_lists_commands_without_importing_them() -> None:
    out = subprocess.run([sys.executable, "-m", "trueturn.cli.main", "--help"],
                         capture_output=True, text=True, check=True).stdout
    assert "trial-mass" in out and "dump" in out


def test_unknown_command_is_one_line_exit_2() -> None:
    proc = subprocess.run([sys.executable, "-m", "trueturn.cli.main", "balance-it"],
                          capture_output=True, text=True)
    assert proc.returncode == 2 and len(proc.stderr.strip().splitlines()) == 1
