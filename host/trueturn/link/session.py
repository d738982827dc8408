"""A conversation with a board (real, ``sim://`` or ``emu://``): commands, replies, the stream.

One place for: opening the conversation the way a real board needs (:meth:`BoardSession.greet`:
a Uno or Nano resets when its port opens and sits in its bootloader for a while, so the host
listens first and never talks into that window), sending host commands with their own
sequence numbers, waiting for the ``reply`` that echoes them, refusing a board whose protocol
version or definition hash differ from ours (protocol/SPEC.md §5), and reading the stream
through the one StreamDecoder.
"""

from __future__ import annotations

import time
from collections import deque
from collections.abc import Callable
from enum import Enum
from typing import Any

import serial

from trueturn.errors import UserError
from trueturn.link.boards import BOOT_QUIET_S
from trueturn.link.catalogue import Catalogue, load_catalogue
from trueturn.link.codec import LinkEvent, Message, StreamDecoder, encode_frame
from trueturn.link.problems import PortError, PortProblem, ProblemCode, classify_error

#: Frames heard this soon after opening may be left from before the reset that opening
#: gave: they do not prove the firmware runs.
SETTLE_S = 0.2
#: This many bytes without one valid frame: whatever talks there is not a trueturn board.
NOT_TRUETURN_BYTES = 2048


class BoardError(UserError):
    """The board refused a command, did not answer, or is not one we can talk to."""


class BoardProblem(BoardError, PortError):
    """A board that is not one we can talk to (silent, another sketch, other definitions)."""


class LinkLost(PortError):
    """The port went away (unplugged, closed, board gone)."""


class Greeting(str, Enum):
    """How the conversation opened (:meth:`BoardSession.greet`)."""

    POWER_UP = "power_up"  # the board started (reset on open, or just powered) and said who
    RUNNING = "running"  # it runs already (no reset on open): asked who it is
    QUIET = "quiet"  # nothing heard in the bootloader's longest wait: asked who it is


class GreetPhase(str, Enum):
    """What :meth:`BoardSession.greet` is doing, for a screen to say."""

    WAITING_FOR_START = "waiting_for_start"  # listening: the board may be in its bootloader
    ASKING = "asking"  # sent identify, waiting for the answer


def _port_name(port: Any) -> str:
    return str(getattr(port, "port", None) or getattr(port, "name", None) or "the port")


def mismatch_problem(identity: dict[str, Any], catalogue: Catalogue,
                     port: str = "PORT") -> PortProblem | None:
    """None when the board speaks our protocol, else the problem naming both sides."""
    theirs = (int(identity["protocol_version"]), int(identity["definition_hash"]))
    ours = (catalogue.protocol_version, catalogue.definition_hash)
    if theirs == ours:
        return None
    return PortProblem(ProblemCode.OTHER_DEFINITIONS, port, board_protocol=theirs,
                       host_protocol=ours)


def mismatch_message(identity: dict[str, Any], catalogue: Catalogue,
                     port: str = "PORT") -> str | None:
    """None when the board speaks our protocol, else one line naming both sides."""
    problem = mismatch_problem(identity, catalogue, port)
    return None if problem is None else BoardProblem(problem).args[0]


class BoardSession:
    """Commands and stream over an open pyserial port (see trueturn.link.ports.open_port)."""

    def __init__(self, port: serial.Serial, catalogue: Catalogue | None = None,
                 on_bytes: Callable[[bytes], None] | None = None) -> None:
        self.port = port
        self.catalogue = catalogue or load_catalogue()
        self.decoder = StreamDecoder(self.catalogue)
        self.identity: dict[str, Any] | None = None
        self.stream_config: dict[str, Any] | None = None
        self._on_bytes = on_bytes
        self._seq = 0
        self._pending: deque[Message | LinkEvent] = deque()
        self.greeting: Greeting | None = None  # how greet() found the board

    # -- low level -------------------------------------------------------------------------
    def send(self, name: str, values: dict[str, Any] | None = None) -> int:
        """Send one host command; return the sequence number it carried."""
        seq = self._seq
        self._seq = (self._seq + 1) & 0xFF
        try:
            self.port.write(encode_frame(name, seq, values, self.catalogue))
        except (serial.SerialException, OSError) as exc:
            raise LinkLost(classify_error(_port_name(self.port), exc, opening=False)) from None
        return seq

    def poll(self) -> list[Message | LinkEvent]:
        """Read what the port has (waiting at most the port's timeout) and decode it."""
        try:
            data = self.port.read(max(1, self.port.in_waiting))
        except (serial.SerialException, OSError) as exc:
            raise LinkLost(classify_error(_port_name(self.port), exc, opening=False)) from None
        if not data:
            return []
        if self._on_bytes is not None:
            self._on_bytes(data)
        items = self.decoder.feed(data)
        for item in items:
            if isinstance(item, Message):
                if item.name == "identity":
                    self.identity = dict(item.values)
                elif item.name == "stream_config":
                    self.stream_config = dict(item.values)
        return items

    def read(self) -> list[Message | LinkEvent]:
        """Everything decoded since the last call: items held back by command() first."""
        items = list(self._pending)
        self._pending.clear()
        return items + self.poll()

    def command(self, name: str, values: dict[str, Any] | None = None, *,
                expect: str | None = None, timeout_s: float = 2.0) -> Message | None:
        """Send a command, wait for its reply (and the ``expect`` message if given).

        Other messages that arrive meanwhile are kept for :meth:`read`. Raises BoardError
        when the board answers with an error code or not at all.
        """
        if name == "identify":
            self.decoder.expect_identity()
        seq = self.send(name, values)
        type_id = self.catalogue.by_name(name).type_id
        deadline = time.monotonic() + timeout_s
        replied = False
        wanted: Message | None = None
        while time.monotonic() < deadline:
            for item in self.poll():
                if (isinstance(item, Message) and item.name == "reply"
                        and item["command_type"] == type_id and item["command_seq"] == seq):
                    if item["error"]:
                        error = int(item.values["error"])
                        code = self.catalogue.error_codes.get(error, str(error))
                        raise BoardError(f"board refused {name}: {code}")
                    replied = True
                elif expect is not None and isinstance(item, Message) and item.name == expect:
                    wanted = item
                else:
                    self._pending.append(item)
            if replied and (expect is None or wanted is not None):
                return wanted
        if name == "identify":
            c = self.decoder.counters
            code = (ProblemCode.NOT_TRUETURN if c.bytes_in and not c.frames_ok
                    else ProblemCode.SILENT_BOARD)
            raise BoardProblem(PortProblem(code, _port_name(self.port), bytes_heard=c.bytes_in,
                                           waited_s=timeout_s))
        raise BoardError(f"no answer from the board to {name} within {timeout_s:g} s "
                         "(wrong port, wrong baud rate, or no trueturn firmware?)")

    # -- the usual conversation ------------------------------------------------------------
    def greet(self, *, quiet_s: float = BOOT_QUIET_S, answer_s: float = 3.0,
              on_phase: Callable[[GreetPhase], object] | None = None) -> dict[str, Any]:
        """Open the conversation right after the port opened, the way a real board needs.

        Opening a Uno's or Nano's port pulses DTR, which resets the board into its
        bootloader for a while (trueturn.link.boards.BOOTLOADER_WAIT_S) before our firmware
        starts and sends its identity; bytes sent into that window are lost and make the
        bootloader wait longer. So nothing is sent until one of:

        * the board's identity arrives (it reset on open, or just powered up): done, no
          question asked, and it is no board restart (``greeting`` POWER_UP);
        * a valid frame of ours arrives later than SETTLE_S after opening: the firmware
          runs already (a board that does not reset on open); a stream left running is
          stopped, then ``identify`` is sent (RUNNING);
        * ``quiet_s`` pass with nothing heard: ``identify`` is sent (QUIET).

        Returns the identity; raises :class:`BoardProblem` for a board that stays silent,
        sends bytes that are not our frames, or speaks other definitions (named both).
        """
        started = time.monotonic()
        if on_phase is not None:
            on_phase(GreetPhase.WAITING_FOR_START)
        self.greeting = None
        running = streaming = False
        while not running and time.monotonic() - started < quiet_s:
            items = self.poll()
            self._pending.extend(items)
            settled = time.monotonic() - started >= SETTLE_S
            for item in items:
                if not isinstance(item, Message):
                    continue
                if item.name == "identity":
                    self.greeting = Greeting.POWER_UP
                    return self._checked(dict(item.values))
                if settled:
                    running = True
                    streaming = streaming or item.name == "samples" or (
                        item.name == "status" and self.catalogue.device_states.get(
                            int(item.values["state"])) == "streaming")
            self._refuse_noise(time.monotonic() - started)
        self.greeting = Greeting.RUNNING if running else Greeting.QUIET
        if on_phase is not None:
            on_phase(GreetPhase.ASKING)
        if streaming:
            try:
                self.command("stop")
            except BoardError:
                pass  # it stopped by itself meanwhile (not_streaming): all the same
        identity = self._ask_identity(answer_s)
        if identity is None:
            c = self.decoder.counters
            waited = time.monotonic() - started
            code = ProblemCode.NOT_TRUETURN if c.bytes_in else ProblemCode.SILENT_BOARD
            raise BoardProblem(PortProblem(code, _port_name(self.port), bytes_heard=c.bytes_in,
                                           waited_s=waited))
        return self._checked(identity)

    def _refuse_noise(self, waited_s: float) -> None:
        """Many bytes and not one valid frame: another sketch or device talks there."""
        c = self.decoder.counters
        if c.bytes_in >= NOT_TRUETURN_BYTES and c.frames_ok == 0:
            raise BoardProblem(PortProblem(ProblemCode.NOT_TRUETURN, _port_name(self.port),
                                           bytes_heard=c.bytes_in, waited_s=waited_s))

    def _ask_identity(self, timeout_s: float) -> dict[str, Any] | None:
        """Send ``identify``; the first identity within ``timeout_s`` (its answer, or the
        power-up identity of a bootloader that held on longer), or None."""
        self.decoder.expect_identity()
        seq = self.send("identify")
        type_id = self.catalogue.by_name("identify").type_id
        deadline = time.monotonic() + timeout_s
        found: dict[str, Any] | None = None
        replied = False
        while time.monotonic() < deadline and not (found is not None and replied):
            for item in self.poll():
                if (isinstance(item, Message) and item.name == "reply"
                        and item["command_type"] == type_id and item["command_seq"] == seq):
                    replied = True
                elif isinstance(item, Message) and item.name == "identity":
                    found = dict(item.values)
                    replied = replied or item.seq == 0  # a late power-up: no reply comes
                else:
                    self._pending.append(item)
            self._refuse_noise(timeout_s)
        return found

    def _checked(self, identity: dict[str, Any]) -> dict[str, Any]:
        problem = mismatch_problem(identity, self.catalogue, _port_name(self.port))
        if problem is not None:
            raise BoardProblem(problem)
        self.identity = identity
        return identity

    def identify(self, timeout_s: float = 3.0) -> dict[str, Any]:
        """Ask who the board is; refuse a protocol mismatch with a message naming both."""
        msg = self.command("identify", expect="identity", timeout_s=timeout_s)
        assert msg is not None
        return self._checked(dict(msg.values))

    def configure(self, rate_hz: int, channels: int, tach_edge: int = 1) -> dict[str, Any]:
        msg = self.command("configure", {"rate_hz": rate_hz, "channels": channels,
                                         "tach_edge": tach_edge}, expect="stream_config")
        assert msg is not None
        return dict(msg.values)

    def start(self) -> dict[str, Any]:
        msg = self.command("start", expect="stream_config")
        assert msg is not None
        return dict(msg.values)

    def stop(self) -> None:
        self.command("stop")
