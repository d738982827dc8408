"""Facts about the boards the kit may bring: USB-serial chips, bootloaders, avrdude settings.

One place for what differs between a Nano clone, a classic Nano and a Uno: which USB-serial
chip it carries (found by USB VID:PID, ``trueturn ports``), whether that chip reaches the
link's 500000 baud exactly (computed from each chip's baud-rate generator), how long its
bootloader listens after a reset (``sim://...&bootloader=``, the host's wait after opening),
and what avrdude needs to flash it (``trueturn flash --board``).
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from dataclasses import dataclass

#: The link's baud rate (firmware/avr/main.c: 16 MHz / (8 x 4) with U2X, exact).
LINK_BAUD = 500_000

#: How long a Uno/Nano-class bootloader listens after a reset before it starts the firmware,
#: in seconds (from memory: roughly 0.5 s for the newer small bootloader of Uno-class and
#: recent Nano boards, 1-2 s for the old Nano one; 1.5 s taken). A byte that reaches it in
#: that window makes it wait again from that byte (from memory: both restart their wait on a
#: received character), so a host that talks into the window delays the board further.
BOOTLOADER_WAIT_S = {"new": 0.5, "old": 1.5}

#: After opening a port, how long the host waits with nothing heard before it speaks first:
#: the longest bootloader wait (old, up to about 2 s from memory) plus a margin. A board
#: running our firmware without a reset on open sends its status every second, so it is
#: heard within this time too.
BOOT_QUIET_S = 2.5


@dataclass(frozen=True)
class BaudResult:
    """The rate a chip really makes when asked for ``requested_baud``."""

    requested_baud: int
    actual_baud: float

    @property
    def error_pct(self) -> float:
        return (self.actual_baud / self.requested_baud - 1.0) * 100.0

    @property
    def exact(self) -> bool:
        return abs(self.actual_baud - self.requested_baud) < 1e-6 * self.requested_baud


def _nearest(requested: int, rates: Iterable[float]) -> BaudResult:
    best = min(rates, key=lambda r: abs(r - requested))
    return BaudResult(requested, best)


def ft232r_rates(requested: int) -> Iterable[float]:
    """FT232R/FT231X: 3 MHz / (n + k/8), n = 2..16383, k = 0..7, and the special divisors
    0 (3 Mbaud) and 1 (2 Mbaud). from memory: FTDI application note AN232B-05."""
    yield 3_000_000.0
    yield 2_000_000.0
    n = 3_000_000 / requested
    for whole in range(max(2, int(n) - 1), min(16383, int(n) + 1) + 1):
        for eighths in range(8):
            yield 3_000_000 / (whole + eighths / 8)


def ch340_rates(requested: int) -> Iterable[float]:
    """CH340/CH341: 48 MHz / (2^(12 - 3 ps - fact) x div), ps = 0..3, fact = 0..1,
    div = 2..256. from memory: the Linux ch341 driver's divisor computation."""
    for ps in range(4):
        for fact in range(2):
            base = 48_000_000 / (1 << (12 - 3 * ps - fact))
            for div in range(2, 257):
                yield base / div


def cp2102_rates(requested: int) -> Iterable[float]:
    """CP2102: 24 MHz / N for whole N (from memory, not checked against Silicon Labs'
    AN205, whose table of supported rates lists 500000)."""
    n = 24_000_000 / requested
    for whole in range(max(1, int(n) - 1), int(n) + 2):
        yield 24_000_000 / whole


def avr_u2x_rates(requested: int, f_cpu_hz: int = 16_000_000) -> Iterable[float]:
    """AVR USART in double speed (U2X): f_cpu / (8 (UBRR + 1)), UBRR = 0..4095.
    from memory: ATmega16U2/ATmega328P datasheets, "Baud Rate Calculation" formula."""
    for ubrr in range(4096):
        yield f_cpu_hz / (8 * (ubrr + 1))


@dataclass(frozen=True)
class UsbSerialChip:
    """A USB-serial chip the kit may bring, with its baud-rate generator."""

    key: str
    name: str
    boards: str  # which boards carry it
    vid_pids: tuple[tuple[int, int], ...]
    rates: Callable[[int], Iterable[float]]
    source: str  # where its generator comes from, honestly marked

    def baud(self, requested: int = LINK_BAUD) -> BaudResult:
        """The nearest rate this chip makes for ``requested``."""
        return _nearest(requested, self.rates(requested))


CHIPS: tuple[UsbSerialChip, ...] = (
    UsbSerialChip("ch340", "CH340 (WCH)", "most Nano clones", ((0x1A86, 0x7523),),
                  ch340_rates, "from memory: Linux ch341 driver divisors"),
    UsbSerialChip("ch341", "CH341 (WCH)", "some clones", ((0x1A86, 0x5523),),
                  ch340_rates, "from memory: Linux ch341 driver divisors"),
    UsbSerialChip("ft232r", "FT232R (FTDI)", "classic Nano, some clones", ((0x0403, 0x6001),),
                  ft232r_rates, "from memory: FTDI AN232B-05"),
    UsbSerialChip("ft231x", "FT231X (FTDI)", "some clones", ((0x0403, 0x6015),),
                  ft232r_rates, "from memory: FTDI AN232B-05 (same generator as FT232R)"),
    UsbSerialChip("cp2102", "CP2102 (Silicon Labs)", "some clones", ((0x10C4, 0xEA60),),
                  cp2102_rates, "from memory, not checked"),
    UsbSerialChip("16u2", "ATmega16U2 (8U2)", "Uno and Uno-class boards",
                  ((0x2341, 0x0043), (0x2A03, 0x0043), (0x2341, 0x0001)),
                  avr_u2x_rates, "from memory: ATmega16U2 datasheet, U2X formula at 16 MHz"),
)


def chip_for(vid: int | None, pid: int | None) -> UsbSerialChip | None:
    """The kit's USB-serial chip with this VID:PID, if it is one."""
    if vid is None or pid is None:
        return None
    for chip in CHIPS:
        if (vid, pid) in chip.vid_pids:
            return chip
    return None


@dataclass(frozen=True)
class FlashBoard:
    """What avrdude needs for one kind of board (``trueturn flash --board``)."""

    key: str
    label: str
    part: str  # avrdude -p
    baud: int  # the bootloader's speed, avrdude -b
    bootloader: str  # a BOOTLOADER_WAIT_S key


#: ``-c arduino`` (STK500v1 over the serial bootloader) for all of them. from memory: the
#: newer bootloader talks at 115200 baud, the old Nano one at 57600; a plain ATmega328
#: (no P) has another signature (1E 95 14, the P 1E 95 0F), so avrdude needs -p m328.
FLASH_BOARDS: dict[str, FlashBoard] = {b.key: b for b in (
    FlashBoard("nano-new", "Nano-class, newer bootloader", "m328p", 115200, "new"),
    FlashBoard("nano-old", "Nano-class, old bootloader", "m328p", 57600, "old"),
    FlashBoard("uno", "Uno-class", "m328p", 115200, "new"),
    FlashBoard("m328", "ATmega328 (no P), newer bootloader", "m328", 115200, "new"),
)}
AVRDUDE_PROGRAMMER = "arduino"
