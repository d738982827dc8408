"""Is it unbalance, and how bad is the machine overall (issue #22 items 1 and 2).

Sources named beside each check: the broadband velocity against a closed form (a sinusoid's
velocity amplitude is a/omega) and against an independent time-domain path with scipy
(Butterworth band-pass, trapezoidal integration); the zone boundaries of ISO 10816-1:1995
Annex B Class I (from memory); the unbalance rules are common practice, no source. The
simulated machines (bench grinder, misaligned belt drive) are invented demo scenarios.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy import integrate, signal

from cli_helpers import run_cli
from trueturn.dsp.findings import Code, Finding, describe
from trueturn.dsp.severity import (
    MM_S2_PER_G,
    NoSeverity,
    Zone,
    band_for,
    band_velocity_rms,
    pickup_severity,
    zone_of,
)
from trueturn.dsp.spectrum import SpectrumPeak, spectrum
from trueturn.dsp.unbalance import NONSYNC_RATIO_MAX, TWO_X_RATIO_MAX, pickup_evidence, verdict

RATE_HZ = 4000.0


def _tones(parts: list[tuple[float, float]], seconds: float = 8.0, noise_g: float = 0.0,
           seed: int = 1) -> np.ndarray:
    t = np.arange(int(seconds * RATE_HZ)) / RATE_HZ
    x = sum(a * np.sin(2 * np.pi * f * t + 0.3 * k) for k, (a, f) in enumerate(parts))
    return x + np.random.default_rng(seed).normal(0.0, noise_g, t.size) if noise_g else x


def test_velocity_of_a_tone_is_a_over_omega():
    # closed form: a = A sin(wt) -> v = -(A/w) cos(wt); RMS = A / (w sqrt 2)
    for amplitude_g, hz in ((0.5, 50.0), (0.2, 180.0), (1.0, 25.0)):
        spec = spectrum(_tones([(amplitude_g, hz)]), RATE_HZ)
        got = band_velocity_rms(spec.frequencies_hz, spec.asd) * MM_S2_PER_G
        want = amplitude_g * MM_S2_PER_G / (2 * math.pi * hz) / math.sqrt(2)
        assert got == pytest.approx(want, rel=0.01)


def test_tones_outside_10_to_1000_hz_do_not_count():
    # ISO 10816-1 / 20816-1 broadband band 10-1000 Hz (from memory): 4 Hz and 1500 Hz left out
    inside = spectrum(_tones([(0.3, 60.0)]), RATE_HZ)
    both = spectrum(_tones([(0.3, 60.0), (0.05, 4.0), (2.0, 1500.0)]), RATE_HZ)
    v_in = band_velocity_rms(inside.frequencies_hz, inside.asd)
    v_both = band_velocity_rms(both.frequencies_hz, both.asd)
    assert v_both == pytest.approx(v_in, rel=0.02)


def test_velocity_agrees_with_a_time_domain_path():
    # reference: scipy.signal.butter band-pass 10-1000 Hz (sosfiltfilt) and
    # scipy.integrate.cumulative_trapezoid to velocity, then RMS -- a second, independent path
    x = _tones([(0.4, 48.0), (0.25, 96.0), (0.05, 333.0)], seconds=16.0, noise_g=0.02)
    spec = spectrum(x, RATE_HZ)
    freq_domain = band_velocity_rms(spec.frequencies_hz, spec.asd) * MM_S2_PER_G
    sos = signal.butter(4, [10.0, 1000.0], btype="bandpass", fs=RATE_HZ, output="sos")
    a = signal.sosfiltfilt(sos, x) * MM_S2_PER_G
    v = integrate.cumulative_trapezoid(a, dx=1 / RATE_HZ, initial=0.0)
    v = signal.sosfiltfilt(sos, v)  # remove the integration constant's drift
    trim = int(RATE_HZ)  # filter edges
    time_domain = float(np.sqrt(np.mean(v[trim:-trim] ** 2)))
    assert freq_domain == pytest.approx(time_domain, rel=0.03)


@pytest.mark.parametrize(("v", "zone"), [
    (0.0, Zone.A), (0.70, Zone.A), (0.71, Zone.B), (1.79, Zone.B), (1.8, Zone.C),
    (4.49, Zone.C), (4.5, Zone.D), (45.0, Zone.D)])
def test_zone_boundaries_class_one(v, zone):
    # ISO 10816-1:1995 Annex B Table B.1, Class I: A/B 0.71, B/C 1.8, C/D 4.5 mm/s (from memory)
    assert zone_of(v) is zone


def test_severity_refuses_rather_than_guess():
    spec = spectrum(_tones([(0.3, 60.0)]), RATE_HZ)
    f, asd = spec.frequencies_hz, spec.asd
    assert pickup_severity("p", f, None, RATE_HZ, 3000).refused is NoSeverity.UNCALIBRATED
    assert pickup_severity("p", f, asd, 1500.0, 3000).refused is NoSeverity.BAND_NOT_SAMPLED
    crawl = pickup_severity("p", f, asd, RATE_HZ, 150)  # 2.5 Hz: its main lobe reaches 0.5 Hz
    assert crawl.refused is NoSeverity.SPEED_TOO_LOW and crawl.velocity_rms_mm_s is None
    assert "too slow" in describe(crawl.as_finding())
    ok = pickup_severity("p", f, asd, RATE_HZ, 3600)
    assert ok.refused is None and ok.zone is zone_of(ok.velocity_rms_mm_s)
    assert "zone" in describe(ok.as_finding()) and "volts" in describe(
        pickup_severity("p", f, None, RATE_HZ, 3000).as_finding())


def test_band_switches_to_2_hz_below_600_rpm():
    # ISO 20816-1 / ISO 10816-1 (from memory): 10-1000 Hz, and 2-1000 Hz for machines below
    # 600 r/min; Hann main lobe +/- 2 bins (Harris 1978): a 1x that close to 10 Hz is
    # measured in the wider band too (the standards ask for at least the band)
    assert band_for(3000.0, 1.0) == (10.0, 1000.0)
    assert band_for(720.0, 1.0) == (10.0, 1000.0)    # 12 Hz - 2 bins = 10 Hz
    assert band_for(660.0, 1.0) == (2.0, 1000.0)     # 11 Hz: its lobe would be cut at 10 Hz
    assert band_for(599.0, 0.25) == (2.0, 1000.0)    # below 600 rpm whatever the bins
    assert band_for(660.0, 0.25) == (10.0, 1000.0)    # finer bins: the lobe clears 10 Hz
    assert band_for(240.0, 1.0) == (2.0, 1000.0)     # 4 Hz - 2 bins = 2 Hz
    assert band_for(200.0, 1.0) is None
    assert band_for(0.0, 1.0) is None and band_for(math.nan, 1.0) is None
    with pytest.raises(ValueError, match="resolution_hz"):
        band_for(3000.0, 0.0)


def test_a_slow_machine_is_measured_over_2_to_1000_hz():
    # closed form: a 5 Hz tone (300 rpm) has v_rms = A / (2 pi f sqrt 2); the 10-1000 Hz band
    # would miss it, so a slow machine's unbalance would read as a smooth machine
    amplitude_g, hz = 0.02, 5.0
    spec = spectrum(_tones([(amplitude_g, hz)], seconds=16.0), RATE_HZ)
    slow = pickup_severity("p", spec.frequencies_hz, spec.asd, RATE_HZ, 60 * hz)
    want = amplitude_g * MM_S2_PER_G / (2 * math.pi * hz) / math.sqrt(2)
    assert slow.band_hz == (2.0, 1000.0) and slow.refused is None
    # the 1/f^2 weight across the Hann main lobe reads a slow tone a little high: computed
    # +2.0 % at 5 Hz, +3.2 % at 4 Hz (the slowest the 2-1000 Hz band takes) with 1 Hz bins
    assert want <= slow.velocity_rms_mm_s <= 1.03 * want
    missed = band_velocity_rms(spec.frequencies_hz, spec.asd) * MM_S2_PER_G
    assert missed < 0.05 * want
    assert "(2-1000 Hz)" in describe(slow.as_finding())
    assert slow.as_finding().to_json()["band_hz"] == [2.0, 1000.0]
    fast = pickup_severity("p", spec.frequencies_hz, spec.asd, RATE_HZ, 3000)
    assert fast.band_hz == (10.0, 1000.0) and "(10-1000 Hz)" in describe(fast.as_finding())


def _peaks(one: float, two: float, other: float | None = None) -> list[SpectrumPeak]:
    """1x at 50 Hz, 2x at 100 Hz and a non-synchronous peak at 37 Hz, amplitudes in g pk
    chosen as velocities (a = v * f) so the ratios read directly."""
    out = [SpectrumPeak(50.0, one * 50.0, "1x"), SpectrumPeak(100.0, two * 100.0, "2x")]
    if other is not None:
        out.append(SpectrumPeak(37.0, other * 37.0, "other"))
    return out


def _overall(*velocities: float) -> float:
    # the same weighting as the rules: v_rms = a_pk / (2 pi f) / sqrt 2
    return math.sqrt(sum(v * v for v in velocities)) / (2 * math.pi) / math.sqrt(2)


def test_strong_2x_fails_its_rule_and_the_verdict_says_balancing_may_not_help():
    # common practice, no source: 2x above half the 1x -> misalignment or looseness
    ev = pickup_evidence("p", _peaks(1.0, 0.6), _overall(1.0, 0.6), [], 50.0)
    two = next(f for f in ev if f.code is Code.TWO_X_RATIO)
    assert not two.details["ok"] and two.details["ratio"] == pytest.approx(0.6)
    v = verdict(ev, 1)
    assert v.code is Code.BALANCING_MAY_NOT_HELP
    assert "2x is 60 % of 1x: check alignment and mounting bolts first; balancing may not " \
           "help" in describe(two)
    below = pickup_evidence("p", _peaks(1.0, 0.9 * TWO_X_RATIO_MAX), _overall(1.0, 0.45), [],
                            50.0)
    assert verdict(below, 1).code is Code.UNBALANCE_LIKELY


def test_low_1x_share_strong_other_peak_and_wandering_phase_each_fail():
    low = pickup_evidence("p", _peaks(1.0, 0.1), _overall(1.0, 0.1, 1.5), [], 50.0)
    assert not next(f for f in low if f.code is Code.ONE_X_SHARE).details["ok"]
    other = pickup_evidence("p", _peaks(1.0, 0.1, 1.2 * NONSYNC_RATIO_MAX),
                            _overall(1.0, 0.1, 0.6), [], 50.0)
    peak = next(f for f in other if f.code is Code.NONSYNC_PEAK)
    assert not peak.details["ok"] and peak.details["order"] == pytest.approx(0.74)
    drifting = pickup_evidence("p", _peaks(1.0, 0.1), _overall(1.0, 0.1),
                               [Finding(Code.VECTOR_DRIFTING, "p", blocking=True)], 50.0)
    assert not next(f for f in drifting if f.code is Code.PHASE_STEADINESS).details["ok"]
    for ev in (low, other, drifting):
        assert verdict(ev, 1).code is Code.BALANCING_MAY_NOT_HELP


def test_no_reading_no_verdict_of_unbalance():
    ev = pickup_evidence("p", _peaks(1.0, 0.1), _overall(1.0, 0.1), None, 50.0)
    assert verdict(ev, 1).code is Code.UNBALANCE_UNDECIDED
    assert verdict([], 0).code is Code.UNBALANCE_UNDECIDED


def _analyze(tmp_path: Path, scenario: str) -> dict:
    cap = tmp_path / f"{scenario}.cap"
    code, _, err = run_cli(["record", "--port", f"sim://{scenario}?realtime=0&seed=3",
                            "--seconds", "6", "-o", str(cap)])
    assert code == 0, err
    code, out, err = run_cli(["analyze", str(cap), "--json"])
    assert code == 0, err
    return json.loads(out)


def test_misaligned_belt_drive_is_told_balancing_may_not_help(tmp_path):
    # invented demo scenario: a strong 2x from a misaligned belt drive
    got = _analyze(tmp_path, "belt-misaligned")
    assert got["unbalance"]["verdict"] == "balancing_may_not_help"
    failing = [e for e in got["unbalance"]["evidence"] if not e["ok"]]
    assert [e["code"] for e in failing] == ["two_x_ratio"]  # the 1x still dominates
    assert "balancing may not help" in got["unbalance"]["words"]
    code, text, _ = run_cli(["analyze", str(tmp_path / "belt-misaligned.cap")])
    assert "check alignment and mounting bolts first" in text


def test_bench_grinder_is_judged_unbalance_and_its_severity_matches_its_1x(tmp_path):
    got = _analyze(tmp_path, "bench-grinder")
    assert got["unbalance"]["verdict"] == "unbalance_likely"
    assert all(e["ok"] for e in got["unbalance"]["evidence"])
    by_name = {p["name"]: p for p in got["pickups"]}
    assert [s["pickup"] for s in got["severity"]] == list(by_name)
    for s in got["severity"]:
        pickup = by_name[s["pickup"]]
        assert pickup["unit"] == "mm/s rms"
        # independent paths: the broadband Welch integral against the order fit's 1x..3x
        orders = math.sqrt(sum(o["amplitude"] ** 2 for o in pickup["orders"]))
        assert s["velocity_rms_mm_s"] == pytest.approx(orders, rel=0.03)
        assert s["zone"] == zone_of(s["velocity_rms_mm_s"]).value


def test_the_guide_says_it_before_the_first_trial(tmp_path):
    """What the app shows after the as-found run (ui.texts.condition_lines, from the same
    analysis the live meter makes): on the misaligned belt drive the warning and the failing
    rule, on the bench grinder that balancing should help."""
    from trueturn.dsp.analysis import analyze_capture
    from trueturn.link.capture import read_capture
    from trueturn.ui.texts import condition_lines

    shown = {}
    for scenario in ("belt-misaligned", "bench-grinder"):
        cap = tmp_path / f"{scenario}.cap"
        code, _, err = run_cli(["record", "--port", f"sim://{scenario}?realtime=0&seed=3",
                                "--seconds", "6", "-o", str(cap)])
        assert code == 0, err
        meta, raw = read_capture(cap)
        result = analyze_capture(raw)
        shown[scenario] = "\n".join(condition_lines(result.severity, result.unbalance,
                                                    as_found=True))
    assert "balancing may not help" in shown["belt-misaligned"]
    assert "2x is" in shown["belt-misaligned"]
    assert "Not only unbalance" in shown["belt-misaligned"]
    assert "balancing should help" in shown["bench-grinder"]
    assert "may not help" not in shown["bench-grinder"]


def test_after_a_check_run_the_rules_speak_only_while_the_machine_is_rough() -> None:
    # After balancing the 1x is gone, so what is left is rightly "not unbalance": in zone
    # A/B (ISO 20816-1 evaluation zones, from memory) the guide no longer says "balancing
    # may not help", which after a PASS misled (seen in the demo: a 2x at 53 % of a tiny
    # 1x); still in zone C/D it says what is left is not mostly unbalance, and the zones'
    # own line follows. As found, the rules speak whatever the zone.
    from trueturn.dsp.severity import Severity, Zone
    from trueturn.ui.texts import LEFT_NOT_UNBALANCE_HEAD, MAY_NOT_HELP_HEAD, condition_lines

    doubt = (Finding(Code.BALANCING_MAY_NOT_HELP),
             Finding(Code.TWO_X_RATIO, "left", details={"ok": False, "ratio": 0.53}))
    smooth = (Severity("left", 0.85, Zone.B),)
    rough = (Severity("left", 5.8, Zone.D),)
    calm = "\n".join(condition_lines(smooth, doubt, as_found=False))
    assert "2x" not in calm and "may not help" not in calm
    still = condition_lines(rough, doubt, as_found=False)
    assert LEFT_NOT_UNBALANCE_HEAD in still and any("2x" in line for line in still)
    assert any("Still zone C/D" in line for line in still)
    assert MAY_NOT_HELP_HEAD in condition_lines(smooth, doubt, as_found=True)
