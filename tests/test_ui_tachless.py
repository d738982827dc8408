"""The amplitude-only procedure with no tach at all, driven headless with Pilot (#17 item 6).

The rig is ``sim://...?tach=off``: no tach edge ever. Speed and the 1x amplitude come from the
spectrum (trueturn.dsp.tachless), standstill from the pickups alone (live and quiet for the
long hold) plus the person's confirmations. Truth for the honest residual: the rig's exact
1x response (physics, trueturn.sim board.exact_response_1x) with the weights the app put on
it, independent of the estimator.
"""

from __future__ import annotations

import asyncio
import math
from pathlib import Path

import yaml

from cli_helpers import run_cli
from test_ui_app import (
    SIZE,
    connect,
    follow_the_screens,
    press,
    quick_scenario,
    screen_text,
    unbalance_now,
    wait_for,
)
from trueturn.dsp.findings import Code, describe
from trueturn.dsp.tachless import speed_band_hz
from trueturn.jobs.store import read_document
from trueturn.link.capture import read_capture
from trueturn.link.codec import Message, StreamDecoder
from trueturn.procedure.standstill import Basis
from trueturn.sim.scenario import scenario_dir
from trueturn.ui.app import AppConfig, TrueturnApp
from trueturn.ui.launch import scenario_profile
from trueturn.ui.meter import MeterAdapter, MeterView
from trueturn.ui.texts import no_tach_measuring


def make_tachless_app(scenario: str, tmp_path: Path) -> TrueturnApp:
    path = quick_scenario(scenario, tmp_path)
    config = AppConfig(f"sim://{path}?realtime=0&motor=off&tach=off", scenario_profile(path),
                       demo=True, workspace=tmp_path / "ws")
    return TrueturnApp(config)


def test_amplitude_only_with_no_tach_reaches_a_correction_that_cuts_the_1x(tmp_path: Path
                                                                          ) -> None:
    async def scenario() -> None:
        app = make_tachless_app("shop-fan", tmp_path)
        async with app.run_test(size=SIZE) as pilot:
            await connect(app, pilot)
            before = unbalance_now(app)
            await press(app, pilot, "3")
            # the guide says the tach is absent, and on what standstill rests
            await wait_for(pilot, lambda: "Standstill proven: no tach on this machine"
                           in screen_text(app), 90)
            assert "no tach is needed" in screen_text(app)
            assert "STANDSTILL (no tach; pickups quiet" in screen_text(app)
            await follow_the_screens(app, pilot, "3")  # (3 again: ignored, chosen already)
            proc = app.procedure
            assert proc is not None and proc.verdict is not None
            job = read_document(app.keeper.path, "job")
            # as found + three trial positions + at least one check; every reading without
            # phase, with its speed and its 95 % uncertainty
            assert [r.kind for r in job.runs][:4] == ["initial", "trial", "trial", "trial"]
            for run in job.runs:
                assert run.speed_rpm > 0
                for r in run.readings:
                    assert r.phase_deg is None and r.confidence_radius is not None
                    assert 0 < r.confidence_radius < 0.2 * r.amplitude or \
                        run.kind == "check"
            # the fan runs at about 1737 rpm (scenario): the spectrum found it
            assert abs(job.runs[0].speed_rpm - 1737) < 30
            # Honest residual: the weights the app placed cut the physics' 1x

            assert unbalance_now(app) < 0.1 * before
            # the overall level is measured at the spectrum's speed (no tach needed)
            first = job.runs[0]
            assert all(s.velocity_rms_mm_s and s.zone for s in first.severity)
            # once the as-found run is kept, the meter knows its speed (a 1x later lost in
            # the noise is read at the speed a harmonic gives)
            tachless = app.session.meter.tachless
            assert tachless is not None and tachless.reference_hz is not None
            assert abs(60.0 * tachless.reference_hz - first.speed_rpm) < 1e-6
            # every confirmation rests on the pickups, the tach absent
            assert all(c.basis == Basis.PICKUPS_NO_TACH.value and not c.standstill_by_tach
                       for r in job.runs for c in r.confirmations)
            await press(app, pilot, "q")
    asyncio.run(scenario())


def test_a_check_run_whose_1x_is_lost_in_the_noise_reads_it_at_the_2x_speed(tmp_path: Path
                                                                            ) -> None:
    # A correction that cut the 1x into the noise: the check run's band then holds no line
    # and, with the spectrum alone, the run waited for ever. The simulated shop fan with no
    # unbalance at all (its 2x, turbulence and hum as shipped) and no tach: the app's meter,
    # told the as-found speed, reads the 1x at the speed its 2x gives (dsp.tachless), near
    # zero within its circle, and says where the speed came from.
    cap = tmp_path / "fan.cap"
    code, _, err = run_cli(["record", "--port",
                            "sim://shop-fan?realtime=0&unbalance=none&tach=off",
                            "--seconds", "20", "-o", str(cap)])
    assert code == 0, err
    profile = scenario_profile("shop-fan")
    sensors = [p.name for p in profile.pickups]
    band = speed_band_hz(1737.0, profile.max_speed_rpm)  # the planned speed (scenario)

    def view(reference_rpm: float | None) -> MeterView:
        return _amplitude_only_view(cap, band, reference_rpm)

    lost = view(None)  # before the as-found run: no speed, no reading, and why
    assert lost.readings == {} and [f.code for f in lost.findings] == [Code.NO_SPEED_LINE]
    found = view(1740.0)  # the as-found run's speed (the scenario's slip gives ~1737)
    assert found.speed_rpm is not None and abs(found.speed_rpm - 1737.0) < 10.0
    assert sorted(found.readings) == sorted(sensors)
    for r in found.readings.values():
        assert r.steady and r.no_tach and r.confidence_radius is not None
        assert r.amplitude <= r.confidence_radius  # zero within its 95 % circle
    (order,) = [f for f in found.findings if f.code is Code.SPEED_FROM_ORDER]
    assert order.details["order"] == 2  # the fan's 2x (scenario: harmonics, order 2)
    assert "from the 2x line" in no_tach_measuring(found.speed_rpm, order.details["order"])


def _quiet_fan(tmp_path: Path) -> str:
    """The shop fan as shipped but with no harmonic line and no other tone: with no
    unbalance, nothing in its spectrum tells the speed (a rotor balanced into the noise)."""
    raw = yaml.safe_load((scenario_dir() / "shop-fan.yaml").read_text(encoding="utf-8"))
    raw["signals"]["harmonics"] = []
    raw["signals"]["tones"] = []
    path = tmp_path / "quiet-fan.yaml"
    path.write_text(yaml.safe_dump(raw), encoding="utf-8")
    return str(path)


def _amplitude_only_meter(cap: Path, band: tuple[float, float], reference_rpm: float | None
                          ) -> MeterAdapter:
    """The app's meter in the amplitude-only procedure, fed a whole recording."""
    _, raw = read_capture(cap)
    profile = scenario_profile("shop-fan")
    meter = MeterAdapter([p.name for p in profile.pickups], 60.0, profile.pickups)
    meter.use_tachless(band, reference_rpm)
    for msg in StreamDecoder().feed(raw):
        if isinstance(msg, Message):
            meter.feed(msg)
    return meter


def _amplitude_only_view(cap: Path, band: tuple[float, float], reference_rpm: float | None
                         ) -> MeterView:
    return _amplitude_only_meter(cap, band, reference_rpm).view()


class _SpectrumAt:
    """Stands in for the spectrum's meter (dsp.tachless.TachlessMeter) with a given speed
    and no readings: what the tach is weighed against."""

    def __init__(self, band_hz: tuple[float, float], speed_rpm: float) -> None:
        self.band_hz, self.speed_rpm = band_hz, speed_rpm

    def readings(self) -> list:  # type: ignore[type-arg]
        return []

    def stream_findings(self) -> list:  # type: ignore[type-arg]
        return []


def test_a_1x_lost_in_the_noise_with_no_harmonic_is_read_once_a_tach_is_fitted(
        tmp_path: Path) -> None:
    # The dead end: an amplitude-only check run of a rotor balanced into the noise, with no
    # harmonic line either. The spectrum finds no speed and reads nothing, and the app says
    # to fit a tach. With a tach fitted the same job's meter reads the 1x locked to it:
    # zero within its 95 % circle (the rig has no unbalance at all), at the tach's speed.
    scenario = _quiet_fan(tmp_path)
    band = speed_band_hz(1737.0, scenario_profile("shop-fan").max_speed_rpm)
    views = {}
    for tach in ("off", "none"):  # the tach absent; fitted and without fault
        cap = tmp_path / f"tach-{tach}.cap"
        code, _, err = run_cli(["record", "--port",
                                f"sim://{scenario}?realtime=0&unbalance=none&tach={tach}",
                                "--seconds", "12", "-o", str(cap)])
        assert code == 0, err
        views[tach] = _amplitude_only_view(cap, band, 1740.0)
    # a tach whose speed lies outside the job's speed band (a second mark on the rotor, a
    # tach on another shaft) is not used, though the spectrum has nothing to set against it
    max_rpm = scenario_profile("shop-fan").max_speed_rpm
    elsewhere = _amplitude_only_view(cap, speed_band_hz(2 * 1737.0, 2 * max_rpm), None)
    assert elsewhere.readings == {}
    assert [f.code for f in elsewhere.findings] == [Code.NO_SPEED_LINE]
    dark = views["off"]
    assert dark.readings == {}
    assert [f.code for f in dark.findings] == [Code.NO_SPEED_LINE]
    assert "fit a tach and run again" in describe(dark.findings[0])
    lit = views["none"]
    assert lit.speed_rpm is not None and abs(lit.speed_rpm - 1737.0) < 15.0
    assert Code.TACH_READS_1X in [f.code for f in lit.findings]
    assert sorted(lit.readings) == sorted(p.name for p in scenario_profile("shop-fan").pickups)
    # zero within its 99.9 % circle: the 95 % radius times sqrt(ln 1000 / ln 20), the
    # Rayleigh distribution's quantiles (a circular normal's magnitude; from memory), so two
    # pickups do not fail one time in ten by chance alone
    widen = math.sqrt(math.log(1000.0) / math.log(20.0))
    for r in lit.readings.values():
        assert not r.no_tach and r.confidence_radius is not None
        assert r.amplitude <= widen * r.confidence_radius


def test_a_tach_reads_the_same_1x_as_the_spectrum_and_only_at_the_planned_speed(
        tmp_path: Path) -> None:
    # The shop fan as shipped, tach fitted, amplitude-only meter. The tach's synchronous 1x
    # and the spectrum's (dsp.tachless) measure one line: they agree within their combined
    # 95 % circles (both estimators' own uncertainty), so a job whose runs mix them is
    # consistent. A tach that disagrees with the spectrum's speed is not used.
    cap = tmp_path / "fan.cap"
    code, _, err = run_cli(["record", "--port", "sim://shop-fan?realtime=0&motor=on",
                            "--seconds", "12", "-o", str(cap)])
    assert code == 0, err
    max_rpm = scenario_profile("shop-fan").max_speed_rpm
    band = speed_band_hz(1737.0, max_rpm)
    meter = _amplitude_only_meter(cap, band, 1740.0)
    with_tach = meter.view()
    assert Code.TACH_READS_1X in [f.code for f in with_tach.findings]
    assert meter.tachless is not None
    for r in meter.tachless.readings():   # the spectrum's own readings of the same stream
        locked = with_tach.readings[r.sensor]
        assert r.confidence_radius is not None and locked.confidence_radius is not None
        assert abs(locked.amplitude - r.amplitude) <= math.hypot(r.confidence_radius,
                                                                 locked.confidence_radius)
    # the spectrum's speed 5 % off the tach's (more than the 3 % one job's runs may differ):
    # the tach is not used, the spectrum's (here no) readings stand
    assert with_tach.speed_rpm is not None
    meter.tachless = _SpectrumAt(band, 1.05 * with_tach.speed_rpm)  # type: ignore[assignment]
    off = meter.view()
    assert off.readings == {} and Code.TACH_READS_1X not in [f.code for f in off.findings]
    meter.tachless = _SpectrumAt(band, 1.01 * with_tach.speed_rpm)  # type: ignore[assignment]
    assert Code.TACH_READS_1X in [f.code for f in meter.view().findings]
