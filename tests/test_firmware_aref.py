"""The firmware's AREF build (``make -C firmware ADC_REF=aref``) through the real ELF in the
simavr harness (``emu://...&aref=MV``): it reports its reference as ``aref_vs_bandgap``,
measured against the bandgap like AVCC, and the host converts counts with it -- or refuses
when the AREF pin holds no usable voltage. The standard image stays AVCC.

Sources: ATmega328P datasheet, "ADC Conversion Result" (ADC = Vin * 1024 / Vref, so the
bandgap input gives floor(1100 * 1024 / Vref)) and "ADMUX" (REFS1:0 = 00 external AREF,
01 AVCC), from memory; protocol/SPEC.md 4.1 and 4.10 (ours).
"""

from __future__ import annotations

import math

import pytest

from firmware_helpers import REPO, make, record_stream, require_tools
from trueturn.dsp import analyze_capture
from trueturn.dsp.findings import Code, describe
from trueturn.link.catalogue import load_catalogue
from trueturn.link.codec import Message, StreamDecoder
from trueturn.sim import signal_spec

KINDS = {name: code for code, name in load_catalogue().reference_kinds.items()}
SLACK = 1.5  # as in test_dsp_emu.py: 1.5 x the 95 % radius


@pytest.fixture(scope="module", autouse=True)
def built() -> None:
    require_tools("avr-gcc", "gcc", "make")
    make("emu")
    make("ADC_REF=aref", "emu")


def _first(raw: bytes, name: str) -> Message:
    return next(m for m in StreamDecoder().feed(raw) if isinstance(m, Message) and m.name == name)


def _bandgap_mv(ref_mv: float) -> int:
    """What the firmware reports: the bandgap's count n = floor(1100 * 1024 / Vref), then
    1100 * 1024 / (n + 1/2) rounded (core/tt_health.h)."""
    n = math.floor(1100 * 1024 / ref_mv)
    return round(1100 * 1024 / (n + 0.5))


def test_aref_build_reports_its_kind_and_the_host_converts_with_it() -> None:
    raw = record_stream("emu://bench-grinder?realtime=0&aref=3300")
    identity, config = _first(raw, "identity"), _first(raw, "stream_config")
    assert identity["adc_reference_kind"] == KINDS["aref_vs_bandgap"]
    assert identity["adc_reference_mv"] == _bandgap_mv(3300) == 3298
    assert config["adc_reference_mv"] == 3298

    spec = signal_spec("bench-grinder", channels=2)
    result = analyze_capture(raw, mains_hz=60.0)
    assert not [f for f in result.findings if f.code is Code.ADC_REFERENCE_REFUSED]
    assert len(result.readings) == 2
    for r in result.readings:
        order1 = next(o for o in spec["channels"][r.channel]["orders"] if o["order"] == 1)
        want = order1["amplitude_v"] * complex(math.cos(math.radians(order1["phase_deg"])),
                                               math.sin(math.radians(order1["phase_deg"])))
        assert r.unit == "V pk" and r.steady
        # with the AVCC figure (5 V) instead of AREF's the 1x would read 5/3.3 = 1.5x high
        assert abs(r.phasor - want) <= SLACK * r.confidence_radius


def test_aref_pin_left_open_is_refused_naming_the_field() -> None:
    # an open AREF pin (here 1.0 V, below the bandgap): the bandgap reads full scale (1023)
    raw = record_stream("emu://bench-grinder?realtime=0&aref=1000")
    identity = _first(raw, "identity")
    assert identity["adc_reference_kind"] == KINDS["aref_vs_bandgap"]
    assert identity["adc_reference_mv"] == round(1100 * 1024 / 1023.5)  # 1101 mV
    result = analyze_capture(raw, mains_hz=60.0)
    assert not result.readings
    refused = [f for f in result.findings if f.code is Code.ADC_REFERENCE_REFUSED]
    assert len(refused) == 1
    words = describe(refused[0])
    assert "stream_config.adc_reference_mv is 1101 mV" in words and "AREF" in words
    assert "USB" not in words


def test_standard_image_stays_avcc() -> None:
    raw = record_stream("emu://bench-grinder?realtime=0", size_bytes=2_000)
    identity = _first(raw, "identity")
    assert identity["adc_reference_kind"] == KINDS["avcc_vs_bandgap"]
    assert identity["adc_reference_mv"] == _bandgap_mv(5000)


def test_wiring_gain_error_table_is_the_formula() -> None:
    # hardware/WIRING.md, "The gain error, in numbers": counts per g = 0.33 V/g x 1024 / AVCC
    # (ADC = Vin * 1024 / Vref, datasheet; 330 mV/g at 3.3 V, the module's figure as WIRING
    # gives it, from memory), the error against the 5.000 V figure
    text = (REPO / "hardware" / "WIRING.md").read_text(encoding="utf-8")
    table = text[text.index("### The gain error, in numbers"):text.index("### The AREF build")]
    rows = [r.strip("|").split("|") for r in table.splitlines()
            if r.startswith("| ") and r[2].isdigit()]
    assert len(rows) == 4
    at_5v = 0.33 * 1024 / 5.0
    for avcc, counts, error in rows:
        v = float(avcc.strip().removesuffix(" V"))
        assert float(counts) == round(0.33 * 1024 / v, 1)
        assert float(error.strip().removesuffix(" %").replace("−", "-")) == \
            round(100 * (0.33 * 1024 / v / at_5v - 1), 1)
    assert "102.4" in text and round(0.33 * 1024 / 3.3, 1) == 102.4
