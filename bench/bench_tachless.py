#!/usr/bin/env python3
"""No-tach figures (#17 item 6, #22): the spectrum's 1x against the simulator's exact 1x on
``sim://...?tach=off`` rigs, a 1x lost in the noise read at a harmonic's speed (a check run
after a perfect correction), and what a 0.5x line does to the order-tracked 1x circle.

Run alone with ``.venv/bin/python bench/bench_tachless.py`` or through ``make bench``.
``BENCH_TACHLESS_SEEDS`` sets how many simulated runs per scenario (default 3).
"""

from __future__ import annotations

import contextlib
import io
import math
import os
import sys
import tempfile
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from common import Row, format_table  # noqa: E402
from trueturn.cli.main import main as cli  # noqa: E402
from trueturn.dsp import LiveAnalyzer  # noqa: E402
from trueturn.dsp.synthetic import OrderComponent, SyntheticRun, synthesize  # noqa: E402
from trueturn.dsp.tachless import (  # noqa: E402
    CIRCLE95_SIGMAS,
    NORMAL95,
    TachlessMeter,
    speed_band_hz,
)
from trueturn.dsp.units import PickupProfile  # noqa: E402
from trueturn.link.capture import CaptureReader  # noqa: E402
from trueturn.link.codec import Message, StreamDecoder  # noqa: E402
from trueturn.sim.scenario import load_scenario  # noqa: E402
from trueturn.sim.spec import exact_1x  # noqa: E402
from trueturn.ui.launch import scenario_profile  # noqa: E402

RECORD_S = 22.0  # 5 segments of 4 s after the first


def _record(url: str, path: str) -> None:
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        code = cli(["record", "--port", url, "--seconds", f"{RECORD_S:g}", "-o", path])
    if code != 0:
        raise RuntimeError(f"trueturn record {url} exited {code}")


def _tachless_readings(url: str, path: str, profile, band: tuple[float, float],  # type: ignore[no-untyped-def]
                       reference_hz: float | None = None) -> tuple[list, list]:
    """Record ``url`` and read it as the app's tachless meter does: readings, findings."""
    _record(url, path)
    meter = TachlessMeter([PickupProfile(p.name) for p in profile.pickups], band,
                          float(profile.mains_hz), unit="V pk", reference_hz=reference_hz)
    decoder = StreamDecoder()
    with CaptureReader(path) as reader:
        for chunk in reader.chunks():
            for m in decoder.feed(chunk):
                if isinstance(m, Message):
                    meter.feed(m)
    return meter.readings(), meter.stream_findings()


def sim_rows(seeds: int) -> list[Row]:
    errors, inside, total = [], 0, 0
    names = ("bench-grinder", "shop-fan")
    with tempfile.TemporaryDirectory() as folder:
        for name in names:
            scenario = load_scenario(name)
            profile = scenario_profile(name)
            band = speed_band_hz(profile.speed_max_rpm, profile.max_speed_rpm)
            for seed in range(1, seeds + 1):
                readings, _ = _tachless_readings(
                    f"sim://{name}?realtime=0&tach=off&seed={seed}",
                    str(Path(folder) / f"{name}-{seed}.cap"), profile, band)
                if not readings:
                    errors.append(math.inf)
                    continue
                speed = float(np.mean([r.speed_rpm for r in readings if r.speed_rpm]))
                truth = {e.pickup: e.amplitude_v for e in exact_1x(scenario, speed)}
                for r in readings:
                    err = abs(r.amplitude - truth[r.sensor])
                    errors.append(err / truth[r.sensor])
                    total += 1
                    assert r.confidence_radius is not None
                    inside += err <= r.confidence_radius * NORMAL95 / CIRCLE95_SIGMAS
    worst = max(errors)
    return [
        Row(f"no tach [sim, tach=off]: 1x amplitude from the spectrum vs the model's exact 1x "
            f"at the measured speed, worst of {len(errors)} readings ({', '.join(names)})",
            f"{100 * worst:.2f} %", "<= 3 %", worst <= 0.03),
        Row("no tach [sim, tach=off]: readings whose stated 95 % amplitude interval holds the "
            "exact 1x", f"{inside} of {total}", "-", None),
    ]


def lost_line_rows(seeds: int) -> list[Row]:
    """A check run after a perfect correction: the as-found run (its unbalance) gives the
    reference speed, then the same rig with no unbalance at all (``unbalance=none``): the 1x
    is zero, lost in the noise, and is read at the speed a harmonic gives."""
    names = ("bench-grinder", "shop-fan")
    runs = read = holds = 0
    speed_errors = []
    with tempfile.TemporaryDirectory() as folder:
        for name in names:
            profile = scenario_profile(name)
            band = speed_band_hz(profile.speed_max_rpm, profile.max_speed_rpm)
            for seed in range(1, seeds + 1):
                base = f"sim://{name}?realtime=0&tach=off&seed={seed}"
                found, _ = _tachless_readings(base, str(Path(folder) / "a.cap"), profile, band)
                if not found:
                    continue
                as_found_rpm = float(np.mean([r.speed_rpm for r in found if r.speed_rpm]))
                lost, findings = _tachless_readings(base + "&unbalance=none",
                                                    str(Path(folder) / "b.cap"), profile,
                                                    band, as_found_rpm / 60.0)
                runs += 1
                if not lost:
                    continue
                read += 1
                speed = float(np.mean([r.speed_rpm for r in lost if r.speed_rpm]))
                speed_errors.append(abs(speed / as_found_rpm - 1.0))
                for r in lost:  # the exact 1x is zero: its interval must hold zero
                    assert r.confidence_radius is not None
                    holds += r.amplitude <= r.confidence_radius * NORMAL95 / CIRCLE95_SIGMAS
    n_readings = 2 * read
    return [
        Row(f"no tach [sim, no unbalance]: check runs whose 1x is lost in the noise read at a "
            f"harmonic's speed ({', '.join(names)})", f"{read} of {runs}", "all",
            read == runs),
        Row("no tach [sim, no unbalance]: their speed against the as-found run's, worst",
            f"{100 * max(speed_errors, default=math.inf):.2f} %", "-", None),
        Row("no tach [sim, no unbalance]: readings whose stated 95 % amplitude interval holds "
            "the exact 1x (zero)", f"{holds} of {n_readings}", "-", None),
    ]


def half_order_rows(seeds: int) -> list[Row]:
    ratios = []
    for seed in range(seeds):
        radii = []
        for half in (40.0, 0.0):
            run = SyntheticRun(speed_rpm=2700.0, duration_s=3.0,
                               orders=((OrderComponent(1, 20.0, 40.0),
                                        OrderComponent(0.5, half, 100.0)),
                                       (OrderComponent(1, 30.0, 250.0),)),
                               noise_counts=2.0, seed=seed)
            raw, _ = synthesize(run)
            meter = LiveAnalyzer(max_revs=400, unit="V pk", mains_hz=60.0)
            for m in StreamDecoder().feed(raw):
                if isinstance(m, Message):
                    meter.feed(m)
            radii.append(meter.readings()[0].confidence_radius)
        ratios.append(radii[0] / radii[1])
    return [Row(f"0.5x line twice the 1x: 1x 95 % circle against no line, median of {seeds} "
                "seeds (averaged over pairs of revolutions)",
                f"x{float(np.median(ratios)):.2f}", "<= x1.25", float(np.median(ratios)) <= 1.25)]


def rows() -> list[Row]:
    seeds = int(os.environ.get("BENCH_TACHLESS_SEEDS", "3"))
    return sim_rows(seeds) + lost_line_rows(seeds) + half_order_rows(4 * seeds)


if __name__ == "__main__":
    print(format_table(rows()))
