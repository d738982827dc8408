"""Port trouble in plain words: what went wrong with a serial port or the board behind it.

The facts travel as a :class:`PortProblem` (a code and what is known beside it), found from
the operating system's error by :func:`classify_error`; :func:`problem_text` is the one place
that puts them into words, for ``ports``, ``record``, ``check``, ``flash`` and the app alike.
"""

from __future__ import annotations

import errno
import os
import re
import sys
from dataclasses import dataclass, field
from enum import Enum
from pathlib import Path

import serial

from trueturn.errors import UserError


class ProblemCode(str, Enum):
    """What is wrong with a port, as far as the host can tell."""

    PERMISSION_DENIED = "permission_denied"  # the user may not open it (Linux group)
    PORT_BUSY = "port_busy"  # another program holds it
    NO_SUCH_PORT = "no_such_port"  # nothing of that name (unplugged, a typo, another OS's name)
    MAC_DIAL_IN = "mac_dial_in"  # macOS /dev/tty.* given where /dev/cu.* is meant
    PORT_VANISHED = "port_vanished"  # it was open and went away (unplugged)
    SILENT_BOARD = "silent_board"  # opened, nothing heard and no answer
    NOT_TRUETURN = "not_trueturn"  # bytes arrive, but no trueturn frames
    OTHER_DEFINITIONS = "other_definitions"  # a trueturn board of another version
    BAD_URL = "bad_url"  # sim:// or emu:// with a mistake in it
    AVRDUDE_MISSING = "avrdude_missing"  # trueturn flash needs avrdude, installed separately
    BOOTLOADER_SILENT = "bootloader_silent"  # avrdude got no answer (other bootloader speed?)
    WRONG_SIGNATURE = "wrong_signature"  # the chip is not the --board's part (328 vs 328P)
    FLASH_VERIFY_FAILED = "flash_verify_failed"  # written, but read back different
    FLASH_FAILED = "flash_failed"  # avrdude failed otherwise (its last line kept)
    OTHER = "other"  # the system's own words


@dataclass(frozen=True)
class PortProblem:
    """One problem with one port; ``detail`` keeps the system's own words."""

    code: ProblemCode
    port: str
    detail: str = ""
    platform: str = field(default_factory=lambda: sys.platform)
    group: str | None = None  # PERMISSION_DENIED on Linux: the group owning the device
    bytes_heard: int = 0  # NOT_TRUETURN: how many bytes came without a valid frame
    waited_s: float = 0.0  # SILENT_BOARD, NOT_TRUETURN: how long the host listened
    board_protocol: tuple[int, int] | None = None  # OTHER_DEFINITIONS: (version, hash)
    host_protocol: tuple[int, int] | None = None
    board_key: str | None = None  # flashing: the --board used


class PortError(UserError, serial.SerialException):
    """A port or board problem, carrying its :class:`PortProblem` (its text is one line).

    Also a ``serial.SerialException``, so code that guards a port with pyserial's exception
    keeps working."""

    def __init__(self, problem: PortProblem) -> None:
        self.problem = problem
        super().__init__(problem_text(problem))


# Linux errno of open(2) on a tty, and what it means for a person.
_ERRNO_CODES = {
    errno.EACCES: ProblemCode.PERMISSION_DENIED,
    errno.EPERM: ProblemCode.PERMISSION_DENIED,
    errno.EBUSY: ProblemCode.PORT_BUSY,
    errno.EAGAIN: ProblemCode.PORT_BUSY,  # flock(2) of an exclusive open: someone holds it
    errno.ENOENT: ProblemCode.NO_SUCH_PORT,
    errno.ENODEV: ProblemCode.NO_SUCH_PORT,
    errno.ENXIO: ProblemCode.NO_SUCH_PORT,
    errno.EIO: ProblemCode.PORT_VANISHED,
}
# Windows: pyserial passes on the system error as text only ("could not open port 'COM5':
# PermissionError(13, 'Access is denied.', None, 5)"); the WinError numbers name the cause.
_WIN_ERRORS = {
    5: ProblemCode.PORT_BUSY,  # ERROR_ACCESS_DENIED: another program has the COM port open
    2: ProblemCode.NO_SUCH_PORT,  # ERROR_FILE_NOT_FOUND
    3: ProblemCode.NO_SUCH_PORT,  # ERROR_PATH_NOT_FOUND
    31: ProblemCode.PORT_VANISHED,  # ERROR_GEN_FAILURE: device not functioning
    22: ProblemCode.PORT_VANISHED,  # ERROR_BAD_COMMAND: device gone
    1167: ProblemCode.PORT_VANISHED,  # ERROR_DEVICE_NOT_CONNECTED
}
_WIN_ERROR_RE = re.compile(r"(?:WinError |, None, )(\d+)")
_WINDOWS_PORT = re.compile(r"^(?:\\\\\.\\)?COM\d+$", re.IGNORECASE)


def _owning_group(port: str) -> str | None:
    """The group that owns a device file (Linux, macOS), if it can be read."""
    try:
        import grp

        return grp.getgrgid(os.stat(port).st_gid).gr_name
    except (ImportError, OSError, KeyError):
        return None


def classify_error(port: str, exc: BaseException, *, opening: bool = True,
                   platform: str | None = None) -> PortProblem:
    """The problem behind an exception from opening (or using) a port.

    ``opening`` False: the port was open and worked, so a missing device means it vanished.
    ``platform``: ``sys.platform`` unless given (tests of other systems' errors).
    """
    platform = platform or sys.platform
    detail = str(exc).strip() or type(exc).__name__
    if port.startswith(("sim://", "emu://")):
        return PortProblem(ProblemCode.BAD_URL if opening else ProblemCode.PORT_VANISHED,
                           port, detail, platform)
    code = ProblemCode.OTHER
    number = getattr(exc, "errno", None)
    if isinstance(number, int) and number in _ERRNO_CODES and not platform.startswith("win"):
        code = _ERRNO_CODES[number]
    elif platform.startswith("win"):
        found = _WIN_ERROR_RE.findall(detail)
        for n in reversed(found):
            if int(n) in _WIN_ERRORS:
                code = _WIN_ERRORS[int(n)]
                break
        else:
            if "PermissionError" in detail or "Access is denied" in detail:
                code = ProblemCode.PORT_BUSY
            elif "FileNotFoundError" in detail:
                code = ProblemCode.NO_SUCH_PORT
    elif "disconnected" in detail or "returned no data" in detail:
        code = ProblemCode.PORT_VANISHED  # pyserial on POSIX: a read on an unplugged port
    if not opening and code in (ProblemCode.NO_SUCH_PORT, ProblemCode.OTHER):
        code = ProblemCode.PORT_VANISHED
    if code is ProblemCode.NO_SUCH_PORT and platform == "darwin" and port.startswith("/dev/tty."):
        code = ProblemCode.MAC_DIAL_IN
    group = _owning_group(port) if code is ProblemCode.PERMISSION_DENIED else None
    return PortProblem(code, port, detail, platform, group=group)


def check_port_name(port: str, platform: str | None = None) -> PortProblem | None:
    """A problem with the name alone, before opening: macOS's dial-in ``/dev/tty.*`` names
    wait for a modem's carrier; the call-out ``/dev/cu.*`` twin is the one to use."""
    platform = platform or sys.platform
    if platform == "darwin" and port.startswith("/dev/tty.") and Path(port).name != "tty":
        return PortProblem(ProblemCode.MAC_DIAL_IN, port, platform=platform)
    return None


def _name_hint(port: str, platform: str) -> str:
    """Where this system's serial ports are, when the name given is not one of them."""
    if platform.startswith("win"):
        if not _WINDOWS_PORT.match(port):
            return ("on Windows a serial port is called COM3, COM4, ...: Device Manager lists "
                    "them under \"Ports (COM & LPT)\"")
        return "unplugged, or a charge-only USB lead (it powers the board but carries no data)?"
    if platform == "darwin":
        return ("on macOS the board is /dev/cu.usbserial-..., /dev/cu.wchusbserial... or "
                "/dev/cu.usbmodem... (ls /dev/cu.*)")
    if _WINDOWS_PORT.match(port):
        return "on Linux the board is /dev/ttyUSB0 (Nano-class) or /dev/ttyACM0 (Uno-class)"
    return "unplugged, or a charge-only USB lead (it powers the board but carries no data)?"


def _avrdude_hint(platform: str) -> str:
    """How to install avrdude on this system."""
    if platform.startswith("win"):
        return ("download the Windows release of avrdude (github.com/avrdudes/avrdude, "
                "Releases), unpack it and add its folder to PATH, or set AVRDUDE to the full "
                "path of avrdude.exe")
    if platform == "darwin":
        return "install it with Homebrew: `brew install avrdude`"
    return ("Debian/Ubuntu: `sudo apt-get install avrdude`; Fedora: `sudo dnf install avrdude`; "
            "Arch: `sudo pacman -S avrdude`")


def problem_text(p: PortProblem) -> str:
    """The problem in one line of plain words, with what to do about it."""
    port = p.port
    flash = f"flash it with `trueturn flash --port {port}`"
    c = ProblemCode
    if p.code is c.PERMISSION_DENIED:
        if p.platform.startswith("linux"):
            group = p.group or "dialout"
            return (f"permission denied on {port}: your user is not in the group '{group}' "
                    f"that owns it; run `sudo usermod -aG {group} $USER`, then log out and back "
                    "in (or reboot)")
        return f"permission denied on {port} ({p.detail})"
    if p.code is c.PORT_BUSY:
        extra = ("; on Linux a modem service may probe a new port for a few seconds after it is "
                 "plugged in: wait and retry" if p.platform.startswith("linux") else "")
        return (f"{port} is busy: another program holds it (trueturn in another window, a "
                f"serial monitor, avrdude): close it and try again{extra}")
    if p.code is c.NO_SUCH_PORT:
        return (f"no serial port {port}: {_name_hint(port, p.platform)}; "
                "`trueturn ports` lists what is plugged in")
    if p.code is c.MAC_DIAL_IN:
        twin = "/dev/cu." + port[len("/dev/tty."):]
        return (f"{port} is macOS's dial-in name, which waits for a modem: use {twin} "
                "(`trueturn ports` lists the cu. names)")
    if p.code is c.PORT_VANISHED:
        said = f"; {p.detail}" if p.detail else ""
        return (f"lost the board: {port} went away (the USB lead was pulled, or the board lost "
                f"power{said})")
    if p.code is c.SILENT_BOARD:
        return (f"nothing answered on {port} within {p.waited_s:.1f} s: the board has no "
                "trueturn firmware (a new board, or another sketch that stays quiet), or it is "
                f"not a board: {flash}")
    if p.code is c.NOT_TRUETURN:
        return (f"{port} sends bytes that are not trueturn frames ({p.bytes_heard} bytes, none "
                f"valid): another sketch runs on the board, or it is another device: {flash}")
    if p.code is c.OTHER_DEFINITIONS:
        theirs = p.board_protocol or (0, 0)
        ours = p.host_protocol or (0, 0)
        return (f"board speaks protocol {theirs[0]} (definitions {theirs[1]:#010x}), this host "
                f"speaks {ours[0]} ({ours[1]:#010x}): flash the firmware of this version "
                f"(`trueturn flash --port {port}`)")
    if p.code is c.BAD_URL:
        return f"cannot open {port}: {p.detail}"
    if p.code is c.AVRDUDE_MISSING:
        return ("avrdude is not installed (trueturn flash runs it to write the firmware): "
                f"{_avrdude_hint(p.platform)}; `trueturn flash --dry-run` prints the command")
    if p.code is c.BOOTLOADER_SILENT:
        other = "nano-new" if p.board_key == "nano-old" else "nano-old"
        return (f"the bootloader on {port} did not answer avrdude: try `--board {other}` (the "
                "other bootloader speed), close every program using the port, and if it still "
                "fails press the board's reset button just as avrdude starts")
    if p.code is c.WRONG_SIGNATURE:
        return (f"the chip on {port} is not the one --board {p.board_key} expects: a plain "
                "ATmega328 (no P) needs `--board m328`, an ATmega328P any of the others "
                "(read the chip's top); other chips cannot run this firmware")
    if p.code is c.FLASH_VERIFY_FAILED:
        return (f"avrdude wrote the firmware to {port} but read back something else: use a "
                "short USB lead straight into the laptop (no hub) and flash again")
    if p.code is c.FLASH_FAILED:
        return f"avrdude failed on {port}: {p.detail}"
    return f"cannot open {port}: {p.detail}"
