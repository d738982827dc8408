#!/usr/bin/env python3
"""Virtual rig figures: sim:// generation speed against real time, loss over long streams,
and the cost of the exact physics.

Run alone with ``.venv/bin/python bench/bench_sim.py`` or through ``make bench``.
Set ``BENCH_SIM_MINUTES`` to shorten the long-stream figure (default 10 simulated minutes).
"""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from common import Row, format_table  # noqa: E402
from trueturn.link.codec import Message  # noqa: E402
from trueturn.link.ports import open_port  # noqa: E402
from trueturn.link.session import BoardSession  # noqa: E402
from trueturn.sim import Mass, load_scenario  # noqa: E402

SPEED_GOAL_X = 2.0  # the app must keep up with a real-time board with room to spare


def _stream(url: str, seconds: float, rate_hz: int = 4000, channels: int = 2
            ) -> tuple[float, dict, int]:
    """Stream ``seconds`` of signal as fast as possible; (wall s, link counters, samples)."""
    port = open_port(url)
    session = BoardSession(port)
    while session.identity is None:
        session.read()
    session.configure(rate_hz, channels)
    session.start()
    target = int(seconds * rate_hz * channels)
    samples = 0
    started = time.perf_counter()
    while samples < target:
        for item in session.read():
            if isinstance(item, Message) and item.name == "samples":
                samples += len(item["samples"])
    wall = time.perf_counter() - started
    session.stop()
    counters = session.decoder.counters.to_json()
    port.close()
    return wall, counters, samples


def rows() -> list[Row]:
    out: list[Row] = []
    for name, rate, ch in (("bench-grinder", 4000, 2), ("jointer-head", 5000, 2),
                           ("shop-fan", 1000, 1)):
        sim_s = 20.0
        wall, _, _ = _stream(f"sim://{name}?realtime=0", sim_s, rate, ch)
        speed = sim_s / wall
        out.append(Row(f"sim:// {name} {ch} ch x {rate} Hz, generate + decode",
                       f"{speed:.1f}x real time", f">= {SPEED_GOAL_X:g}x",
                       speed >= SPEED_GOAL_X))
    minutes = float(os.environ.get("BENCH_SIM_MINUTES", "10"))
    # Start half the run before the 32-bit tick wraps, so the wrap is inside the run.
    tick0 = (1 << 32) - int(minutes * 30 * 2_000_000)
    wall, c, samples = _stream(f"sim://bench-grinder?realtime=0&tick0={tick0}", minutes * 60)
    lost = c["samples_lost"] + c["frames_lost"] + c["frames_bad"] + c["tach_edges_lost"]
    out.append(Row(f"sim:// {minutes:g} simulated min, 2 ch x 4 kHz (tick wrap inside): "
                   "samples + frames + tach edges lost",
                   f"{lost} of {samples} samples", "0", lost == 0))
    out.append(Row(f"sim:// {minutes:g} simulated min wall time", f"{wall:.1f} s", "-", None))
    sc = load_scenario("bench-grinder")
    masses = sc.as_found + [Mass("left-wheel", 1.0, 90.0)]
    n = 2000
    started = time.perf_counter()
    for i in range(n):
        sc.rotor.response_1x(3000.0 + i * 0.1, masses)
    per_call_us = (time.perf_counter() - started) / n * 1e6
    out.append(Row("exact 1x response (4-DOF complex solve), per speed", f"{per_call_us:.0f} us",
                   "-", None))
    return out


if __name__ == "__main__":
    print(format_table(rows()))
