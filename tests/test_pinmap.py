"""The one pin map: firmware/avr/tt_pins.h against the table in hardware/WIRING.md.

The firmware and the wiring page must name the same board pin for every signal, or a person
who follows the page wires a kit the firmware does not read. The pin names themselves are
also checked against the ATmega328P's pin functions on Uno/Nano-class boards.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

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


# --- the schematic against WIRING.md (issue #19 item 4) ------------------------------------
# hardware/schematic.svg marks every part (data-part, data-value) and every wire (data-joins:
# two terminals, "PART.PIN" or a net name such as A0, 5V, GND). Wires joined by a terminal
# form one net; a path between a module and a pin through no part is a direct wire.

SCHEMATIC = ROOT / "hardware" / "schematic.svg"
_SVG = "{http://www.w3.org/2000/svg}"
_PREFIX = {"": 1.0, "k": 1e3, "M": 1e6, "µ": 1e-6, "u": 1e-6, "n": 1e-9, "p": 1e-12}


def schematic() -> tuple[dict[str, str], list[tuple[str, str]], set[str]]:
    """(part -> value, wires as terminal pairs, optional parts) of the schematic."""
    import xml.etree.ElementTree as ET

    root = ET.parse(SCHEMATIC).getroot()
    parts: dict[str, str] = {}
    optional: set[str] = set()
    for el in root.iter():
        name = el.get("data-part")
        if name:
            assert name not in parts, f"part {name} drawn twice"
            parts[name] = el.get("data-value", "")
            if el.get("data-optional") == "yes":
                optional.add(name)
    wires = []
    for el in root.iter(f"{_SVG}path"):
        joins = el.get("data-joins")
        if joins:
            a, b = joins.split()
            wires.append((a, b))
    return parts, wires, optional


def _nets(wires: list[tuple[str, str]]) -> dict[str, str]:
    """Terminal -> net representative (union-find over the wires)."""
    parent: dict[str, str] = {}

    def find(x: str) -> str:
        parent.setdefault(x, x)
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    for a, b in wires:
        parent[find(a)] = find(b)
    return {t: find(t) for t in list(parent)}


def _value(text: str, unit: str) -> float:
    m = re.search(rf"([\d.]+)\s*([kMµunp]?){unit}", text)
    assert m, f"no value in {unit} in {text!r}"
    return float(m.group(1)) * _PREFIX[m.group(2)]


def _filter_rows(text: str) -> list[list[str]]:
    lines = text.splitlines()
    for i, line in enumerate(lines):
        if line.startswith("| pickup output | R | C |"):
            return [_cells(r) for r in lines[i + 2:] if r.startswith("|")][:10]
    raise AssertionError("WIRING.md lost its filter table")


def test_schematic_pins_are_the_wiring_pins() -> None:
    _, wires, _ = schematic()
    terminals = {t for w in wires for t in w}
    pins = wiring_pinmap(WIRING.read_text(encoding="utf-8"))
    for signal in ("PICKUP_1", "PICKUP_2", "TACH"):
        assert pins[signal] in terminals, f"the schematic has no wire to {pins[signal]}"


def test_mems_modules_go_straight_to_their_pins() -> None:
    # WIRING.md: an ADXL335-class module is its own RC filter: "Wire such a module straight
    # to the pin" -- a wire from X OUT to the pin with no part between.
    _, wires, _ = schematic()
    pins = wiring_pinmap(WIRING.read_text(encoding="utf-8"))
    assert ("PICKUP1.XOUT", pins["PICKUP_1"]) in wires
    assert ("PICKUP2.XOUT", pins["PICKUP_2"]) in wires
    assert "straight to the pin" in WIRING.read_text(encoding="utf-8")


def test_buffered_rc_and_tach_parts_match_the_wiring_page() -> None:
    parts, wires, optional = schematic()
    text = WIRING.read_text(encoding="utf-8")
    buffered = _filter_rows(text)[0]  # the buffered pickup's R and C
    assert buffered[0].startswith("buffered")
    assert _value(parts["R1"], "Ω") == pytest.approx(_value(buffered[1], "Ω"))
    assert _value(parts["C1"], "F") == pytest.approx(_value(buffered[2], "F"))
    nets = _nets(wires)
    assert nets["BUFFERED.OUT"] == nets["R1.1"] and nets["R1.2"] == nets["C1.1"]
    assert nets["C1.2"] == nets["GND"]
    # the tach: "goes to D8 through a 1 kΩ series resistor"; "add 10 kΩ from D8 to 5V"
    assert "through a **1 kΩ series resistor**" in text and "10 kΩ from D8 to 5V" in text
    assert _value(parts["R3"], "Ω") == pytest.approx(1e3)
    assert nets["TACH.OUT"] == nets["R3.1"] and nets["R3.2"] == nets["D8"]
    assert _value(parts["R4"], "Ω") == pytest.approx(10e3) and "R4" in optional
    assert nets["R4.1"] == nets["D8"] and nets["R4.2"] == nets["5V"]


def test_every_module_is_powered_from_5v_and_gnd() -> None:
    # WIRING.md "Supply": modules with their own regulator take VCC from 5V
    _, wires, _ = schematic()
    nets = _nets(wires)
    for module in ("PICKUP1", "PICKUP2", "TACH"):
        assert nets[f"{module}.VCC"] == nets["5V"], module
        assert nets[f"{module}.GND"] == nets["GND"], module
    assert nets["5V"] != nets["GND"]
    assert "connect their VCC to 5V" in WIRING.read_text(encoding="utf-8")
