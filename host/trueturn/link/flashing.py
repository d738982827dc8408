"""Flashing the board with the firmware image shipped inside the package, through avrdude.

The image ``trueturn/firmware/trueturn.hex`` is package data: what ``make firmware-image``
builds from firmware/ (a test rebuilds it with avr-gcc and compares byte for byte, so it
cannot go stale). avrdude is installed separately; :func:`avrdude_command` is the exact
command ``trueturn flash`` runs (``--dry-run`` prints it), :func:`run_avrdude` runs it and
turns its failures into :class:`~trueturn.link.problems.PortProblem` codes.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from collections.abc import Callable
from importlib import resources
from pathlib import Path

from trueturn.link.boards import AVRDUDE_PROGRAMMER, FLASH_BOARDS, FlashBoard
from trueturn.link.problems import PortError, PortProblem, ProblemCode, check_port_name

IMAGE_NAME = "trueturn.hex"


def firmware_image() -> Path:
    """The shipped firmware image (Intel HEX) inside the installed package."""
    return Path(str(resources.files("trueturn") / "firmware" / IMAGE_NAME))


def avrdude_command(port: str, board: FlashBoard, image: Path, *, avrdude: str = "avrdude",
                    baud: int | None = None) -> list[str]:
    """The avrdude command that writes ``image`` through the board's serial bootloader.

    ``-D`` leaves the chip erase to the bootloader (it erases page by page, from memory);
    ``flash:w:FILE:i`` writes and then verifies the Intel HEX image.
    """
    return [avrdude, "-p", board.part, "-c", AVRDUDE_PROGRAMMER, "-P", port,
            "-b", str(baud or board.baud), "-D", "-U", f"flash:w:{image}:i"]


def find_avrdude() -> str | None:
    """avrdude on PATH (``AVRDUDE`` names another one), or None."""
    named = os.environ.get("AVRDUDE")
    if named:
        return shutil.which(named) or (named if Path(named).is_file() else None)
    return shutil.which("avrdude")


def check_flash_port(port: str) -> None:
    """Refuse a port avrdude cannot use, in plain words, before running it."""
    if port.startswith(("sim://", "emu://")):
        raise PortError(PortProblem(ProblemCode.BAD_URL, port,
                                    "a virtual rig runs its own firmware: nothing to flash"))
    named = check_port_name(port)
    if named is not None:
        raise PortError(named)


# avrdude's own words for the usual failures (avrdude 6.x/7.x, from memory) -> our codes.
_AVRDUDE_SIGNS: tuple[tuple[str, ProblemCode], ...] = (
    ("permission denied", ProblemCode.PERMISSION_DENIED),
    ("access is denied", ProblemCode.PORT_BUSY),
    ("resource busy", ProblemCode.PORT_BUSY),
    ("no such file or directory", ProblemCode.NO_SUCH_PORT),
    ("cannot find the file", ProblemCode.NO_SUCH_PORT),
    ("can't open device", ProblemCode.NO_SUCH_PORT),
    ("device signature", ProblemCode.WRONG_SIGNATURE),
    ("not in sync", ProblemCode.BOOTLOADER_SILENT),
    ("not responding", ProblemCode.BOOTLOADER_SILENT),
    ("verification error", ProblemCode.FLASH_VERIFY_FAILED),
    ("content mismatch", ProblemCode.FLASH_VERIFY_FAILED),
)


def classify_avrdude(port: str, board: FlashBoard, output: str) -> PortProblem:
    """What went wrong, from avrdude's output of a failed run."""
    low = output.lower()
    for sign, code in _AVRDUDE_SIGNS:
        if sign in low:
            return PortProblem(code, port, board_key=board.key)
    last = next((ln.strip() for ln in reversed(output.splitlines()) if ln.strip()), "")
    return PortProblem(ProblemCode.FLASH_FAILED, port, last, board_key=board.key)


def run_avrdude(command: list[str], port: str, board: FlashBoard,
                echo: Callable[[str], None] = lambda line: sys.stderr.write(line)) -> None:
    """Run avrdude, echoing its output as it comes; raise PortError if it fails."""
    try:
        proc = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.STDOUT,
                                text=True, errors="replace")
    except OSError as exc:
        raise PortError(PortProblem(ProblemCode.AVRDUDE_MISSING, port, str(exc))) from None
    seen: list[str] = []
    assert proc.stdout is not None
    for line in proc.stdout:
        seen.append(line)
        echo(line)
    if proc.wait() != 0:
        raise PortError(classify_avrdude(port, board, "".join(seen)))


def board_choice(key: str) -> FlashBoard:
    """The board by its ``--board`` name."""
    return FLASH_BOARDS[key]
