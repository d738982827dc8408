"""A conversation with a board (real, ``sim://`` or ``emu://``): commands, replies, the stream.

One place for: sending host commands with their own sequence numbers, waiting for the
``reply`` that echoes them, refusing a board whose protocol version or definition hash differ
from ours (protocol/SPEC.md §5), and reading the stream through the one StreamDecoder.
"""

from __future__ import annotations

import time
from collections import deque
from collections.abc import Callable
from typing import Any

import serial

from trueturn.errors import UserError
from trueturn.link.catalogue import Catalogue, load_catalogue
from trueturn.link.codec import LinkEvent, Message, StreamDecoder, encode_frame


class BoardError(UserError):
    """The board refused a command, did not answer, or is not one we can talk to."""


class LinkLost(UserError):
    """The port went away (unplugged, closed, board gone)."""


def mismatch_message(identity: dict[str, Any], catalogue: Catalogue) -> str | None:
    """None when the board speaks our protocol, else one line naming both sides."""
    theirs = (identity["protocol_version"], identity["definition_hash"])
    ours = (catalogue.protocol_version, catalogue.definition_hash)
    if theirs == ours:
        return None
    return (f"board speaks protocol {theirs[0]} (definitions {theirs[1]:#010x}), this host speaks "
            f"{ours[0]} ({ours[1]:#010x}): flash the firmware of this version "
            "(make -C firmware flash)")


class BoardSession:
    """Commands and stream over an open pyserial port (see trueturn.link.ports.open_port)."""

    def __init__(self, port: serial.SerialBase, catalogue: Catalogue | None = None,
                 on_bytes: Callable[[bytes], None] | None = None) -> None:
        self.port = port
        self.catalogue = catalogue or load_catalogue()
        self.decoder = StreamDecoder(self.catalogue)
        self.identity: dict[str, Any] | None = None
        self.stream_config: dict[str, Any] | None = None
        self._on_bytes = on_bytes
        self._seq = 0
        self._pending: deque[Message | LinkEvent] = deque()

    # -- low level -------------------------------------------------------------------------
    def send(self, name: str, values: dict[str, Any] | None = None) -> int:
        """Send one host command; return the sequence number it carried."""
        seq = self._seq
        self._seq = (self._seq + 1) & 0xFF
        try:
            self.port.write(encode_frame(name, seq, values, self.catalogue))
        except (serial.SerialException, OSError) as exc:
            raise LinkLost(f"lost the board while sending {name}: {exc}") from None
        return seq

    def poll(self) -> list[Message | LinkEvent]:
        """Read what the port has (waiting at most the port's timeout) and decode it."""
        try:
            data = self.port.read(max(1, self.port.in_waiting))
        except (serial.SerialException, OSError) as exc:
            raise LinkLost(f"lost the board: {exc}") from None
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
                        code = self.catalogue.error_codes.get(item["error"], str(item["error"]))
                        raise BoardError(f"board refused {name}: {code}")
                    replied = True
                elif expect is not None and isinstance(item, Message) and item.name == expect:
                    wanted = item
                else:
                    self._pending.append(item)
            if replied and (expect is None or wanted is not None):
                return wanted
        raise BoardError(f"no answer from the board to {name} within {timeout_s:g} s "
                         "(wrong port, wrong baud rate, or no trueturn firmware?)")

    # -- the usual conversation ------------------------------------------------------------
    def identify(self, timeout_s: float = 3.0) -> dict[str, Any]:
        """Ask who the board is; refuse a protocol mismatch with a message naming both."""
        msg = self.command("identify", expect="identity", timeout_s=timeout_s)
        assert msg is not None
        identity = dict(msg.values)
        problem = mismatch_message(identity, self.catalogue)
        if problem:
            raise BoardError(problem)
        self.identity = identity
        return identity

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
