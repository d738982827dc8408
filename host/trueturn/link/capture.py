"""Capture files: a small header plus the raw received bytes (protocol/SPEC.md, "Capture files").

Layout: 8-byte magic ``b"TTCAP1\\r\\n"``, u32 little-endian header length H, H bytes of UTF-8
JSON metadata, then every byte received from the board, unchanged, to the end of the file.
Replay goes through the same :class:`~trueturn.link.codec.StreamDecoder` as a live port.
A file without the magic is read as plain frame bytes (for example protocol/vectors/).
"""

from __future__ import annotations

import json
import os
import struct
from pathlib import Path
from typing import Any, BinaryIO

CAPTURE_MAGIC = b"TTCAP1\r\n"
CAPTURE_FORMAT_VERSION = 1


class CaptureError(ValueError):
    """A capture file's header is unreadable."""


def write_capture_header(stream: BinaryIO, metadata: dict[str, Any]) -> None:
    """Write magic, header length and JSON metadata (``format_version`` is added)."""
    header = json.dumps({"format_version": CAPTURE_FORMAT_VERSION, **metadata},
                        sort_keys=True).encode("utf-8")
    stream.write(CAPTURE_MAGIC + struct.pack("<I", len(header)) + header)


class CaptureWriter:
    """Append received bytes to a capture file, flushing so a yanked cable loses nothing."""

    def __init__(self, path: str | os.PathLike[str], metadata: dict[str, Any]) -> None:
        self.path = Path(path)
        self._file = open(self.path, "wb")  # noqa: SIM115 - closed in close()
        write_capture_header(self._file, metadata)
        self._file.flush()

    def write(self, data: bytes) -> None:
        self._file.write(data)
        self._file.flush()

    def close(self) -> None:
        self._file.flush()
        os.fsync(self._file.fileno())
        self._file.close()

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
