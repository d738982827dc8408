"""Pick a saved machine profile, create one, or edit one (workspace ``machines/``).

The form covers what the procedure and the pictures need: the rotor, its speeds and the
direction it turns (seen from the front), each correction plane (radius, position along the
shaft, the end it is worked from, its positions: any angle, a count with the angle of
position 1, or a list of irregular angles; whether material may be removed; the largest mass
it takes, which caps a trial), the bearings' positions, and each pickup's sensitivity and
input filter corner. Editing starts from the saved profile and keeps what the form does not
show (tach, units, notes, parts, ...).

Nothing is checked here: the text is turned into the profile's data as it is (a word where a
number belongs stays a word) and the one validator, :mod:`trueturn.schema`, judges it. Its
coded answer (:class:`~trueturn.schema.SchemaError`: field path, problem, values, rule) is
put into plain words naming the field as the form labels it (:func:`form_error_words`).
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Grid, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Footer, Input, Label, OptionList, Static
from textual.widgets.option_list import Option

from trueturn.errors import UserError
from trueturn.jobs.profiles import MachineProfile
from trueturn.jobs.schema import from_data, to_data
from trueturn.jobs.store import Workspace
from trueturn.model.fields import RuleCode
from trueturn.schema import Problem, SchemaError

NEW = "__new__"
MAX_PLANES = 2


@dataclass(frozen=True)
class FormField:
    """One line of the machine form: its id, the label the person reads, the default."""

    key: str
    label: str
    default: str = ""
    short: str = ""  # the field named inside a sentence (default: the label)

    @property
    def named(self) -> str:
        return self.short or self.label


#: a blank field's hint, by the field key's tail (pickup fields ``k<j>_<tail>``)
PLACEHOLDERS = {
    # Pickup.angle_from_tach_deg: from the line shaft -> tach to the pickup's arrow,
    # counted against rotation (trueturn/angles.py); blank: not measured
    "angle": "blank: not measured (then trial runs)",
    # MachineProfile.transverse_inertia_kg_m2 (about a line across the shaft through the
    # centre of mass); blank: not known
    "inertia": "blank: not known (then trial runs)",
    # MachineProfile.mounted_mass_kg (everything that shakes on the mounts); blank: not known
    "mounted": "blank: not known (then trial runs)",
    # MachineProfile.polar_inertia_kg_m2 (about the shaft); blank: guessed as a solid disc
    "polar": "blank: guessed (a disc as wide as the planes)",
    # Pickup.on_bearing; blank: the pickups in order (first on the first bearing)
    "bearing": "blank: in order",
}


def form_fields(pickups: int) -> list[FormField]:
    """The form's fields, in order, for a board streaming ``pickups`` channels."""
    fields = [
        FormField("name", "Machine name"),
        FormField("kind", "What it is (e.g. table saw arbor)"),
        FormField("mass", "Rotor mass, kg"),
        FormField("mounted", "Weight on the mounts (machine with rotor), kg",
                  short="the weight on the mounts"),
        FormField("speed", "Service speed, rpm"),
        FormField("speed_min", "Lowest service speed, rpm (blank: same)"),
        FormField("max_speed", "Maximum safe speed, rpm"),
        FormField("rotation", "Turns, seen from the front (cw or ccw)", "cw"),
        FormField("bearings", "Bearings along the shaft, mm (two, or blank)",
                  short="the bearings' positions"),
        FormField("inertia", "Rotor inertia across the shaft, kg m2",
                  short="the rotor's inertia across the shaft"),
        FormField("polar", "Rotor inertia about the shaft, kg m2",
                  short="the rotor's inertia about the shaft"),
    ]
    for k in range(1, MAX_PLANES + 1):
        p = f"Plane {k}"
        fields += [
            FormField(f"p{k}_name", f"{p}: name" + (" (blank: one plane)" if k > 1 else ""),
                      "plane 1" if k == 1 else ""),
            FormField(f"p{k}_radius", f"{p}: weight radius, mm"),
            FormField(f"p{k}_axial", f"{p}: position along the shaft, mm",
                      short=f"plane {k}'s position along the shaft"),
            FormField(f"p{k}_face", f"{p}: worked from the front or back", "front"),
            FormField(f"p{k}_positions", f"{p}: positions (0 any, 6, or 0,100,200)", "0"),
            FormField(f"p{k}_offset", f"{p}: position 1 at, deg from the mark", "0"),
            FormField(f"p{k}_removal", f"{p}: removing material allowed (yes/no)", "no"),
            FormField(f"p{k}_limit", f"{p}: largest mass (trial limit), g"),
        ]
    for j in range(1, pickups + 1):
        fields += [FormField(f"k{j}_sens", f"Pickup {j}: sensitivity, mV/g", "300"),
                   FormField(f"k{j}_corner", f"Pickup {j}: input filter corner, Hz (or none)"),
                   FormField(f"k{j}_angle", f"Pickup {j}: deg from tach, against rotation",
                             short=f"pickup {j}'s angle from the tach"),
                   FormField(f"k{j}_bearing", f"Pickup {j}: on bearing (1 or 2)",
                             short=f"pickup {j}'s bearing")]
    fields += [FormField("mains", "Mains frequency, Hz (50 or 60)", "50"),
               FormField("grade", "Target grade G, mm/s", "6.3")]
    return fields


# ---- text to data (no judging: that is the schema's) ---------------------------------------

_NUMBER = re.compile(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?")


def _value(text: str) -> Any:
    """A number where the text is one (a whole number as int), else the text itself, for
    the schema to judge; blank: None."""
    text = text.strip()
    if not text:
        return None
    if _NUMBER.fullmatch(text):
        number = float(text)
        return int(number) if number.is_integer() and "." not in text and "e" not in \
            text.lower() else number
    return text


def _values(text: str) -> list[Any]:
    """A list typed as ``0, 100, 200`` (commas or spaces)."""
    return [_value(t) for t in re.split(r"[,\s;]+", text.strip()) if t]


def _yes_no(text: str) -> Any:
    word = text.strip().lower()
    if word in ("yes", "y", "true"):
        return True
    if word in ("no", "n", "false"):
        return False
    return text.strip()


def _none_word(text: str) -> Any:
    return None if text.strip().lower() in ("", "none", "no", "-") else _value(text)


def _layout(positions: str, offset: str) -> dict[str, Any]:
    items = _values(positions)
    if len(items) > 1:
        return {"kind": "angles", "angles_deg": items}
    if not items or items[0] == 0:
        return {"kind": "free"}
    off = _value(offset)
    return {"kind": "equal", "positions": items[0],
            **({"offset_deg": off} if off is not None else {})}


def _set(data: dict[str, Any], key: str, value: Any) -> None:
    """Put ``value`` at ``key``; None removes it (the field's default, or 'missing')."""
    if value is None:
        data.pop(key, None)
    else:
        data[key] = value


def form_data(values: dict[str, str], pickups: int,
              base: MachineProfile | None = None) -> tuple[dict[str, Any], dict[str, str]]:
    """The profile's data from the form's text, on top of ``base`` (editing), and which form
    field each data path came from (``{"planes[0].radius_mm": "p1_radius", ...}``)."""
    data: dict[str, Any] = to_data(base) if base is not None else {}
    source: dict[str, str] = {}

    def put(target: dict[str, Any], key: str, path: str, field_key: str, value: Any) -> None:
        _set(target, key, value)
        source[path] = field_key

    put(data, "name", "name", "name", values.get("name", "").strip() or None)
    put(data, "rotor_kind", "rotor_kind", "kind", values.get("kind", "").strip() or None)
    put(data, "rotor_mass_kg", "rotor_mass_kg", "mass", _value(values.get("mass", "")))
    speed = _value(values.get("speed", ""))
    put(data, "speed_max_rpm", "speed_max_rpm", "speed", speed)
    low = _value(values.get("speed_min", ""))
    put(data, "speed_min_rpm", "speed_min_rpm", "speed_min", speed if low is None else low)
    put(data, "max_speed_rpm", "max_speed_rpm", "max_speed", _value(values.get("max_speed", "")))
    put(data, "rotation", "rotation", "rotation", values.get("rotation", "").strip() or None)
    put(data, "transverse_inertia_kg_m2", "transverse_inertia_kg_m2", "inertia",
        _none_word(values.get("inertia", "")))
    put(data, "polar_inertia_kg_m2", "polar_inertia_kg_m2", "polar",
        _none_word(values.get("polar", "")))
    put(data, "mounted_mass_kg", "mounted_mass_kg", "mounted",
        _none_word(values.get("mounted", "")))
    old_bearings = data.get("bearings") or []
    bearings = [{"name": (old_bearings[i]["name"] if i < len(old_bearings) and
                          len(old_bearings) == 2 else f"bearing {i + 1}"), "axial_mm": v}
                for i, v in enumerate(_values(values.get("bearings", "")))]
    put(data, "bearings", "bearings", "bearings", bearings)
    old_planes = data.get("planes") or []
    planes: list[dict[str, Any]] = []
    for k in range(1, MAX_PLANES + 1):
        name = values.get(f"p{k}_name", "").strip()
        if k > 1 and not name:
            break
        i = len(planes)
        plane: dict[str, Any] = dict(old_planes[i]) if i < len(old_planes) else {}
        at = f"planes[{i}]"
        put(plane, "name", f"{at}.name", f"p{k}_name", name or None)
        put(plane, "radius_mm", f"{at}.radius_mm", f"p{k}_radius",
            _value(values.get(f"p{k}_radius", "")))
        put(plane, "axial_mm", f"{at}.axial_mm", f"p{k}_axial",
            _value(values.get(f"p{k}_axial", "")))
        put(plane, "face", f"{at}.face", f"p{k}_face",
            values.get(f"p{k}_face", "").strip().lower() or None)
        put(plane, "layout", f"{at}.layout", f"p{k}_positions",
            _layout(values.get(f"p{k}_positions", ""), values.get(f"p{k}_offset", "")))
        source[f"{at}.layout.offset_deg"] = f"p{k}_offset"
        put(plane, "removal_allowed", f"{at}.removal_allowed", f"p{k}_removal",
            _yes_no(values.get(f"p{k}_removal", "")))
        put(plane, "max_mass_g", f"{at}.max_mass_g", f"p{k}_limit",
            _value(values.get(f"p{k}_limit", "")))
        planes.append(plane)
    put(data, "planes", "planes", "p1_name", planes)
    old_pickups = data.get("pickups") or []
    out_pickups: list[dict[str, Any]] = []
    for j in range(pickups):
        pickup: dict[str, Any] = (dict(old_pickups[j]) if j < len(old_pickups)
                                  else {"name": f"pickup {j + 1}"})
        at = f"pickups[{j}]"
        put(pickup, "sensitivity_mv_per_g", f"{at}.sensitivity_mv_per_g", f"k{j + 1}_sens",
            _value(values.get(f"k{j + 1}_sens", "")))
        put(pickup, "lowpass_corner_hz", f"{at}.lowpass_corner_hz", f"k{j + 1}_corner",
            _none_word(values.get(f"k{j + 1}_corner", "")))
        put(pickup, "angle_from_tach_deg", f"{at}.angle_from_tach_deg", f"k{j + 1}_angle",
            _none_word(values.get(f"k{j + 1}_angle", "")))
        put(pickup, "on_bearing", f"{at}.on_bearing", f"k{j + 1}_bearing",
            _none_word(values.get(f"k{j + 1}_bearing", "")))
        source[at] = f"k{j + 1}_sens"
        out_pickups.append(pickup)
    put(data, "pickups", "pickups", "k1_sens" if pickups else "name", out_pickups)
    put(data, "mains_hz", "mains_hz", "mains", _value(values.get("mains", "")))
    put(data, "target_grade", "target_grade", "grade", _value(values.get("grade", "")))
    return data, source


def form_values(profile: MachineProfile, pickups: int) -> dict[str, str]:
    """The form's text for a saved profile (to edit it)."""
    def num(value: float | None) -> str:
        return "" if value is None else f"{value:g}"

    values = {f.key: f.default for f in form_fields(pickups)}
    values.update(name=profile.name, kind=profile.rotor_kind, mass=num(profile.rotor_mass_kg),
                  speed=num(profile.speed_max_rpm), max_speed=num(profile.max_speed_rpm),
                  speed_min="" if profile.speed_min_rpm == profile.speed_max_rpm else
                  num(profile.speed_min_rpm), rotation=profile.rotation,
                  bearings=", ".join(num(b.axial_mm) for b in profile.bearings),
                  mains=str(profile.mains_hz), grade=num(profile.target_grade),
                  inertia=num(profile.transverse_inertia_kg_m2),
                  polar=num(profile.polar_inertia_kg_m2),
                  mounted=num(profile.mounted_mass_kg))
    for k, plane in enumerate(profile.planes[:MAX_PLANES], start=1):
        lay = plane.layout
        positions = ("0" if lay.kind == "free" else str(lay.positions) if lay.kind == "equal"
                     else ", ".join(num(a) for a in lay.angles_deg))
        values.update({f"p{k}_name": plane.name, f"p{k}_radius": num(plane.radius_mm),
                       f"p{k}_axial": num(plane.axial_mm), f"p{k}_face": plane.face,
                       f"p{k}_positions": positions, f"p{k}_offset": num(lay.offset_deg),
                       f"p{k}_removal": "yes" if plane.removal_allowed else "no",
                       f"p{k}_limit": num(plane.max_mass_g)})
    for j, pickup in enumerate(profile.pickups[:pickups], start=1):
        values[f"k{j}_sens"] = num(pickup.sensitivity_mv_per_g)
        values[f"k{j}_corner"] = ("none" if pickup.lowpass_corner_hz is None
                                  else num(pickup.lowpass_corner_hz))
        values[f"k{j}_angle"] = num(pickup.angle_from_tach_deg)
        values[f"k{j}_bearing"] = "" if pickup.on_bearing is None else str(pickup.on_bearing)
    return values


# ---- the schema's coded answer in the form's words -----------------------------------------

class FormError(UserError):
    """A mistake in the form: ``field`` (the form field's key) and the words to show."""

    def __init__(self, field: str, words: str) -> None:
        super().__init__(words)
        self.field = field


def field_of(path: str, source: dict[str, str]) -> str | None:
    """The form field a data path came from: the path itself or its nearest parent."""
    while path:
        if path in source:
            return source[path]
        path = re.sub(r"(\.[^.\[\]]+|\[\d+\])$", "", path)
    return None


def _n(value: Any) -> str:
    return f"{value:g}" if isinstance(value, (int, float)) and not isinstance(value, bool) \
        else f"'{value}'"


def form_error_words(exc: SchemaError, label: Callable[[str], str],
                     named: Callable[[str], str] | None = None) -> str:
    """The validator's coded error in plain words; ``label(path)``: how the form labels the
    field a data path came from, ``named(path)``: how a sentence names it (default: the
    label)."""
    name = label(exc.path)
    named = named or label
    got, limit = exc.values.get("got"), exc.values.get("limit")
    problem = exc.problem
    if problem in (Problem.MISSING, Problem.EMPTY):
        return f"{name}: please fill this in."
    if problem in (Problem.NOT_A_NUMBER, Problem.NOT_FINITE):
        return f"{name}: {_n(got)} is not a number."
    if problem is Problem.NOT_WHOLE:
        return f"{name}: give a whole number ({_n(got)} is not one)."
    if problem is Problem.NOT_YES_NO:
        return f"{name}: answer yes or no."
    if problem is Problem.NOT_ONE_OF:
        choices = " or ".join(str(c) for c in exc.values.get("choices", ()))
        return f"{name}: write {choices}, not {_n(got)}."
    if problem is Problem.NOT_ABOVE:
        return f"{name}: must be more than {_n(limit)} (you gave {_n(got)})."
    if problem is Problem.NOT_BELOW:
        return f"{name}: must be less than {_n(limit)} (you gave {_n(got)})."
    if problem is Problem.UNDER_MINIMUM:
        return f"{name}: must be at least {_n(limit)} (you gave {_n(got)})."
    if problem is Problem.NEGATIVE:
        return f"{name}: must not be negative (you gave {_n(got)})."
    if problem is Problem.OVER_MAXIMUM:
        return f"{name}: must be at most {_n(limit)} (you gave {_n(got)})."
    if problem is Problem.OUTSIDE_TURN:
        return f"{name}: give angles within one turn, -360 to 360 (you gave {_n(got)})."
    rule = exc.rule
    if rule is not None:
        other = named(rule.other) if rule.other else ""
        match rule.code:
            case RuleCode.NOT_MORE_THAN:
                return f"{name} must not be more than {other}."
            case RuleCode.NOT_LESS_THAN:
                return f"{name} must not be less than {other}."
            case RuleCode.TWO_OR_NONE:
                return f"{name}: give two positions, or leave it blank."
            case RuleCode.MUST_DIFFER:
                return (f"{name}: must differ from {other} (both {rule.value})." if other
                        else f"{name}: the two must be at different places (both {rule.value}).")
            case RuleCode.NEEDED:
                return f"{name}: please fill this in (needed with {other})."
            case RuleCode.AT_MOST_TWO:
                return f"{name}: at most two planes."
            case RuleCode.NAME_TWICE:
                return f"{name}: the name '{rule.value}' is used twice."
            case RuleCode.UNKNOWN_NAME:
                return f"{name}: '{rule.value}' is not one of the planes."
    return f"{name}: {exc.detail}"


def profile_from_form(values: dict[str, str], pickups: int,
                      base: MachineProfile | None = None) -> MachineProfile:
    """Build the profile from the form's text through the one validator; a mistake is a
    :class:`FormError` naming the form field in plain words."""
    data, source = form_data(values, pickups, base)
    fields = {f.key: f for f in form_fields(pickups)}

    def label(path: str) -> str:
        key = field_of(path, source)
        return fields[key].label if key in fields else path

    def named(path: str) -> str:
        key = field_of(path, source)
        return fields[key].named if key in fields else path

    try:
        return from_data(MachineProfile, data, "machine form")
    except SchemaError as exc:
        key = field_of(exc.path, source) or "name"
        raise FormError(key, form_error_words(exc, label, named)) from None


class MachineForm(ModalScreen[MachineProfile | None]):
    """The machine form: a new machine, or ``editing`` a saved one (it scrolls at 80x24)."""

    BINDINGS = [Binding("escape", "cancel", "Cancel"), Binding("ctrl+s", "save", "Save")]

    def __init__(self, workspace: Workspace, pickups: int,
                 editing: MachineProfile | None = None) -> None:
        super().__init__(id="machine-form")
        self.workspace = workspace
        self.pickups = pickups
        self.editing = editing
        self.fields = form_fields(pickups)

    def compose(self) -> ComposeResult:
        what = (Text.assemble(("Edit machine ", "bold"), (self.editing.name, "bold"))
                if self.editing is not None else Text("New machine", "bold"))
        what.append("  (Tab: next field, Ctrl+S: save, Escape: cancel)")
        yield Static(what, classes="form-title")
        values = (form_values(self.editing, self.pickups) if self.editing is not None
                  else {f.key: f.default for f in self.fields})
        with VerticalScroll(id="form-scroll"), Grid(classes="form"):
            for f in self.fields:
                yield Label(f.label)
                yield Input(value=values[f.key], id=f"f-{f.key}",
                            placeholder=PLACEHOLDERS.get(f.key.split("_")[-1], ""))
        yield Static("", id="form-msg")
        yield Footer()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        inputs = list(self.query(Input))
        if event.input is inputs[-1]:
            self.action_save()
        else:
            self.focus_next()

    def values(self) -> dict[str, str]:
        return {f.key: self.query_one(f"#f-{f.key}", Input).value for f in self.fields}

    def action_save(self) -> None:
        message = self.query_one("#form-msg", Static)
        try:
            profile = profile_from_form(self.values(), self.pickups, self.editing)
        except FormError as exc:
            message.update(Text(str(exc), "bold red"))  # words from the person: not markup
            self.query_one(f"#f-{exc.field}", Input).focus()
            return
        try:
            path = self.workspace.machine_path(profile.name)
            mine = (self.editing is not None
                    and path == self.workspace.machine_path(self.editing.name))
            if path.exists() and not mine:
                raise FormError("name", f"Machine name: a machine called '{profile.name}' is "
                                "saved already; pick it and press e to edit it, or give "
                                "another name.")
            self.workspace.save_machine(profile)
        except FormError as exc:
            message.update(Text(str(exc), "bold red"))
            self.query_one("#f-name", Input).focus()
            return
        except (UserError, OSError) as exc:
            message.update(Text(str(exc), "bold red"))
            return
        self.dismiss(profile)

    def action_cancel(self) -> None:
        self.dismiss(None)


class MachinePicker(ModalScreen[MachineProfile | None]):
    """The saved machines with as many pickups as the board streams, and 'new machine'."""

    BINDINGS = [Binding("escape", "cancel", "Cancel"), Binding("n", "new", "New machine"),
                Binding("e", "edit", "Edit machine")]

    def __init__(self, workspace: Workspace, pickups: int, current: MachineProfile) -> None:
        super().__init__(id="machine-picker")
        self.workspace = workspace
        self.pickups = pickups
        self.current = current
        self.note = ""

    def compose(self) -> ComposeResult:
        yield Static("[b]Machine[/b]  (Enter: use it, e: edit it, n: new machine, Escape: "
                     "back)",
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

    def action_edit(self) -> None:
        """e: edit the machine highlighted (the one in use, or a saved one)."""
        listing = self.query_one("#machine-list", OptionList)
        index = listing.highlighted
        option_id = (listing.get_option_at_index(index).id or "") if index is not None else ""
        note = self.query_one("#picker-msg", Static)
        if option_id.startswith("now:"):
            profile = self.current
        elif option_id.startswith("saved:"):
            try:
                profile = self.workspace.load_machine(option_id.split(":", 1)[1])
            except UserError as exc:
                note.update(Text(str(exc), "bold red"))
                return
        else:
            note.update("Highlight a machine to edit (n: a new one).")
            return
        if len(profile.pickups) != self.pickups:
            note.update(Text(f"{profile.name} has {len(profile.pickups)} pickup(s); the board "
                             f"streams {self.pickups}: edit its file, or restart with trueturn "
                             "ui --machine", "bold red"))
            return
        done: Callable[[MachineProfile | None], None] = self._created
        self.app.push_screen(MachineForm(self.workspace, self.pickups, profile), done)

    def _created(self, profile: MachineProfile | None) -> None:
        if profile is not None:
            self.dismiss(profile)

    def action_cancel(self) -> None:
        self.dismiss(None)
