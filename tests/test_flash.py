"""`trueturn flash` (issue #19 item 1): the shipped image, the avrdude command, its failures.

avrdude itself is replaced by small scripts that say what avrdude says (its messages as
avrdude 6.x/7.x print them, from memory); the image test rebuilds the firmware with avr-gcc.
"""

from __future__ import annotations

import os
import shlex
import stat
import subprocess
import sys
from pathlib import Path

import pytest

from cli_helpers import run_cli
from firmware_helpers import FIRMWARE, REPO, require_tools
from trueturn.link.boards import FLASH_BOARDS
from trueturn.link.flashing import firmware_image


def test_the_shipped_image_is_what_the_sources_build(tmp_path: Path) -> None:
    require_tools("avr-gcc", "avr-objcopy", "make")
    build = tmp_path / "build"
    done = subprocess.run(["make", "-s", "-C", str(FIRMWARE), f"BUILD={build}",
                           f"{build}/trueturn.hex"], capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stderr
    fresh = (build / "trueturn.hex").read_bytes()
    shipped = firmware_image().read_bytes()
    assert shipped == fresh, ("host/trueturn/firmware/trueturn.hex is stale: run "
                              "`make firmware-image` and commit it with the firmware change")


def test_the_image_is_package_data() -> None:
    image = firmware_image()
    assert image.is_file() and image.parent.parent.name == "trueturn"
    pyproject = (REPO / "pyproject.toml").read_text(encoding="utf-8")
    assert '"firmware/*.hex"' in pyproject  # [tool.setuptools.package-data] trueturn
    assert image.relative_to(image.parent.parent).match("firmware/*.hex")
    # Intel HEX: every record starts with ':' and the file ends with the end-of-file record
    lines = image.read_text(encoding="ascii").split()
    assert all(ln.startswith(":") for ln in lines) and lines[-1] == ":00000001FF"


@pytest.mark.parametrize("board", list(FLASH_BOARDS))
def test_dry_run_prints_the_exact_command(board: str) -> None:
    code, out, _ = run_cli(["flash", "--port", "/dev/ttyUSB0", "--board", board, "--dry-run"])
    assert code == 0
    words = shlex.split(out.strip())
    b = FLASH_BOARDS[board]
    assert Path(words[0]).name.startswith("avrdude")
    assert words[1:] == ["-p", b.part, "-c", "arduino", "-P", "/dev/ttyUSB0", "-b", str(b.baud),
                         "-D", "-U", f"flash:w:{firmware_image()}:i"]


def test_plain_atmega328_and_the_old_bootloader() -> None:
    _, out, _ = run_cli(["flash", "--port", "COM5", "--board", "m328", "--dry-run"])
    assert " -p m328 " in out  # not m328p: its signature check would fail
    _, out, _ = run_cli(["flash", "--port", "COM5", "--board", "nano-old", "--dry-run"])
    assert " -p m328p " in out and " -b 57600 " in out


def _fake_avrdude(tmp_path: Path, say: str, status: int) -> Path:
    script = tmp_path / "avrdude"
    log = tmp_path / "args.txt"
    script.write_text(f"#!{sys.executable}\nimport sys\nopen({str(log)!r}, 'w').write("
                      f"'\\n'.join(sys.argv[1:]))\nsys.stderr.write({say!r})\n"
                      f"sys.exit({status})\n", encoding="utf-8")
    script.chmod(script.stat().st_mode | stat.S_IEXEC)
    return script


@pytest.fixture
def path_with(monkeypatch: pytest.MonkeyPatch):  # type: ignore[no-untyped-def]
    def use(folder: Path | None) -> None:
        monkeypatch.delenv("AVRDUDE", raising=False)
        monkeypatch.setenv("PATH", str(folder) if folder else "/nonexistent")
    return use


def test_missing_avrdude_is_one_line_with_the_install_hint(path_with, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    path_with(None)
    port = tmp_path / "ttyUSB0"
    port.write_bytes(b"")
    code, out, err = run_cli(["flash", "--port", str(port)])
    assert code == 2 and err.count("\n") == 1 and "avrdude is not installed" in err
    if sys.platform.startswith("linux"):
        assert "sudo apt-get install avrdude" in err
    code, out, err = run_cli(["flash", "--port", str(port), "--dry-run"])
    assert code == 0 and "-U flash:w:" in out and "not installed" in err


def test_a_successful_flash_runs_the_dry_run_command(path_with, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    path_with(tmp_path)
    _fake_avrdude(tmp_path, "avrdude: 5432 bytes of flash verified\n", 0)
    port = tmp_path / "ttyUSB0"
    port.write_bytes(b"")
    _, dry, _ = run_cli(["flash", "--port", str(port), "--dry-run"])
    code, out, err = run_cli(["flash", "--port", str(port), "--no-check"])
    assert code == 0, err
    ran = (tmp_path / "args.txt").read_text(encoding="utf-8").split("\n")
    assert ran == shlex.split(dry.strip())[1:]
    assert "bytes of flash verified" in err and "trueturn check" in out


@pytest.mark.parametrize(("said", "needle"), [
    ("avrdude: stk500_recv(): programmer is not responding\n", "--board nano-old"),
    ("avrdude: stk500_getsync() attempt 10 of 10: not in sync: resp=0x00\n", "--board nano-old"),
    ("avrdude: Device signature = 0x1e9514\navrdude: Expected signature for ATmega328P is "
     "1E 95 0F\n", "--board m328"),
    ("avrdude: ser_open(): can't open device \"/dev/ttyUSB0\": Permission denied\n",
     "sudo usermod -aG"),
    ("avrdude: verification error, first mismatch at byte 0x0000\n", "short USB lead"),
])
def test_avrdude_failures_in_plain_words(said: str, needle: str, path_with,  # type: ignore[no-untyped-def]
                                         tmp_path: Path) -> None:
    path_with(tmp_path)
    _fake_avrdude(tmp_path, said, 1)
    port = tmp_path / "ttyUSB0"
    port.write_bytes(b"")
    code, _, err = run_cli(["flash", "--port", str(port), "--no-check"])
    assert code == 2 and "Traceback" not in err
    assert needle in err.splitlines()[-1]


def test_virtual_rigs_are_not_flashed() -> None:
    code, _, err = run_cli(["flash", "--port", "sim://bench-grinder"])
    assert code == 2 and "nothing to flash" in err


def test_flash_then_the_board_is_greeted(path_with, tmp_path: Path, monkeypatch) -> None:  # type: ignore[no-untyped-def]
    """After avrdude, the freshly started board is heard the way a real one needs (here a
    virtual board that resets on open stands in for it)."""
    import trueturn.cli.cmd_flash as cmd_flash
    import trueturn.link.ports as ports

    path_with(tmp_path)
    _fake_avrdude(tmp_path, "avrdude done.  Thank you.\n", 0)
    real = ports.open_port
    monkeypatch.setattr(ports, "open_port", lambda url: real(
        "sim://bench-grinder?realtime=0&reset_on_open=1&bootloader=new"))
    monkeypatch.setattr(cmd_flash, "check_flash_port", lambda port: None)
    code, out, err = run_cli(["flash", "--port", "/dev/ttyUSB0"])
    assert code == 0, err
    assert "answers as trueturn firmware" in out and os.path.basename("/dev/ttyUSB0") in out
