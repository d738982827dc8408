"""Units: board counts -> volts -> g -> velocity and displacement at one order.

Chain (all amplitudes of a phasor are peak, 0-pk, until the last step):

* counts -> volts: ``V = counts * Vref / 2**bits`` (AVR ADC transfer, ATmega328P datasheet,
  "ADC Conversion Result": ADC = Vin * 1024 / Vref).
* volts -> g: ``a = (V - zero_g_v) / sensitivity_v_per_g``; only the sensitivity matters
  for a phasor (the zero-g offset is DC). A pickup without a sensitivity (a piezo disc, a
  small speaker) stays in volts: it still balances, because influence coefficients only
  need a reading proportional to the vibration.
* g -> velocity at angular frequency w: ``v = a * g0 / w``. The velocity's positive peak
  comes 90 degrees of rotation after the acceleration's, so phase_v = phase_a + 90 (lag
  convention of :mod:`trueturn.angles`). Displacement ``x = a * g0 / w**2``, phase + 180.
* Detectors as commonly quoted: acceleration in g peak, velocity in mm/s RMS (the ISO 20816
  family rates velocity RMS) or in/s peak (common US practice), displacement in um or mils
  peak-to-peak (common practice for shaft and bearing displacement).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

from trueturn.constants import MM_PER_INCH, STANDARD_GRAVITY_M_S2, UM_PER_MIL  # noqa: F401
from trueturn.model.units import VibrationUnit, is_vibration_unit

Quantity = Literal["volts", "acceleration", "velocity", "displacement"]

# unit label -> (quantity, factor from SI peak (m/s^2, m/s, m) or V peak to the unit)
UNITS: dict[str, tuple[Quantity, float]] = {
    "V pk": ("volts", 1.0),
    "g pk": ("acceleration", 1.0 / STANDARD_GRAVITY_M_S2),
    "m/s2 pk": ("acceleration", 1.0),
    "mm/s rms": ("velocity", 1000.0 / math.sqrt(2.0)),
    "mm/s pk": ("velocity", 1000.0),
    "in/s pk": ("velocity", 1000.0 / MM_PER_INCH),
    "um pk-pk": ("displacement", 2.0e6),
    "mil pk-pk": ("displacement", 2.0e6 / UM_PER_MIL),
}

# Phase added (degrees, lag convention) when going from acceleration to each quantity.
PHASE_FROM_ACCELERATION_DEG: dict[str, float] = {
    "acceleration": 0.0, "velocity": 90.0, "displacement": 180.0,
}


@dataclass(frozen=True)
class PickupProfile:
    """What is known about one pickup and its input filter.

    ``sensitivity_v_per_g`` None means uncalibrated (readings stay in volts).
    ``zero_g_v`` is the output at rest (used for the DC level only).
    ``lowpass_corners_hz``: first-order RC low-pass corners between the sensor and the ADC
    (for example the ADXL335-style output capacitor, or an RC anti-alias filter), whose
    phase lag and gain loss at each order are compensated.
    ``delay_us``: any further pure delay of the chain (compensated as a phase lag).
    """

    name: str
    sensitivity_v_per_g: float | None = None
    zero_g_v: float | None = None
    lowpass_corners_hz: tuple[float, ...] = field(default_factory=tuple)
    delay_us: float = 0.0

    @property
    def calibrated(self) -> bool:
        return self.sensitivity_v_per_g is not None and self.sensitivity_v_per_g > 0


def counts_to_volts(counts: float, adc_bits: int, reference_mv: float) -> float:
    """Volts per the AVR ADC transfer ``ADC = Vin * 2**bits / Vref``."""
    return counts * (reference_mv / 1000.0) / (1 << adc_bits)


def chain_response(profile: PickupProfile, frequency_hz: float | np.ndarray) -> Any:
    """Complex gain of the known input chain at ``frequency_hz`` in the phasor convention.

    A first-order low-pass with corner fc delays a tone by ``atan(f/fc)`` and scales it by
    ``1/sqrt(1 + (f/fc)^2)``, i.e. its gain is ``1 / (1 - i f/fc)`` with phase counted as
    lag; a pure delay tau adds ``360 f tau`` degrees of lag. The measured phasor is
    ``true * chain_response``. Works on a float or an array of frequencies.
    """
    f = np.asarray(frequency_hz, dtype=float)
    gain = np.exp(2j * np.pi * f * profile.delay_us * 1e-6)
    for corner in profile.lowpass_corners_hz:
        gain = gain / (1.0 - 1j * f / corner)
    return complex(gain) if gain.ndim == 0 else gain


def default_unit(profile: PickupProfile) -> str:
    """Velocity mm/s RMS for a calibrated pickup, volts otherwise."""
    return "mm/s rms" if profile.calibrated else "V pk"


def conversion_factors(profile: PickupProfile, frequency_hz: float | np.ndarray,
                       unit: str) -> tuple[Any, VibrationUnit]:
    """Complex factors taking a volts phasor (peak) at ``frequency_hz`` to ``unit``.

    Compensates the profile's input chain. An uncalibrated pickup asked for a physical unit
    gives volts (the returned unit says so); the caller warns.
    """
    if unit not in UNITS or not is_vibration_unit(unit):
        raise ValueError(f"unknown unit {unit!r}; choose one of {', '.join(UNITS)}")
    f = np.asarray(frequency_hz, dtype=float)
    factor = 1.0 / np.asarray(chain_response(profile, f))
    quantity, scale = UNITS[unit]
    used: VibrationUnit = unit
    if quantity == "volts" or not profile.calibrated:
        used = "V pk"
    else:
        assert profile.sensitivity_v_per_g is not None
        omega = 2.0 * np.pi * f
        factor = factor * (STANDARD_GRAVITY_M_S2 / profile.sensitivity_v_per_g) * scale
        if quantity == "velocity":
            factor = factor / omega
        elif quantity == "displacement":
            factor = factor / (omega * omega)
        factor = factor * np.exp(1j * np.radians(PHASE_FROM_ACCELERATION_DEG[quantity]))
    return (complex(factor) if np.ndim(factor) == 0 else factor), used


def convert_phasor(volts_phasor: complex, profile: PickupProfile, frequency_hz: float,
                   unit: str) -> tuple[complex, VibrationUnit]:
    """A phasor in volts (peak) at ``frequency_hz`` -> (phasor in ``unit``, unit used)."""
    factor, used = conversion_factors(profile, frequency_hz, unit)
    return complex(volts_phasor * factor), used


def velocity_mm_s_pk(accel_g_pk: float, frequency_hz: float) -> float:
    """Peak velocity (mm/s) of a sinusoidal acceleration (g peak) at ``frequency_hz``: a/w."""
    return accel_g_pk * STANDARD_GRAVITY_M_S2 / (2.0 * math.pi * frequency_hz) * 1000.0


def displacement_um_pk(accel_g_pk: float, frequency_hz: float) -> float:
    """Peak displacement (um) of a sinusoidal acceleration (g peak): a/w^2."""
    omega = 2.0 * math.pi * frequency_hz
    return accel_g_pk * STANDARD_GRAVITY_M_S2 / (omega * omega) * 1e6
