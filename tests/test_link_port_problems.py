"""Port trouble in plain words (issue #23 item 3) and the USB-serial chips (item 4).

The operating systems' errors are made with fake ports: the exceptions pyserial raises on
each system, as its sources build them (serialposix.py: ``SerialException(errno, "could not
open port ...")``; serialwin32.py: ``SerialException("could not open port 'COM5':
PermissionError(13, 'Access is denied.', None, 5)")``).
"""

from __future__ import annotations

import errno
import grp
import os
from pathlib import Path

import pytest
import serial

import trueturn.link.ports as ports_mod
from cli_helpers import run_cli
from trueturn.link.boards import (
    CHIPS,
    LINK_BAUD,
    avr_u2x_rates,
    ch340_rates,
    chip_for,
    ft232r_rates,
)
from trueturn.link.problems import (
    PortError,
    ProblemCode,
    check_port_name,
    classify_error,
    problem_text,
)


def _posix(number: int, port: str) -> serial.SerialException:
    return serial.SerialException(number, f"could not open port {port}: [Errno {number}] "
                                          f"{os.strerror(number)}: '{port}'")


def _win(port: str, error: str) -> serial.SerialException:
    return serial.SerialException(f"could not open port {port!r}: {error}")


def test_permission_denied_names_the_owning_group_and_the_exact_command(tmp_path: Path) -> None:
    device = tmp_path / "ttyUSB0"
    device.write_bytes(b"")
    group = grp.getgrgid(os.stat(device).st_gid).gr_name
    p = classify_error(str(device), _posix(errno.EACCES, str(device)), platform="linux")
    assert p.code is ProblemCode.PERMISSION_DENIED and p.group == group
    text = problem_text(p)
    assert f"sudo usermod -aG {group} $USER" in text and "log out" in text


def test_permission_denied_without_the_device_suggests_dialout() -> None:
    p = classify_error("/dev/ttyUSB7", _posix(errno.EACCES, "/dev/ttyUSB7"), platform="linux")
    assert "sudo usermod -aG dialout $USER" in problem_text(p)


@pytest.mark.parametrize("number", [errno.EBUSY, errno.EAGAIN])
def test_busy_port_says_another_program_holds_it(number: int) -> None:
    p = classify_error("/dev/ttyUSB0", _posix(number, "/dev/ttyUSB0"), platform="linux")
    assert p.code is ProblemCode.PORT_BUSY
    assert "another program holds it" in problem_text(p)


def test_windows_access_denied_is_a_busy_port() -> None:
    exc = _win("COM5", "PermissionError(13, 'Access is denied.', None, 5)")
    p = classify_error("COM5", exc, platform="win32")
    assert p.code is ProblemCode.PORT_BUSY and "COM5 is busy" in problem_text(p)


def test_windows_missing_port_and_a_linux_name_on_windows() -> None:
    exc = _win("COM9", "FileNotFoundError(2, 'The system cannot find the file specified.', "
                       "None, 2)")
    assert classify_error("COM9", exc, platform="win32").code is ProblemCode.NO_SUCH_PORT
    exc = _win("/dev/ttyUSB0", "FileNotFoundError(2, 'The system cannot find the path "
                               "specified.', None, 3)")
    text = problem_text(classify_error("/dev/ttyUSB0", exc, platform="win32"))
    assert "COM3, COM4" in text and "Device Manager" in text


def test_a_windows_name_on_linux_and_a_linux_name_on_macos() -> None:
    text = problem_text(classify_error("COM3", _posix(errno.ENOENT, "COM3"), platform="linux"))
    assert "/dev/ttyUSB0" in text and "/dev/ttyACM0" in text
    text = problem_text(classify_error("/dev/ttyUSB0", _posix(errno.ENOENT, "/dev/ttyUSB0"),
                                       platform="darwin"))
    assert "/dev/cu.usbserial" in text


def test_macos_dial_in_name_points_to_its_cu_twin() -> None:
    p = check_port_name("/dev/tty.usbserial-1410", platform="darwin")
    assert p is not None and p.code is ProblemCode.MAC_DIAL_IN
    assert "/dev/cu.usbserial-1410" in problem_text(p)
    assert check_port_name("/dev/cu.usbserial-1410", platform="darwin") is None
    assert check_port_name("/dev/tty.usbserial-1410", platform="linux") is None


def test_a_port_that_vanishes_while_open() -> None:
    # pyserial serialposix.py, read() on an unplugged adapter
    exc = serial.SerialException("device reports readiness to read but returned no data "
                                 "(device disconnected or multiple access on port?)")
    p = classify_error("/dev/ttyUSB0", exc, opening=False, platform="linux")
    assert p.code is ProblemCode.PORT_VANISHED
    assert classify_error("/dev/ttyUSB0", OSError(errno.EIO, "Input/output error"),
                          opening=False, platform="linux").code is ProblemCode.PORT_VANISHED


@pytest.mark.parametrize(("number", "needle"), [
    (errno.EACCES, "sudo usermod -aG"), (errno.EBUSY, "another program holds it"),
    (errno.ENOENT, "no serial port"),
])
def test_record_says_it_in_one_line(number: int, needle: str, tmp_path: Path,
                                    monkeypatch: pytest.MonkeyPatch) -> None:
    def fake_open(url: str, **_: object) -> serial.SerialBase:
        raise _posix(number, url)

    monkeypatch.setattr(ports_mod.serial, "serial_for_url", fake_open)
    monkeypatch.setattr("trueturn.link.problems.sys.platform", "linux")
    code, _, err = run_cli(["record", "--port", "/dev/ttyUSB0", "--seconds", "1", "-o",
                            str(tmp_path / "x.cap")])
    assert code == 2 and err.count("\n") == 1 and "Traceback" not in err
    assert needle in err


def test_open_port_refuses_a_macos_dial_in_name(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(ports_mod, "check_port_name",
                        lambda url: check_port_name(url, platform="darwin"))
    with pytest.raises(PortError) as err:
        ports_mod.open_port("/dev/tty.usbserial-1410")
    assert err.value.problem.code is ProblemCode.MAC_DIAL_IN


# --- USB-serial chips and the link's 500000 baud ----------------------------------------------

def _nearest(rates, baud: int) -> float:  # type: ignore[no-untyped-def]
    return min(rates(baud), key=lambda r: abs(r - baud))


def test_avr_u2x_baud_rates_match_the_datasheet_table() -> None:
    # from memory: ATmega328P datasheet, "Examples of UBRRn Settings", fosc = 16 MHz, U2X = 1:
    # 115.2k -> UBRR 16, error 2.1 %; 500k -> UBRR 3, error 0.0 %; 250k -> UBRR 7, 0.0 %
    assert (_nearest(avr_u2x_rates, 115200) / 115200 - 1) * 100 == pytest.approx(2.1, abs=0.05)
    assert _nearest(avr_u2x_rates, 500_000) == 500_000
    assert _nearest(avr_u2x_rates, 250_000) == 250_000


def test_ft232r_divisors() -> None:
    # from memory: FTDI AN232B-05: 3 MHz / divisor with eighths; 115200 -> 26 (115384 baud,
    # +0.16 %), 500000 -> 6 exactly
    assert _nearest(ft232r_rates, 115200) == pytest.approx(3e6 / 26)
    assert _nearest(ft232r_rates, 500_000) == 500_000


def test_ch340_divisors() -> None:
    # from memory: Linux ch341 driver, 48 MHz / (2^(12 - 3 ps - fact) * div):
    # 500000 = 48 MHz / (4 * 24); 115200 -> 115384.6 (+0.16 %)
    assert _nearest(ch340_rates, 500_000) == 500_000
    assert _nearest(ch340_rates, 115200) == pytest.approx(48e6 / (8 * 52))


def test_every_kit_chip_makes_the_link_baud_exactly() -> None:
    for chip in CHIPS:
        result = chip.baud(LINK_BAUD)
        assert result.exact, chip.name
        assert "from memory" in chip.source  # none of these was checked against a datasheet here


def test_chips_are_found_by_vid_pid() -> None:
    assert chip_for(0x1A86, 0x7523).key == "ch340"  # type: ignore[union-attr]
    assert chip_for(0x0403, 0x6001).key == "ft232r"  # type: ignore[union-attr]
    assert chip_for(0x10C4, 0xEA60).key == "cp2102"  # type: ignore[union-attr]
    assert chip_for(0x2341, 0x0043).key == "16u2"  # type: ignore[union-attr]
    assert chip_for(0x046D, 0xC52B) is None and chip_for(None, None) is None


class _Listed:
    def __init__(self, device: str, vid: int | None, pid: int | None, description: str) -> None:
        self.device, self.vid, self.pid, self.description = device, vid, pid, description


def test_ports_lists_the_chip_and_its_baud(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(ports_mod.list_ports, "comports", lambda: [
        _Listed("/dev/ttyS0", None, None, "n/a"),
        _Listed("/dev/ttyUSB0", 0x1A86, 0x7523, "USB Serial")])
    code, out, _ = run_cli(["ports"])
    assert code == 0
    first = out.splitlines()[0]
    assert first.startswith("/dev/ttyUSB0") and "1A86:7523" in first and "CH340" in first
    assert "500000 baud exact" in first
    code, out, _ = run_cli(["ports", "--chips"])
    assert code == 0 and "0403:6001" in out and "10C4:EA60" in out and "2341:0043" in out
