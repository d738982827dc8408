"""The one vocabulary of vibration units a reading may carry."""

from __future__ import annotations

import typing
from typing import Literal, TypeGuard

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
