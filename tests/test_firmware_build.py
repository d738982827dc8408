"""The ATmega328P firmware builds from scratch with Debian's avr-gcc/avr-libc and fits its
budgets: flash <= 16 KB (half of the 32 KB part, leaving room for the bootloader and growth),
data + bss <= 1536 bytes (of 2048 bytes SRAM, leaving >= 512 bytes for the stack)."""

from __future__ import annotations

import re
import subprocess

import pytest

from firmware_helpers import BUILD, ELF, make, require_tools

FLASH_BUDGET_BYTES = 16 * 1024
RAM_BUDGET_BYTES = 1536


def section_sizes() -> dict[str, int]:
    """Section sizes of the ELF from `avr-size -A` (binutils, SysV format)."""
    out = subprocess.run(["avr-size", "-A", str(ELF)], capture_output=True, text=True,
                         check=True).stdout
    sizes = {}
    for line in out.splitlines():
        m = re.match(r"^(\.\w+)\s+(\d+)\s+\d+", line)
        if m:
            sizes[m.group(1)] = int(m.group(2))
    return sizes


@pytest.fixture(scope="module")
def built() -> dict[str, int]:
    require_tools("avr-gcc", "avr-objcopy", "avr-size", "avr-nm", "make")
    make("all")
    return section_sizes()


def test_elf_and_hex_are_built(built: dict[str, int]) -> None:
    assert ELF.is_file()
    hex_lines = (BUILD / "trueturn.hex").read_text().splitlines()
    # Intel HEX: every record starts with ':' and the file ends with the EOF record
    assert hex_lines and all(line.startswith(":") for line in hex_lines)
    assert hex_lines[-1] == ":00000001FF"


def test_flash_budget(built: dict[str, int]) -> None:
    flash = built[".text"] + built.get(".data", 0)
    assert 1000 < flash <= FLASH_BUDGET_BYTES, f"flash {flash} bytes"


def test_ram_budget(built: dict[str, int]) -> None:
    ram = built.get(".data", 0) + built.get(".bss", 0) + built.get(".noinit", 0)
    assert 0 < ram <= RAM_BUDGET_BYTES, f"data+bss {ram} bytes"


def test_interrupt_vectors_present(built: dict[str, int]) -> None:
    # avr-libc names handlers __vector_N (ATmega328P datasheet, "Interrupt Vectors"):
    # 10 TIMER1_CAPT, 13 TIMER1_OVF, 18 USART_RX, 19 USART_UDRE, 21 ADC
    syms = subprocess.run(["avr-nm", str(ELF)], capture_output=True, text=True,
                          check=True).stdout
    for n in (10, 13, 18, 19, 21):
        assert re.search(rf"\b__vector_{n}\b", syms), f"__vector_{n} missing"
