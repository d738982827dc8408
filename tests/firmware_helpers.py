"""Shared by the firmware tests: build targets of firmware/Makefile, and tool checks that
fail (never skip) under CI=true, so a CI machine without the toolchain cannot pass quietly."""

from __future__ import annotations

import os
import shutil
import subprocess
import time
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
FIRMWARE = REPO / "firmware"
BUILD = FIRMWARE / "build"
ELF = BUILD / "trueturn.elf"
CORE_CHECK = BUILD / "tt_core_check"
HARNESS = BUILD / "tt_emu"


def require_tools(*names: str) -> None:
    """Skip locally, fail under CI=true, when a build tool is missing."""
    missing = [n for n in names if shutil.which(n) is None]
    if not missing:
        return
    why = f"missing tool(s): {', '.join(missing)} (Debian: gcc-avr avr-libc simavr libsimavr-dev)"
    if os.environ.get("CI") == "true":
        pytest.fail(why)
    pytest.skip(why)


def make(*targets: str) -> None:
    """Run ``make -C firmware TARGETS``; fail the test with make's output on an error."""
    require_tools("make")
    done = subprocess.run(["make", "-s", "-C", str(FIRMWARE), *targets],
                          capture_output=True, text=True, check=False)
    if done.returncode != 0:
        pytest.fail(f"make -C firmware {' '.join(targets)} failed:\n{done.stdout}\n{done.stderr}")


def record_stream(url: str, size_bytes: int = 40_000, wall_s: float = 60.0) -> bytes:
    """Start the stream of the board behind ``url`` and return its first ``size_bytes``
    bytes (at least), failing when it stops sending within ``wall_s`` of wall time."""
    from trueturn.link.codec import encode_frame
    from trueturn.link.ports import open_port

    port = open_port(url, timeout_s=0.05)
    try:
        port.write(encode_frame("start", 1))
        raw = bytearray()
        deadline = time.monotonic() + wall_s
        while len(raw) < size_bytes and time.monotonic() < deadline:
            raw += port.read(65536)
    finally:
        port.close()
    assert len(raw) >= size_bytes, "the emulated board stopped sending"
    return bytes(raw)
