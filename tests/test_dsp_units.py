"""Unit conversions at 1x: counts -> volts -> g -> velocity and displacement."""

from __future__ import annotations

import math

import pytest

from trueturn.dsp.units import (
    PickupProfile,
    chain_response,
    convert_phasor,
    counts_to_volts,
    displacement_um_pk,
    velocity_mm_s_pk,
)

ACCEL = PickupProfile("accel", sensitivity_v_per_g=0.300)


def test_counts_to_volts_avr_transfer() -> None:
    # ATmega328P datasheet, ADC conversion result: ADC = Vin * 1024 / Vref
    assert counts_to_volts(512, 10, 5000) == pytest.approx(2.5)
    assert counts_to_volts(1023, 10, 5000) == pytest.approx(5.0 * 1023 / 1024)
    assert counts_to_volts(1, 10, 1100) == pytest.approx(1.1 / 1024)


def test_velocity_worked_number() -> None:
    # v = a / omega at 1x. Worked number: 0.1 g pk at 30 Hz (1800 rpm):
    # a = 0.980665 m/s^2, omega = 188.496 rad/s, v = 5.2026 mm/s pk = 3.679 mm/s rms.
    assert velocity_mm_s_pk(0.1, 30.0) == pytest.approx(5.2026, rel=1e-4)
    z, unit = convert_phasor(0.030 + 0j, ACCEL, 30.0, "mm/s rms")  # 0.030 V = 0.1 g
    assert unit == "mm/s rms"
    assert abs(z) == pytest.approx(3.679, rel=1e-3)


def test_conversion_chart_formulas() -> None:
    # from memory: common vibration conversion chart (sinusoid, 1 g = 386.1 in/s^2):
    # v_pk [in/s] = 61.44 * a_pk [g] / f [Hz];  D_pk-pk [mils] = 19 560 * a_pk [g] / f^2
    a_g, f = 0.1, 30.0
    v_in_s, _ = convert_phasor(0.030 + 0j, ACCEL, f, "in/s pk")
    d_mils, _ = convert_phasor(0.030 + 0j, ACCEL, f, "mil pk-pk")
    assert abs(v_in_s) == pytest.approx(61.44 * a_g / f, rel=1e-3)
    assert abs(d_mils) == pytest.approx(19_560 * a_g / f**2, rel=1e-3)
    assert displacement_um_pk(a_g, f) == pytest.approx(27.60, rel=1e-3)


def test_phase_of_velocity_and_displacement() -> None:
    # x = -a / omega^2 and v = integral of a: velocity peaks 90 deg of rotation after the
    # acceleration, displacement 180 deg after it (textbook calculus, no source needed)
    a = complex(math.cos(math.radians(10)), math.sin(math.radians(10))) * 0.03
    for unit, shift in (("g pk", 0.0), ("mm/s pk", 90.0), ("um pk-pk", 180.0)):
        z, _ = convert_phasor(a, ACCEL, 25.0, unit)
        assert math.degrees(math.atan2(z.imag, z.real)) % 360 == pytest.approx(10.0 + shift)


def test_first_order_rc_at_corner() -> None:
    # first-order RC low-pass at its corner: gain 1/sqrt(2), phase lag 45 deg (textbook)
    rc = PickupProfile("p", lowpass_corners_hz=(50.0,))
    g = chain_response(rc, 50.0)
    assert abs(g) == pytest.approx(1 / math.sqrt(2))
    assert math.degrees(math.atan2(g.imag, g.real)) == pytest.approx(45.0)
    # compensation: a measured phase of 100 deg at the corner means 55 deg before the filter
    z, _ = convert_phasor(complex(math.cos(math.radians(100)), math.sin(math.radians(100))),
                          rc, 50.0, "V pk")
    assert math.degrees(math.atan2(z.imag, z.real)) == pytest.approx(55.0)
    assert abs(z) == pytest.approx(math.sqrt(2))


def test_pure_delay_phase() -> None:
    # 100 us at 50 Hz is 360 * 50 * 1e-4 = 1.8 deg of lag
    g = chain_response(PickupProfile("p", delay_us=100.0), 50.0)
    assert math.degrees(math.atan2(g.imag, g.real)) == pytest.approx(1.8)


def test_uncalibrated_pickup_stays_in_volts() -> None:
    disc = PickupProfile("piezo disc")
    z, unit = convert_phasor(0.2 + 0.1j, disc, 40.0, "mm/s rms")
    assert unit == "V pk" and z == pytest.approx(0.2 + 0.1j)
    with pytest.raises(ValueError):
        convert_phasor(1j, disc, 40.0, "furlongs")
