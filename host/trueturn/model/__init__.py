"""The nouns every layer shares, each defined once (ARCHITECTURE.md, "model").

dsp measures :class:`Reading`; balance turns runs of readings and placed masses into a
:class:`Correction` and a :class:`Verdict`; the procedure sequences :class:`Run` s of a
:class:`RunKind`; jobs persists them through its schema; ui and cli show them. Frozen
dataclasses, plain numbers, units in the names, angles in the one convention of
:mod:`trueturn.angles`, positions numbered as :mod:`trueturn.positions` says.
"""

from trueturn.model.mass import MassKind, PlacedMass
from trueturn.model.reading import Phasor, Reading
from trueturn.model.result import (
    Correction,
    PlaneArrangement,
    TolerancePlanes,
    Verdict,
    VerdictFlag,
)
from trueturn.model.rotor import Bearing, Pickup, Plane, PlaneLayout
from trueturn.model.run import Run, RunKind, SafetyEvent

__all__ = [
    "Bearing",
    "Correction",
    "MassKind",
    "Phasor",
    "Pickup",
    "PlacedMass",
    "Plane",
    "PlaneArrangement",
    "PlaneLayout",
    "Reading",
    "Run",
    "RunKind",
    "SafetyEvent",
    "TolerancePlanes",
    "Verdict",
    "VerdictFlag",
]
