"""``trueturn flash``: write the firmware shipped inside this package to the board (avrdude).

No toolchain needed: the image is package data (trueturn.link.flashing.firmware_image), the
same bytes the firmware sources build. avrdude is installed separately; without it the
command says how to get it, in one line, and exits 2.
"""

from __future__ import annotations

import argparse
import shlex
import sys

from trueturn.errors import UserError
from trueturn.link.boards import FLASH_BOARDS
from trueturn.link.flashing import (
    avrdude_command,
    board_choice,
    check_flash_port,
    check_image,
    find_avrdude,
    firmware_image,
    run_avrdude,
)
from trueturn.link.problems import PortError, PortProblem, ProblemCode


def add_parser(sub: argparse._SubParsersAction) -> None:
    boards = ", ".join(f"{b.key} ({b.label}: -p {b.part}, {b.baud} baud)"
                       for b in FLASH_BOARDS.values())
    parser = sub.add_parser(
        "flash", help="write the firmware shipped with trueturn to the board (avrdude)",
        description="Upload the firmware image shipped inside this package through the "
                    "board's serial bootloader with avrdude (installed separately). Boards: "
                    f"{boards}. If avrdude says the programmer is not responding, try the "
                    "other bootloader (nano-old / nano-new).")
    parser.add_argument("--port", required=True, help="serial port: /dev/ttyUSB0, COM5, "
                                                      "/dev/cu.usbserial-1410")
    parser.add_argument("--board", choices=list(FLASH_BOARDS), default="nano-new",
                        help="board and bootloader (default nano-new; Uno-class: uno; old "
                             "Nano clones: nano-old; a plain ATmega328 without P: m328)")
    parser.add_argument("--baud", type=int, default=None,
                        help="bootloader speed instead of the board's (e.g. 57600 for an "
                             "ATmega328 with the old bootloader)")
    parser.add_argument("--image", metavar="FILE", default=None,
                        help="an Intel HEX image of your own build instead of the shipped one, "
                             "e.g. the AREF variant: make -C firmware ADC_REF=aref, then "
                             "--image firmware/build-aref/trueturn.hex (hardware/FLASHING.md)")
    parser.add_argument("--dry-run", action="store_true",
                        help="print the exact avrdude command and do nothing")
    parser.add_argument("--no-check", action="store_true",
                        help="after flashing, do not open the port to check that the board "
                             "answers as trueturn")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    board = board_choice(args.board)
    if args.baud is not None and not 1200 <= args.baud <= 2_000_000:
        raise UserError(f"--baud must be 1200..2000000, got {args.baud}")
    image = check_image(args.image) if args.image is not None else firmware_image()
    if not image.is_file():
        raise UserError(f"the firmware image {image} is missing from this installation: "
                        "reinstall trueturn (or run `make firmware-image` in a checkout)")
    avrdude = find_avrdude()
    command = avrdude_command(args.port, board, image, avrdude=avrdude or "avrdude",
                              baud=args.baud)
    if args.dry_run:
        print(shlex.join(command) if not sys.platform.startswith("win")
              else " ".join(f'"{c}"' if " " in c else c for c in command))
        if avrdude is None:
            print(f"note: {PortError(PortProblem(ProblemCode.AVRDUDE_MISSING, args.port))}",
                  file=sys.stderr)
        return 0
    check_flash_port(args.port)
    if avrdude is None:
        raise PortError(PortProblem(ProblemCode.AVRDUDE_MISSING, args.port))
    print(f"flashing {image.name} to {args.port} ({board.label}): {shlex.join(command)}",
          file=sys.stderr)
    run_avrdude(command, args.port, board)
    if args.no_check:
        print(f"flashed {args.port}; check it with `trueturn check --port {args.port}`")
        return 0
    return _answers(args.port)


def _answers(port: str) -> int:
    """Open the freshly flashed board the way it needs and hear its identity."""
    from trueturn.link.ports import open_port
    from trueturn.link.session import BoardSession

    link = open_port(port)
    try:
        ident = BoardSession(link).greet()
    finally:
        link.close()
    print(f"flashed {port}: the board answers as trueturn firmware {ident['firmware_major']}."
          f"{ident['firmware_minor']}.{ident['firmware_patch']}, protocol "
          f"{ident['protocol_version']}; next: `trueturn check --port {port}`")
    return 0
