"""Decoder fuzzing at scale (issue: reliability): impaired streams and random frame bodies.

Figures: frames sent, impaired, corrupted and detected, delivered intact, losses accounted by
the decoder vs actual, false accepts measured vs the CRC-16 theory, pure random bytes through
the decoder, exceptions escaping the decoder (goal 0).
Frame count: TT_BENCH_FRAMES (default 1 000 000).
"""

from __future__ import annotations

import os
import random
import time

import numpy as np

from common import Row
from trueturn.link.cobs import cobs_decode, cobs_encode
from trueturn.link.codec import FrameError, Message, StreamDecoder, decode_frame, encode_frame
from trueturn.link.crc import crc16_ibm3740

SAMPLES_PER_FRAME = 4
BIT_ERROR_RATE = 1e-3
# the board the fuzzed stream comes from: a 10-bit ADC, so a count above 1023 is corrupt
IDENTITY = {"protocol_version": 2, "definition_hash": 0, "firmware_major": 1,
            "firmware_minor": 0, "firmware_patch": 0, "board_id": 1, "tick_hz": 2_000_000,
            "adc_bits": 10, "adc_reference_mv": 5000, "aperture_delay_ticks": 16,
            "max_channels": 2, "channel0_pin": 0, "channel1_pin": 1, "tach_pin": 8,
            "adc_reference_kind": 1, "reset_flags": 1}


def _out_of_range(msg: Message) -> bool:
    """A value no board of ours sends (SPEC 4.9) in an accepted message."""
    v = msg.values
    if msg.name == "samples":
        return (max(v["samples"]) > 1023 or not 1 <= v["channels"] <= 4
                or v["period_ticks"] == 0)
    if msg.name == "identity":
        return not (6 <= v["adc_bits"] <= 16 and 10_000 <= v["tick_hz"] <= 200_000_000
                    and 500 <= v["adc_reference_mv"] <= 10_000)
    if msg.name == "stream_config":
        return v["rate_hz"] == 0 or v["period_ticks"] == 0 or not 1 <= v["channels"] <= 4
    return msg.name in ("identify", "start", "stop", "configure", "ping")


def _expected_samples(index: int) -> list[int]:
    return [(index * 7 + k * 131) % 1024 for k in range(SAMPLES_PER_FRAME)]


def _frame(i: int) -> bytes:
    first = i * SAMPLES_PER_FRAME
    return encode_frame("samples", i & 0xFF, {"first_index": first, "channels": 1,
                                              "start_tick": 400, "period_ticks": 500,
                                              "samples": _expected_samples(first)})


def impaired_stream(n_frames: int, rng: random.Random) -> tuple[bytes, int, int, int]:
    """Frames with drops (1 %), duplicates (0.5 %), truncation (0.5 %), garbage (0.5 %), then
    bit flips at BIT_ERROR_RATE. Returns (bytes, frames structurally impaired, bits flipped,
    frames corrupted: truncated or hit by a flip in any copy; drops are losses, not corrupt)."""
    parts: list[bytes] = []
    owner: list[int] = []  # frame index of each part, -1 for inserted garbage
    impaired = 0
    truncated: set[int] = set()
    for i in range(n_frames):
        wire = _frame(i)
        roll = rng.random()
        if roll < 0.01:
            impaired += 1
            continue  # dropped on the way
        if roll < 0.015:
            parts.append(wire)  # duplicated
            owner.append(i)
        elif roll < 0.02:
            wire = wire[: rng.randrange(1, len(wire) - 1)] + b"\x00"  # truncated
            impaired += 1
            truncated.add(i)
        elif roll < 0.025:
            parts.append(bytes(rng.randrange(256) for _ in range(rng.randrange(1, 30))))
            owner.append(-1)
        parts.append(wire)
        owner.append(i)
    stream = np.frombuffer(b"".join(parts), dtype=np.uint8).copy()
    gen = np.random.default_rng(rng.randrange(2**32))
    n_bits = stream.size * 8
    flips = gen.choice(n_bits, size=gen.binomial(n_bits, BIT_ERROR_RATE), replace=False)
    np.bitwise_xor.at(stream, flips // 8, (1 << (flips % 8)).astype(np.uint8))
    ends = np.cumsum([len(p) for p in parts])
    hit = np.asarray(owner)[np.searchsorted(ends, flips // 8, side="right")]
    corrupted = truncated | {int(i) for i in hit if i >= 0}
    # one clean frame closes the stream, as the next frame of a live stream would: a loss
    # at the very end cannot be seen from sequence numbers before a later frame arrives;
    # and one opens it, as the board's identity opens a live stream: a loss of the very
    # first frame cannot be seen without a frame before it
    opening = encode_frame("pong", 0xFF, {"token": 0, "tick": 0})
    return (opening + stream.tobytes() + _frame(n_frames), impaired, int(flips.size),
            len(corrupted))


def fuzz_stream(n_frames: int) -> dict[str, float]:
    rng = random.Random(20261201)
    data, impaired, flipped, corrupted = impaired_stream(n_frames, rng)
    decoder = StreamDecoder()
    decoder.assume_identity(IDENTITY)
    delivered = set()
    false_accepts = 0
    out_of_range = 0
    crashes = 0
    started = time.perf_counter()
    for pos in range(0, len(data), 4096):
        try:
            items = decoder.feed(data[pos : pos + 4096])
        except Exception:  # the figure we want to be zero
            crashes += 1
            continue
        for item in items:
            if not isinstance(item, Message):
                continue
            if item.name == "pong" and item.seq == 0xFF and item.values["token"] == 0:
                continue  # the opening frame
            first = item.values.get("first_index", -1)
            ok = (item.name == "samples" and first % SAMPLES_PER_FRAME == 0
                  and 0 <= first <= n_frames * SAMPLES_PER_FRAME  # the closing frame too
                  and item.seq == (first // SAMPLES_PER_FRAME) & 0xFF
                  and item.values["samples"] == _expected_samples(first))
            if ok and first < n_frames * SAMPLES_PER_FRAME:
                delivered.add(first // SAMPLES_PER_FRAME)
            elif ok:
                pass  # the closing frame
            else:
                false_accepts += 1
                out_of_range += _out_of_range(item)
    elapsed = time.perf_counter() - started
    c = decoder.counters
    return {"frames": n_frames, "impaired": impaired, "bits_flipped": flipped,
            "corrupted": corrupted, "detected": corrupted - false_accepts,
            "delivered": len(delivered), "missing": n_frames - len(delivered),
            "accounted": c.frames_lost, "rejected": c.frames_bad, "false_accepts": false_accepts,
            "crashes": crashes, "frames_per_s": n_frames / elapsed,
            "out_of_range": out_of_range, "bad_value": c.errors["bad_value"]
            + c.errors["wrong_direction"]}


def random_bodies(n: int) -> tuple[int, int]:
    """Random frame bodies of valid-looking length: how many does the CRC let through?

    Theory: a 16-bit CRC accepts a random body with probability 2^-16.
    """
    rng = np.random.default_rng(7)
    bodies = rng.integers(0, 256, size=(n, 12), dtype=np.uint8)
    passed = 0
    for row in bodies:
        raw = row.tobytes()
        if crc16_ibm3740(raw[:-2]) == int.from_bytes(raw[-2:], "big"):
            passed += 1
            try:
                decode_frame(cobs_encode(raw))
            except FrameError:
                pass
            assert cobs_decode(cobs_encode(raw)) == raw
    return n, passed


def random_byte_stream(n_bytes: int) -> dict[str, int]:
    """Pure random bytes through the stream decoder: nothing may escape, and a message is
    accepted only when a body between two 0x00 passes COBS, CRC-16, type and length checks
    (at most one body in 2^16 by the CRC alone)."""
    data = np.random.default_rng(1234).integers(0, 256, n_bytes, dtype=np.uint8).tobytes()
    decoder = StreamDecoder()
    decoder.assume_identity(IDENTITY)
    accepted = crashes = out_of_range = 0
    for pos in range(0, len(data), 4096):
        try:
            items = decoder.feed(data[pos:pos + 4096])
        except Exception:  # the figure we want to be zero
            crashes += 1
            continue
        for item in items:
            if isinstance(item, Message):
                accepted += 1
                out_of_range += _out_of_range(item)
    return {"bytes": n_bytes, "bodies": decoder.counters.frames_bad + accepted,
            "accepted": accepted, "crashes": crashes, "out_of_range": out_of_range}


def rows() -> list[Row]:
    n = int(os.environ.get("TT_BENCH_FRAMES", "1000000"))
    r = fuzz_stream(n)
    n_random, passed = random_bodies(n)
    theory = n_random / 65536
    noise = random_byte_stream(max(1 << 16, 16 * n))
    return [
        Row("link fuzz: frames sent (BER 1e-3, drops, dups, truncation, garbage)",
            f"{r['frames']:,}", ">= 1,000,000", r["frames"] >= 1_000_000),
        Row("link fuzz: frames impaired before bit flips / bits flipped",
            f"{r['impaired']:,} / {r['bits_flipped']:,}", "info"),
        Row("link fuzz: frames not delivered intact / counted lost by decoder",
            f"{r['missing']:,} / {r['accounted']:,}", "equal", r["missing"] == r["accounted"]),
        Row("link fuzz: frames corrupted (truncated or bit-flipped) / detected (refused, "
            "not accepted with wrong content)",
            f"{r['corrupted']:,} / {r['detected']:,}", "info"),
        Row("link fuzz: frames rejected (cobs/crc/length)", f"{r['rejected']:,}", "info"),
        Row("link fuzz: false accepts in impaired stream", f"{r['false_accepts']}",
            f"~{r['missing'] / 65536:.1f} or fewer (2^-16 x corrupted)",
            r["false_accepts"] <= max(3, 3 * r["missing"] / 65536)),
        Row("link fuzz: exceptions escaping the decoder", f"{r['crashes']}", "0",
            r["crashes"] == 0),
        Row("link fuzz: random 12-byte bodies passing CRC-16, measured vs theory",
            f"{passed} of {n_random:,} (theory {theory:.1f})",
            "within 3 sigma of n/65536", abs(passed - theory) <= 3 * theory**0.5 + 1),
        Row("link fuzz: pure random bytes, bodies between 0x00 / accepted as messages",
            f"{noise['bodies']:,} / {noise['accepted']} (CRC bound {noise['bodies'] / 65536:.2f})",
            "<= 3 x bound + 1", noise["accepted"] <= 3 * noise["bodies"] / 65536 + 1),
        Row("link fuzz: exceptions escaping the decoder on pure random bytes",
            f"{noise['crashes']}", "0", noise["crashes"] == 0),
        Row("link fuzz: corrupt frames accepted with out-of-range values (impaired stream + "
            "random bytes)", f"{r['out_of_range'] + noise['out_of_range']}", "0",
            r["out_of_range"] + noise["out_of_range"] == 0),
        Row("link fuzz: CRC-passing frames refused for out-of-range values or direction",
            f"{r['bad_value']:,}", "info"),
        Row("link: decode speed", f"{r['frames_per_s']:,.0f} frames/s", "info"),
    ]


if __name__ == "__main__":
    from common import format_table

    print(format_table(rows()))
