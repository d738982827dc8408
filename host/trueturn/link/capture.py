"""Capture files: a small header plus the raw received bytes (protocol/SPEC.md, "Capture files").

Layout: 8-byte magic ``b"TTCAP1\\r\\n"``, u32 little-endian header length H, H bytes of UTF-8
JSON metadata, then every byte received from the board, unchanged, to the end of the file.
Replay goes through the same :class:`~trueturn.link.codec.StreamDecoder` as a live port.
A file without the magic is read as plain frame bytes (for example protocol/vectors/).
"""

from __future__ import annotations

import io
import json
import math
import os
import stat
import struct
from collections.abc import Iterator
from pathlib import Path
from typing import Any, BinaryIO

from trueturn.errors import one_line
from trueturn.files import check_input, check_output

CAPTURE_MAGIC = b"TTCAP1\r\n"
CAPTURE_FORMAT_VERSION = 1


class CaptureError(ValueError):
    """A capture file's header is unreadable."""


def write_capture_header(stream: BinaryIO, metadata: dict[str, Any]) -> None:
    """Write magic, header length and JSON metadata (``format_version`` is added)."""
    header = json.dumps({"format_version": CAPTURE_FORMAT_VERSION, **metadata},
                        sort_keys=True).encode("utf-8")
    stream.write(CAPTURE_MAGIC + struct.pack("<I", len(header)) + header)


class CaptureWriteError(OSError):
    """The capture file could not be written on (a full disk, a removed drive): what was
    written before stays a valid capture, cut short (``bytes_kept`` bytes of stream)."""

    def __init__(self, path: Path, strerror: str, bytes_kept: int) -> None:
        super().__init__(f"cannot write {path}: {strerror}")
        self.path, self.reason, self.bytes_kept = path, strerror, bytes_kept


class CaptureWriter:
    """Append received bytes to a capture file, written through at once so a yanked cable
    loses nothing; on a write error (a full disk) it stops writing and raises
    :class:`CaptureWriteError`, leaving the file a valid capture cut short."""

    def __init__(self, path: str | os.PathLike[str], metadata: dict[str, Any]) -> None:
        self.path = check_output(path)  # a regular file or none, no link, folder exists
        # O_NOFOLLOW: a link put there since the check is refused, not written through
        # O_NONBLOCK: a FIFO put there is refused (no reader: ENXIO), never waited on
        flags = (os.O_WRONLY | os.O_CREAT | os.O_TRUNC | getattr(os, "O_NOFOLLOW", 0)
                 | getattr(os, "O_NONBLOCK", 0))
        self._fd = os.open(self.path, flags, 0o666)
        if not stat.S_ISREG(os.fstat(self._fd).st_mode):
            os.close(self._fd)
            check_output(path)  # says what it is now
            raise OSError(f"{path} is not a regular file")
        self.failed: CaptureWriteError | None = None
        self.stream_bytes = 0
        buffer = io.BytesIO()
        write_capture_header(buffer, metadata)
        self._write_all(buffer.getvalue())

    def _write_all(self, data: bytes) -> None:
        view = memoryview(data)
        while view:
            try:
                done = os.write(self._fd, view)
            except OSError as exc:
                self.failed = CaptureWriteError(self.path, exc.strerror or str(exc),
                                                self.stream_bytes)
                raise self.failed from None
            view = view[done:]

    def write(self, data: bytes) -> None:
        if self.failed is not None:
            raise self.failed
        self._write_all(data)
        self.stream_bytes += len(data)

    def close(self) -> None:
        """fsync and close; after a write error the file is closed as it is."""
        if self._fd < 0:
            return
        try:
            if self.failed is None:
                os.fsync(self._fd)
        finally:
            os.close(self._fd)
            self._fd = -1

    def __enter__(self) -> CaptureWriter:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


#: The largest capture header read (``record`` writes about 1 KB).
MAX_HEADER_BYTES = 1 << 20
#: Bytes handed on per chunk when a capture is streamed (memory does not grow with the file).
CHUNK_BYTES = 1 << 20


def _finite(value: Any, low: float, high: float) -> bool:
    return (not isinstance(value, bool) and isinstance(value, (int, float))
            and math.isfinite(value) and low <= value <= high)


def _whole(value: Any, low: int, high: int) -> bool:
    return not isinstance(value, bool) and isinstance(value, int) and low <= value <= high


def header_problem(metadata: dict[str, Any]) -> str | None:
    """What is wrong with the values of a capture header that trueturn uses, or None.

    Unknown keys are left alone (a newer ``record`` may add some); the known ones must hold
    what ``record`` writes: ``identity`` the board's identity fields (each a whole number in
    its wire type's range, and in the protocol's limits when complete), ``requested`` the
    recording asked for (seconds up to 86400, rate and channels within the protocol's
    limits), ``mains_hz`` 50 or 60, ``pickups`` one profile per channel."""
    from trueturn.link.catalogue import load_catalogue
    from trueturn.link.codec import StreamDecoder

    catalogue = load_catalogue()
    version = metadata.get("format_version", CAPTURE_FORMAT_VERSION)
    if not _whole(version, 1, CAPTURE_FORMAT_VERSION):
        return (f"format_version {version!r}: this trueturn reads capture format "
                f"{CAPTURE_FORMAT_VERSION}")
    identity = metadata.get("identity")
    if identity is not None:
        if not isinstance(identity, dict):
            return "identity: not a set of fields"
        fields = catalogue.by_name("identity").fixed_fields
        for f in fields:
            if f.name in identity:
                bits = 8 * f.size_bytes
                low, high = (-(1 << (bits - 1)), (1 << (bits - 1)) - 1) if f.type[0] == "i" \
                    else (0, (1 << bits) - 1)
                if not _whole(identity[f.name], low, high):
                    return f"identity.{f.name}: {identity[f.name]!r} is not a {f.type}"
        if all(f.name in identity for f in fields):
            problem = StreamDecoder(catalogue)._identity_problem(identity)
            if problem:
                return problem
    requested = metadata.get("requested")
    if requested is not None:
        if not isinstance(requested, dict):
            return "requested: not a set of fields"
        limits = catalogue.limits
        checks = (("seconds", lambda v: _finite(v, 0.0, 86400.0) and v > 0, "0..86400 s"),
                  ("rate_hz", lambda v: _whole(v, 0, 1 << 32) and v in limits["rate_hz"],
                   limits["rate_hz"].span()),
                  ("channels", lambda v: _whole(v, 0, 255) and v in limits["channels"],
                   limits["channels"].span()),
                  ("tach_edge", lambda v: v in ("rising", "falling"), "rising or falling"))
        for name, ok, span in checks:
            if name in requested and not ok(requested[name]):
                return f"requested.{name}: {requested[name]!r} is not {span}"
    if "mains_hz" in metadata and metadata["mains_hz"] not in (50, 60):
        return f"mains_hz: {metadata['mains_hz']!r} is not 50 or 60"
    pickups = metadata.get("pickups")
    if pickups is not None:
        most = catalogue.limits["channels"].max
        if not isinstance(pickups, list) or len(pickups) > most:
            return f"pickups: not a list of at most {most} pickup profiles"
        for n, pickup in enumerate(pickups, 1):
            if not isinstance(pickup, dict):
                return f"pickups[{n}]: not a set of fields"
            name = pickup.get("name", "")
            if not isinstance(name, str) or len(name) > 100:
                return f"pickups[{n}].name: not a name of up to 100 characters"
            for key, bottom, top in (("sensitivity_v_per_g", 1e-9, 1e6), ("zero_g_v", -100, 100),
                                     ("delay_us", -1e6, 1e6)):
                value = pickup.get(key)
                if value is not None and not _finite(value, bottom, top):
                    return f"pickups[{n}].{key}: {value!r} is not a number {bottom:g}..{top:g}"
            corners = pickup.get("lowpass_corners_hz", [])
            if not isinstance(corners, list) or len(corners) > 8 or not all(
                    _finite(c, 1e-3, 1e9) for c in corners):
                return f"pickups[{n}].lowpass_corners_hz: not a list of corner frequencies"
    return None


class CaptureReader:
    """A capture or frame file opened for streaming: ``metadata`` from its header (checked
    by :func:`header_problem`), then :meth:`chunks` hands on the received bytes
    :data:`CHUNK_BYTES` at a time, so memory stays bounded however long the capture is.

    Only a regular file is opened (``/dev/zero``, a FIFO or a folder are refused before a
    byte is read); a damaged header is one :class:`CaptureError` line."""

    def __init__(self, path: str | os.PathLike[str]) -> None:
        self.path = check_input(path)
        name = one_line(os.fspath(path))
        self._file: BinaryIO = open(self.path, "rb")  # noqa: SIM115 - closed in close()
        try:
            self.size_bytes = os.fstat(self._file.fileno()).st_size
            self.metadata, self._start = self._header(name)
        except BaseException:
            self._file.close()
            raise

    def _header(self, name: str) -> tuple[dict[str, Any], int]:
        head = self._file.read(len(CAPTURE_MAGIC) + 4)
        if not head.startswith(CAPTURE_MAGIC):
            return {"plain": True}, 0
        if len(head) < len(CAPTURE_MAGIC) + 4:
            raise CaptureError(f"{name}: capture header is cut short")
        (length,) = struct.unpack_from("<I", head, len(CAPTURE_MAGIC))
        if length > MAX_HEADER_BYTES:
            raise CaptureError(f"{name}: capture header claims {length} bytes (at most "
                               f"{MAX_HEADER_BYTES}); the file is damaged")
        text = self._file.read(length)
        if len(text) < length:
            raise CaptureError(f"{name}: capture header is cut short")
        try:
            metadata = json.loads(text.decode("utf-8"))
        except (UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise CaptureError(f"{name}: capture header is not valid JSON "
                               f"({one_line(exc)})") from None
        except RecursionError:
            raise CaptureError(f"{name}: capture header is nested too deeply") from None
        if not isinstance(metadata, dict):
            raise CaptureError(f"{name}: capture header is not a JSON object")
        problem = header_problem(metadata)
        if problem:
            raise CaptureError(f"{name}: capture header: {one_line(problem)}")
        return metadata, len(head) + length

    @property
    def plain(self) -> bool:
        return bool(self.metadata.get("plain"))

    def chunks(self, limit_bytes: int | None = None) -> Iterator[bytes]:
        """The received bytes from the start, in chunks (at most ``limit_bytes`` in all)."""
        self._file.seek(self._start)
        left = math.inf if limit_bytes is None else limit_bytes
        while left > 0:
            data = self._file.read(int(min(CHUNK_BYTES, left)))
            if not data:
                return
            left -= len(data)
            yield data

    def close(self) -> None:
        self._file.close()

    def __enter__(self) -> CaptureReader:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def read_capture(path: str | os.PathLike[str]) -> tuple[dict[str, Any], bytes]:
    """Return (metadata, raw bytes) of a whole capture (small files, tests); plain frame
    files give metadata ``{"plain": True}``. Commands stream with :class:`CaptureReader`."""
    with CaptureReader(path) as reader:
        return reader.metadata, b"".join(reader.chunks())
