"""The pickup's RC low-pass corner from the machine profile (issue #17 item 7).

The stream a filtered pickup gives is built from the analog RC response computed by
scipy.signal.freqs (reference library: PyPI scipy), independent of trueturn's own
``chain_response``; the readings of the app's meter and of ``analyze --machine`` must give
back the unfiltered 1x. Formula: first-order RC low-pass ``|H| = 1/sqrt(1 + (f/fc)^2)``,
phase ``-atan(f/fc)`` (any circuits textbook, e.g. Horowitz & Hill, The Art of Electronics,
3rd ed. 2015, ch. 1; from memory): x0.71 and 45 deg late at the corner.
"""

from __future__ import annotations

import json
import math
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from scipy import signal

from cli_helpers import run_cli
from trueturn.dsp.synthetic import OrderComponent, SyntheticRun, synthesize
from trueturn.dsp.units import PickupProfile, chain_response, pickup_profile
from trueturn.jobs.store import Workspace
from trueturn.link.codec import Message, StreamDecoder
from trueturn.model import Pickup
from trueturn.ui.launch import scenario_profile
from trueturn.ui.meter import MeterAdapter

CORNER_HZ = 49.7  # the ADXL335-class module as sold (hardware/WIRING.md)
SPEED_RPM = 60.0 * CORNER_HZ  # the 1x right at the corner: x0.71, 45 deg late
# mains 60 Hz: a hum comb at 50 Hz would sit 0.3 Hz from this 1x, closer than the window
# resolves (dsp/README.md, "What the 95 % circle covers")
TRUE_1X = ((OrderComponent(1, 90.0, 40.0),), (OrderComponent(1, 60.0, 250.0),))


def rc_response_scipy(f_hz: float, corner_hz: float) -> complex:
    """The analog RC low-pass ``1/(1 + s/wc)`` at ``f_hz`` by scipy.signal.freqs (engineering
    convention: phase negative = lag)."""
    wc = 2.0 * math.pi * corner_hz
    _, h = signal.freqs([1.0], [1.0 / wc, 1.0], worN=[2.0 * math.pi * f_hz])
    return complex(h[0])


def filtered_run(seed: int = 3) -> SyntheticRun:
    """The true 1x of each pickup as the ADC sees it behind the RC (steady state: amplitude
    times |H|, lag -arg H, from scipy), plus noise."""
    h = rc_response_scipy(SPEED_RPM / 60.0, CORNER_HZ)
    seen = tuple(tuple(OrderComponent(c.order, c.amplitude_counts * abs(h),
                                      c.phase_deg - math.degrees(np.angle(h))) for c in comps)
                 for comps in TRUE_1X)
    return SyntheticRun(speed_rpm=SPEED_RPM, duration_s=3.0, orders=seen, noise_counts=2.0,
                        seed=seed)


def test_rc_formula_against_scipy_and_the_textbook() -> None:
    # Horowitz & Hill ch. 1 (from memory): 1/sqrt(2) and 45 deg lag at the corner
    h = rc_response_scipy(CORNER_HZ, CORNER_HZ)
    assert abs(h) == pytest.approx(1 / math.sqrt(2), rel=1e-12)
    assert math.degrees(np.angle(h)) == pytest.approx(-45.0, abs=1e-9)
    profile = PickupProfile("p", lowpass_corners_hz=(CORNER_HZ,))
    for f in (5.0, 29.0, CORNER_HZ, 60.0, 92.0, 400.0):
        ours = chain_response(profile, f)
        ref = rc_response_scipy(f, CORNER_HZ)
        assert abs(ours) == pytest.approx(abs(ref), rel=1e-12)
        assert abs(ours) == pytest.approx(1 / math.sqrt(1 + (f / CORNER_HZ) ** 2), rel=1e-12)
        # trueturn phasors count phase as lag (trueturn/angles.py): +atan(f/fc)
        assert math.degrees(np.angle(ours)) == pytest.approx(-math.degrees(np.angle(ref)))
        assert math.degrees(np.angle(ours)) == pytest.approx(math.degrees(math.atan(f / CORNER_HZ)))


def test_the_profile_pickup_carries_its_corner_into_the_dsp() -> None:
    pickup = Pickup("left", 300.0, 1650.0, lowpass_corner_hz=CORNER_HZ)
    profile = pickup_profile("left", pickup)
    assert profile.lowpass_corners_hz == (CORNER_HZ,)
    assert profile.sensitivity_v_per_g == pytest.approx(0.3)
    assert pickup_profile("left", replace(pickup, lowpass_corner_hz=None)).lowpass_corners_hz == ()


def _meter(pickups: list[Pickup], raw: bytes) -> MeterAdapter:
    meter = MeterAdapter([p.name for p in pickups], mains_hz=60.0, pickups=pickups, max_revs=400)
    for m in StreamDecoder().feed(raw):
        if isinstance(m, Message):
            meter.feed(m)
    return meter


def _meter_readings(pickups: list[Pickup], raw: bytes) -> dict[str, Any]:
    return dict(_meter(pickups, raw).view().readings)


def test_the_app_meter_takes_the_filter_out_of_amplitude_and_phase() -> None:
    raw, truth = synthesize(filtered_run())
    volts_per_count = 5.0 / 1024
    sens = 0.3
    with_corner = [Pickup("left", 1000 * sens, lowpass_corner_hz=CORNER_HZ),
                   Pickup("right", 1000 * sens, lowpass_corner_hz=CORNER_HZ)]
    without = [replace(p, lowpass_corner_hz=None) for p in with_corner]
    fixed = _meter_readings(with_corner, raw)
    plain = _meter_readings(without, raw)
    f1 = SPEED_RPM / 60.0
    for name, comps in zip(("left", "right"), TRUE_1X, strict=True):
        r, p = fixed[name], plain[name]
        # the truth in mm/s rms: counts -> V -> g -> m/s^2 -> velocity (+90 deg), rms
        true_g = comps[0].amplitude_counts * volts_per_count / sens
        true_mm_s = true_g * 9.80665 / (2 * math.pi * f1) * 1000 / math.sqrt(2)
        true_phase = comps[0].phase_deg + 90.0
        radius = r.confidence_radius
        assert radius is not None and radius < 0.02 * true_mm_s
        want = true_mm_s * np.exp(1j * math.radians(true_phase))
        assert abs(r.vector - want) <= radius  # inside its own 95 % circle
        # without the corner the module reads x0.71 and 45 deg late at its corner
        assert p.amplitude / r.amplitude == pytest.approx(1 / math.sqrt(2), rel=1e-5)
        assert math.remainder(p.phase_deg - r.phase_deg, 360) == pytest.approx(45.0, abs=1e-3)
    del truth
    # the spectrum (and so the overall level and its zone) is corrected the same way
    peaks = []
    for pickups in (with_corner, without):
        meter = _meter(pickups, raw)
        meter.view()  # the revolutions measured: the peaks are named
        spec = meter.analyzer.spectra()[0]
        assert spec is not None
        peaks.append({p.label: p.amplitude for p in spec.peaks})
    assert peaks[1]["1x"] / peaks[0]["1x"] == pytest.approx(1 / math.sqrt(2), rel=1e-3)


def test_analyze_takes_the_corner_from_the_machine_profile(tmp_path: Path) -> None:
    raw, _ = synthesize(filtered_run(seed=5))
    capture = tmp_path / "filtered.bin"
    capture.write_bytes(raw)
    profile = scenario_profile("bench-grinder")
    profile.pickups = [replace(p, lowpass_corner_hz=CORNER_HZ) for p in profile.pickups]
    profile.name = "Filtered grinder"
    Workspace.open(tmp_path / "ws").save_machine(profile)
    code, out, err = run_cli(["analyze", str(capture), "--machine", "Filtered grinder",
                              "--workspace", str(tmp_path / "ws"), "--unit", "g", "--json",
                              "--mains-hz", "60"])
    assert code == 0, err
    got = {r["name"]: r for r in json.loads(out)["pickups"]}
    code, out_plain, err = run_cli(["analyze", str(capture), "--unit", "g", "--json",
                                    "--sensitivity-v-per-g", "0.3,0.3", "--mains-hz", "60"])
    assert code == 0, err
    plain = json.loads(out_plain)["pickups"]
    assert list(got) == [p.name for p in profile.pickups]
    for r, p, comps in zip(got.values(), plain, TRUE_1X, strict=True):
        true_g = comps[0].amplitude_counts * 5.0 / 1024 / 0.3
        assert r["amplitude"] == pytest.approx(true_g, rel=0.02)
        assert p["amplitude"] / r["amplitude"] == pytest.approx(1 / math.sqrt(2), rel=1e-6)


def test_analyze_machine_mistakes_are_one_line(tmp_path: Path) -> None:
    raw, _ = synthesize(filtered_run())
    capture = tmp_path / "c.bin"
    capture.write_bytes(raw)
    code, _, err = run_cli(["analyze", str(capture), "--workspace", str(tmp_path)])
    assert code != 0 and "--workspace goes with --machine" in err
    code, _, err = run_cli(["analyze", str(capture), "--machine", "No such",
                            "--workspace", str(tmp_path / "ws")])
    assert code != 0 and len(err.strip().splitlines()) == 1 and "Traceback" not in err
