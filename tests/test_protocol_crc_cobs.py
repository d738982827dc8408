"""CRC and framing against outside references."""

from __future__ import annotations

import pytest
from cobs import cobs as reference_cobs  # reference library: cobs (PyPI)
from crccheck.crc import Crc16Ibm3740  # reference library: crccheck (PyPI)
from hypothesis import given
from hypothesis import strategies as st

from trueturn.link.catalogue import load_catalogue
from trueturn.link.cobs import CobsError, cobs_decode, cobs_encode
from trueturn.link.crc import CRC16_CHECK, crc16_ibm3740


def test_crc_catalogue_check_value() -> None:
    # CRC catalogue check value: CRC-16/IBM-3740 of ASCII "123456789" is 0x29B1
    # (Greg Cook's "Catalogue of parametrised CRC algorithms", entry CRC-16/IBM-3740).
    assert crc16_ibm3740(b"123456789") == 0x29B1 == CRC16_CHECK


def test_catalogue_names_the_same_crc() -> None:
    crc = load_catalogue().crc
    assert crc["name"] == "CRC-16/IBM-3740"
    assert (crc["poly"], crc["init"], crc["xorout"], crc["check"]) == (0x1021, 0xFFFF, 0, 0x29B1)
    assert crc["refin"] is False and crc["refout"] is False


@given(st.binary(max_size=300))
def test_crc_matches_crccheck(data: bytes) -> None:
    # reference library: crccheck (PyPI), class Crc16Ibm3740, compared value for value
    assert crc16_ibm3740(data) == Crc16Ibm3740.calc(data)


def test_crc_chains_across_blocks() -> None:
    assert crc16_ibm3740(b"56789", crc16_ibm3740(b"1234")) == 0x29B1


@given(st.binary(max_size=600))
def test_cobs_matches_reference_byte_for_byte(data: bytes) -> None:
    # reference library: cobs (PyPI), cobs.cobs.encode/decode, compared byte for byte
    ours = cobs_encode(data)
    assert ours == reference_cobs.encode(data)
    assert 0 not in ours
    assert cobs_decode(ours) == data == reference_cobs.decode(ours)


@pytest.mark.parametrize("data", [b"", b"\x00", b"\x00\x00", b"\x11\x22\x00\x33",
                                  bytes(range(1, 255)), bytes(range(1, 256)), b"\x00" * 300])
def test_cobs_edge_cases(data: bytes) -> None:
    # Edge cases from the COBS paper's examples (Cheshire & Baker 1999), compared with cobs (PyPI)
    assert cobs_encode(data) == reference_cobs.encode(data)
    assert cobs_decode(cobs_encode(data)) == data


@pytest.mark.parametrize("bad", [b"\x05\x01\x02", b"\x02\x00", b"\x00"])
def test_cobs_rejects_malformed(bad: bytes) -> None:
    with pytest.raises(CobsError):
        cobs_decode(bad)
