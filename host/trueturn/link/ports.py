"""Finding and opening the board: serial port discovery (pyserial list_ports) and URLs."""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any

import serial
from serial.tools import list_ports

from trueturn.link.boards import CHIPS, LINK_BAUD, chip_for
from trueturn.link.problems import PortError, check_port_name, classify_error

# USB VID:PID of the USB-serial chips found on Uno/Nano-class boards and their clones.
KNOWN_BRIDGES: dict[tuple[int, int], str] = {
    vid_pid: f"{chip.name}, {chip.boards}" for chip in CHIPS for vid_pid in chip.vid_pids}

#: packages pyserial searches for ``protocol_<scheme>`` modules, by name: the simulated
#: and emulated boards live with the simulator, which link never imports
URL_HANDLER_PACKAGES = ("trueturn.sim.handlers",)


@dataclass(frozen=True)
class PortInfo:
    """A serial port and whether it looks like a trueturn board."""

    device: str
    description: str
    vid_pid: str | None
    likely_board: str | None
    chip: str | None = None  # trueturn.link.boards.UsbSerialChip.key
    link_baud: int = LINK_BAUD
    link_baud_actual: float | None = None  # what the chip makes when asked for link_baud
    link_baud_error_pct: float | None = None


def register_url_handlers() -> None:
    """Make ``sim://`` and ``emu://`` (modules ``protocol_sim``/``protocol_emu``) known to pyserial."""
    for package in URL_HANDLER_PACKAGES:
        if package not in serial.protocol_handler_packages:
            serial.protocol_handler_packages.append(package)


def port_info(device: str, description: str, vid: int | None, pid: int | None) -> PortInfo:
    """What is known about one port from its USB VID:PID."""
    vid_pid = f"{vid:04X}:{pid:04X}" if vid is not None and pid is not None else None
    chip = chip_for(vid, pid)
    if chip is None:
        return PortInfo(device, description, vid_pid, None)
    baud = chip.baud(LINK_BAUD)
    return PortInfo(device, description, vid_pid, f"{chip.name}, {chip.boards}", chip.key,
                    LINK_BAUD, baud.actual_baud, round(baud.error_pct, 3))


def list_board_ports() -> list[PortInfo]:
    """All serial ports, likely boards first."""
    found = [port_info(p.device, p.description or "", p.vid, p.pid)
             for p in list_ports.comports()]
    found.sort(key=lambda p: (p.likely_board is None, p.device))
    return found


def open_port(url: str, baudrate: int = LINK_BAUD, timeout_s: float = 0.1) -> serial.Serial:
    """Open a real port (``/dev/ttyUSB0``, ``COM3``) or a URL (``sim://bench-grinder``).

    A port that cannot be opened raises :class:`~trueturn.link.problems.PortError` saying
    why in plain words (permission, busy, no such port, macOS dial-in name, ...). On POSIX a
    real port is opened exclusively, so a second program cannot read the same board.
    """
    register_url_handlers()
    named = check_port_name(url)
    if named is not None:
        raise PortError(named)
    virtual = "://" in url
    extra: dict[str, Any] = {"exclusive": True} if os.name == "posix" and not virtual else {}
    try:
        return serial.serial_for_url(url, baudrate=baudrate, timeout=timeout_s, **extra)
    except PortError:
        raise
    except (serial.SerialException, OSError, ValueError) as exc:
        raise PortError(classify_error(url, exc)) from None
