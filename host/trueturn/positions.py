"""Positions on a correction plane (blades, holes, slots): one numbering, from 1, everywhere.

* Inside the code a position is an *index* into a plane's list of position angles (0, 1, ...).
  A person sees its *number*, index + 1: position 1 is the first one. The two meet only here
  (:func:`number_of`, :func:`index_of`); every screen, report, ring, job file and command line
  shows and takes numbers.
* Numbers grow **against** rotation from position 1, like every angle of trueturn
  (host/trueturn/angles.py): position ``n`` of ``count`` equally spaced positions, with
  position 1 at ``first_deg`` from the reference mark, sits at
  ``first_deg + (n - 1) * 360 / count`` (:func:`equally_spaced_deg`). A rotor whose blades are
  stamped the other way round converts its angles at the edge (``angles.from_user_angle_deg``).
* A position is put into words in one place, :func:`position_text`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from trueturn.angles import wrap_deg

#: The number a person sees for the first position (index 0).
FIRST_NUMBER = 1


def number_of(index: int) -> int:
    """The number a person sees for the position at ``index`` (0-based) of a plane's list."""
    if index < 0:
        raise ValueError(f"position index must not be negative, got {index}")
    return index + FIRST_NUMBER


def index_of(number: int, count: int) -> int:
    """The index into a plane's list of ``count`` positions of position ``number`` (from 1)."""
    if not FIRST_NUMBER <= number < FIRST_NUMBER + count:
        raise ValueError(f"position {number} does not exist: positions are numbered "
                         f"{FIRST_NUMBER}..{count + FIRST_NUMBER - 1}")
    return number - FIRST_NUMBER


def equally_spaced_deg(count: int, first_deg: float = 0.0) -> tuple[float, ...]:
    """Angles of ``count`` equally spaced positions, position 1 at ``first_deg``.

    Parameters
    ----------
    count : int
        Number of positions (at least 1).
    first_deg : float, default 0.0
        Angle of position 1 from the reference mark, degrees against rotation.

    Returns
    -------
    tuple of float
        Entry ``k`` is the angle of position ``k + 1``: ``first_deg + k * 360 / count``,
        folded into [0, 360).
    """
    if count < 1:
        raise ValueError(f"number of positions must be at least 1, got {count}")
    step = 360.0 / count
    return tuple(wrap_deg(first_deg + k * step) for k in range(count))


@dataclass(frozen=True)
class Position:
    """One numbered position: its ``number`` as a person sees it (from 1) and its angle."""

    number: int
    angle_deg: float

    def __post_init__(self) -> None:
        if self.number < FIRST_NUMBER:
            raise ValueError(f"positions are numbered from {FIRST_NUMBER}, got {self.number}")

    @property
    def index(self) -> int:
        """Index of this position in its plane's list of angles."""
        return self.number - FIRST_NUMBER

    @classmethod
    def at_index(cls, index: int, angles_deg: Sequence[float]) -> Position:
        """The position at ``index`` of a plane's list of angles."""
        return cls(number_of(index), wrap_deg(angles_deg[index]))


def numbered(angles_deg: Sequence[float]) -> tuple[Position, ...]:
    """A plane's list of position angles as numbered positions (1, 2, ...)."""
    return tuple(Position.at_index(k, angles_deg) for k in range(len(angles_deg)))


def degrees_text(angle_deg: float) -> str:
    """An angle as shown to a person: whole degrees when it is one, else one decimal."""
    if abs(angle_deg - round(angle_deg)) < 0.05:
        return f"{wrap_deg(round(angle_deg)):.0f}\u00b0"
    return f"{angle_deg:.1f}\u00b0"


def position_text(number: int, angle_deg: float | None = None) -> str:
    """``'position 3 (200°)'``: the one wording of a position, for screens, reports, CLI."""
    if number < FIRST_NUMBER:
        raise ValueError(f"positions are numbered from {FIRST_NUMBER}, got {number}")
    text = f"position {number}"
    return text if angle_deg is None else f"{text} ({degrees_text(angle_deg)})"
