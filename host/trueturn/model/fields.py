"""Field limits carried as dataclass metadata, so the one validator (``trueturn.schema``)
checks every noun of the model the same way when it is read from a file."""

from __future__ import annotations

from typing import Any


def limits(*, minimum: float | None = None, maximum: float | None = None,
           above: float | None = None, below: float | None = None,
           nonempty: bool = False) -> dict[str, Any]:
    """Field metadata: inclusive ``minimum``/``maximum``, exclusive ``above``/``below``,
    ``nonempty`` for text and lists."""
    return {"minimum": minimum, "maximum": maximum, "above": above, "below": below,
            "nonempty": nonempty}
