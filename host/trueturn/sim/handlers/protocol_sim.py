"""pyserial URL handler ``sim://NAME[?options]``: the virtual board as a serial port.

``NAME`` is a packaged scenario (``bench-grinder``) or a path to a scenario YAML
(``sim://./my-fan.yaml``). Options (all optional):

``realtime=1|0``   1 (default): bytes appear as simulated time follows the wall clock;
                   0: as fast as the host reads (simulated time runs ahead).
``pace=F``         with realtime=1, run simulated time F times faster than the wall clock.
``seed=N``         noise and speed-wander seed (default 1).
``rpm=R``          drive speed (variable-speed scenarios, within their range).
``motor=on|off``   rotor turning (default) or at standstill at power-up.
``noise=F``        scale every disturbance (noise, hum, harmonics, tones, jitter); 0 = clean.
``unbalance=as-found|none``  start with the scenario's hidden unbalance (default) or none.
``tick0=T``        the board clock at power-up (e.g. 4294000000 to see the 32-bit wrap soon).
``tach=F``         a tach fault on about one edge in ten: none (default), missing, double,
                   knocked (5-15 degrees early or late), or off (no tach signal at all);
                   chatter: a burst of 10 extra edges 10 us apart after every edge, which
                   the board's hold-off drops (counted in status.tach_suppressed).
``reset_on_open=1|0``  1: opening the port resets the board, as on a Uno or Nano whose
                   DTR line is wired to reset: its bootloader listens first (nothing sent;
                   bytes written then are swallowed and make it wait again from that
                   byte), then the firmware starts and sends its identity (seq 0).
                   0: the board does not reset (DTR not wired) and has run for a minute:
                   no identity at open, its status every second. Without the option the
                   board powers up as the port opens (identity at once).
``floating=1|2``   that pickup input has nothing connected: it reads a ghost copy of the
                   conversion before it (trueturn.sim.board.FLOATING_CARRY), as an open
                   AVR ADC input does.
``run=steady|coastdown|runup|bump``  what the motor does: runs at speed (default);
                   coastdown: at speed, then switched off, the rotor coasting to a stop;
                   runup: at standstill, then switched on (trueturn.sim.board.run_times says
                   when, and how long a recording covers it: ``trueturn sim describe``);
                   bump: at standstill (tach dark), a pickup's housing struck every ~2 s,
                   the pickups in turn (a bump test: the rotor's free response on its
                   supports, always integrated in time; trueturn.sim.board.BUMP_*).
``response=quasi-static|transient``  how the rotor's 1x follows a changing speed: the steady
                   response of the speed of the moment (default), or the rotor's motion
                   integrated in time, so a lightly damped resonance passed quickly builds
                   up late, peaks later and lower and rings on (trueturn.sim.transient).
``bootloader=new|old``  with reset_on_open=1: the newer bootloader (waits about 0.5 s) or
                   the old Nano one (about 1.5 s); trueturn.link.boards.BOOTLOADER_WAIT_S.

``port.rig`` reaches the running virtual rig: ``add_mass``, ``remove_mass``, ``set_masses``,
``clear_masses``, ``motor_start``, ``motor_stop``, ``set_speed_rpm``, ``speed_rpm``,
``standstill``, ``in_bootloader``, ``bootloader_bytes`` (bytes the host sent into the
bootloader's window), ``exact_response_1x()``, ``unplug()`` (later reads and writes raise
``serial.SerialException`` like a pulled USB cable) and ``reset()`` (the board restarts: a
fresh identity with seq 0, stream stopped, uptime from zero).
"""

from __future__ import annotations

import math
import time
import urllib.parse
from typing import TYPE_CHECKING, Any

from serial.serialutil import PortNotOpenError, SerialException

from trueturn.errors import UserError
from trueturn.link.boards import BOOTLOADER_WAIT_S
from trueturn.link.handlers.virtual import VirtualLineSerial
from trueturn.sim.board import (
    RESET_FLAGS,
    RESPONSES,
    RUNS,
    STEP_TICKS,
    TACH_FAULTS,
    TICK_HZ,
    BoardOptions,
    VirtualBoard,
)
from trueturn.sim.scenario import load_scenario

if TYPE_CHECKING:
    from typing_extensions import Buffer  # what pyserial's stubs take (PEP 688)

_USAGE = ('expected "sim://NAME[?realtime=0|1&pace=F&seed=N&rpm=R&motor=on|off&noise=F'
          '&unbalance=as-found|none&tick0=T&tach=none|missing|double|knocked|off|chatter'
          '&reset_on_open=0|1&bootloader=new|old&floating=1|2&run=steady|coastdown|runup|bump'
          '&response=quasi-static|transient]"')


class Rig(VirtualBoard):
    """The virtual board plus the cable: :meth:`unplug` makes the port fail like a real one."""

    unplugged = False

    def unplug(self) -> None:
        """Pull the virtual USB cable."""
        with self.lock:
            self.unplugged = True

    def reset(self) -> None:
        """Restart the board as a brown-out would, keeping the rotor as it is.

        What the board had not sent yet is lost; its sequence numbers, uptime, edge count and
        stream settings start again from power-up (identity with seq 0 and reset_flags
        brown_out, idle, defaults).
        """
        with self.lock:
            self._out.clear()
            self._rx.clear()
            self._rx_discarding = False
            self._boot_at = None
            self._reset_flags = RESET_FLAGS["brown_out"]
            self._power_up()


class Serial(VirtualLineSerial):
    """A serial port whose other end is the simulated board of a scenario."""

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        self.rig: Rig | None = None
        self.realtime = True
        self.pace = 1.0
        self._wall_start = 0.0
        self._tick_start = 0
        super().__init__(*args, **kwargs)

    # --- pyserial plumbing ------------------------------------------------------------------

    def open(self) -> None:
        name, options = self.from_url(self._check_can_open())
        try:
            scenario = load_scenario(name)
            self.rig = Rig(scenario, options)
        except (UserError, ValueError) as exc:
            raise SerialException(f"sim://{name}: {exc}") from None
        self._wall_start = time.monotonic()
        self._tick_start = self.rig.tick
        self._reconfigure_port()
        self.is_open = True

    def close(self) -> None:
        self.is_open = False
        super().close()

    def _reconfigure_port(self) -> None:
        """Baud rate and framing do not matter to the virtual board."""

    def from_url(self, url: str) -> tuple[str, BoardOptions]:
        """Scenario name (or path) and board options from ``sim://...``."""
        if not url.startswith("sim://"):
            raise SerialException(f"{_USAGE}: not starting with sim:// ({url!r})")
        rest = url[len("sim://"):]
        name, _, query = rest.partition("?")
        if not name:
            raise SerialException(f"{_USAGE}: no scenario name")
        opts = BoardOptions()
        try:
            for key, values in urllib.parse.parse_qs(query, keep_blank_values=True).items():
                value = values[-1]
                if key == "realtime":
                    self.realtime = _flag(value)
                elif key == "pace":
                    self.pace = _number(key, value, 0.01, 1000.0)
                elif key == "seed":
                    opts.seed = int(_number(key, value, 0, 2**32 - 1, whole=True))
                elif key == "rpm":
                    # 0 must not fall back to the nominal speed: at least 1 rpm
                    opts.speed_rpm = _number(key, value, 1.0, 200_000.0)
                elif key == "motor":
                    opts.motor_on = _flag(value)
                elif key == "noise":
                    opts.noise_scale = _number(key, value, 0.0, 1000.0)
                elif key == "unbalance":
                    if value not in ("as-found", "none"):
                        raise ValueError("unbalance must be as-found or none")
                    opts.unbalance = value
                elif key == "tach":
                    if value not in TACH_FAULTS:
                        raise ValueError(f"tach must be one of {', '.join(TACH_FAULTS)}")
                    opts.tach_fault = value
                elif key == "reset_on_open":
                    opts.reset_on_open = _flag(value)
                elif key == "bootloader":
                    if value not in BOOTLOADER_WAIT_S:
                        raise ValueError(f"bootloader must be one of {', '.join(BOOTLOADER_WAIT_S)}")
                    opts.bootloader = value
                elif key == "floating":
                    if value not in ("1", "2"):
                        raise ValueError("floating must be 1 or 2 (the pickup input left open)")
                    opts.floating_channel = int(value) - 1
                elif key == "run":
                    if value not in RUNS:
                        raise ValueError(f"run must be one of {', '.join(RUNS)}")
                    opts.run = value
                elif key == "response":
                    if value not in RESPONSES:
                        raise ValueError(f"response must be one of {', '.join(RESPONSES)}")
                    opts.response = value
                elif key == "tick0":
                    opts.tick0 = int(_number(key, value, 0, 2**32 - 1, whole=True))
                else:
                    raise ValueError(f"unknown option {key!r}")
            if opts.run != "steady" and "motor" in urllib.parse.parse_qs(query):
                raise ValueError("give run= or motor=, not both (a run switches the motor)")
        except ValueError as exc:
            raise SerialException(f"{_USAGE}: {exc}") from None
        return name, opts

    # --- the clock --------------------------------------------------------------------------

    def _check(self) -> Rig:
        if not self.is_open or self.rig is None:
            raise PortNotOpenError()
        if self.rig.unplugged:
            raise SerialException("device disconnected (the virtual USB cable was unplugged)")
        return self.rig

    def _sync(self) -> None:
        """Realtime: bring the simulated clock up to the wall clock."""
        rig = self._check()
        if self.realtime:
            elapsed = (time.monotonic() - self._wall_start) * self.pace
            rig.advance_to(self._tick_start + int(elapsed * TICK_HZ))

    @property
    def in_waiting(self) -> int:
        rig = self._check()
        self._sync()
        if not self.realtime and not rig.output_pending:
            rig.advance_to(rig.tick + STEP_TICKS)
        return rig.output_pending

    def read(self, size: int = 1) -> bytes:
        rig = self._check()
        timeout = self.timeout
        deadline = None if timeout is None else time.monotonic() + timeout
        data = bytearray()
        while len(data) < size:
            self._sync()
            if not self.realtime and rig.output_pending < size - len(data):
                rig.advance_to(rig.tick + STEP_TICKS)
            data += rig.take_output(size - len(data))
            if len(data) >= size or not self.realtime:
                continue
            if deadline is not None and time.monotonic() >= deadline:
                break
            time.sleep(0.002 if deadline is None else
                       max(0.0, min(0.002, deadline - time.monotonic())))
            self._check()
        return bytes(data)

    def write(self, data: Buffer, /) -> int:
        rig = self._check()
        payload = bytes(data)  # as pyserial's to_bytes: any buffer, never text
        self._sync()
        rig.receive(payload)
        return len(payload)

    def reset_input_buffer(self) -> None:
        rig = self._check()
        self._sync()
        rig.take_output()

    def reset_output_buffer(self) -> None:
        self._check()

    @property
    def out_waiting(self) -> int:
        return 0

    @property
    def in_bootloader(self) -> bool:
        """True while the board's bootloader listens (``reset_on_open=1``)."""
        return self._check().in_bootloader

    @property
    def bootloader_bytes(self) -> int:
        """Bytes the host wrote into the bootloader's window (lost, and it waited longer)."""
        return self._check().bootloader_bytes



def _flag(value: str) -> bool:
    low = value.strip().lower()
    if low in ("1", "on", "yes", "true"):
        return True
    if low in ("0", "off", "no", "false"):
        return False
    raise ValueError(f"expected 1/0 or on/off, got {value!r}")


def _number(key: str, value: str, low: float, high: float, whole: bool = False) -> float:
    """A URL option's number, finite and within ``low..high`` (nan, inf or 1e300 would
    reach the physics as a ZeroDivisionError, an endless loop or an overflow)."""
    try:
        number = int(value) if whole else float(value)
    except ValueError:
        raise ValueError(f"{key} must be a number, got {value!r}") from None
    if not (math.isfinite(number) and low <= number <= high):
        raise ValueError(f"{key} must be {low:.12g}..{high:.12g}, got {value!r}")
    return float(number)
