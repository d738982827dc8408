"""``trueturn`` entry point: one subcommand per module in this package."""

from __future__ import annotations

import argparse
import importlib
import os
import sys
import warnings
from collections.abc import Sequence

from trueturn import __version__
from trueturn.errors import UserError, one_line

# numpy's BLAS in one thread, set before any command imports numpy: our matrices are tiny
# (4x4 solves, a few hundred rows), BLAS threads cost more than they save on a two-core
# laptop and contend with the serial reader (measured on the support fit, 2026-12-03)
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

# Subcommand name -> (module in trueturn.cli defining ``add_parser(subparsers)``, one-line help).
# Only the chosen command's module is imported, so `trueturn dump` does not pay for scipy or
# Textual; the help lines here are what `trueturn --help` lists.
COMMANDS: dict[str, tuple[str, str]] = {
    "demo": ("cmd_demo", "open the app on a simulated machine"),
    "ui": ("cmd_ui", "open the app on a board or a virtual rig"),
    "ports": ("cmd_ports", "list serial ports and mark likely boards"),
    "record": ("cmd_record", "record the board's stream to a capture file"),
    "check": ("cmd_check", "the bring-up check of a wired board: link, pickups, tach"),
    "flash": ("cmd_flash", "write the firmware shipped with trueturn to the board (avrdude)"),
    "dump": ("cmd_dump", "print the messages in a capture or frame file as JSON lines"),
    "analyze": ("cmd_analyze", "phase-locked 1x amplitude and phase from a capture"),
    "solve": ("cmd_solve", "compute correction masses from balancing runs"),
    "grade": ("cmd_grade", "ISO 21940-11 permissible residual unbalance"),
    "split": ("cmd_split", "split a correction onto the rotor's positions"),
    "trial-mass": ("cmd_trial_mass", "size a trial mass and show its force"),
    "report": ("cmd_report", "write a job report (HTML with SVG plots)"),
    "ring": ("cmd_ring", "print a 1:1 angle ring for a rotor"),
    "sim": ("cmd_sim", "list and describe the simulated machines"),
}


APP_COMMANDS = {"demo", "ui"}  # the commands that open the app


class _Parser(argparse.ArgumentParser):
    """argparse that exits 2 with one line (``trueturn X: problem``) on a usage mistake."""

    def error(self, message: str) -> None:  # type: ignore[override]
        self.exit(2, f"{self.prog}: {one_line(message)} (see {self.prog} --help)\n")


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """The full parser, or with ``only`` just that command's real options (others: help line)."""
    parser = _Parser(
        prog="trueturn",
        description="Dynamic balancing of small rotating machines with a low-cost kit.",
    )
    parser.add_argument("--version", action="version", version=f"trueturn {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name, (module_name, help_text) in COMMANDS.items():
        if only is None or only == name:
            importlib.import_module(f"trueturn.cli.{module_name}").add_parser(sub)
        else:
            sub.add_parser(name, help=help_text, add_help=False)
    return parser


def _chosen_command(argv: Sequence[str]) -> str | None:
    """The subcommand named in ``argv`` (first word not starting with '-'), if it is known."""
    for word in argv:
        if not word.startswith("-"):
            return word if word in COMMANDS else None
    return None


def main(argv: Sequence[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    chosen = _chosen_command(argv)
    parser = build_parser(only=chosen or "")
    args = parser.parse_args(argv)
    try:
        with warnings.catch_warnings():
            # numpy's floating-point warnings (overflow, invalid value, division by zero) mean
            # a number may be wrong: refuse in one line rather than print it (or the warning).
            # Not around the app (its threads share the filters; it shows numbers itself).
            if args.command not in APP_COMMANDS:
                warnings.simplefilter("error", RuntimeWarning)
            return int(args.run(args) or 0)
    except RuntimeWarning as exc:
        print(f"trueturn {args.command}: the numbers could not be computed "
              f"({one_line(exc)}); check the values given", file=sys.stderr)
        return 2
    except UserError as exc:
        print(f"trueturn {args.command}: {one_line(exc)}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # the output was cut short (| head): nothing to say
        return 0
    except OSError as exc:  # a file or port the person named cannot be used
        name = f" {exc.filename}" if exc.filename else ""
        print(f"trueturn {args.command}: cannot use{name}: {one_line(exc.strerror or exc)}",
              file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"trueturn {args.command}: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
