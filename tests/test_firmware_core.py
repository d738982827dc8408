"""The portable firmware core (firmware/core/), compiled for the host with -Wall -Wextra
-Werror and AddressSanitizer/UBSan, against the golden vectors and reference libraries.

Outside references: the golden vectors of protocol/vectors; CRC catalogue check value of
CRC-16/IBM-3740; reference library crccheck (PyPI, Crc16Ibm3740); reference library cobs
(PyPI); and the host codec, which the C code must agree with frame for frame.
"""

from __future__ import annotations

import random
import subprocess

import pytest
import yaml
from cobs import cobs as reference_cobs  # reference library: cobs (PyPI)
from crccheck.crc import Crc16Ibm3740  # reference library: crccheck (PyPI)

from firmware_helpers import CORE_CHECK, REPO, make, require_tools
from trueturn.link.catalogue import load_catalogue
from trueturn.link.codec import FrameError, decode_frame, encode_frame

VECTORS = REPO / "protocol" / "vectors"
ERROR_CODES = {name: code for code, name in load_catalogue().error_codes.items()}


@pytest.fixture(scope="module")
def core_check() -> str:
    require_tools("gcc", "make")
    make("build/tt_core_check")
    return str(CORE_CHECK)


def _run(tool: str, mode: str, text: str = "") -> list[str]:
    done = subprocess.run([tool, mode], input=text, capture_output=True, text=True,
                          timeout=60, check=False)
    assert done.returncode == 0, done.stdout + done.stderr  # sanitizer reports land here
    assert "runtime error" not in done.stderr, done.stderr  # UBSan
    return done.stdout.splitlines()


def _encode_line(name: str, seq: int, values: dict) -> str:
    mdef = load_catalogue().by_name(name)
    nums = [values[f.name] for f in mdef.fixed_fields]
    if mdef.rest_field is not None:
        nums += values.get(mdef.rest_field.name, [])
    return " ".join([name, str(seq), *(str(int(v)) for v in nums)])


def _vectors() -> dict:
    return yaml.safe_load((VECTORS / "vectors.yaml").read_text(encoding="utf-8"))


def test_unit_checks_pass_under_sanitizers(core_check: str) -> None:
    # includes: CRC catalogue check value 0x29B1 for "123456789" (CRC-16/IBM-3740), COBS
    # examples of Cheshire & Baker (1999), timer extension at the overflow race, ring rules
    lines = _run(core_check, "unit")
    assert lines and lines[-1].startswith("ok ")


def test_c_encoder_reproduces_every_valid_golden_vector(core_check: str) -> None:
    valid = _vectors()["valid"]
    lines = [_encode_line(v["type"], v["seq"], v["values"]) for v in valid]
    out = _run(core_check, "encode", "\n".join(lines) + "\n")
    assert len(out) == len(valid)
    for vec, got in zip(valid, out, strict=True):
        assert got == vec["hex"], vec["name"]
        assert bytes.fromhex(got) == (VECTORS / vec["file"]).read_bytes(), vec["name"]


def test_c_decoder_accepts_every_valid_vector(core_check: str) -> None:
    valid = _vectors()["valid"]
    out = _run(core_check, "decode", "\n".join(v["hex"] for v in valid) + "\n")
    for vec, got in zip(valid, out, strict=True):
        frame = reference_cobs.decode(bytes.fromhex(vec["hex"])[:-1])
        want = f"ok {frame[0]} {frame[1]} {frame[2:-2].hex()}"
        assert got.split(" | ")[0] == want, vec["name"]


def test_c_parser_rejects_every_invalid_vector_with_its_error(core_check: str) -> None:
    invalid = _vectors()["invalid"]
    out = _run(core_check, "decode", "\n".join(v["hex"] for v in invalid) + "\n")
    for vec, got in zip(invalid, out, strict=True):
        verdict, answer = got.split(" | ")
        assert verdict.split()[:2] == ["err", vec["error"]], vec["name"]
        if vec["error"] in ("cobs", "crc", "too_short", "too_long"):
            # SPEC 4.2: a frame failing COBS or CRC checks gets no reply
            assert answer == "noreply", vec["name"]
        elif vec["error"] == "unknown_type":
            assert answer.split()[3] == str(ERROR_CODES["unknown_command"]), vec["name"]
        else:  # bad_length on a board->host type: still not a command the board takes
            assert answer.split()[3] in (str(ERROR_CODES["unknown_command"]),
                                         str(ERROR_CODES["bad_length"])), vec["name"]


def test_board_answers_host_commands_per_spec(core_check: str) -> None:
    frames = [
        encode_frame("identify", 1),
        encode_frame("ping", 2, {"token": 0x01020304}),
        encode_frame("configure", 3, {"rate_hz": 4000, "channels": 2, "tach_edge": 1}),
        encode_frame("configure", 4, {"rate_hz": 3000, "channels": 2, "tach_edge": 1}),
        encode_frame("configure", 5, {"rate_hz": 4000, "channels": 3, "tach_edge": 0}),
        encode_frame("stop", 6),  # idle
        encode_frame("tach", 7, {"tick": 1, "edge_count": 1}),  # a board message
    ]
    out = _run(core_check, "decode", "\n".join(f.hex() for f in frames) + "\n")
    errors = [int(line.split(" | ")[1].split()[3]) for line in out]
    assert errors == [ERROR_CODES[n] for n in ("ok", "ok", "ok", "bad_value", "bad_value",
                                                "not_streaming", "unknown_command")]


def _random_values(rng: random.Random, name: str) -> dict:
    mdef = load_catalogue().by_name(name)
    limits = {"u8": 0xFF, "u16": 0xFFFF, "u32": 0xFFFFFFFF}
    values = {f.name: rng.choice([0, limits[f.type], rng.randint(0, limits[f.type])])
              for f in mdef.fixed_fields}
    if name == "samples":
        channels = rng.randint(1, 2)
        values["channels"] = channels
        values["first_index"] = rng.randint(0, 0xFFFFFFFF) // channels * channels
        values["samples"] = [rng.choice([0, 1023, rng.randint(0, 1023), rng.randint(0, 0xFFFF)])
                             for _ in range(channels * rng.randint(1, 118 // channels))]
    return values


def test_c_encoder_matches_host_codec_and_reference_libraries(core_check: str) -> None:
    rng = random.Random(20260501)  # common practice, no source: seeded random cross-check
    names = [m.name for m in load_catalogue().messages]
    cases = [(name, rng.randint(0, 255), _random_values(rng, name))
             for name in names for _ in range(25)]
    out = _run(core_check, "encode", "\n".join(_encode_line(*c) for c in cases) + "\n")
    for (name, seq, values), got in zip(cases, out, strict=True):
        wire = bytes.fromhex(got)
        assert wire == encode_frame(name, seq, values), name
        frame = reference_cobs.decode(wire[:-1])  # reference library: cobs (PyPI)
        assert wire.count(0) == 1 and wire[-1] == 0
        # reference library: crccheck (PyPI), CRC-16/IBM-3740, sent big-endian
        assert Crc16Ibm3740.calc(frame[:-2]) == int.from_bytes(frame[-2:], "big"), name


def test_c_decoder_agrees_with_host_codec_on_damaged_frames(core_check: str) -> None:
    rng = random.Random(7)  # common practice, no source: mutation fuzzing
    good = [bytes.fromhex(v["hex"]) for v in _vectors()["valid"]]
    bodies = []
    for _ in range(3000):
        body = bytearray(rng.choice(good)[:-1])
        action = rng.randrange(4)
        if action == 0 and body:
            body[rng.randrange(len(body))] ^= 1 << rng.randrange(8)
        elif action == 1 and body:
            del body[rng.randrange(len(body)):]
        elif action == 2:
            body = bytearray(rng.randbytes(rng.randint(1, 300)))
        else:
            body[rng.randrange(len(body))] = rng.randrange(256)
        if body:
            bodies.append(bytes(body))
    out = _run(core_check, "decode", "\n".join(b.hex() + "00" for b in bodies) + "\n")
    for body, got in zip(bodies, out, strict=True):
        verdict = got.split(" | ")[0].split()
        try:
            decode_frame(body)
            python_kind = "ok"
        except FrameError as exc:
            python_kind = exc.kind
        c_kind = "ok" if verdict[0] == "ok" else verdict[1]
        assert c_kind == python_kind, body.hex()


def test_firmware_core_and_simulated_board_share_the_catalogue_limits(core_check: str) -> None:
    # #16 item 6: the configure limits are the catalogue's (rate 100..5000, channels 1..2,
    # period_ticks 200..65535 whole ticks of 2 MHz); the C core (generated TT_LIMIT_*) and the
    # simulated board (read from the catalogue) must answer every configure the same way.
    from trueturn.link.codec import StreamDecoder
    from trueturn.sim.board import VirtualBoard
    from trueturn.sim.scenario import load_scenario

    lim = load_catalogue().limits
    rates = sorted({lim["rate_hz"].min - 1, lim["rate_hz"].min, 2000, 3000, 4000,
                    lim["rate_hz"].max, lim["rate_hz"].max + 1, 30, 0xFFFF})
    channels = range(lim["channels"].min - 1, lim["channels"].max + 2)
    cases = [(r, c) for r in rates for c in channels]
    frames = [encode_frame("configure", i, {"rate_hz": r, "channels": c, "tach_edge": 1})
              for i, (r, c) in enumerate(cases)]
    out = _run(core_check, "decode", "\n".join(f.hex() for f in frames) + "\n")
    c_errors = [int(line.split(" | ")[1].split()[3]) for line in out]
    board = VirtualBoard(load_scenario("bench-grinder"))
    board.take_output()
    for f in frames:
        board.receive(f)
    replies = [m for m in StreamDecoder().feed(board.take_output()) if m.name == "reply"]
    assert [m["error"] for m in replies] == c_errors
    ok = {case for case, err in zip(cases, c_errors, strict=True) if err == ERROR_CODES["ok"]}
    assert (lim["rate_hz"].max, lim["channels"].max) in ok  # 2 x 5 kSps: 200 ticks
    assert (lim["rate_hz"].max + 1, 1) not in ok and (4000, lim["channels"].max + 1) not in ok
