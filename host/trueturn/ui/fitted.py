"""Enter what was actually fitted: a one-screen form over the hands-on step (issue #17).

The form only asks and reads numbers; whether the entry is possible (a mass above 0 and
within the plane's limit, a position the plane has, a hole only where the profile allows
removal, never for a trial) is the procedure's answer
(:meth:`trueturn.procedure.guide.Procedure.fit`). A field left empty keeps what the step
says now.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Grid
from textual.screen import ModalScreen
from textual.widgets import Footer, Input, Label, Static

from trueturn.model import PlacedMass
from trueturn.model.units import MassUnit, mass_to_g
from trueturn.positions import index_of, number_of, position_text
from trueturn.procedure.guide import Procedure
from trueturn.ui.texts import Shown


@dataclass(frozen=True)
class FitEntry:
    """What the person typed: ``item`` (index into the step's changes), and each of the
    mass, position (index), angle and hole/weight, None where left as it was."""

    item: int
    mass_g: float | None = None
    position: int | None = None
    angle_deg: float | None = None
    removal: bool | None = None


class FitFormError(ValueError):
    """A field that is not what it asks for (the form says which, in one line)."""


def read_entry(proc: Procedure, items: Sequence[int], part: str, mass: str, where: str,
               kind: str, mass_unit: MassUnit = "g") -> FitEntry:
    """The form's fields as an entry (the mass typed in ``mass_unit``, the machine's);
    FitFormError names the field that is wrong."""
    number = 1
    if part.strip():
        try:
            number = int(part)
        except ValueError:
            raise FitFormError(f"part: a number 1 to {len(items)}, got {part!r}") from None
    if not 1 <= number <= len(items):
        raise FitFormError(f"part: a number 1 to {len(items)}, got {number}")
    item = items[number - 1]
    if item not in proc.fittable():
        raise FitFormError("the step is over: nothing to enter now")
    mass_now = proc.fit_target(item).mass
    assert mass_now is not None
    plane = proc.plane(mass_now.plane)
    mass_g = position = angle = None
    if mass.strip():
        unit_words = {"g": "grams", "oz": "ounces"}[mass_unit]
        try:
            typed = float(mass.replace(",", ".").strip().removesuffix(mass_unit).strip())
        except ValueError:
            raise FitFormError(f"mass: a number of {unit_words}, got {mass!r}") from None
        if not math.isfinite(typed):
            raise FitFormError(f"mass: a number of {unit_words}, got {mass!r}")
        mass_g = mass_to_g(typed, mass_unit)
    if where.strip():
        angles = plane.position_angles_deg
        try:
            if angles:
                position = index_of(int(where), len(angles))
            else:
                angle = float(where.replace("°", "").strip())
        except ValueError:
            what = f"a position 1 to {len(angles)}" if angles else "an angle in degrees"
            raise FitFormError(f"where: {what}, got {where!r}") from None
    removal = None
    if kind.strip():
        letter = kind.strip().lower()[0]
        if letter not in "wh":
            raise FitFormError(f"weight or hole: w or h, got {kind!r}")
        removal = letter == "h"
    return FitEntry(item, mass_g, position, angle, removal)


class FittedForm(ModalScreen[FitEntry | None]):
    """Ask what was fitted for one mass of the hands-on step; Enter keeps it, Escape not."""

    DEFAULT_CSS = """
    FittedForm { align: center top; background: $background 80%; }
    FittedForm #fit-parts { height: auto; max-height: 8; padding: 0 1; }
    FittedForm #fit-msg { height: 2; padding: 0 1; }
    """
    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(self, proc: Procedure, items: Sequence[int], shown: Shown | None = None
                 ) -> None:
        super().__init__(id="fitted-form")
        self.proc = proc
        self.items = tuple(items)
        self.shown = shown or Shown()

    def _masses(self) -> list[PlacedMass]:
        live = self.proc.fittable()
        return [m for i in self.items if i in live
                for m in (self.proc.fit_target(i).mass,) if m is not None]

    def _part_lines(self) -> list[str]:
        lines = []
        for n, m in enumerate(self._masses(), start=1):
            where = (position_text(number_of(m.position), m.angle_deg)
                     if m.position is not None else f"{m.angle_deg:.0f}°")
            what = "hole" if m.removal else m.kind.value
            lines.append(f"  {n}. {what} {self.shown.mass(abs(m.mass_g))} on {m.plane} at {where}")
        return lines

    def compose(self) -> ComposeResult:
        yield Static("[b]What was actually fitted[/b]  (empty field: as it is; Enter: keep, "
                     "Escape: cancel)", classes="form-title")
        yield Static("\n".join(self._part_lines()), id="fit-parts")
        planes = {m.plane for m in self._masses()}
        positions = [self.proc.plane(p).position_angles_deg for p in planes]
        where = ("position number" if all(positions) else
                 "angle, degrees from the mark" if not any(positions) else
                 "position number (or angle where the plane has none)")
        holes = any(self.proc.plane(p).removal_allowed for p in planes)
        with Grid(classes="form"):
            yield Label(f"part (1-{len(self.items)})")
            yield Input(value="1" if len(self.items) == 1 else "", id="fit-part")
            yield Label(f"mass, {self.shown.units.mass}")
            yield Input(id="fit-mass")
            yield Label(where)
            yield Input(id="fit-where")
            if holes:
                yield Label("w: weight added, h: hole (material out)")
                yield Input(id="fit-kind")
        yield Static("", id="fit-msg")
        yield Footer()

    def on_mount(self) -> None:
        self.query_one("#fit-mass" if len(self.items) == 1 else "#fit-part", Input).focus()

    def _value(self, field_id: str) -> str:
        found = self.query(f"#{field_id}")
        return found.first(Input).value if found else ""

    def on_input_submitted(self, event: Input.Submitted) -> None:
        del event
        try:
            entry = read_entry(self.proc, self.items, self._value("fit-part"),
                               self._value("fit-mass"), self._value("fit-where"),
                               self._value("fit-kind"), self.shown.units.mass)
        except FitFormError as exc:
            self.query_one("#fit-msg", Static).update(f"[b red]{exc}[/]")
            return
        self.dismiss(entry)

    def action_cancel(self) -> None:
        self.dismiss(None)
