"""A mass placed on the rotor (trial, correction part, trim), added or removed."""

from __future__ import annotations

from dataclasses import dataclass, replace
from enum import Enum

from trueturn.angles import phasor, wrap_deg


class MassKind(str, Enum):
    """What a placed mass is for."""

    TRIAL = "trial"
    CORRECTION = "correction"
    TRIM = "trim"


@dataclass(frozen=True)
class PlacedMass:
    """``mass_g`` (> 0) in ``plane`` at ``angle_deg``, relative to the as-found rotor.

    ``removal``: the mass is drilled or ground OUT at ``angle_deg`` instead of added; its
    effect equals adding the same mass at the opposite angle (:meth:`as_addition`, the one
    removal rule). ``position``: index into the plane's list of position angles when the
    plane has positions (a person sees its number, :func:`trueturn.positions.number_of`).
    """

    plane: str
    mass_g: float
    angle_deg: float
    position: int | None = None
    kind: MassKind = MassKind.CORRECTION
    removal: bool = False

    def as_addition(self) -> PlacedMass:
        """The added mass with the same effect: removal at theta = addition at theta + 180."""
        if not self.removal:
            return self
        return replace(self, angle_deg=wrap_deg(self.angle_deg + 180.0), removal=False)

    @property
    def vector_g(self) -> complex:
        """The mass's effect as a complex vector (grams at the plane's radius)."""
        m = self.as_addition()
        return phasor(m.mass_g, m.angle_deg)
