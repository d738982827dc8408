"""CRC-16/IBM-3740 (a.k.a. CRC-16/CCITT-FALSE), the frame check of protocol v1.

Parameters (catalogue notation): width 16, poly 0x1021, init 0xFFFF, refin false,
refout false, xorout 0x0000, check 0x29B1 for ASCII "123456789".
"""

from __future__ import annotations

import binascii

CRC16_INIT = 0xFFFF
CRC16_CHECK = 0x29B1


def crc16_ibm3740(data: bytes | bytearray | memoryview, crc: int = CRC16_INIT) -> int:
    """Return the CRC-16/IBM-3740 of ``data`` (continue from ``crc`` to chain blocks).

    The standard library's ``binascii.crc_hqx`` is this CRC (poly 0x1021, MSB first, no final
    XOR) with the initial value passed in; the tests hold it to the catalogue check value and
    to crccheck's implementation.
    """
    return binascii.crc_hqx(bytes(data), crc)
