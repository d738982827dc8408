"""The units module: exact conversion factors, round trips, the words shown (issue #17)."""

from __future__ import annotations

import math

import pytest

from trueturn.model import units
from trueturn.model.units import IMPERIAL, METRIC, NBSP


def test_factors_are_the_exact_definitions():
    # NIST SP 811 (2008), Appendix B.8/B.9, and the international yard and pound agreement
    # (1959): 1 in = 25.4 mm, 1 lb = 0.45359237 kg, 1 oz = lb/16 = 28.349523125 g,
    # 1 lbf = 4.4482216152605 N (the pound under standard gravity 9.80665 m/s²); all exact.
    assert units.MM_PER_IN == 25.4
    assert units.KG_PER_LB == 0.45359237
    assert units.G_PER_OZ == pytest.approx(28.349523125, rel=1e-15)
    assert units.N_PER_LBF == pytest.approx(4.4482216152605, rel=1e-15)


def test_handbook_values():
    # NIST SP 811 Appendix B.9 rows: "ounce (avoirdupois) to gram 2.834 952 E+01",
    # "pound-force to newton 4.448 222 E+00", "inch to meter 2.54 E-02";
    # the ounce-inch to gram-millimetre factor follows: 28.349523125 * 25.4 = 720.077887375
    assert units.mass_to_g(1.0, "oz") == pytest.approx(28.34952, abs=1e-5)
    assert units.force_from_n(4.448222, "lbf") == pytest.approx(1.0, abs=1e-6)
    assert units.length_to_mm(1.0, "in") == 25.4
    assert units.unbalance_to_gmm(1.0, "oz", "in") == pytest.approx(720.077887375, rel=1e-14)
    assert units.rotor_mass_to_kg(10.0, "lb") == pytest.approx(4.5359237, rel=1e-15)


@pytest.mark.parametrize("value", [1e-6, 0.05, 1.0, 37.5, 12345.678])
def test_round_trips(value):
    for unit in ("g", "oz"):
        assert units.mass_to_g(units.mass_from_g(value, unit), unit) == pytest.approx(value)
    for unit in ("mm", "in"):
        assert units.length_to_mm(units.length_from_mm(value, unit), unit) == pytest.approx(value)
    for unit in ("kg", "lb"):
        assert units.rotor_mass_to_kg(units.rotor_mass_from_kg(value, unit), unit) == \
            pytest.approx(value)
    assert units.unbalance_to_gmm(units.unbalance_from_gmm(value, "oz", "in"), "oz", "in") == \
        pytest.approx(value)


def test_the_words_round_at_the_scale_resolution():
    # a pocket scale reads 0.01 g or 0.001 oz (common practice, no source)
    assert units.mass_text(0.7375, "g") == "0.74 g"
    assert units.mass_text(28.349523125, "oz") == "1.000 oz"
    assert units.mass_text(0.7375, "oz", sep=NBSP) == f"0.026{NBSP}oz"
    assert units.rounded_mass_g(0.7375, "g") == pytest.approx(0.74)
    assert units.length_text(76.2, "in") == "3.000 in"
    assert units.force_text(4.4482216152605 * 12.3, "lbf") == "12.3 lbf"
    assert units.force_text(1234.4, "N") == "1234 N"  # whole numbers, never 1.23e+03
    assert units.unbalance_text(720.077887375 * 0.174, "oz", "in") == "0.174 oz·in"
    assert units.significant_text(8.006e-16) == "0.000000000000000801"
    assert units.significant_text(0.0) == "0"


def test_vibration_follows_the_machine_and_keeps_the_detector():
    # 25.4 mm/s = 1 in/s exactly (1 in = 25.4 mm); 25.4 um = 1 mil
    assert units.vibration_text(25.4, "mm/s rms", IMPERIAL) == "1.000 in/s rms"
    assert units.vibration_text(25.4, "um pk-pk", IMPERIAL) == "1.000 mil pk-pk"
    assert units.vibration_text(2.0, "mm/s rms", METRIC) == "2.000 mm/s rms"
    assert units.vibration_text(0.3, "g pk", IMPERIAL) == "0.300 g pk"  # not a velocity
    assert units.vibration_text(25.4, "mm/s rms", IMPERIAL, sep=NBSP) == \
        f"1.000{NBSP}in/s{NBSP}rms"


def test_choice_derives_force_rotor_mass_and_unbalance():
    assert (IMPERIAL.force, IMPERIAL.rotor_mass, IMPERIAL.unbalance) == ("lbf", "lb", "oz·in")
    assert (METRIC.force, METRIC.rotor_mass, METRIC.unbalance) == ("N", "kg", "g·mm")
    assert math.isclose(units.force_from_n(100.0, METRIC.force), 100.0)


def test_the_choice_words_masses_and_forces_for_every_layer():
    # the one wording the procedure and the app share (issue #20 follow-up); factors exact
    # (NIST SP 811, 2008, B.8/B.9: 1 oz = 28.349523125 g, 1 lbf = 4.4482216152605 N)
    assert IMPERIAL.mass_words(28.349523125 * 0.0264) == "0.026 oz"
    assert METRIC.mass_words(0.7375) == "0.74 g"
    assert IMPERIAL.force_words(4.4482216152605 * 12.3, sep=NBSP) == f"12.3{NBSP}lbf"
    assert METRIC.force_words(54.8) == "54.8 N"
    assert units.UnitChoice("oz", "mm", "mm/s").force_words(4.4482216152605) == "1.00 lbf"


@pytest.mark.parametrize("suggested_g", [0.004, 0.05, 0.3101, 1.234, 12.0, 0.74])
def test_a_mass_for_a_person_is_rounded_up_to_a_whole_step_of_the_scale(suggested_g):
    # one step for every mass rounded up for a person: what the app shows, 0.01 g or
    # 0.001 oz (a pocket scale, common practice, no source); 1 oz = 28.349523125 g exact
    # (NIST SP 811, B.8). Checked in the person's unit by integer arithmetic on the steps.
    g = units.ceil_to_scale_g(suggested_g, "g")
    hundredths = round(g * 100)
    assert g == pytest.approx(hundredths / 100, abs=1e-12)
    assert hundredths == max(1, math.ceil(suggested_g * 100 - 1e-9))
    assert units.mass_text(g, "g") == f"{hundredths / 100:.2f} g"  # the words show it exactly
    oz = units.ceil_to_scale_g(suggested_g, "oz") / 28.349523125
    thousandths = round(oz * 1000)
    assert oz == pytest.approx(thousandths / 1000, abs=1e-12)
    assert thousandths == max(1, math.ceil(suggested_g / 28.349523125 * 1000 - 1e-9))
