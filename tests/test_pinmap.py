"""The one pin map: firmware/avr/tt_pins.h against the table in hardware/WIRING.md.

The firmware and the wiring page must name the same board pin for every signal, or a person
who follows the page wires a kit the firmware does not read. The pin names themselves are
also checked against the ATmega328P's pin functions on Uno/Nano-class boards.
"""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PINS_HEADER = ROOT / "firmware" / "avr" / "tt_pins.h"
WIRING = ROOT / "hardware" / "WIRING.md"

# The contract between the firmware and the hardware docs (issue #9 / the firmware issue).
CONTRACT = {
    "PICKUP_1": "A0",
    "PICKUP_2": "A1",
    "TACH": "D8",
    "LED": "D13",
    "UART_TX": "D1",
    "UART_RX": "D0",
}

# Board pin -> (ATmega328P port pin, alternate function the kit relies on).
# from memory: ATmega328P datasheet, "Pin Configurations" and "Alternate Port Functions"
# (PB0 = ICP1, PB5 = SCK, PC0/PC1 = ADC0/ADC1, PD0 = RXD, PD1 = TXD), with the Arduino
# Uno/Nano pin numbering (D0-D7 = PD0-PD7, D8-D13 = PB0-PB5, A0-A5 = PC0-PC5).
ATMEGA328P_PINS = {
    "A0": ("PC0", "ADC0"),
    "A1": ("PC1", "ADC1"),
    "D8": ("PB0", "ICP1"),
    "D13": ("PB5", None),
    "D1": ("PD1", "TXD"),
    "D0": ("PD0", "RXD"),
}

_DEFINE = re.compile(r'^\s*#\s*define\s+TT_PINMAP_(\w+)\s+"([^"]*)"', re.MULTILINE)


def header_pinmap(text: str) -> dict[str, str]:
    """The ``TT_PINMAP_<SIGNAL> "<pin>"`` lines of tt_pins.h as {signal: pin}."""
    found: dict[str, str] = {}
    for signal, pin in _DEFINE.findall(text):
        assert signal not in found, f"TT_PINMAP_{signal} defined twice in tt_pins.h"
        found[signal] = pin
    return found


def _cells(line: str) -> list[str]:
    return [c.strip().strip("`").strip() for c in line.strip().strip("|").split("|")]


def wiring_table(text: str) -> list[list[str]]:
    """Rows (cells, backticks removed) of the table whose header starts ``| signal | board pin |``."""
    lines = text.splitlines()
    for i, line in enumerate(lines):
        if line.strip().startswith("|") and _cells(line)[:2] == ["signal", "board pin"]:
            rows = []
            for row in lines[i + 2 :]:  # skip the |---| separator
                if not row.strip().startswith("|"):
                    break
                rows.append(_cells(row))
            return rows
    raise AssertionError("hardware/WIRING.md has no table with header '| signal | board pin |'")


def wiring_pinmap(text: str) -> dict[str, str]:
    found: dict[str, str] = {}
    for cells in wiring_table(text):
        assert cells[0] not in found, f"signal {cells[0]} listed twice in WIRING.md"
        found[cells[0]] = cells[1]
    return found


def test_header_matches_wiring_page() -> None:
    assert PINS_HEADER.exists(), "firmware/avr/tt_pins.h is missing (the one pin-map header)"
    from_header = header_pinmap(PINS_HEADER.read_text(encoding="utf-8"))
    from_docs = wiring_pinmap(WIRING.read_text(encoding="utf-8"))
    assert from_header == from_docs


def test_header_keeps_the_contract() -> None:
    assert header_pinmap(PINS_HEADER.read_text(encoding="utf-8")) == CONTRACT


def test_wiring_page_keeps_the_contract() -> None:
    assert wiring_pinmap(WIRING.read_text(encoding="utf-8")) == CONTRACT


def test_wiring_page_names_the_right_chip_pins() -> None:
    # Reference table above: ATmega328P datasheet pin functions (from memory).
    for cells in wiring_table(WIRING.read_text(encoding="utf-8")):
        board_pin, chip_column = cells[1], cells[2]
        port_pin, function = ATMEGA328P_PINS[board_pin]
        assert port_pin in chip_column, f"{board_pin}: expected {port_pin} in {chip_column!r}"
        if function is not None:
            assert function in chip_column, f"{board_pin}: expected {function} in {chip_column!r}"


def test_table_parser_reads_backticked_and_plain_names() -> None:
    text = ("intro\n\n| signal | board pin | note |\n|---|---|---|\n"
            "| `TACH` | D8 | x |\n| LED | `D13` | y |\n\nafter\n| other | table |\n")
    assert wiring_pinmap(text) == {"TACH": "D8", "LED": "D13"}


def test_header_parser_ignores_other_defines() -> None:
    text = ('#define TT_PINMAP_TACH     "D8"   /* PB0 / ICP1 */\n'
            "#define TT_TACH_DDR DDRB\n"
            '  #  define TT_PINMAP_LED "D13"\n')
    assert header_pinmap(text) == {"TACH": "D8", "LED": "D13"}
