"""The row type every bench script returns, and the table printer."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Row:
    """One figure: what was measured, its value with unit, the goal, and whether it is met."""

    name: str
    value: str
    goal: str
    met: bool | None = None  # None: informational, no goal


def format_table(rows: list[Row]) -> str:
    headers = ("figure", "value", "goal", "met")
    cells = [(r.name, r.value, r.goal, {True: "yes", False: "NO", None: "-"}[r.met]) for r in rows]
    widths = [max([len(h)] + [len(c[i]) for c in cells]) for i, h in enumerate(headers)]
    lines = ["  ".join(h.ljust(w) for h, w in zip(headers, widths, strict=True))]
    lines.append("  ".join("-" * w for w in widths))
    lines += ["  ".join(c.ljust(w) for c, w in zip(cell, widths, strict=True)) for cell in cells]
    return "\n".join(lines)
