"""Pick a saved machine profile, or create one with a short form (workspace ``machines/``).

The form asks only what the procedure needs; everything is checked by the jobs layer's own
schema (one line naming the field), then saved atomically in the workspace.
"""

from __future__ import annotations

from collections.abc import Callable

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Grid
from textual.screen import ModalScreen
from textual.widgets import Footer, Input, Label, OptionList, Static
from textual.widgets.option_list import Option

from trueturn.errors import UserError
from trueturn.jobs.profiles import MachineProfile
from trueturn.jobs.schema import from_data
from trueturn.jobs.store import Workspace

NEW = "__new__"

# (field id, label, default) of the new-machine form.
FORM: list[tuple[str, str, str]] = [
    ("name", "Machine name", ""),
    ("kind", "What it is (e.g. table saw arbor)", ""),
    ("mass", "Rotor mass, kg", ""),
    ("speed", "Service speed, rpm", ""),
    ("max_speed", "Maximum safe speed, rpm", ""),
    ("planes", "Correction planes (1 or 2)", "1"),
    ("radius", "Weight radius, mm", ""),
    ("positions", "Fixed positions per plane (0 = any angle)", "0"),
    ("sensitivity", "Pickup sensitivity, mV/g", "300"),
    ("mains", "Mains frequency, Hz (50 or 60)", "50"),
    ("grade", "Target grade G, mm/s", "6.3"),
]


def profile_from_form(values: dict[str, str], pickups: int) -> MachineProfile:
    """Build and check a profile from the form's text fields (UserError naming the field)."""
    def number(key: str) -> float:
        text = values.get(key, "").strip()
        try:
            return float(text)
        except ValueError:
            label = next(lab for k, lab, _ in FORM if k == key)
            raise UserError(f"{label}: '{text}' is not a number") from None

    planes = int(number("planes"))
    if planes not in (1, 2):
        raise UserError("Correction planes: 1 or 2")
    positions = int(number("positions"))
    layout = {"kind": "equal", "positions": positions} if positions > 0 else {"kind": "free"}
    speed = number("speed")
    data = {
        "name": values.get("name", "").strip(), "rotor_kind": values.get("kind", "").strip(),
        "rotor_mass_kg": number("mass"), "speed_min_rpm": speed, "speed_max_rpm": speed,
        "max_speed_rpm": number("max_speed"), "rotation": "cw",
        "planes": [{"name": f"plane {k + 1}", "radius_mm": number("radius"), "layout": layout}
                   for k in range(planes)],
        "pickups": [{"name": f"pickup {k + 1}", "sensitivity_mv_per_g": number("sensitivity")}
                    for k in range(pickups)],
        "mains_hz": int(number("mains")), "target_grade": number("grade"),
    }
    return from_data(MachineProfile, data, "new machine form")


class MachineForm(ModalScreen[MachineProfile | None]):
    """A one-screen form for a new machine."""

    BINDINGS = [Binding("escape", "cancel", "Cancel"), Binding("ctrl+s", "save", "Save")]

    def __init__(self, workspace: Workspace, pickups: int) -> None:
        super().__init__(id="machine-form")
        self.workspace = workspace
        self.pickups = pickups

    def compose(self) -> ComposeResult:
        yield Static("[b]New machine[/b]  (Tab: next field, Ctrl+S or Enter on the last: "
                     "save, Escape: cancel)", classes="form-title")
        with Grid(classes="form"):
            for key, label, default in FORM:
                yield Label(label)
                yield Input(value=default, id=f"f-{key}")
        yield Static("", id="form-msg")
        yield Footer()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        inputs = list(self.query(Input))
        if event.input is inputs[-1]:
            self.action_save()
        else:
            self.focus_next()

    def action_save(self) -> None:
        values = {key: self.query_one(f"#f-{key}", Input).value for key, _, _ in FORM}
        try:
            profile = profile_from_form(values, self.pickups)
            self.workspace.save_machine(profile)
        except (UserError, OSError) as exc:
            self.query_one("#form-msg", Static).update(f"[b red]{exc}[/]")
            return
        self.dismiss(profile)

    def action_cancel(self) -> None:
        self.dismiss(None)


class MachinePicker(ModalScreen[MachineProfile | None]):
    """The saved machines with as many pickups as the board streams, and 'new machine'."""

    BINDINGS = [Binding("escape", "cancel", "Cancel"), Binding("n", "new", "New machine")]

    def __init__(self, workspace: Workspace, pickups: int, current: MachineProfile) -> None:
        super().__init__(id="machine-picker")
        self.workspace = workspace
        self.pickups = pickups
        self.current = current
        self.note = ""

    def compose(self) -> ComposeResult:
        yield Static("[b]Machine[/b]  (Enter: use it, n: new machine, Escape: back)",
                     classes="form-title")
        options = [Option(f"{self.current.name}  (now)", id=f"now:{self.current.name}")]
        try:
            names = self.workspace.machine_names() if self.workspace.machines_dir.is_dir() \
                else []
        except UserError as exc:
            names, self.note = [], str(exc)
        for name in names:
            if name != self.current.name:
                options.append(Option(name, id=f"saved:{name}"))
        options.append(Option("New machine…", id=NEW))
        yield OptionList(*options, id="machine-list")
        yield Static(self.note, id="picker-msg")
        yield Footer()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        option_id = event.option.id or ""
        if option_id == NEW:
            self.action_new()
            return
        if option_id.startswith("now:"):
            self.dismiss(None)
            return
        try:
            profile = self.workspace.load_machine(option_id.split(":", 1)[1])
        except UserError as exc:
            self.query_one("#picker-msg", Static).update(f"[b red]{exc}[/]")
            return
        if len(profile.pickups) != self.pickups:
            self.query_one("#picker-msg", Static).update(
                f"[b red]{profile.name} has {len(profile.pickups)} pickup(s); the board "
                f"streams {self.pickups}: restart with trueturn ui --machine[/]")
            return
        self.dismiss(profile)

    def action_new(self) -> None:
        done: Callable[[MachineProfile | None], None] = self._created
        self.app.push_screen(MachineForm(self.workspace, self.pickups), done)

    def _created(self, profile: MachineProfile | None) -> None:
        if profile is not None:
            self.dismiss(profile)

    def action_cancel(self) -> None:
        self.dismiss(None)
