"""Units of measure: one internal convention, converted at the edge (like :mod:`trueturn.angles`).

Inside every layer masses are grams (``mass_g``), lengths millimetres (``radius_mm``),
rotor masses kilograms (``rotor_mass_kg``), forces newtons (``force_n``), unbalance g·mm and
velocity mm/s. A person may see and type ounces, inches, pounds, pound-force and in/s: the
edges (the app, the command line, the report) convert with the functions here and nowhere
else, and put numbers into words with the ``*_text`` functions, whose resolution is chosen
once for each unit.

Exact definitions (international yard and pound agreement, 1959; NIST SP 811, 2008 ed.,
Appendix B.8 and B.9):

* 1 in = 25.4 mm exactly;
* 1 lb (avoirdupois) = 0.453 592 37 kg exactly, 1 oz = 1/16 lb = 28.349 523 125 g exactly;
* 1 lbf = 1 lb × standard gravity 9.806 65 m/s² = 4.448 221 615 260 5 N exactly.

This module also keeps the one vocabulary of vibration units a reading may carry
(:data:`VIBRATION_UNIT_LABELS`).
"""

from __future__ import annotations

import math
import typing
from dataclasses import dataclass
from typing import Literal, TypeGuard

from trueturn.constants import MM_PER_INCH, STANDARD_GRAVITY_M_S2

#: Units a reading may carry. The first group are the DSP layer's labels, detector included
#: (trueturn.dsp.units.UNITS; a test keeps the two lists in step); the bare forms are
#: accepted for hand-written files and mean "detector not stated".
VibrationUnit = Literal["mm/s rms", "mm/s pk", "in/s pk", "in/s rms", "um pk-pk", "mil pk-pk",
                        "g pk", "m/s2 pk", "V pk", "mm/s", "in/s", "um", "mil", "g", "m/s2", "V"]

VIBRATION_UNIT_LABELS: tuple[str, ...] = typing.get_args(VibrationUnit)


def is_vibration_unit(label: str) -> TypeGuard[VibrationUnit]:
    """True when ``label`` is one of :data:`VIBRATION_UNIT_LABELS` (narrows it for a type
    checker: the label then has the type :data:`VibrationUnit`)."""
    return label in VIBRATION_UNIT_LABELS


MassUnit = Literal["g", "oz"]
LengthUnit = Literal["mm", "in"]
VelocityUnit = Literal["mm/s", "in/s"]
ForceUnit = Literal["N", "lbf"]
RotorMassUnit = Literal["kg", "lb"]

#: Millimetres per inch (exact; the one definition is trueturn.constants).
MM_PER_IN = MM_PER_INCH
#: Kilograms per pound (avoirdupois), exact (NIST SP 811, B.8).
KG_PER_LB = 0.45359237
#: Grams per ounce (avoirdupois, 1/16 lb), exact: 28.349523125.
G_PER_OZ = KG_PER_LB * 1000.0 / 16.0
#: Newtons per pound-force, exact: one pound under standard gravity, 4.4482216152605.
N_PER_LBF = KG_PER_LB * STANDARD_GRAVITY_M_S2

#: Between a number and its unit in the app: a no-break space, so a line is never wrapped
#: between ``0.60`` and ``g`` (Textual wraps at ordinary spaces only).
NBSP = "\u00a0"

#: Decimals a mass is shown with: a pocket scale reads 0.01 g or 0.001 oz (0.028 g), the
#: resolution a person can weigh a part to (common practice, no source).
MASS_DECIMALS: dict[str, int] = {"g": 2, "oz": 3}
#: Decimals a length (radius, axial position) is shown with: 0.1 mm, 0.001 in (a rule or a
#: caliper, common practice, no source).
LENGTH_DECIMALS: dict[str, int] = {"mm": 1, "in": 3}


@dataclass(frozen=True)
class UnitChoice:
    """The units a person sees for one machine: masses, lengths, vibration velocity.

    Forces and rotor masses follow the mass unit (ounces go with pound-force and pounds),
    unbalance is the mass unit times the length unit (g·mm, oz·in).
    """

    mass: MassUnit = "g"
    length: LengthUnit = "mm"
    vibration: VelocityUnit = "mm/s"

    @property
    def force(self) -> ForceUnit:
        return "lbf" if self.mass == "oz" else "N"

    @property
    def rotor_mass(self) -> RotorMassUnit:
        return "lb" if self.mass == "oz" else "kg"

    @property
    def unbalance(self) -> str:
        return f"{self.mass}·{self.length}"

    def mass_words(self, mass_g: float, sep: str = " ") -> str:
        """A mass in these units at the scale's resolution (:func:`mass_text`): ``'0.74 g'``,
        ``'0.026 oz'``. The one wording of a mass for every layer that speaks to a person."""
        return mass_text(mass_g, self.mass, sep)

    def force_words(self, force_n: float, sep: str = " ") -> str:
        """A force in these units (N, or lbf with ounces; :func:`force_text`)."""
        return force_text(force_n, self.force, sep)


METRIC = UnitChoice()
IMPERIAL = UnitChoice("oz", "in", "in/s")


# ---- conversions (value in the person's unit <-> the internal unit) ----------------------
def mass_from_g(mass_g: float, unit: MassUnit) -> float:
    """A mass in grams in ``unit`` (g or oz)."""
    return mass_g / G_PER_OZ if unit == "oz" else mass_g


def mass_to_g(value: float, unit: MassUnit) -> float:
    """A mass given in ``unit`` (g or oz), in grams."""
    return value * G_PER_OZ if unit == "oz" else value


def length_from_mm(length_mm: float, unit: LengthUnit) -> float:
    """A length in millimetres in ``unit`` (mm or in)."""
    return length_mm / MM_PER_IN if unit == "in" else length_mm


def length_to_mm(value: float, unit: LengthUnit) -> float:
    """A length given in ``unit`` (mm or in), in millimetres."""
    return value * MM_PER_IN if unit == "in" else value


def rotor_mass_from_kg(mass_kg: float, unit: RotorMassUnit) -> float:
    """A rotor mass in kilograms in ``unit`` (kg or lb)."""
    return mass_kg / KG_PER_LB if unit == "lb" else mass_kg


def rotor_mass_to_kg(value: float, unit: RotorMassUnit) -> float:
    """A rotor mass given in ``unit`` (kg or lb), in kilograms."""
    return value * KG_PER_LB if unit == "lb" else value


def force_from_n(force_n: float, unit: ForceUnit) -> float:
    """A force in newtons in ``unit`` (N or lbf)."""
    return force_n / N_PER_LBF if unit == "lbf" else force_n


def unbalance_from_gmm(unbalance_gmm: float, mass: MassUnit, length: LengthUnit) -> float:
    """An unbalance in g·mm in ``mass``·``length`` (g·mm, oz·in, g·in, oz·mm)."""
    return length_from_mm(mass_from_g(unbalance_gmm, mass), length)


def unbalance_to_gmm(value: float, mass: MassUnit, length: LengthUnit) -> float:
    """An unbalance given in ``mass``·``length``, in g·mm."""
    return length_to_mm(mass_to_g(value, mass), length)


#: length-dependent vibration base unit -> (quantity, factor to the metric base of it)
_VIBRATION_BASES: dict[str, tuple[str, float]] = {
    "mm/s": ("velocity", 1.0),
    "in/s": ("velocity", MM_PER_IN),
    "um": ("displacement", 1.0),
    "mil": ("displacement", MM_PER_IN),  # 1 mil = 0.001 in = 25.4 um
}


def split_unit(label: str) -> tuple[str, str]:
    """``'mm/s rms'`` -> ``('mm/s', 'rms')``; ``'mm/s'`` -> ``('mm/s', '')``."""
    base, _, detector = label.partition(" ")
    return base, detector


def convert_vibration(amplitude: float, from_unit: str, preferred: VelocityUnit,
                      length: LengthUnit = "mm") -> tuple[float, str]:
    """A reading in the person's units: velocity in ``preferred`` (mm/s or in/s),
    displacement in um (``length`` mm) or mil (``length`` in); the detector (rms, pk, pk-pk)
    is kept as measured, never converted. Acceleration and volts stay as stored."""
    base, detector = split_unit(from_unit)
    if base not in _VIBRATION_BASES:
        return amplitude, from_unit
    quantity, factor = _VIBRATION_BASES[base]
    target = preferred if quantity == "velocity" else ("mil" if length == "in" else "um")
    value = amplitude * factor / _VIBRATION_BASES[target][1]
    return value, f"{target} {detector}".strip()


# ---- words ---------------------------------------------------------------------------------
def significant_text(value: float, digits: int = 3) -> str:
    """``value`` to ``digits`` significant figures, never in exponent form (``1230``,
    ``0.0694``); a value that rounds to zero is ``0``."""
    if value == 0 or not math.isfinite(value):
        return "0" if value == 0 else f"{value}"
    exponent = math.floor(math.log10(abs(value)))
    decimals = max(0, digits - 1 - exponent)
    text = f"{round(value, decimals):.{decimals}f}"
    return "0" if float(text) == 0 else text


def mass_text(mass_g: float, unit: MassUnit, sep: str = " ") -> str:
    """A mass at the scale's resolution: ``'0.74 g'``, ``'0.026 oz'``."""
    return f"{mass_from_g(mass_g, unit):.{MASS_DECIMALS[unit]}f}{sep}{unit}"


def rounded_mass_g(mass_g: float, unit: MassUnit) -> float:
    """``mass_g`` rounded to what :func:`mass_text` shows, back in grams."""
    return mass_to_g(round(mass_from_g(mass_g, unit), MASS_DECIMALS[unit]), unit)


def ceil_to_scale_g(mass_g: float, unit: MassUnit) -> float:
    """``mass_g`` rounded up to a whole step of the scale in the person's unit, back in
    grams: a trial (or a redone one) is never lighter than suggested, never zero.

    The step is the resolution every mass is shown with (:data:`MASS_DECIMALS`: 0.01 g,
    0.001 oz), the one rule wherever a mass is rounded up for a person. Why not 0.1 g (a
    kitchen scale): the app already shows and the solver rounds every correction to 0.01 g,
    so it assumes a pocket scale reading 0.01 g (the usual tool for fans and wheels,
    whose corrections are fractions of a gram; common practice, no source); a 0.1 g step
    would round a 0.31 g trial up to 0.40 g (+29 %) and, in grams only, be 3.5 times coarser
    than the 0.001 oz (0.028 g) step a person in ounces gets on the same scale. A person
    whose scale is coarser rounds up once more and enters what was fitted (the fitted mass,
    not the suggestion, is what the runs use).
    """
    step = 10.0 ** -MASS_DECIMALS[unit]
    steps = max(1, math.ceil(round(mass_from_g(mass_g, unit) / step, 9)))
    return mass_to_g(steps * step, unit)


def length_text(length_mm: float, unit: LengthUnit, sep: str = " ") -> str:
    """A length: ``'75.0 mm'``, ``'2.953 in'``."""
    return f"{length_from_mm(length_mm, unit):.{LENGTH_DECIMALS[unit]}f}{sep}{unit}"


def rotor_mass_text(mass_kg: float, unit: RotorMassUnit, sep: str = " ") -> str:
    """A rotor mass to 3 significant figures: ``'4.2 kg'``, ``'9.26 lb'``."""
    return f"{significant_text(rotor_mass_from_kg(mass_kg, unit))}{sep}{unit}"


def force_text(force_n: float, unit: ForceUnit, sep: str = " ") -> str:
    """A force to 3 significant figures: ``'54.8 N'``, ``'12.3 lbf'``."""
    return f"{significant_text(force_from_n(force_n, unit))}{sep}{unit}"


def unbalance_text(unbalance_gmm: float, mass: MassUnit, length: LengthUnit,
                   sep: str = " ", digits: int = 3) -> str:
    """An unbalance to ``digits`` significant figures: ``'125 g·mm'``, ``'0.174 oz·in'``."""
    value = unbalance_from_gmm(unbalance_gmm, mass, length)
    return f"{significant_text(value, digits)}{sep}{mass}·{length}"


def vibration_text(amplitude: float, unit: str, choice: UnitChoice, sep: str = " ",
                   width: int = 0) -> str:
    """A reading's amplitude in the person's vibration unit, 3 decimals: ``'2.715 mm/s
    rms'``, ``'0.107 in/s rms'`` (acceleration and volts as measured). ``width`` pads the
    number for a column."""
    value, shown = convert_vibration(amplitude, unit, choice.vibration, choice.length)
    return f"{value:{width}.3f}{sep}{shown.replace(' ', sep)}"
