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
from trueturn.model.rotor import Pickup
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


def pickup_profile(name: str, pickup: Pickup | None) -> PickupProfile:
    """The DSP's profile of a machine profile's pickup (:class:`trueturn.model.Pickup`).

    Parameters
    ----------
    name : str
        The name its readings carry.
    pickup : Pickup or None
        Sensitivity (mV/g, taken to V/g), zero-g output (mV) and the RC low-pass corner (Hz,
        or None); None gives an uncalibrated profile (readings in volts).

    Returns
    -------
    PickupProfile
        With ``lowpass_corners_hz`` holding the corner, so every reading, spectrum and
        severity of the pickup takes the filter's gain and lag out (:func:`chain_response`).

    References
    ----------
    .. [1] Lookup only; units as named (common practice, no source).
    """
    if pickup is None:
        return PickupProfile(name)
    corners = (float(pickup.lowpass_corner_hz),) if pickup.lowpass_corner_hz else ()
    return PickupProfile(name, pickup.sensitivity_mv_per_g / 1000.0,
                         pickup.zero_offset_mv / 1000.0 or None, corners)


def counts_to_volts(counts: float, adc_bits: int, reference_mv: float) -> float:
    """Volts of an ADC count per the AVR transfer ``ADC = Vin 2**bits / Vref``.

    Parameters
    ----------
    counts : float
        ADC value (or a phasor's amplitude in counts).
    adc_bits : int
        ADC resolution, bits (10 on the ATmega328P).
    reference_mv : float
        ADC reference voltage, mV.

    Returns
    -------
    float
        Volts.

    References
    ----------
    .. [1] ATmega328P datasheet, "ADC Conversion Result": ``ADC = Vin 1024 / Vref``.
    """
    return counts * (reference_mv / 1000.0) / (1 << adc_bits)


def chain_response(profile: PickupProfile, frequency_hz: float | np.ndarray) -> Any:
    """Complex gain of the known input chain at ``frequency_hz`` in the phasor convention.

    A first-order low-pass with corner fc delays a tone by ``atan(f/fc)`` and scales it by
    ``1/sqrt(1 + (f/fc)^2)``, i.e. its gain is ``1 / (1 - i f/fc)`` with phase counted as lag; a
    pure delay tau adds ``360 f tau`` degrees of lag. The measured phasor is ``true *
    chain_response``.

    Parameters
    ----------
    profile : PickupProfile
        The pickup's low-pass corners (Hz) and pure delay (us).
    frequency_hz : float or numpy.ndarray
        Frequency or frequencies, Hz.

    Returns
    -------
    complex or numpy.ndarray
        The gain (dimensionless), one per frequency.

    References
    ----------
    .. [1] First-order RC low-pass: lag ``atan(f/fc)``, gain ``1/sqrt(1 + (f/fc)^2)``; 45 deg and
       1/sqrt(2) at the corner (any circuits textbook; common practice, no single source).
    """
    f = np.asarray(frequency_hz, dtype=float)
    gain = np.exp(2j * np.pi * f * profile.delay_us * 1e-6)
    for corner in profile.lowpass_corners_hz:
        gain = gain / (1.0 - 1j * f / corner)
    return complex(gain) if gain.ndim == 0 else gain


def default_unit(profile: PickupProfile) -> str:
    """The unit a pickup's readings are shown in when none is asked for.

    Parameters
    ----------
    profile : PickupProfile
        The pickup.

    Returns
    -------
    str
        ``"mm/s rms"`` for a calibrated pickup, ``"V pk"`` otherwise.

    References
    ----------
    .. [1] Velocity RMS as the ISO 20816 family rates vibration (from memory).
    """
    return "mm/s rms" if profile.calibrated else "V pk"


def conversion_factors(profile: PickupProfile, frequency_hz: float | np.ndarray,
                       unit: str) -> tuple[Any, VibrationUnit]:
    """Complex factors taking a volts phasor (peak) at ``frequency_hz`` to ``unit``.

    Compensates the profile's input chain. An uncalibrated pickup asked for a physical unit
    gives volts (the returned unit says so); the caller warns.

    Parameters
    ----------
    profile : PickupProfile
        The pickup: sensitivity (V/g), low-pass corners (Hz), delay (us).
    frequency_hz : float or numpy.ndarray
        Frequency of the order, Hz (one or many).
    unit : str
        A key of :data:`UNITS` (e.g. ``"mm/s rms"``, ``"g pk"``, ``"um pk-pk"``).

    Returns
    -------
    factor : complex or numpy.ndarray
        Multiply a volts phasor by it to get the phasor in the unit used.
    unit : VibrationUnit
        The unit used: ``unit``, or ``"V pk"`` for an uncalibrated pickup.

    Raises
    ------
    ValueError
        When ``unit`` is not a key of :data:`UNITS`.

    References
    ----------
    .. [1] Sinusoidal kinematics ``v = a / omega``, ``x = a / omega^2`` (velocity 90 deg,
       displacement 180 deg after acceleration); the conversion-chart forms 61.44 g/f in/s and
       19 560 g/f^2 mils pk-pk (from memory).
    .. [2] Detectors as commonly quoted: velocity RMS (ISO 20816 family, from memory), in/s
       peak and displacement peak-to-peak (common practice, no source).
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


def from_acceleration_factor(unit: str, frequency_hz: float) -> complex | None:
    """The complex factor taking an acceleration phasor (m/s^2 peak, phase as lag) at
    ``frequency_hz`` to ``unit``; None for volts (no physical quantity to convert to).

    Parameters
    ----------
    unit : str
        A key of :data:`UNITS`.
    frequency_hz : float
        Frequency of the order, Hz (> 0).

    Returns
    -------
    complex or None

    Raises
    ------
    ValueError
        When ``unit`` is not a key of :data:`UNITS` or the frequency is not above 0.

    References
    ----------
    .. [1] Sinusoidal kinematics ``v = a / omega``, ``x = a / omega^2`` (velocity 90 deg,
       displacement 180 deg after acceleration; from memory).
    """
    if unit not in UNITS:
        raise ValueError(f"unknown unit {unit!r}; choose one of {', '.join(UNITS)}")
    if not 0 < frequency_hz < math.inf:
        raise ValueError(f"frequency_hz must be > 0, got {frequency_hz!r}")
    quantity, scale = UNITS[unit]
    if quantity == "volts":
        return None
    omega = 2.0 * math.pi * frequency_hz
    power = {"acceleration": 0, "velocity": 1, "displacement": 2}[quantity]
    turn = complex(np.exp(1j * np.radians(PHASE_FROM_ACCELERATION_DEG[quantity])))
    return scale / omega**power * turn


def convert_phasor(volts_phasor: complex, profile: PickupProfile, frequency_hz: float,
                   unit: str) -> tuple[complex, VibrationUnit]:
    """A phasor in volts (peak) at ``frequency_hz`` in ``unit``.

    Parameters
    ----------
    volts_phasor : complex
        The 1x (or any order) as measured, volts peak, phase as lag.
    profile : PickupProfile
        The pickup.
    frequency_hz : float
        Frequency of the order, Hz.
    unit : str
        A key of :data:`UNITS`.

    Returns
    -------
    phasor : complex
        The phasor in the unit used.
    unit : VibrationUnit
        The unit used (``"V pk"`` for an uncalibrated pickup).

    Raises
    ------
    ValueError
        When ``unit`` is not a key of :data:`UNITS`.

    References
    ----------
    .. [1] Sinusoidal kinematics ``v = a / omega``, ``x = a / omega^2`` (velocity 90 deg,
       displacement 180 deg after acceleration); the conversion-chart forms 61.44 g/f in/s and
       19 560 g/f^2 mils pk-pk (from memory).
    """
    factor, used = conversion_factors(profile, frequency_hz, unit)
    return complex(volts_phasor * factor), used


def velocity_mm_s_pk(accel_g_pk: float, frequency_hz: float) -> float:
    """Peak velocity of a sinusoidal acceleration: ``a / omega``.

    Parameters
    ----------
    accel_g_pk : float
        Acceleration, g peak.
    frequency_hz : float
        Frequency, Hz.

    Returns
    -------
    float
        Velocity, mm/s peak (0.1 g pk at 30 Hz: 5.203 mm/s pk).

    References
    ----------
    .. [1] Sinusoidal kinematics ``v = a / omega``, ``x = a / omega^2`` (velocity 90 deg,
       displacement 180 deg after acceleration); the conversion-chart forms 61.44 g/f in/s and
       19 560 g/f^2 mils pk-pk (from memory).
    """
    return accel_g_pk * STANDARD_GRAVITY_M_S2 / (2.0 * math.pi * frequency_hz) * 1000.0


def displacement_um_pk(accel_g_pk: float, frequency_hz: float) -> float:
    """Peak displacement of a sinusoidal acceleration: ``a / omega^2``.

    Parameters
    ----------
    accel_g_pk : float
        Acceleration, g peak.
    frequency_hz : float
        Frequency, Hz.

    Returns
    -------
    float
        Displacement, um peak.

    References
    ----------
    .. [1] Sinusoidal kinematics ``v = a / omega``, ``x = a / omega^2`` (velocity 90 deg,
       displacement 180 deg after acceleration); the conversion-chart forms 61.44 g/f in/s and
       19 560 g/f^2 mils pk-pk (from memory).
    """
    omega = 2.0 * math.pi * frequency_hz
    return accel_g_pk * STANDARD_GRAVITY_M_S2 / (omega * omega) * 1e6
