"""Finding and opening the board: serial port discovery (pyserial list_ports) and URLs."""

from __future__ import annotations

from dataclasses import dataclass

import serial
from serial.tools import list_ports

# USB VID:PID of the USB-serial chips found on Uno/Nano-class boards and their clones.
KNOWN_BRIDGES: dict[tuple[int, int], str] = {
    (0x2341, 0x0043): "Arduino Uno R3 (ATmega16U2)",
    (0x2341, 0x0001): "Arduino Uno (ATmega8U2)",
    (0x2A03, 0x0043): "Uno-class board (ATmega16U2)",
    (0x1A86, 0x7523): "CH340 USB-serial (common Nano clone)",
    (0x1A86, 0x5523): "CH341 USB-serial",
    (0x0403, 0x6001): "FTDI FT232R USB-serial (classic Nano)",
    (0x0403, 0x6015): "FTDI FT231X USB-serial",
    (0x10C4, 0xEA60): "Silicon Labs CP210x USB-serial",
}

URL_HANDLER_PACKAGE = "trueturn.link.handlers"


@dataclass(frozen=True)
class PortInfo:
    """A serial port and whether it looks like a trueturn board."""

    device: str
    description: str
    vid_pid: str | None
    likely_board: str | None


def register_url_handlers() -> None:
    """Make ``sim://`` and ``emu://`` (modules ``protocol_sim``/``protocol_emu``) known to pyserial."""
    if URL_HANDLER_PACKAGE not in serial.protocol_handler_packages:
        serial.protocol_handler_packages.append(URL_HANDLER_PACKAGE)


def list_board_ports() -> list[PortInfo]:
    """All serial ports, likely boards first."""
    found = []
    for port in list_ports.comports():
        vid_pid = None
        likely = None
        if port.vid is not None and port.pid is not None:
            vid_pid = f"{port.vid:04X}:{port.pid:04X}"
            likely = KNOWN_BRIDGES.get((port.vid, port.pid))
        found.append(PortInfo(port.device, port.description or "", vid_pid, likely))
    found.sort(key=lambda p: (p.likely_board is None, p.device))
    return found


def open_port(url: str, baudrate: int = 500_000, timeout_s: float = 0.1) -> serial.SerialBase:
    """Open a real port (``/dev/ttyUSB0``, ``COM3``) or a URL (``sim://bench-grinder``)."""
    register_url_handlers()
    return serial.serial_for_url(url, baudrate=baudrate, timeout=timeout_s)
