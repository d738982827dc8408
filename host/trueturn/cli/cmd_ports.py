"""``trueturn ports``: list serial ports, marking the likely boards by USB VID:PID."""

from __future__ import annotations

import argparse
import sys
from dataclasses import asdict
from typing import Any

from trueturn.cli.common import print_json
from trueturn.link.boards import CHIPS, LINK_BAUD, BaudResult
from trueturn.link.ports import list_board_ports


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser("ports", help="list serial ports and mark likely boards",
                            description="List serial ports; likely boards (known USB-serial "
                                        "chips) first, with whether the chip makes the link's "
                                        f"{LINK_BAUD} baud exactly. Virtual rigs: sim://NAME, "
                                        "emu://NAME.")
    parser.add_argument("--chips", action="store_true",
                        help="list the USB-serial chips the kit may bring, their USB VID:PID "
                             f"and the rate each makes for {LINK_BAUD} baud")
    parser.add_argument("--json", action="store_true", help="print JSON")
    parser.set_defaults(run=run)


def baud_words(result: BaudResult) -> str:
    """``500000 baud exact`` or ``500000 baud: makes 500801 (+0.16 %)``."""
    if result.exact:
        return f"{result.requested_baud} baud exact"
    return (f"{result.requested_baud} baud: makes {result.actual_baud:.0f} "
            f"({result.error_pct:+.2f} %)")


def _chips(as_json: bool) -> int:
    rows: list[dict[str, Any]] = []
    for chip in CHIPS:
        b = chip.baud(LINK_BAUD)
        rows.append({"chip": chip.key, "name": chip.name, "boards": chip.boards,
                     "vid_pid": [f"{v:04X}:{p:04X}" for v, p in chip.vid_pids],
                     "baud": LINK_BAUD, "actual_baud": round(b.actual_baud, 3),
                     "error_pct": round(b.error_pct, 3), "exact": b.exact,
                     "source": chip.source})
    if as_json:
        print_json(rows)
        return 0
    for r in rows:
        words = baud_words(BaudResult(r["baud"], r["actual_baud"]))
        print(f"{r['name']:22s} {', '.join(r['vid_pid']):30s} {words:28s} {r['boards']} "
              f"({r['source']})")
    print("Driver notes per system: hardware/FLASHING.md")
    return 0


def _no_ports_hint() -> str:
    if sys.platform.startswith("win"):
        return ("Plug the board in; Device Manager shows it under \"Ports (COM & LPT)\" once "
                "its USB-serial driver is installed (hardware/FLASHING.md)")
    if sys.platform == "darwin":
        return "Plug the board in (ls /dev/cu.*); a CH340 clone may need a driver on old macOS"
    return ("Plug the board in and try another USB lead (charge-only leads carry no data); "
            "dmesg | tail names the port")


def run(args: argparse.Namespace) -> int:
    if args.chips:
        return _chips(args.json)
    ports = list_board_ports()
    if args.json:
        print_json([asdict(p) for p in ports])
        return 0
    if not ports:
        print(f"No serial ports found. {_no_ports_hint()}. Without a board try: trueturn demo")
        return 0
    for p in ports:
        mark = ""
        if p.likely_board:
            baud = BaudResult(p.link_baud, p.link_baud_actual or 0.0)
            mark = f"  <- likely board: {p.likely_board}; {baud_words(baud)}"
        print(f"{p.device:20s} {p.vid_pid or '-':10s} {p.description}{mark}")
    return 0
