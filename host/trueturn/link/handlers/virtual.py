"""What every virtual port (sim://, emu://) shares: a serial link without modem lines."""

from __future__ import annotations

from serial.serialutil import SerialBase


class VirtualLineSerial(SerialBase):
    """A pyserial port whose far end is a program: no DTR/RTS/break, modem lines always ready."""

    def _update_dtr_state(self) -> None:
        """No DTR line (a virtual board is not reset by opening the port)."""

    def _update_rts_state(self) -> None:
        """No RTS line."""

    def _update_break_state(self) -> None:
        """Breaks are ignored."""

    @property
    def cts(self) -> bool:
        return True

    @property
    def dsr(self) -> bool:
        return True

    @property
    def ri(self) -> bool:
        return False

    @property
    def cd(self) -> bool:
        return True
