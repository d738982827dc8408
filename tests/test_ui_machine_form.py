"""The machine form (issue #17 item 4): every field the procedure and the pictures need,
irregular position angles, editing a saved machine without losing what the form does not
show, and mistakes said in plain words that name the field as the form labels it.

The values typed here are invented (demo numbers); what counts as right is what was typed,
read back from the saved file; the words are checked for the form's own labels and for the
absence of the file's keys (common practice, no source).
"""

from __future__ import annotations

import asyncio
import re
from dataclasses import replace
from pathlib import Path

import pytest
from textual.containers import VerticalScroll
from textual.widgets import Input, OptionList, Static

from test_ui_app import SIZE, connect, press, screen_text, type_text, wait_for
from trueturn.jobs.profiles import MachineProfile, TachSetup, Units
from trueturn.jobs.store import Workspace
from trueturn.model import PlaneLayout
from trueturn.model.mass import OwnedParts, PartStock
from trueturn.ui.app import AppConfig, TrueturnApp
from trueturn.ui.launch import scenario_profile
from trueturn.ui.machines import (
    FormError,
    MachineForm,
    form_fields,
    form_values,
    profile_from_form,
)

LABELS = {f.key: f.label for f in form_fields(2)}
#: the profile file's own keys: a person using the form never saw them
FILE_KEYS = re.compile(r"_rpm|_mm\b|_kg|_hz|_g\b|max_speed|speed_max|rotor_kind|\[\d\]|"
                       r"layout|angles_deg|offset_deg|removal_allowed|sensitivity_mv")


def typed(**changes: str) -> dict[str, str]:
    """A complete form for an invented two-plane rotor, with ``changes``."""
    values = {f.key: f.default for f in form_fields(2)}
    values.update(name="Arbor 3", kind="table saw arbor", mass="6.5", speed="3450",
                  max_speed="3600", rotation="ccw", bearings="-40, 40",
                  p1_radius="60", p1_axial="-90", p1_face="front", p1_positions="0",
                  p2_name="pulley", p2_radius="45", p2_axial="95", p2_face="back",
                  p2_positions="3", p2_offset="15", p2_removal="yes", p2_limit="8",
                  k1_sens="300", k1_corner="none", k2_sens="330", k2_corner="49")
    values.update(changes)
    return values


def test_every_field_reaches_the_profile() -> None:
    p = profile_from_form(typed(speed_min="3000"), 2)
    assert (p.name, p.rotor_kind, p.rotor_mass_kg) == ("Arbor 3", "table saw arbor", 6.5)
    assert (p.speed_min_rpm, p.speed_max_rpm, p.max_speed_rpm) == (3000, 3450, 3600)
    assert p.rotation == "ccw" and [b.axial_mm for b in p.bearings] == [-40, 40]
    first, second = p.planes
    assert (first.name, first.radius_mm, first.axial_mm, first.face) == ("plane 1", 60, -90,
                                                                        "front")
    assert first.layout.kind == "free" and not first.removal_allowed
    assert first.max_mass_g is None
    assert (second.name, second.face, second.removal_allowed, second.max_mass_g) == \
        ("pulley", "back", True, 8)
    # 3 positions from 15 deg: 15, 135, 255 (README: first + (n - 1) * 360 / N)
    assert second.position_angles_deg == (15.0, 135.0, 255.0)
    assert [k.sensitivity_mv_per_g for k in p.pickups] == [300, 330]
    assert [k.lowpass_corner_hz for k in p.pickups] == [None, 49]
    assert (p.mains_hz, p.target_grade) == (50, 6.3)
    # blank lowest speed: the service speed; blank plane 2 name: one plane
    p = profile_from_form(typed(p2_name=""), 2)
    assert len(p.planes) == 1 and p.speed_min_rpm == p.speed_max_rpm == 3450


def test_irregular_position_angles_are_kept_in_their_order() -> None:
    p = profile_from_form(typed(p1_positions="0, 100, 200 250", p1_offset="30"), 2)
    lay = p.planes[0].layout
    assert lay.kind == "angles" and lay.angles_deg == [0.0, 100.0, 200.0, 250.0]
    assert p.planes[0].position_angles_deg == (0.0, 100.0, 200.0, 250.0)  # offset: unused


@pytest.mark.parametrize(("changes", "field", "words"), [
    ({"speed": "3700"}, "speed",
     "Service speed, rpm must not be more than Maximum safe speed, rpm."),
    ({"speed_min": "3500"}, "speed_min", "must not be more than Service speed, rpm"),
    ({"mass": "six"}, "mass", "Rotor mass, kg: 'six' is not a number."),
    ({"mass": "-2"}, "mass", "Rotor mass, kg: must be more than 0 (you gave -2)."),
    ({"rotation": "left"}, "rotation", "write cw or ccw, not 'left'"),
    ({"p2_positions": "3.5"}, "p2_positions", "give a whole number (3.5 is not one)"),
    ({"p2_positions": "0, 90, ten"}, "p2_positions", "'ten' is not a number"),
    ({"p1_positions": "400"}, "p1_positions", "must be at most 360 (you gave 400)"),
    ({"bearings": "40"}, "bearings", "give two positions, or leave it blank"),
    ({"bearings": "40, 40"}, "bearings", "different places (both 40)"),
    ({"p1_axial": ""}, "p1_axial",
     "Plane 1: position along the shaft, mm: please fill this in (needed with the bearings' "
     "positions)."),
    ({"p2_axial": "-90"}, "p2_axial", "must differ from plane 1's position along the shaft "
     "(both -90)"),
    ({"p2_face": "side"}, "p2_face", "write front or back, not 'side'"),
    ({"p2_removal": "maybe"}, "p2_removal", "answer yes or no"),
    ({"p2_limit": "0"}, "p2_limit", "must be more than 0 (you gave 0)"),
    ({"k2_corner": "-49"}, "k2_corner", "must be more than 0 (you gave -49)"),
    ({"k1_sens": ""}, "k1_sens", "please fill this in"),
    ({"p2_name": "plane 1"}, "p2_name", "the name 'plane 1' is used twice"),
    ({"mains": "55"}, "mains", "write 50 or 60, not 55"),
    ({"name": "  "}, "name", "Machine name: please fill this in."),
])
def test_mistakes_are_said_in_the_forms_words(changes: dict[str, str], field: str,
                                              words: str) -> None:
    with pytest.raises(FormError) as caught:
        profile_from_form(typed(**changes), 2)
    message = str(caught.value)
    assert caught.value.field == field
    assert message.startswith(LABELS[field]) or message.startswith(words), message
    assert words in message, message
    assert not FILE_KEYS.search(message), message
    assert "\n" not in message and "form:" not in message


def saved_profile() -> MachineProfile:
    """A saved profile with what the form does not show (invented)."""
    p = profile_from_form(typed(), 2)
    return replace(p, tach=TachSetup("falling", 1, "white paint on the pulley"),
                   units=Units("oz", "in", "in/s"), notes="belt changed in May",
                   correction_parts=OwnedParts([PartStock(1.5, 4, "M5 washer")], stack=2),
                   cg_axial_mm=5.0,
                   pickups=[replace(k, zero_offset_mv=1650.0, mounting="magnet")
                            for k in p.pickups])


def test_editing_changes_what_was_edited_and_keeps_the_rest() -> None:
    base = saved_profile()
    values = form_values(base, 2)
    assert values["p2_positions"] == "3" and values["p2_offset"] == "15"
    assert values["k1_corner"] == "none" and values["bearings"] == "-40, 40"
    assert profile_from_form(values, 2, base) == base  # the form as shown: nothing changes
    values.update(p1_radius="62.5", p1_positions="10, 130, 250", k2_corner="none")
    edited = profile_from_form(values, 2, base)
    assert edited.planes[0].radius_mm == 62.5
    assert edited.planes[0].layout == PlaneLayout("angles", angles_deg=[10.0, 130.0, 250.0])
    assert edited.pickups[1].lowpass_corner_hz is None
    assert edited.planes[1] == base.planes[1]
    for kept in ("tach", "units", "notes", "correction_parts", "cg_axial_mm", "bearings"):
        assert getattr(edited, kept) == getattr(base, kept), kept
    assert [k.zero_offset_mv for k in edited.pickups] == [1650.0, 1650.0]


# --- in the app ------------------------------------------------------------------------------

def app_on(tmp_path: Path) -> TrueturnApp:
    config = AppConfig("sim://shop-fan?realtime=0&motor=off", scenario_profile("shop-fan"),
                       demo=False, workspace=tmp_path / "ws")
    return TrueturnApp(config)


def form_message(app: TrueturnApp) -> str:
    return str(app.screen.query_one("#form-msg", Static).render())


def test_edit_a_saved_machine_in_the_app_and_see_a_mistake_in_words(tmp_path: Path) -> None:
    app = app_on(tmp_path)
    workspace = Workspace(tmp_path / "ws")
    fan = replace(saved_profile(), name="Fan 7")  # two pickups, as the shop fan's board
    workspace.save_machine(fan)

    async def scenario() -> None:
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await press(app, pilot, "p")
            await wait_for(pilot, lambda: "e: edit it" in screen_text(app), 5)
            listing = app.screen.query_one("#machine-list", OptionList)
            listing.highlighted = next(i for i in range(listing.option_count)
                                       if listing.get_option_at_index(i).id == "saved:Fan 7")
            await press(app, pilot, "e")
            await wait_for(pilot, lambda: isinstance(app.screen, MachineForm), 5)
            form = app.screen
            assert "Edit machine Fan 7" in screen_text(app)
            assert form.query_one("#f-p2_name", Input).value == "pulley"
            # the form fits 80x24: it scrolls, and the field with focus is in sight
            scroll = form.query_one("#form-scroll", VerticalScroll)
            await wait_for(pilot, lambda: scroll.region.height > 0, 5)
            assert scroll.region.bottom <= SIZE[1] and scroll.max_scroll_y > 0
            last = form.query(Input).last()
            last.focus()
            await wait_for(pilot, lambda: scroll.region.contains_region(last.region), 5)
            # a mistake: the words name the field as labelled, the field gets the focus
            speed = form.query_one("#f-max_speed", Input)
            speed.value = "3000"
            await press(app, pilot, "ctrl+s")
            await wait_for(pilot, lambda: "must not be more than" in form_message(app), 5)
            assert form_message(app) == ("Service speed, rpm must not be more than Maximum "
                                         "safe speed, rpm.")
            await wait_for(pilot, lambda: app.focused is form.query_one("#f-speed", Input), 5)
            await wait_for(pilot, lambda: scroll.region.contains_region(
                form.query_one("#f-speed", Input).region), 5)  # scrolled back into sight
            speed.value = "3600"
            radius = form.query_one("#f-p1_radius", Input)
            radius.value = ""
            radius.focus()
            await type_text(app, pilot, "61.5")
            await press(app, pilot, "ctrl+s")
            await wait_for(pilot, lambda: app.config.profile.name == "Fan 7", 5)
            saved = workspace.load_machine("Fan 7")
            assert saved.planes[0].radius_mm == 61.5
            assert saved.notes == "belt changed in May" and saved.units.mass == "oz"
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_a_new_machine_never_replaces_a_saved_one(tmp_path: Path) -> None:
    app = app_on(tmp_path)
    workspace = Workspace(tmp_path / "ws")
    workspace.save_machine(replace(saved_profile(), name="Fan 7"))
    before = workspace.machine_path("Fan 7").read_bytes()

    async def scenario() -> None:
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            await press(app, pilot, "p")
            await wait_for(pilot, lambda: "n: new machine" in screen_text(app), 5)
            await press(app, pilot, "n")
            await wait_for(pilot, lambda: isinstance(app.screen, MachineForm), 5)
            form = app.screen
            for key, text in typed(name="Fan 7", p2_name="").items():
                form.query_one(f"#f-{key}", Input).value = text
            await press(app, pilot, "ctrl+s")
            await wait_for(pilot, lambda: "saved already" in form_message(app), 5)
            assert form_message(app).startswith("Machine name: a machine called 'Fan 7'")
            await press(app, pilot, "escape")
            await wait_for(pilot, lambda: not isinstance(app.screen, MachineForm), 5)
            await press(app, pilot, "q")
    asyncio.run(scenario())
    assert workspace.machine_path("Fan 7").read_bytes() == before


def test_the_pickups_angle_from_the_tach_is_optional_and_said_in_words() -> None:
    # Pickup.angle_from_tach_deg, counted against rotation (trueturn/angles.py)
    p = profile_from_form(typed(k1_angle="90", k2_angle="-30"), 2)
    assert [k.angle_from_tach_deg for k in p.pickups] == [90.0, 330.0]
    assert form_values(p, 2)["k2_angle"] == "330"
    assert [k.angle_from_tach_deg for k in profile_from_form(typed(), 2).pickups] == [None, None]
    with pytest.raises(FormError) as caught:
        profile_from_form(typed(k2_angle="400"), 2)
    assert caught.value.field == "k2_angle"
    assert str(caught.value).startswith(LABELS["k2_angle"]) and "400" in str(caught.value)
    assert not FILE_KEYS.search(str(caught.value))


def test_the_rotors_inertia_across_the_shaft_is_optional() -> None:
    p = profile_from_form(typed(inertia="0.055"), 2)
    assert p.transverse_inertia_kg_m2 == 0.055 and form_values(p, 2)["inertia"] == "0.055"
    assert profile_from_form(typed(), 2).transverse_inertia_kg_m2 is None
    with pytest.raises(FormError) as caught:
        profile_from_form(typed(inertia="-1"), 2)
    assert caught.value.field == "inertia" and "must be more than 0" in str(caught.value)
    assert not FILE_KEYS.search(str(caught.value))


def test_the_rotors_inertia_about_the_shaft_is_optional() -> None:
    # the model-first correction's gyroscopic stiffening (a disc's rocking) needs it
    p = profile_from_form(typed(polar="0.03"), 2)
    assert p.polar_inertia_kg_m2 == 0.03 and form_values(p, 2)["polar"] == "0.03"
    assert profile_from_form(typed(), 2).polar_inertia_kg_m2 is None
    with pytest.raises(FormError) as caught:
        profile_from_form(typed(polar="0"), 2)
    assert caught.value.field == "polar" and "must be more than 0" in str(caught.value)


def test_the_weight_on_the_mounts_is_optional_and_never_below_the_rotors() -> None:
    # MachineProfile.mounted_mass_kg: the model-first correction's size rests on it
    p = profile_from_form(typed(mounted="18.5"), 2)
    assert p.mounted_mass_kg == 18.5 and form_values(p, 2)["mounted"] == "18.5"
    assert profile_from_form(typed(), 2).mounted_mass_kg is None
    with pytest.raises(FormError) as caught:
        profile_from_form(typed(mass="6", mounted="4"), 2)
    assert caught.value.field == "mounted"
    assert "must not be less than" in str(caught.value) and "Rotor mass" in str(caught.value)


def test_the_bearing_a_pickup_sits_on_is_optional() -> None:
    p = profile_from_form(typed(k1_bearing="2", k2_bearing="2"), 2)
    assert [k.on_bearing for k in p.pickups] == [2, 2]
    assert form_values(p, 2)["k1_bearing"] == "2"
    with pytest.raises(FormError) as caught:
        profile_from_form(typed(k1_bearing="3"), 2)
    assert caught.value.field == "k1_bearing" and "at most 2" in str(caught.value)
    with pytest.raises(FormError) as caught:
        profile_from_form(typed(k1_bearing="1", bearings="", p1_axial="", p2_axial=""), 2)
    assert caught.value.field == "bearings" and not FILE_KEYS.search(str(caught.value))
