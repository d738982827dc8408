"""The pickups' evidence of standstill (trueturn.dsp.motion): a signal that cannot show
motion is no evidence.

A still accelerometer sits near its zero-g output, mid-range (ADXL335-class modules at
3.3 V: about 1.65 V, a third of a 5 V ADC's range; datasheet, from memory), with its own
noise. A pickup stuck at an ADC limit (unwired, no supply, an open AREF pin) or clipping
against one reads flat or flat-topped: a quiet level there proves nothing, so it must never
vouch for standstill - the case of a dark tach on a spinning rotor whose pickup cable is
off. Invented signals.
"""

from __future__ import annotations

import numpy as np
import pytest

from trueturn.dsp.motion import (
    RAIL_FRACTION_LIMIT,
    MotionMonitor,
    free_vibration,
    motion_spectrum,
)
from trueturn.procedure.guide import standstill_refusal
from trueturn.procedure.standstill import StandstillWatch

RATE_HZ = 4000.0
ADC_MAX = 1023
G_PER_COUNT = 5.0 / 1024 / 0.33  # 10-bit, 5 V reference, 330 mV/g


def _monitor(counts: np.ndarray) -> MotionMonitor:
    m = MotionMonitor(("left",), (G_PER_COUNT,), RATE_HZ, 50.0, adc_max_count=ADC_MAX)
    m.feed(counts.astype(np.int64), 1)
    return m


def test_a_still_working_pickup_is_live_and_quiet() -> None:
    rng = np.random.default_rng(7)
    counts = np.round(338 + 0.6 * rng.normal(size=int(3 * RATE_HZ)))
    (p,) = _monitor(counts).judge()
    assert p.at_rail_fraction == 0.0 and p.live and p.quiet


def test_a_pickup_stuck_at_a_limit_is_no_evidence() -> None:
    for rail in (0, ADC_MAX):
        (p,) = _monitor(np.full(int(3 * RATE_HZ), rail)).judge()
        assert p.at_rail_fraction == 1.0 and not p.live and not p.quiet
        assert p.level_g_rms < p.limit_g_rms  # flat: it *looks* quiet, which is the danger


def test_a_pickup_clipping_on_a_violent_machine_is_no_evidence() -> None:
    t = np.arange(int(3 * RATE_HZ)) / RATE_HZ
    counts = np.clip(np.round(338 + 900 * np.sin(2 * np.pi * 59.0 * t)), 0, ADC_MAX)
    (p,) = _monitor(counts).judge()
    assert p.at_rail_fraction is not None and p.at_rail_fraction > RAIL_FRACTION_LIMIT
    assert not p.live and not p.quiet


def test_a_dark_tach_and_an_unwired_pickup_never_prove_standstill() -> None:
    """Board data keep coming, the tach says nothing (dark), the only pickup is stuck at
    0 V: a minute later standstill is still not proven, and the refusal names the pickup."""
    watch = StandstillWatch(3.0)
    stuck = _monitor(np.zeros(int(3 * RATE_HZ))).judge()
    t = 0.0
    while t < 60.0:
        t += 0.2
        watch.motion(t, stuck)
    ev = watch.evidence()
    assert not ev.proven
    words = standstill_refusal(ev)
    assert "pickup left reads at the ADC limit" in words and "cannot vouch" in words


# --- free vibration: a stopped machine's supports ringing down (dsp.motion.free_vibration) ---
# A viscously damped mode left to itself vibrates as X e^{-zeta w_n t} cos(w_d t), w_d =
# w_n sqrt(1 - zeta^2) (S. S. Rao, Mechanical Vibrations, 2.6, from memory): the envelope's
# decay rate is zeta w_n at every amplitude. Modes as the demo scenarios' supports have them
# (the grinder's rubber feet 13.8 Hz at 3 % and 20.1 Hz at 3.1 %, the fan's 10.2 Hz at 1.3 %).
FLOOR_G = 0.004  # a still accelerometer's own noise, rms


@pytest.mark.parametrize(("natural_hz", "zeta"), [(13.8, 0.03), (10.2, 0.013), (20.1, 0.031)])
def test_a_damped_mode_left_to_itself_rings_down_at_zeta_omega_n(natural_hz: float,
                                                                  zeta: float) -> None:
    rng = np.random.default_rng(11)
    t = np.arange(int(4.0 * RATE_HZ)) / RATE_HZ
    omega_n = 2 * np.pi * natural_hz
    omega_d = omega_n * np.sqrt(1 - zeta ** 2)
    x = 0.15 * np.exp(-zeta * omega_n * t) * np.cos(omega_d * t + 0.4) \
        + rng.normal(0.0, FLOOR_G, t.size)
    level, line = motion_spectrum(x, RATE_HZ, 50.0)
    assert line is not None
    ring = free_vibration(x, RATE_HZ, line[0])
    assert ring is not None and ring.rings_down
    assert ring.decay_per_s == pytest.approx(zeta * omega_n, rel=0.05)
    assert ring.frequency_hz == pytest.approx(omega_d / (2 * np.pi), rel=0.005)


def _coast_angle(speed0_rpm: float, coast_down_s: float, nominal_rpm: float,
                 seconds: float) -> tuple[np.ndarray, np.ndarray]:
    """Shaft angle and speed of a rotor coasting with windage and bearing friction,
    dw/dt = -w/tau - f (tau = T/2, f = w_nom/(2T)), as the simulator's motor; stopped at 0."""
    tau, friction = coast_down_s / 2, nominal_rpm * np.pi / 30 / (2 * coast_down_s)
    t = np.arange(int(seconds * RATE_HZ)) / RATE_HZ
    w0 = speed0_rpm * np.pi / 30
    w = np.maximum((w0 + friction * tau) * np.exp(-t / tau) - friction * tau, 0.0)
    return np.cumsum(w) / RATE_HZ, w


@pytest.mark.parametrize(("speed0_rpm", "coast_down_s"),
                         [(900.0, 12.0), (600.0, 60.0), (3540.0, 12.0), (450.0, 30.0),
                          (1200.0, 120.0)])
def test_a_coasting_rotors_fading_1x_is_no_ring_down(speed0_rpm: float,
                                                     coast_down_s: float) -> None:
    # Its 1x fades (the unbalance force goes with w^2) but moves down with the speed: never
    # a free vibration, whatever the pace of the coast (a heavy flywheel or a quick stop).
    rng = np.random.default_rng(5)
    angle, speed = _coast_angle(speed0_rpm, coast_down_s, 3540.0, 4.0)
    x = 0.9 * (speed / (3540.0 * np.pi / 30)) ** 2 * np.cos(angle) \
        + rng.normal(0.0, FLOOR_G, angle.size)
    level, line = motion_spectrum(x, RATE_HZ, 50.0)
    assert line is not None  # each of these coasts is still seen
    ring = free_vibration(x, RATE_HZ, line[0])
    assert ring is None or not ring.rings_down


@pytest.mark.parametrize("growth_per_s", [0.0, 0.3])
def test_a_steady_or_growing_line_is_no_ring_down(growth_per_s: float) -> None:
    rng = np.random.default_rng(9)
    t = np.arange(int(4.0 * RATE_HZ)) / RATE_HZ
    x = 0.02 * np.exp(growth_per_s * t) * np.cos(2 * np.pi * 29.0 * t) \
        + rng.normal(0.0, FLOOR_G, t.size)
    ring = free_vibration(x, RATE_HZ, 29.0)
    assert ring is not None and not ring.rings_down


def test_the_monitor_says_which_line_rings_down() -> None:
    rng = np.random.default_rng(3)
    t = np.arange(int(4.0 * RATE_HZ)) / RATE_HZ
    omega_n, zeta = 2 * np.pi * 13.8, 0.03
    ring_g = 0.05 * np.exp(-zeta * omega_n * t) * np.cos(omega_n * t)
    running_g = 0.05 * np.cos(2 * np.pi * 29.0 * t)
    for signal_g, ringing in ((ring_g, True), (running_g, False)):
        counts = np.round(338 + (signal_g + rng.normal(0, FLOOR_G, t.size)) / G_PER_COUNT)
        (p,) = _monitor(counts).judge()
        assert p.periodic_hz is not None and not p.quiet and p.ringing is ringing
