"""A run: the rotor spun with some masses on it, and what the pickups read."""

from __future__ import annotations

from dataclasses import dataclass
from enum import Enum
from typing import Literal

from trueturn.model.mass import PlacedMass
from trueturn.model.reading import Reading


class RunKind(str, Enum):
    """Why a run was made (the values are the job file's words)."""

    AS_FOUND = "initial"
    TRIAL = "trial"
    CHECK = "check"
    #: checks named after what preceded them (job files may use them; the app says "check")
    CORRECTION = "correction"
    TRIM = "trim"


@dataclass(frozen=True)
class SafetyEvent:
    """Something the person had to be told to stop for (or that cut a run short), with board
    time."""

    kind: Literal["overspeed", "runaway", "link-lost", "board-restart", "aborted"]
    detail: str
    time_s: float


@dataclass(frozen=True)
class Run:
    """One run: the masses on the rotor relative to the as-found rotor, and the readings.

    ``time_s``: board time when it was kept (None outside a live job);
    ``forces_confirmed``: what the person confirmed before it started, in their words.
    """

    label: str
    masses: tuple[PlacedMass, ...]
    readings: dict[str, Reading]
    speed_rpm: float | None = None
    kind: RunKind | None = None  # None: not stated (a readings file)
    time_s: float | None = None
    forces_confirmed: tuple[str, ...] = ()
    events: tuple[SafetyEvent, ...] = ()
