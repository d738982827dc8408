#!/usr/bin/env python3
"""Write protocol/vectors/: golden frames for every message type, edge cases, invalid frames.

Run once when the protocol changes (``python protocol/make_vectors.py``), review the diff, and
commit. Tests then hold both codecs (Python and C) to these bytes.
"""

from __future__ import annotations

import sys
from pathlib import Path

import yaml

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "host"))

from trueturn.link.catalogue import load_catalogue  # noqa: E402
from trueturn.link.cobs import cobs_decode, cobs_encode  # noqa: E402
from trueturn.link.codec import encode_frame  # noqa: E402
from trueturn.link.crc import crc16_ibm3740  # noqa: E402

CAT = load_catalogue()

VALID = [
    ("identity", "identity", 0, dict(protocol_version=CAT.protocol_version,
                         definition_hash=CAT.definition_hash,
                         firmware_major=1, firmware_minor=1, firmware_patch=0, board_id=1,
                         tick_hz=2_000_000, adc_bits=10, adc_reference_mv=4873,
                         adc_reference_kind=1, aperture_delay_ticks=16, max_channels=2,
                         channel0_pin=0, channel1_pin=1, tach_pin=8, reset_flags=0x52)),
    ("reply", "reply", 7, dict(command_type=0x84, command_seq=12, error=0)),
    ("reply_busy", "reply", 8, dict(command_type=0x84, command_seq=13, error=4)),
    ("stream_config", "stream_config", 9, dict(rate_hz=4000, channels=2, period_ticks=250, tach_edge=1,
                              start_tick=123_456_789, adc_reference_mv=4869)),
    ("samples", "samples", 10, dict(first_index=1024, channels=2, start_tick=123_456_789,
                                    period_ticks=250,
                                    samples=[512, 498, 530, 477, 1023, 0, 300, 700])),
    ("samples_longest", "samples", 255, dict(first_index=0xFFFFFF8A, channels=2,
                                             start_tick=0xFFFFFF00, period_ticks=200,
                                             samples=[(i * 37) % 1024 for i in range(118)])),
    ("samples_shortest", "samples", 1, dict(first_index=5, channels=1, start_tick=400,
                                            period_ticks=20000, samples=[511])),
    # every byte of the payload zero except channels and the high byte of period_ticks
    ("samples_zero_bytes", "samples", 0, dict(first_index=0, channels=1, start_tick=0,
                                              period_ticks=0x0100, samples=[0] * 118)),
    ("tach", "tach", 42, dict(tick=4_000_000_123, edge_count=65535)),
    ("status", "status", 200, dict(uptime_ms=86_400_000, state=1, samples_dropped=3, frames_dropped=1,
                         adc_overruns=0, tach_edges=1_234_567, rx_bad_frames=2, tach_suppressed=9,
                         capture_overwrites=4, error_flags=0x31)),
    ("pong", "pong", 17, dict(token=0xDEADBEEF, tick=77)),
    ("identify", "identify", 0, {}),
    ("start", "start", 1, {}),
    ("stop", "stop", 2, {}),
    ("configure", "configure", 3, dict(rate_hz=2000, channels=2, tach_edge=0)),
    ("ping", "ping", 4, dict(token=0x01020304)),
]


# fixed part of a samples payload: first_index 16, channels, start_tick 400, period_ticks 250
SAMPLES_HEAD_1CH = ((16).to_bytes(4, "little") + b"\x01" + (400).to_bytes(4, "little")
                    + (250).to_bytes(2, "little"))
SAMPLES_HEAD_2CH = ((16).to_bytes(4, "little") + b"\x02" + (400).to_bytes(4, "little")
                    + (250).to_bytes(2, "little"))


def frame_bytes(raw: bytes) -> bytes:
    """Wrap an unencoded frame body (type, seq, payload) with a correct CRC and COBS."""
    return cobs_encode(raw + crc16_ibm3740(raw).to_bytes(2, "big")) + b"\x00"


def invalid_vectors() -> list[tuple[str, bytes, str]]:
    good = encode_frame("ping", 4, {"token": 0x01020304})
    body = bytearray(good[:-1])
    bad_crc = bytearray(body)
    bad_crc[-1] ^= 0x01
    return [
        ("bad_crc", bytes(bad_crc) + b"\x00", "crc"),
        ("truncated_frame", cobs_encode(cobs_decode(bytes(body))[:-2]) + b"\x00", "crc"),
        ("truncated_wire", bytes(body[:-3]) + b"\x00", "cobs"),
        ("too_short", cobs_encode(b"\x85\x04\x12") + b"\x00", "too_short"),
        ("unknown_type", frame_bytes(bytes((0x7E, 0))), "unknown_type"),
        ("wrong_length_fixed", frame_bytes(bytes((0x85, 5, 1, 2, 3))), "bad_length"),
        ("wrong_length_samples_odd_bytes",
         frame_bytes(bytes((0x04, 6)) + SAMPLES_HEAD_1CH + b"\x10\x02\x20"),
         "bad_length"),
        ("samples_not_whole_sets",
         frame_bytes(bytes((0x04, 6)) + SAMPLES_HEAD_2CH + b"\x10\x02\x20\x03\x01\x00"),
         "bad_length"),
        ("too_long", frame_bytes(bytes((0x04, 1)) + SAMPLES_HEAD_1CH
                                 + b"\x11\x01" * 120), "too_long"),
        ("bad_cobs", bytes((0x05, 0x85, 0x04)) + b"\x00", "cobs"),
        # 119 samples fit a frame (253 bytes) but exceed limits.samples_per_block (118)
        ("samples_over_block_limit", frame_bytes(bytes((0x04, 7)) + SAMPLES_HEAD_1CH
                                                 + b"\x11\x01" * 119), "bad_length"),
        # three channels: a whole number of sets, but more than limits.channels (2)
        ("samples_too_many_channels",
         frame_bytes(bytes((0x04, 8)) + (18).to_bytes(4, "little") + b"\x03"
                     + (400).to_bytes(4, "little") + (250).to_bytes(2, "little")
                     + b"\x10\x02" * 3), "bad_length"),
    ]


def main() -> None:
    out = HERE / "vectors"
    for sub in ("valid", "invalid"):
        (out / sub).mkdir(parents=True, exist_ok=True)
        for old in (out / sub).glob("*.bin"):
            old.unlink()
    index: dict = {"definition_hash": f"{CAT.definition_hash:#010x}", "valid": [], "invalid": []}
    for name, message, seq, values in VALID:
        wire = encode_frame(message, seq, values)
        (out / "valid" / f"{name}.bin").write_bytes(wire)
        index["valid"].append({"name": name, "file": f"valid/{name}.bin", "type": message,
                               "seq": seq, "values": values, "hex": wire.hex()})
    for name, wire, error in invalid_vectors():
        (out / "invalid" / f"{name}.bin").write_bytes(wire)
        index["invalid"].append({"name": name, "file": f"invalid/{name}.bin", "error": error,
                                 "hex": wire.hex()})
    header = ("# Golden vectors of the protocol, written by protocol/make_vectors.py.\n"
              "# hex = the wire bytes (COBS body + 0x00). values = the decoded fields.\n")
    (out / "vectors.yaml").write_text(header + yaml.safe_dump(index, sort_keys=False, width=120))



if __name__ == "__main__":
    main()
