"""Consistent Overhead Byte Stuffing (Cheshire & Baker, IEEE/ACM Trans. Netw. 7(2), 1999).

Frames on the wire are ``cobs_encode(frame) + b"\\x00"``; the encoded body never contains 0x00.
"""

from __future__ import annotations


class CobsError(ValueError):
    """The bytes between two delimiters are not a valid COBS encoding."""


def cobs_encode(data: bytes) -> bytes:
    """Encode ``data`` so that the result contains no zero byte (delimiter not added)."""
    out = bytearray()
    block = bytearray()
    ended_on_full_block = False
    for byte in data:
        ended_on_full_block = False
        if byte == 0:
            out.append(len(block) + 1)
            out += block
            block.clear()
        else:
            block.append(byte)
            if len(block) == 254:
                out.append(255)
                out += block
                block.clear()
                ended_on_full_block = True
    if not ended_on_full_block:  # a trailing 0xFF block needs no empty block after it
        out.append(len(block) + 1)
        out += block
    return bytes(out)


def cobs_decode(encoded: bytes) -> bytes:
    """Invert :func:`cobs_encode`; raise :class:`CobsError` on a malformed body."""
    if 0 in encoded:
        raise CobsError("zero byte inside a COBS body")
    return cobs_unstuff(encoded)


def cobs_unstuff(encoded: bytes) -> bytes:
    """:func:`cobs_decode` of a body known to hold no zero byte (split at the delimiters).

    Every code byte after the first stands where the decoded data has a zero, unless a
    block before it was full (code 255, no zero follows it): so the usual body decodes by
    walking its few code bytes, writing a zero at each and dropping the first.
    """
    length = len(encoded)
    out = bytearray(encoded)
    pos = 0
    while pos < length:
        code = encoded[pos]
        if code == 255:
            return _unstuff_blocks(encoded)
        pos += code
        if pos < length:
            out[pos] = 0
    if pos > length:
        raise CobsError("COBS block runs past the end of the frame")
    del out[0]
    return bytes(out)


def _unstuff_blocks(encoded: bytes) -> bytes:
    """:func:`cobs_unstuff` block by block (bodies with full 254-byte blocks)."""
    parts: list[bytes] = []
    append = parts.append
    pos = 0
    length = len(encoded)
    while pos < length:
        code = encoded[pos]
        end = pos + code
        if end > length:
            raise CobsError("COBS block runs past the end of the frame")
        append(encoded[pos + 1 : end])
        if code != 255 and end < length:
            append(b"\x00")
        pos = end
    return b"".join(parts)
