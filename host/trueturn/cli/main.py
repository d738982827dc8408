"""``trueturn`` entry point: one subcommand per module in this package."""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

from trueturn import __version__
from trueturn.errors import UserError, one_line

# Subcommand name -> module in trueturn.cli defining ``add_parser(subparsers)`` and ``run(args)``.
COMMANDS: dict[str, str] = {
    "demo": "cmd_demo",
    "ui": "cmd_ui",
    "ports": "cmd_ports",
    "record": "cmd_record",
    "dump": "cmd_dump",
    "analyze": "cmd_analyze",
    "solve": "cmd_solve",
    "grade": "cmd_grade",
    "split": "cmd_split",
    "trial-mass": "cmd_trial_mass",
    "report": "cmd_report",
    "ring": "cmd_ring",
    "sim": "cmd_sim",
}


class _Parser(argparse.ArgumentParser):
    """argparse that exits 2 with one line (``trueturn X: problem``) on a usage mistake."""

    def error(self, message: str) -> None:  # type: ignore[override]
        self.exit(2, f"{self.prog}: {one_line(message)} (see {self.prog} --help)\n")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="trueturn",
        description="Dynamic balancing of small rotating machines with a low-cost kit.",
    )
    parser.add_argument("--version", action="version", version=f"trueturn {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for module_name in COMMANDS.values():
        module = importlib.import_module(f"trueturn.cli.{module_name}")
        module.add_parser(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.run(args) or 0)
    except UserError as exc:
        print(f"trueturn {args.command}: {one_line(exc)}", file=sys.stderr)
        return 2
    except OSError as exc:  # a file or port the person named cannot be used
        name = f" {exc.filename}" if exc.filename else ""
        print(f"trueturn {args.command}: cannot use{name}: {one_line(exc.strerror or exc)}",
              file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"trueturn {args.command}: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0


if __name__ == "__main__":
    sys.exit(main())
