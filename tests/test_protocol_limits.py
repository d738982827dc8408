"""Facts defined once (#16 item 6): protocol limits and board ids in the catalogue, one mismatch
message, shared physical constants in trueturn.constants."""

from __future__ import annotations

import re
from pathlib import Path

from trueturn.link.catalogue import load_catalogue

REPO = Path(__file__).resolve().parent.parent


def test_every_board_id_has_words_and_the_app_names_no_other() -> None:
    from trueturn.ui.session import BOARD_WORDS

    assert set(BOARD_WORDS) == set(load_catalogue().board_ids.values())


def test_the_app_refuses_a_mismatch_with_the_link_layers_one_message() -> None:
    from trueturn.link.session import mismatch_message
    from trueturn.ui.session import BoardIdentity

    cat = load_catalogue()
    ident = BoardIdentity(protocol_version=cat.protocol_version - 1, definition_hash=0x1234ABCD,
                          firmware="1.0.0", board="ATmega328P board", tick_hz=2_000_000,
                          max_channels=2, host_protocol_version=cat.protocol_version,
                          host_definition_hash=cat.definition_hash)
    text = ident.mismatch_text()
    assert text == mismatch_message({"protocol_version": cat.protocol_version - 1,
                                     "definition_hash": 0x1234ABCD}, cat)
    assert "0x1234abcd" in text and f"{cat.definition_hash:#010x}" in text


def test_shared_constants_are_one_object() -> None:
    # CGPM 1901 standard gravity 9.80665 m/s^2 (exact); 25.4 mm per inch (exact, 1959)
    import trueturn.balance.trial_mass as trial_mass
    import trueturn.constants as constants
    import trueturn.dsp.units as units
    import trueturn.jobs.profiles as profiles
    import trueturn.sim.rotor as rotor

    assert constants.STANDARD_GRAVITY_M_S2 == 9.80665 and constants.MM_PER_INCH == 25.4
    for module in (trial_mass, units, rotor):
        assert module.STANDARD_GRAVITY_M_S2 is constants.STANDARD_GRAVITY_M_S2
    assert units.MM_PER_INCH is profiles.MM_PER_IN is constants.MM_PER_INCH
    literal = re.compile(r"^\s*\w+\s*=\s*(9\.80665|25\.4)\b", re.M)  # a definition
    for path in (REPO / "host" / "trueturn").rglob("*.py"):
        if path.name != "constants.py":
            assert not literal.search(path.read_text(encoding="utf-8")), path


def test_the_board_tick_rate_is_not_retyped() -> None:
    # the tick rate of boards of ours is limits.board_tick_hz; host code takes it from there
    tick = load_catalogue().limit("board_tick_hz").min
    pattern = re.compile(rf"tick_hz\w*\s*(:\s*int)?\s*=\s*({tick}|{tick:_})\b", re.I)
    for path in (REPO / "host" / "trueturn").rglob("*.py"):
        assert not pattern.search(path.read_text(encoding="utf-8")), path
