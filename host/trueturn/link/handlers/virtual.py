"""What every virtual port (sim://, emu://) shares: a serial link without modem lines."""

from __future__ import annotations

from serial.serialutil import SerialBase, SerialException


class VirtualLineSerial(SerialBase):
    """A pyserial port whose far end is a program: no DTR/RTS/break, modem lines always ready."""

    def _check_can_open(self) -> str:
        """pyserial's rule for open(): not open already, and a port (URL) is set; the URL."""
        if self.is_open:
            raise SerialException("Port is already open.")
        if self.port is None:
            raise SerialException("Port must be configured before it can be used.")
        return self.port

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
