"""Field limits carried as dataclass metadata, so the one validator (``trueturn.schema``)
checks every noun of the model the same way when it is read from a file."""

from __future__ import annotations

from dataclasses import dataclass
from enum import Enum
from typing import Any

#: metadata key: an angle as a person writes it, checked within one turn either way
ANGLE_WITHIN_TURN_KEY = "angle_within_turn"


def angle_limits() -> dict[str, Any]:
    """Field metadata for an angle as a person or an instrument writes it: 0..360 or
    -180..180 degrees, taken modulo 360 (:func:`trueturn.angles.wrap_deg`); beyond a full
    turn either way it is more likely a typo and is refused (by ``trueturn.schema``)."""
    return {**limits(), ANGLE_WITHIN_TURN_KEY: True}


def limits(*, minimum: float | None = None, maximum: float | None = None,
           above: float | None = None, below: float | None = None,
           nonempty: bool = False) -> dict[str, Any]:
    """Field metadata: inclusive ``minimum``/``maximum``, exclusive ``above``/``below``,
    ``nonempty`` for text and lists."""
    return {"minimum": minimum, "maximum": maximum, "above": above, "below": below,
            "nonempty": nonempty}


class RuleCode(str, Enum):
    """Which rule across fields a value breaks (``_checks`` of a model dataclass)."""

    NOT_MORE_THAN = "not-more-than"  # the field must not exceed ``other``
    NOT_LESS_THAN = "not-less-than"  # the field must not fall below ``other``
    TWO_OR_NONE = "two-or-none"  # give exactly two entries, or none
    MUST_DIFFER = "must-differ"  # the entries' positions must differ
    NEEDED = "needed"  # the field must be given (because of ``other``)
    AT_MOST_TWO = "at-most-two"  # at most two entries
    NAME_TWICE = "name-twice"  # a name (``value``) is used twice
    UNKNOWN_NAME = "unknown-name"  # ``value`` names nothing in ``other``


@dataclass(frozen=True)
class Rule:
    """A broken rule across fields as data: ``code``, the field it is judged against
    (``other``, a field path beside the one named) and the value in question. ``text`` is
    the wording for a file (field keys); a screen words the code itself."""

    code: RuleCode
    text: str
    other: str = ""
    value: str = ""

    def __str__(self) -> str:
        return self.text
