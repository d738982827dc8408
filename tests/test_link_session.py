"""BoardSession over the simulated board: commands, replies, and the mismatch refusal."""

from __future__ import annotations

import dataclasses

import pytest

from trueturn.link.catalogue import load_catalogue
from trueturn.link.codec import Message
from trueturn.link.ports import open_port
from trueturn.link.session import BoardError, BoardSession, mismatch_message


@pytest.fixture()
def port():
    p = open_port("sim://bench-grinder?realtime=0")
    yield p
    p.close()


def test_identify_configure_start_stream_stop(port) -> None:
    session = BoardSession(port)
    ident = session.identify()
    assert ident["protocol_version"] == load_catalogue().protocol_version and ident["board_id"] == 2
    cfg = session.configure(rate_hz=2000, channels=2)
    assert cfg["period_ticks"] == ident["tick_hz"] // (2000 * 2)
    started = session.start()
    assert started["rate_hz"] == 2000
    blocks = 0
    for _ in range(200):
        blocks += sum(1 for m in session.read() if isinstance(m, Message) and m.name == "samples")
        if blocks >= 5:
            break
    assert blocks >= 5
    session.stop()
    assert session.decoder.counters.board_resets == 0
    assert session.decoder.counters.samples_lost == 0


def test_board_errors_become_one_line_user_errors(port) -> None:
    session = BoardSession(port)
    with pytest.raises(BoardError, match="bad_value"):
        session.configure(rate_hz=3, channels=2)
    with pytest.raises(BoardError, match="not_streaming"):
        session.stop()


def test_mismatched_definitions_are_refused_naming_both(port) -> None:
    ours = dataclasses.replace(load_catalogue(), definition_hash=0x12345678)
    session = BoardSession(port, catalogue=ours)
    with pytest.raises(BoardError) as err:
        session.identify()
    text = str(err.value)
    assert "0x12345678" in text and f"{load_catalogue().definition_hash:#010x}" in text
    assert "\n" not in text


def test_mismatch_message_is_none_for_a_matching_board() -> None:
    cat = load_catalogue()
    ours = cat.protocol_version
    assert mismatch_message({"protocol_version": ours, "definition_hash": cat.definition_hash},
                            cat) is None
    assert f"protocol {ours + 1}" in mismatch_message({"protocol_version": ours + 1,
                                                      "definition_hash": cat.definition_hash},
                                                     cat)
