"""CRC-16/IBM-3740 (a.k.a. CRC-16/CCITT-FALSE), the frame check of protocol v1.

Parameters (catalogue notation): width 16, poly 0x1021, init 0xFFFF, refin false,
refout false, xorout 0x0000, check 0x29B1 for ASCII "123456789".
"""

from __future__ import annotations

CRC16_POLY = 0x1021
CRC16_INIT = 0xFFFF
CRC16_CHECK = 0x29B1


def _make_table() -> tuple[int, ...]:
    table = []
    for byte in range(256):
        crc = byte << 8
        for _ in range(8):
            crc = ((crc << 1) ^ CRC16_POLY) if crc & 0x8000 else (crc << 1)
            crc &= 0xFFFF
        table.append(crc)
    return tuple(table)


_TABLE = _make_table()


def crc16_ibm3740(data: bytes | bytearray | memoryview, crc: int = CRC16_INIT) -> int:
    """Return the CRC-16/IBM-3740 of ``data`` (continue from ``crc`` to chain blocks)."""
    table = _TABLE
    for byte in bytes(data):
        crc = ((crc << 8) & 0xFFFF) ^ table[(crc >> 8) ^ byte]
    return crc
