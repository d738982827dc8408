"""Running the ``trueturn`` command line in-process and capturing what a person would see."""

from __future__ import annotations

import contextlib
import io

from trueturn.cli.main import main


def run_cli(argv: list[str]) -> tuple[int, str, str]:
    """(exit status, stdout, stderr) of ``trueturn ARGV``; argparse exits count as statuses."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main(argv)
        except SystemExit as exc:  # argparse usage errors and --help
            code = exc.code if isinstance(exc.code, int) else 2
    return code, out.getvalue(), err.getvalue()
