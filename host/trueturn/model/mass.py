"""A mass placed on the rotor (trial, correction part, trim), added or removed."""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from enum import Enum

from trueturn.angles import phasor, wrap_deg
from trueturn.model.fields import limits


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

#: Most pieces a kit of owned parts lists (the search of balance.parts is exponential in it).
MAX_OWNED_PARTS = 40


@dataclass(frozen=True)
class PartStock:
    """Correction parts of one mass that the person owns: ``count`` pieces of ``mass_g``."""

    mass_g: float = field(metadata=limits(above=0))
    count: int = field(default=1, metadata=limits(minimum=1, maximum=MAX_OWNED_PARTS))
    what: str = ""  # e.g. "M6 washer", "clip weight"


@dataclass(frozen=True)
class OwnedParts:
    """The correction parts in the drawer; ``stack``: most parts one position takes.

    A machine profile without them places any mass ("any mass"); with them a correction is
    made as the best combination of these parts (:mod:`trueturn.balance.parts`).
    """

    parts: list[PartStock] = field(metadata=limits(nonempty=True))
    stack: int = field(default=1, metadata=limits(minimum=1, maximum=MAX_OWNED_PARTS))

    def _checks(self) -> list[tuple[str, str]]:
        total = sum(p.count for p in self.parts)
        if total > MAX_OWNED_PARTS:
            return [("parts", f"at most {MAX_OWNED_PARTS} pieces in all, got {total}")]
        return []

    def masses_g(self) -> list[float]:
        """One entry per piece, as :func:`trueturn.balance.parts.best_combination` takes."""
        return [p.mass_g for p in self.parts for _ in range(p.count)]
