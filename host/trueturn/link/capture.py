"""Capture files: a small header plus the raw received bytes (protocol/SPEC.md, "Capture files").

Layout: 8-byte magic ``b"TTCAP1\\r\\n"``, u32 little-endian header length H, H bytes of UTF-8
JSON metadata, then every byte received from the board, unchanged, to the end of the file.
Replay goes through the same :class:`~trueturn.link.codec.StreamDecoder` as a live port.
A file without the magic is read as plain frame bytes (for example protocol/vectors/).
"""

from __future__ import annotations

import io
import json
import os
import stat
import struct
from pathlib import Path
from typing import Any, BinaryIO

from trueturn.files import check_output

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


def read_capture(path: str | os.PathLike[str]) -> tuple[dict[str, Any], bytes]:
    """Return (metadata, raw bytes); plain frame files give metadata ``{"plain": True}``."""
    data = Path(path).read_bytes()
    if not data.startswith(CAPTURE_MAGIC):
        return {"plain": True}, data
    start = len(CAPTURE_MAGIC) + 4
    if len(data) < start:
        raise CaptureError(f"{path}: capture header is cut short")
    (length,) = struct.unpack_from("<I", data, len(CAPTURE_MAGIC))
    if len(data) < start + length:
        raise CaptureError(f"{path}: capture header is cut short")
    try:
        metadata = json.loads(data[start : start + length].decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise CaptureError(f"{path}: capture header is not valid JSON ({exc})") from None
    if not isinstance(metadata, dict):
        raise CaptureError(f"{path}: capture header is not a JSON object")
    return metadata, data[start + length :]
