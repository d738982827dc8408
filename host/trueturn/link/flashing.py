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


#: The highest flash address an image may write: 32 KB less the 2 KB the old Nano
#: bootloader takes (the largest of our boards'; Optiboot takes 512 B) -- from memory.
IMAGE_LIMIT_BYTES = 0x7800
#: A custom image file read at most this large (a 30 KB image is about 85 KB of Intel HEX).
IMAGE_MAX_FILE_BYTES = 1024 * 1024


def check_image(path: str | os.PathLike[str]) -> Path:
    """``path`` if it is an Intel HEX flash image that fits below the bootloader, else one
    line naming the file and line (a custom build for ``trueturn flash --image``).

    Intel HEX (Intel, "Hexadecimal Object File Format Specification", rev. A, 1988): records
    ``:LLAAAATT<data>CC``, the checksum the two's complement of the byte sum; types 00 data,
    01 end of file, 02/04 segment and linear extended address (03/05: start address, ignored
    by avrdude). The file must end with the end-of-file record.
    """
    from trueturn.errors import UserError
    from trueturn.files import read_text_file

    name = os.fspath(path)
    try:
        text = read_text_file(path, max_bytes=IMAGE_MAX_FILE_BYTES)
    except UserError as exc:
        raise UserError(f"--image: {exc}") from None
    base = 0
    top = 0
    ended = False
    for number, line in enumerate(text.splitlines(), 1):
        line = line.strip()
        if not line:
            continue
        where = f"--image {name}:{number}"
        if ended:
            raise UserError(f"{where}: a record after the end-of-file record")
        try:
            if not line.startswith(":") or len(line) % 2 == 0:
                raise ValueError
            raw = bytes.fromhex(line[1:])
        except ValueError:
            raise UserError(f"{where}: not an Intel HEX record (a .hex file from "
                            "avr-objcopy -O ihex, as `make -C firmware` writes)") from None
        if len(raw) < 5 or raw[0] != len(raw) - 5:
            raise UserError(f"{where}: the record's length byte does not match")
        if sum(raw) & 0xFF:
            raise UserError(f"{where}: checksum wrong (the file is damaged)")
        kind = raw[3]
        if kind == 0x00:
            top = max(top, base + int.from_bytes(raw[1:3], "big") + raw[0])
        elif kind == 0x01:
            ended = True
        elif kind == 0x02:
            base = int.from_bytes(raw[4:6], "big") << 4
        elif kind == 0x04:
            base = int.from_bytes(raw[4:6], "big") << 16
        elif kind not in (0x03, 0x05):
            raise UserError(f"{where}: unknown record type {kind:02X}")
    if not ended:
        raise UserError(f"--image {name}: no end-of-file record (the file is cut short)")
    if top == 0:
        raise UserError(f"--image {name}: no data")
    if top > IMAGE_LIMIT_BYTES:
        raise UserError(f"--image {name}: {top} bytes reach past {IMAGE_LIMIT_BYTES} (the "
                        "bootloader's area): not an image for this board")
    return Path(path)


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
                echo: Callable[[str], object] = lambda line: sys.stderr.write(line)) -> None:
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
