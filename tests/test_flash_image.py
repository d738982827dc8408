"""`trueturn flash --image FILE` (issue #19 item 3): a custom build such as the AREF variant.

The file is checked as Intel HEX before avrdude sees it (Intel, "Hexadecimal Object File
Format Specification", rev. A, 1988: ``:LLAAAATT<data>CC``, CC the two's complement of the
byte sum, ``:00000001FF`` the end-of-file record); a file that is not one is one line, exit 2.
"""

from __future__ import annotations

import shlex
from pathlib import Path

import pytest

from cli_helpers import run_cli
from firmware_helpers import FIRMWARE, make, require_tools
from trueturn.link.flashing import IMAGE_LIMIT_BYTES, firmware_image


def _record(address: int, kind: int, data: bytes) -> str:
    body = bytes([len(data), address >> 8, address & 0xFF, kind]) + data
    return ":" + (body + bytes([-sum(body) & 0xFF])).hex().upper()


def test_record_helper_writes_what_avr_objcopy_writes() -> None:
    # the end-of-file record of the specification; every record of the shipped image (written
    # by avr-objcopy -O ihex) rebuilt from its fields
    assert _record(0, 1, b"") == ":00000001FF"
    for line in firmware_image().read_text(encoding="ascii").split():
        raw = bytes.fromhex(line[1:])
        assert _record(int.from_bytes(raw[1:3], "big"), raw[3], raw[4:-1]) == line


def test_the_aref_build_is_flashed_with_image() -> None:
    require_tools("avr-gcc", "avr-objcopy", "make")
    make("ADC_REF=aref", "build-aref/trueturn.hex")
    image = FIRMWARE / "build-aref" / "trueturn.hex"
    assert image.read_bytes() != firmware_image().read_bytes()  # a different build
    code, out, _ = run_cli(["flash", "--port", "/dev/ttyUSB0", "--dry-run", "--image", str(image)])
    assert code == 0
    assert shlex.split(out.strip())[-1] == f"flash:w:{image}:i"


def test_the_shipped_image_passes_the_check(tmp_path: Path) -> None:
    copy = tmp_path / "mine.hex"
    copy.write_bytes(firmware_image().read_bytes())
    code, out, _ = run_cli(["flash", "--port", "COM5", "--dry-run", "--image", str(copy)])
    assert code == 0 and f"flash:w:{copy}:i" in out


@pytest.mark.parametrize(("lines", "needle"), [
    (["hello"], ":1: not an Intel HEX record"),
    ([_record(0, 0, b"\x01\x02")[:-2] + "00", ":00000001FF"], ":1: checksum wrong"),
    ([_record(0, 0, b"\x01\x02")], "no end-of-file record"),
    ([":00000001FF"], "no data"),
    ([":00000001FF", _record(0, 0, b"\x01")], ":2: a record after the end-of-file record"),
    ([_record(IMAGE_LIMIT_BYTES - 1, 0, b"\x01\x02"), ":00000001FF"], "bootloader's area"),
    ([":0300000001FF", ":00000001FF"], ":1: the record's length byte does not match"),
])
def test_a_file_that_is_not_an_image_is_one_line(tmp_path: Path, lines: list[str],
                                                 needle: str) -> None:
    bad = tmp_path / "bad.hex"
    bad.write_text("\n".join(lines) + "\n", encoding="ascii")
    code, out, err = run_cli(["flash", "--port", "/dev/ttyUSB0", "--dry-run", "--image", str(bad)])
    assert code == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and needle in err and "Traceback" not in err


@pytest.mark.parametrize("path", ["/nonexistent/trueturn.hex", "/dev/zero", "/tmp"])
def test_a_missing_or_special_file_is_one_line(path: str) -> None:
    code, _, err = run_cli(["flash", "--port", "/dev/ttyUSB0", "--dry-run", "--image", path])
    assert code == 2 and len(err.strip().splitlines()) == 1 and "--image" in err
