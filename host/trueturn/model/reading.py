"""A 1x reading: one pickup over one run, as the DSP layer measures it."""

from __future__ import annotations

from dataclasses import dataclass, field

from trueturn.angles import amplitude_phase, phasor
from trueturn.model.fields import limits
from trueturn.model.units import VibrationUnit


@dataclass(frozen=True)
class Phasor:
    """An amplitude and a phase (degrees, the convention of :mod:`trueturn.angles`)."""

    amplitude: float
    phase_deg: float

    @property
    def vector(self) -> complex:
        """``amplitude * exp(i phase)``."""
        return phasor(self.amplitude, self.phase_deg)

    @classmethod
    def of(cls, vector: complex) -> Phasor:
        """The phasor of a complex vector."""
        return cls(*amplitude_phase(vector))


@dataclass(frozen=True)
class Reading:
    """The 1x of one pickup averaged over a run.

    ``unit`` is the DSP layer's label with its detector (``'g pk'``, ``'mm/s rms'``); the
    limits in the fields' metadata are checked when a reading is read from a file.
    ``phase_deg`` is the lag of the 1x positive peak after the tach event (None: not known,
    e.g. the amplitude-only method). ``confidence_radius`` is the radius (in ``unit``) of
    the circle holding the true phasor with about 95 % probability, ``confidence_deg`` the
    phase half-width it subtends. ``clipped``: the capture hit the ADC limits (the 1x reads
    low): never used for coefficients, no pass on it. ``no_tach``: no once-per-rev
    reference during the run, so the phase means nothing.
    """

    sensor: str = field(metadata=limits(nonempty=True))
    amplitude: float = field(metadata=limits(minimum=0))
    unit: VibrationUnit
    phase_deg: float | None = field(metadata=limits(minimum=0, below=360))
    confidence_deg: float = field(default=180.0, metadata=limits(minimum=0, maximum=180))
    revolutions: int = field(default=0, metadata=limits(minimum=0))
    steady: bool = True
    speed_rpm: float | None = field(default=None, metadata=limits(above=0))
    confidence_radius: float | None = field(default=None, metadata=limits(minimum=0))
    clipped: bool = False
    no_tach: bool = False

    @property
    def has_phase(self) -> bool:
        return self.phase_deg is not None

    @property
    def vector(self) -> complex:
        """The 1x as a complex phasor; a reading without a phase has none."""
        if self.phase_deg is None:
            raise ValueError(f"reading of {self.sensor} has no phase")
        return phasor(self.amplitude, self.phase_deg)
