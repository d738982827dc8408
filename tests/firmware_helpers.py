"""Shared by the firmware tests: build targets of firmware/Makefile, and tool checks that
fail (never skip) under CI=true, so a CI machine without the toolchain cannot pass quietly."""

from __future__ import annotations

import os
import shutil
import subprocess
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
