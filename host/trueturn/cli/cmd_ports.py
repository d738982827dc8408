"""``trueturn ports``: list serial ports, marking the likely boards by USB VID:PID."""

from __future__ import annotations

import argparse
from dataclasses import asdict

from trueturn.cli.common import print_json
from trueturn.link.ports import list_board_ports


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser("ports", help="list serial ports and mark likely boards",
                            description="List serial ports; likely boards (known USB-serial "
                                        "chips) first. Virtual rigs: sim://NAME, emu://NAME.")
    parser.add_argument("--json", action="store_true", help="print JSON")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    ports = list_board_ports()
    if args.json:
        print_json([asdict(p) for p in ports])
        return 0
    if not ports:
        print("No serial ports found. Plug the board in; on Linux check you are in the "
              "'dialout' group. Without a board try: trueturn demo")
        return 0
    for p in ports:
        mark = f"  <- likely board: {p.likely_board}" if p.likely_board else ""
        print(f"{p.device:20s} {p.vid_pid or '-':10s} {p.description}{mark}")
    return 0
