"""Protocol v1 codec: frames <-> messages, and a stream decoder that counts every loss.

Frame layout before COBS (protocol/SPEC.md): ``type u8 | seq u8 | payload | CRC-16 (big-endian)``.
On the wire: ``COBS(frame) | 0x00``. All payload fields are little-endian.
"""

from __future__ import annotations

import struct
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any, NamedTuple, overload

import numpy as np

from trueturn.link.catalogue import FIELD_FORMATS, Catalogue, MessageDef, load_catalogue
from trueturn.link.cobs import CobsError, cobs_encode, cobs_unstuff
from trueturn.link.crc import crc16_ibm3740

# Error kinds a frame can be rejected with; the golden invalid vectors name the first six.
# The stream decoder adds two checks of meaning (SPEC.md section 3): ``wrong_direction``, a
# host command type arriving from the board, and ``bad_value``, a field outside its
# physical range (SPEC.md section 4, "Ranges").
FRAME_ERRORS = ("cobs", "too_short", "too_long", "crc", "unknown_type", "bad_length",
                "wrong_direction", "bad_value")

# Physical ranges of board fields come from the catalogue's ``limits`` (SPEC.md section 4.9);
# outside them a frame that passed its CRC is still corrupt (or from no board of ours) and is
# refused, the field named.


# The high bytes a little-endian u16 sample of an n-bit ADC can have (n = 8..16)
_HIGH_BYTES = {bits: bytes(range(1 << (bits - 8))) for bits in range(8, 17)}


class FrameError(ValueError):
    """A frame was rejected; ``kind`` is one of :data:`FRAME_ERRORS`."""

    def __init__(self, kind: str, detail: str) -> None:
        super().__init__(f"{kind}: {detail}")
        self.kind = kind
        self.detail = detail


# numpy dtypes of the catalogue's field types (all little-endian on the wire)
_FIELD_DTYPES = {"u8": "<u1", "u16": "<u2", "u32": "<u4", "i16": "<i2", "i32": "<i4"}


class RestArray(Sequence[int]):
    """A decoded array field (``count: rest``, e.g. the ``samples`` of a block), read-only.

    Backed by a numpy view of the frame bytes (no Python int per element), so
    ``numpy.asarray(values["samples"])`` costs nothing; it behaves as a sequence of ints and
    is equal to a list holding the same numbers, as the decoded field always was.
    """

    __slots__ = ("_array",)
    __hash__ = None  # type: ignore[assignment]  # like the list it stands for

    def __init__(self, array: np.ndarray) -> None:
        self._array = array

    def __len__(self) -> int:
        return len(self._array)

    @overload
    def __getitem__(self, index: int) -> int: ...

    @overload
    def __getitem__(self, index: slice) -> list[int]: ...

    def __getitem__(self, index: int | slice) -> int | list[int]:
        if isinstance(index, slice):
            return self._array[index].tolist()
        return int(self._array[index])

    def __iter__(self) -> Iterator[int]:
        return iter(self._array.tolist())

    def __eq__(self, other: object) -> bool:
        if isinstance(other, RestArray):
            return self.tolist() == other.tolist()
        if isinstance(other, (list, tuple)):
            return self.tolist() == list(other)
        return NotImplemented

    def __repr__(self) -> str:
        return repr(self.tolist())

    def __array__(self, dtype: Any = None, copy: Any = None) -> np.ndarray:
        if dtype is None or np.dtype(dtype) == self._array.dtype:
            return self._array
        return self._array.astype(dtype)

    def tolist(self) -> list[int]:
        return self._array.tolist()


class Message(NamedTuple):
    """One decoded message: its catalogue name, sequence number and field values.

    ``message["field"]`` reads a field. Immutable; a named tuple rather than a frozen
    dataclass because thousands are made a second (a quarter of the cost to create).
    """

    name: str
    seq: int
    values: dict[str, Any]

    def __getitem__(self, key: str) -> Any:  # type: ignore[override]  # fields by name
        return self.values[key]

    def to_json(self) -> dict[str, Any]:
        values = {k: v.tolist() if isinstance(v, RestArray) else v
                  for k, v in self.values.items()}
        return {"type": self.name, "seq": self.seq, **values}


def encode_payload(mdef: MessageDef, values: dict[str, Any]) -> bytes:
    """Pack field values into a payload; raise ValueError naming a missing or bad field."""
    fixed = mdef.fixed_fields
    try:
        out = mdef.fixed_struct.pack(*(int(values[f.name]) for f in fixed))
    except KeyError as exc:
        raise ValueError(f"{mdef.name}: missing field {exc.args[0]!r}") from None
    except struct.error as exc:
        raise ValueError(f"{mdef.name}: field out of range ({exc})") from None
    rest = mdef.rest_field
    if rest is not None:
        items = [int(v) for v in values.get(rest.name, [])]
        try:
            out += struct.pack(f"<{len(items)}{FIELD_FORMATS[rest.type]}", *items)
        except struct.error as exc:
            raise ValueError(f"{mdef.name}: {rest.name} out of range ({exc})") from None
    return out


def encode_frame(name: str, seq: int, values: dict[str, Any] | None = None,
                 catalogue: Catalogue | None = None) -> bytes:
    """Return the wire bytes (COBS body plus the 0x00 delimiter) of one message."""
    cat = catalogue or load_catalogue()
    mdef = cat.by_name(name)
    payload = encode_payload(mdef, values or {})
    frame = bytes((mdef.type_id, seq & 0xFF)) + payload
    if len(frame) + cat.crc_bytes > cat.max_frame_bytes:
        raise ValueError(f"{name}: frame of {len(frame) + cat.crc_bytes} bytes exceeds "
                         f"{cat.max_frame_bytes}")
    frame += crc16_ibm3740(frame).to_bytes(2, "big")
    return cobs_encode(frame) + b"\x00"


def decode_frame(body: bytes, catalogue: Catalogue | None = None) -> Message:
    """Decode one COBS body (delimiter removed) or raise :class:`FrameError`."""
    return _frame_decoder(catalogue or load_catalogue()).decode(body)


class _FrameDecoder:
    """:func:`decode_frame` with the catalogue's constants and per-type layouts looked up
    once (a sample stream is thousands of frames a second)."""

    def __init__(self, cat: Catalogue) -> None:
        self.catalogue = cat
        self.max_frame = cat.max_frame_bytes
        self.max_encoded = cat.max_frame_bytes + 1 + cat.max_frame_bytes // 254
        self.overhead = cat.overhead_bytes
        self.types = {m.type_id: m for m in cat.messages}
        self.kinds = {m.type_id: (m.name, _layout(m)) for m in cat.messages}

    def decode(self, body: bytes) -> Message:
        if len(body) > self.max_encoded:  # checked in this order, as the C decoder does
            raise FrameError("too_long", f"{len(body)} encoded bytes, at most {self.max_encoded}")
        if 0 in body:
            raise FrameError("cobs", "zero byte inside a COBS body")
        return self.decode_split(body)

    def decode_split(self, body: bytes) -> Message:
        """:meth:`decode` of a body split at the delimiters (so without a zero byte)."""
        if len(body) > self.max_encoded:
            raise FrameError("too_long", f"{len(body)} encoded bytes, at most {self.max_encoded}")
        try:
            frame = cobs_unstuff(body)
        except CobsError as exc:
            raise FrameError("cobs", str(exc)) from None
        size = len(frame)
        if size < self.overhead:
            raise FrameError("too_short", f"{size} bytes, at least {self.overhead}")
        if size > self.max_frame:
            raise FrameError("too_long", f"{size} bytes, at most {self.max_frame}")
        # CRC-16/IBM-3740 has no final XOR: the CRC over the frame including its own
        # big-endian CRC is 0 exactly when the check value matches (the CRC residue)
        if crc16_ibm3740(frame):
            got_crc = int.from_bytes(frame[-2:], "big")
            want_crc = crc16_ibm3740(frame[:-2])
            raise FrameError("crc", f"CRC {got_crc:#06x}, computed {want_crc:#06x}")
        kind = self.kinds.get(frame[0])
        if kind is None:
            raise FrameError("unknown_type", f"message type {frame[0]:#04x}")
        return Message(kind[0], frame[1], kind[1].unpack(frame, size - 2))


_DECODERS: dict[int, _FrameDecoder] = {}


def _frame_decoder(cat: Catalogue) -> _FrameDecoder:
    found = _DECODERS.get(id(cat))
    if found is None or found.catalogue is not cat:
        found = _DECODERS[id(cat)] = _FrameDecoder(cat)
    return found


class _Layout:
    """A message definition's payload layout, looked up once per definition."""

    def __init__(self, mdef: MessageDef) -> None:
        self.mdef = mdef
        self.fixed = mdef.fixed_struct
        self.fixed_size = mdef.fixed_struct.size
        self.names = tuple(f.name for f in mdef.fixed_fields)
        rest = mdef.rest_field
        self.rest_name = rest.name if rest is not None else None
        self.rest_dtype = _FIELD_DTYPES[rest.type] if rest is not None else None
        self.rest_size = rest.size_bytes if rest is not None else 0
        self.is_samples = mdef.name == "samples"
        self.block_limits = _sample_block_limits() if self.is_samples else (0, 0, 0, 0)

    def unpack(self, frame: bytes, stop: int) -> dict[str, Any]:
        """:func:`decode_payload` of ``frame[2:stop]``, read in place (no payload copy)."""
        size = self.fixed_size
        length = stop - 2
        if self.rest_name is None:
            if length != size:
                raise FrameError("bad_length", f"{self.mdef.name} payload {length} bytes, "
                                               f"must be {size}")
            return dict(zip(self.names, self.fixed.unpack_from(frame, 2), strict=True))
        extra = length - size
        if extra < 0 or extra % self.rest_size:
            raise FrameError("bad_length", f"{self.mdef.name} payload {length} bytes, must be "
                                           f"{size} + a multiple of {self.rest_size}")
        values: dict[str, Any] = dict(zip(self.names, self.fixed.unpack_from(frame, 2),
                                           strict=True))
        values[self.rest_name] = RestArray(np.frombuffer(
            frame, self.rest_dtype, extra // self.rest_size, 2 + size))
        if self.is_samples:  # check_sample_block, with the limits looked up once
            channels, count = values["channels"], extra // self.rest_size
            ch_min, ch_max, n_min, n_max = self.block_limits
            if not ch_min <= channels <= ch_max or not n_min <= count <= n_max \
                    or count % channels or values["first_index"] % channels:
                check_sample_block(values)  # raises, naming the block
        return values


_LAYOUTS: dict[int, _Layout] = {}


def _layout(mdef: MessageDef) -> _Layout:
    found = _LAYOUTS.get(id(mdef))
    if found is None or found.mdef is not mdef:
        found = _LAYOUTS[id(mdef)] = _Layout(mdef)
    return found


def decode_payload(mdef: MessageDef, payload: bytes) -> dict[str, Any]:
    """Unpack a payload by its definition or raise ``FrameError('bad_length')``."""
    lay = _layout(mdef)
    size = lay.fixed_size
    if lay.rest_name is None:
        if len(payload) != size:
            raise FrameError("bad_length", f"{mdef.name} payload {len(payload)} bytes, "
                                           f"must be {size}")
    else:
        extra = len(payload) - size
        if extra < 0 or extra % lay.rest_size:
            raise FrameError("bad_length", f"{mdef.name} payload {len(payload)} bytes, must be "
                                           f"{size} + a multiple of {lay.rest_size}")
    values: dict[str, Any] = dict(zip(lay.names, lay.fixed.unpack_from(payload), strict=True))
    if lay.rest_name is not None:
        values[lay.rest_name] = RestArray(np.frombuffer(payload, lay.rest_dtype, offset=size))
    if lay.is_samples:
        check_sample_block(values)
    return values


@lru_cache(maxsize=1)
def _sample_block_limits() -> tuple[int, int, int, int]:
    lim = load_catalogue().limits
    return (lim["channels"].min, lim["channels"].max, lim["samples_per_block"].min,
            lim["samples_per_block"].max)


def check_sample_block(values: dict[str, Any]) -> None:
    """The sample-block rules of SPEC.md 4.4: limits.channels, 1..limits.samples_per_block
    samples in whole channel sets, aligned start."""
    channels = values["channels"]
    count = len(values["samples"])
    ch_min, ch_max, n_min, n_max = _sample_block_limits()
    if not ch_min <= channels <= ch_max or not n_min <= count <= n_max \
            or count % channels or values["first_index"] % channels:
        raise FrameError("bad_length", f"samples block of {count} samples on {channels} channels "
                                       f"starting at {values['first_index']}")


@dataclass
class LinkCounters:
    """Everything the stream decoder has seen and lost, for the status line and reports."""

    bytes_in: int = 0
    frames_ok: int = 0
    frames_bad: int = 0
    errors: dict[str, int] = field(default_factory=lambda: {k: 0 for k in FRAME_ERRORS})
    seq_gaps: int = 0
    frames_lost: int = 0
    sample_gaps: int = 0
    samples_lost: int = 0
    tach_edges_lost: int = 0
    board_resets: int = 0
    duplicates: int = 0

    def to_json(self) -> dict[str, Any]:
        return {
            "bytes": self.bytes_in, "frames_ok": self.frames_ok, "frames_bad": self.frames_bad,
            **{f"err_{k}": v for k, v in self.errors.items()},
            "seq_gaps": self.seq_gaps, "frames_lost": self.frames_lost,
            "sample_gaps": self.sample_gaps, "samples_lost": self.samples_lost,
            "tach_edges_lost": self.tach_edges_lost, "board_resets": self.board_resets,
            "duplicates": self.duplicates,
        }


@dataclass(frozen=True)
class LinkEvent:
    """Something the decoder noticed that is not a message: a rejected frame, a gap, a reset."""

    # a FRAME_ERRORS kind, or seq_gap, sample_gap, tach_gap, tach_repeat, board_reset,
    # duplicate, stream_config_missing
    kind: str
    detail: str
    count: int = 1


class StreamDecoder:
    """Bytes in, messages and link events out; never raises on bad input.

    Resynchronises at every 0x00. Loss accounting per SPEC.md "Loss detection": sequence
    gaps (frames lost), sample-index gaps (samples lost), tach edge-count gaps, and board
    resets (uptime going backwards, or an unsolicited identity while streaming).
    """

    def __init__(self, catalogue: Catalogue | None = None, from_board: bool = True) -> None:
        """``from_board``: the bytes come from a board (a port or a capture), so a host
        command type in them is refused (``wrong_direction``); False for files of frames of
        either direction, such as the golden vectors."""
        self.catalogue = catalogue or load_catalogue()
        self.from_board = from_board
        self.counters = LinkCounters()
        self._buffer = bytearray()
        self._discarding = False
        self._max_body = self.catalogue.max_frame_bytes + 2
        self._last_seq: int | None = None
        self._next_sample_index: int | None = None
        self._last_edge_count: int | None = None
        self._last_uptime_ms: int | None = None
        self._identity_requested = False
        self._last_body = b""
        self._decoder = _frame_decoder(self.catalogue)
        self._tick_hz: int | None = None
        self._adc_max: int | None = None  # 2^adc_bits - 1 of the board's identity
        self._stream: tuple[int, int, int] | None = None  # start_tick, period_ticks, channels
        self._error_bits = sum(1 << b for b in self.catalogue.error_flags)
        self._states = set(self.catalogue.device_states)
        self._limits = self.catalogue.limits
        self._reply_errors = set(self.catalogue.error_codes)
        self._host_names = {m.name for m in self.catalogue.messages if m.direction == "host"}
        self._identify_id = self.catalogue.by_name("identify").type_id

    def assume_identity(self, identity: dict[str, Any]) -> None:
        """Take the board's identity from elsewhere (a capture header) for the range checks
        of values that depend on it (sample counts against ``adc_bits``); an identity in the
        stream replaces it."""
        try:
            if self._identity_problem(identity) is None:
                self._tick_hz = int(identity["tick_hz"])
                self._adc_max = (1 << int(identity["adc_bits"])) - 1
        except (KeyError, TypeError, ValueError):
            pass

    def expect_identity(self) -> None:
        """Tell the decoder the host sent ``identify``, so the next identity is no reset."""
        self._identity_requested = True

    @property
    def pending_bytes(self) -> int:
        """Bytes received after the last delimiter (an unfinished frame)."""
        return len(self._buffer)

    def feed(self, data: bytes) -> list[Message | LinkEvent]:
        """Consume bytes; return the messages and events completed by them, in order."""
        self.counters.bytes_in += len(data)
        out: list[Message | LinkEvent] = []
        *bodies, rest = bytes(data).split(b"\x00")
        max_body = self._max_body
        for body in bodies:
            if not self._buffer and not self._discarding and len(body) <= max_body:
                if body:  # the common case: a whole frame inside this chunk
                    self._frame(body, out)
                continue
            self._take(body, out)
            if self._discarding:
                self._discarding = False
            elif self._buffer:
                self._frame(bytes(self._buffer), out)
            self._buffer.clear()
        self._take(rest, out)
        return out

    def _take(self, chunk: bytes, out: list[Message | LinkEvent]) -> None:
        if self._discarding or not chunk:
            return
        self._buffer += chunk
        if len(self._buffer) > self._max_body:
            self._reject("too_long", f"no delimiter within {self._max_body} bytes", out)
            self._buffer.clear()
            self._discarding = True

    def _reject(self, kind: str, detail: str, out: list[Message | LinkEvent]) -> None:
        self.counters.frames_bad += 1
        self.counters.errors[kind] += 1
        out.append(LinkEvent(kind, detail))

    def _frame(self, body: bytes, out: list[Message | LinkEvent]) -> None:
        try:
            msg = self._decoder.decode_split(body)
        except FrameError as exc:
            self._reject(exc.kind, exc.detail, out)
            return
        if self.from_board and msg.name in self._host_names:
            self._reject("wrong_direction", f"message type {msg.name} is a host command; "
                                            "a board never sends it", out)
            return
        problem = self._check_values(msg)
        if problem is not None:
            self._reject(*problem, out)
            return
        if msg.seq == self._last_seq and body == self._last_body:
            self.counters.duplicates += 1
            out.append(LinkEvent("duplicate", f"frame seq {msg.seq} received twice, dropped"))
            return
        self._last_body = body
        self.counters.frames_ok += 1
        self._track(msg, out)
        out.append(msg)

    def _identity_problem(self, v: dict[str, Any]) -> str | None:
        lim = self._limits
        checks = (("tick_hz", lim["tick_hz"]), ("adc_bits", lim["adc_bits"]),
                  ("adc_reference_mv", lim["adc_reference_mv"]),
                  ("max_channels", lim["channels"]))
        for name, limit in checks:
            if int(v[name]) not in limit:
                return f"identity {name} {v[name]} outside {limit.span()}"
        for name, table in (("board_id", self.catalogue.board_ids),
                            ("adc_reference_kind", self.catalogue.reference_kinds)):
            if v[name] not in table:
                return f"identity {name} {v[name]} not a code of the catalogue"
        return None

    def _samples_in_range(self, samples: RestArray) -> bool:
        """True when no sample exceeds ``2^adc_bits - 1`` (False: look closer). For an ADC
        of 8 bits or more the little-endian high bytes alone tell (a C-speed byte check,
        cheaper per block than a numpy reduction)."""
        assert self._adc_max is not None
        bits = self._adc_max.bit_length()
        array = np.asarray(samples)
        if not 8 <= bits <= 16 or array.dtype != np.dtype("<u2"):
            return int(array.max()) <= self._adc_max
        allowed = _HIGH_BYTES[bits]
        return not array.tobytes()[1::2].translate(None, allowed)

    def _check_values(self, msg: Message) -> tuple[str, str] | None:
        """A field outside its physical range: (error kind, detail naming the field)."""
        v = msg.values
        name = msg.name
        if name == "samples":  # the most frequent first
            if v["period_ticks"] == 0:
                return "bad_value", "samples period_ticks 0"
            stream = self._stream
            if stream is not None and v["start_tick"] == stream[0]:
                if v["channels"] != stream[2]:  # SPEC 4.4: channels equals the stream's
                    return "bad_length", (f"samples block on {v['channels']} channels in a "
                                          f"stream of {stream[2]}")
                if v["period_ticks"] != stream[1]:
                    return "bad_value", (f"samples period_ticks {v['period_ticks']} in a "
                                         f"stream of {stream[1]}")
            if self._adc_max is not None and not self._samples_in_range(v["samples"]):
                top = int(np.asarray(v["samples"]).max())
                if top > self._adc_max:
                    return "bad_value", (f"samples value {top} above {self._adc_max}, the "
                                         "largest count of the board's ADC")
        elif name == "tach":
            pass
        elif name == "identity":
            problem = self._identity_problem(v)
            if problem is not None:
                return "bad_value", problem
            self._tick_hz = v["tick_hz"]
            self._adc_max = (1 << v["adc_bits"]) - 1
        elif name == "stream_config":
            for key, limit in (("channels", self._limits["channels"]),
                               ("adc_reference_mv", self._limits["adc_reference_mv"])):
                if v[key] not in limit:
                    return "bad_value", f"stream_config {key} {v[key]} outside {limit.span()}"
            for key in ("rate_hz", "period_ticks"):
                if v[key] == 0:
                    return "bad_value", f"stream_config {key} 0"
            if v["tach_edge"] > 1:
                return "bad_value", f"stream_config tach_edge {v['tach_edge']} not 0 or 1"
            if self._tick_hz is not None and \
                    v["period_ticks"] * v["rate_hz"] * v["channels"] != self._tick_hz:
                return "bad_value", (f"stream_config period_ticks {v['period_ticks']} is not "
                                     f"tick_hz {self._tick_hz} / (rate_hz {v['rate_hz']} x "
                                     f"channels {v['channels']})")
        elif name == "status":
            if v["state"] not in self._states:
                return "bad_value", f"status state {v['state']} not a device state"
            if v["error_flags"] & ~self._error_bits:
                return "bad_value", (f"status error_flags {v['error_flags']:#04x} has a bit the "
                                     "catalogue does not define")
        elif name == "reply":
            if v["error"] not in self._reply_errors:
                return "bad_value", f"reply error {v['error']} not a known code"
        return None

    def _track(self, msg: Message, out: list[Message | LinkEvent]) -> None:
        c = self.counters
        v = msg.values
        name = msg.name
        if name == "identity":
            if self._last_seq is None:
                # First frame seen. A power-up identity (seq 0, sent when opening the port
                # resets the board) leaves a pending identify request for the answer to come.
                if msg.seq != 0:
                    self._identity_requested = False
            elif not self._identity_requested:
                flags = self.catalogue.flag_names("reset_flags", int(v["reset_flags"]))
                self._reset("identity sent without being asked (reset flags: "
                            f"{', '.join(flags) or 'none'})", out)
            else:
                self._identity_requested = False
        elif name == "reply":
            # SPEC 5: an identity right after the board's ok to `identify` was asked for, also
            # in a capture, where the host's own frames are not recorded
            if v["command_type"] == self._identify_id and v["error"] == 0:
                self._identity_requested = True
        elif name == "status":
            if self._last_uptime_ms is not None and v["uptime_ms"] < self._last_uptime_ms:
                self._reset(f"uptime went back from {self._last_uptime_ms} to "
                            f"{v['uptime_ms']} ms", out)
            self._last_uptime_ms = v["uptime_ms"]
        if self._last_seq is not None:
            missing = (msg.seq - self._last_seq - 1) & 0xFF
            if missing:
                c.seq_gaps += 1
                c.frames_lost += missing
                out.append(LinkEvent("seq_gap", f"{missing} frame(s) missing before seq "
                                                f"{msg.seq}", missing))
        self._last_seq = msg.seq
        if name == "stream_config":
            self._next_sample_index = None
            self._stream = (v["start_tick"], v["period_ticks"], v["channels"])
        elif name == "samples":
            first = v["first_index"]
            timebase = (v["start_tick"], v["period_ticks"], v["channels"])
            if self._stream is None or timebase[0] != self._stream[0]:
                # SPEC 4.4: every block carries its stream's timebase; a new one without a
                # stream_config before it means that frame was lost (or the capture started
                # after it): the blocks alone place the samples in time
                out.append(LinkEvent("stream_config_missing",
                                     f"samples of a stream starting at tick {timebase[0]} "
                                     "arrived without its stream_config; timing taken from "
                                     "the sample blocks"))
                self._stream = timebase
                self._next_sample_index = None
            if self._next_sample_index is not None and first != self._next_sample_index:
                lost = (first - self._next_sample_index) & 0xFFFFFFFF
                c.sample_gaps += 1
                if lost < 0x80000000:
                    c.samples_lost += lost
                    out.append(LinkEvent("sample_gap", f"{lost} sample(s) missing before "
                                                       f"index {first}", lost))
                else:
                    out.append(LinkEvent("sample_gap", f"sample index went back to {first}; "
                                                       "stream restarted", 0))
            self._next_sample_index = (first + len(v["samples"])) & 0xFFFFFFFF
        elif name == "tach":
            count = v["edge_count"]
            if self._last_edge_count is not None:
                step = (count - self._last_edge_count) & 0xFFFF
                if step == 0:  # SPEC 5: the same edge again (a repeated message), no loss
                    out.append(LinkEvent("tach_repeat", f"tach edge {count} received again", 0))
                elif step >= 0x8000:  # SPEC 5: backwards: counting started again, no loss
                    out.append(LinkEvent("tach_gap", f"tach edge count went back to {count}",
                                         0))
                elif step > 1:
                    lost = step - 1
                    c.tach_edges_lost += lost
                    out.append(LinkEvent("tach_gap", f"{lost} tach edge(s) missing", lost))
            self._last_edge_count = count

    def _reset(self, why: str, out: list[Message | LinkEvent]) -> None:
        self.counters.board_resets += 1
        self._last_seq = None
        self._next_sample_index = None
        self._last_edge_count = None
        self._last_uptime_ms = None
        self._stream = None
        out.append(LinkEvent("board_reset", f"board reset detected: {why}"))
