"""The virtual board: a scenario's rotor behind a board that speaks the protocol byte for byte.

One simulated clock (ticks of ``TICK_HZ``) drives everything: conversion ``n`` of a stream is
triggered at ``start_tick + n * period_ticks`` and sampled at that instant (aperture delay 0),
tach edges are stamped with the tick at which the shaft angle crosses the mark, status goes
out every simulated second. Frames are made with :func:`trueturn.link.codec.encode_frame`.

Behaviour, matching the firmware's contract in protocol/catalogue.yaml:

* at power-up: ``identity`` with sequence number 0, then ``status`` every second;
* every host command gets ``reply`` (error codes of the catalogue) first, then its answer:
  ``identify`` -> ``identity``; ``configure`` (only idle) -> ``stream_config`` with
  ``start_tick`` 0; ``start`` -> ``stream_config`` with the stream's ``start_tick``, then
  ``samples`` blocks (whole channel sets, at most 120 samples); ``stop`` flushes the whole
  sets taken so far, then replies; ``ping`` -> ``pong``;
* a frame failing COBS or CRC gets no reply and counts in ``rx_bad_frames``; an unknown or
  board-to-host type gets ``unknown_command``; a wrong payload length gets ``bad_length``;
* ``tach`` messages go out for every edge, streaming or not (standstill = no edges).

Defaults at power-up (our choice): 2 channels at 4000 Hz each, rising tach edge, so
``period_ticks`` = 250 (one conversion every 125 us).
"""

from __future__ import annotations

import math
import threading
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from trueturn.constants import STANDARD_GRAVITY_M_S2
from trueturn.link.boards import BOOTLOADER_WAIT_S
from trueturn.link.catalogue import load_catalogue
from trueturn.link.cobs import CobsError, cobs_decode
from trueturn.link.codec import FrameError, decode_payload, encode_frame
from trueturn.link.crc import crc16_ibm3740
from trueturn.sim.rotor import Mass, rpm_to_rad_s
from trueturn.sim.scenario import (
    ADC_COUNTS_PER_REFERENCE,
    ADC_MAX_COUNT,
    ADC_REFERENCE_V,
    Scenario,
)
from trueturn.sim.transient import RotorMotion, nonlinear_accel

_CAT = load_catalogue()
TICK_HZ = _CAT.limit("board_tick_hz").min  # every board of ours ticks at this rate
BOARD_ID_SIMULATED = {name: code for code, name in _CAT.board_ids.items()}["simulated"]
FIRMWARE_VERSION = (0, 1, 0)
MAX_BLOCK_SAMPLES = _CAT.limit("samples_per_block").max
DEFAULT_RATE_HZ = 4000
DEFAULT_CHANNELS = 2
STEP_TICKS = 100_000  # at most 50 ms of simulated time per generation step
STATUS_PERIOD_TICKS = TICK_HZ
START_DELAY_TICKS = 200  # first conversion of a stream, after the start command
STANDSTILL_RAD_S = 0.05  # below this the virtual shaft is taken as stopped
#: response=quasi-static: a step whose speed changes by more than this (0.5 rpm) follows the
#: steady 1x across it (a sweep), interpolated between responses at most this far apart
SWEEP_STEP_RAD_S = 0.5 * 2.0 * math.pi / 60.0
#: response=transient: the rotor's motion is integrated on the conversions' instants and at least this often
#: (1 ms: the speed taken constant within an interval costs a phase error of at most
#: Omega' h^2 / 8, 4e-6 rad at the bench grinder's coast-down rate; trueturn.sim.transient)
MOTION_GRID_TICKS = TICK_HZ // 1000
#: a rotor standing still whose motion has decayed below this (m, m/s) is at rest
REST_LIMIT = 1e-15
SENSOR_FLOOR_G = 0.004  # a still accelerometer's own noise, rms over the sampled band
TWO_PI = 2.0 * math.pi

ERROR_CODES = {name: code for code, name in _CAT.error_codes.items()}
STATES = {name: code for code, name in _CAT.device_states.items()}
#: status.error_flags and identity.reset_flags: name -> bit value
ERROR_FLAGS = {name: 1 << bit for bit, name in _CAT.error_flags.items()}
RESET_FLAGS = {name: 1 << bit for bit, name in _CAT.reset_flags.items()}
REFERENCE_KINDS = {name: code for code, name in _CAT.reference_kinds.items()}


@dataclass
class BoardOptions:
    """Knobs of the virtual board (the ``sim://`` URL options)."""

    seed: int = 1
    speed_rpm: float | None = None  # None: the scenario's nominal speed
    motor_on: bool = True  # running (at speed) at power-up
    noise_scale: float = 1.0  # multiplies every noise, hum, harmonic and tone level
    tick0: int = 0  # value of the clock at power-up (tests of the 32-bit wrap)
    unbalance: str = "as-found"  # or "none": start with no unbalance at all
    tach_fault: str = "none"  # see TACH_FAULTS
    #: None: the board powers up as the port opens (identity at once, the default);
    #: True: opening the port resets it into its bootloader (see BOOTLOADER_WAIT_S), then
    #: the firmware starts; False: it does not reset (DTR not wired) and has been running
    #: for a while: no identity at open, its status every second.
    reset_on_open: bool | None = None
    bootloader: str = "new"  # a key of trueturn.link.boards.BOOTLOADER_WAIT_S
    floating_channel: int | None = None  # this input (0-based) has nothing connected
    run: str = "steady"  # a key of RUNS: what the motor does after power-up
    response: str = "quasi-static"  # a key of RESPONSES: how the rotor follows the speed


#: ``sim://NAME?run=...``: what the motor does after power-up (see :func:`run_times`).
RUNS = {
    "steady": "runs at speed from power-up (or stands still with motor=off)",
    "coastdown": "at speed, then the motor is switched off and the rotor coasts to a stop",
    "runup": "at standstill, then the motor is switched on and runs the rotor up to speed",
    "bump": "at standstill (tach dark), a bearing housing struck every ~2 s, the pickups' "
            "housings in turn: a bump test (the rotor's free response on its supports)",
}

#: ``run=bump``: the first tap this long after power-up, then one every BUMP_PERIOD_S
#: (give or take BUMP_JITTER_S: a person's rhythm), BUMP_TAPS of them in a recording of
#: ``run_times(...)["record_s"]``; each tap's impulse is sized so that no pickup's
#: free response exceeds BUMP_PEAK_G x a share from BUMP_SHARE (a soft mallet, a hand that
#: does not strike the same twice): under the ADC's +-5.5 g at 0.3 V/g (invented figures)
BUMP_FIRST_S = 1.0
BUMP_PERIOD_S = 2.0
BUMP_JITTER_S = 0.2
BUMP_TAPS = 5
BUMP_PEAK_G = 2.0
BUMP_SHARE = (0.6, 1.0)


def coast_stop_s(coast_down_s: float) -> float:
    """Seconds from nominal speed to standstill in the coast-down model of ``_next_omega``.

    ``dw/dt = -w/tau - f`` with ``tau = T/2`` and ``f = w_nom/(2T)`` (T the scenario's
    ``coast_down_s``) gives ``w(t) = (w_nom + f tau) exp(-t/tau) - f tau``, zero when
    ``exp(-t/tau) = (w_nom/4)/(5 w_nom/4)``: ``t = tau ln 5 = 0.80 T``.
    """
    return coast_down_s / 2.0 * math.log(5.0)


def run_times(scenario: Scenario, run: str) -> dict[str, float]:
    """When a ``run=`` switches the motor and how long a recording should be, seconds.

    ``coastdown``: at speed for a third of the coast-down time, so that a recording of
    ``record_s`` (switch plus the coast to a stop plus 1 s) is about a quarter at speed.
    ``runup``: at standstill for a quarter of the recording, then the spin-up (the drive
    pulls the speed to its target with time constant ``spin_up_s/4``: within 0.5 % after
    ``ln(200) spin_up_s/4``), then a second at speed.
    ``bump``: no switch (the motor stays off); the recording holds ``BUMP_TAPS`` taps, the
    first ``first_tap_s`` after power-up, then one every ``tap_period_s``.
    """
    motor = scenario.motor
    if run == "bump":
        return {"switch_s": 0.0, "sweep_s": 0.0,
                "record_s": round(BUMP_FIRST_S + BUMP_TAPS * BUMP_PERIOD_S, 1),
                "first_tap_s": BUMP_FIRST_S, "tap_period_s": BUMP_PERIOD_S}
    if run == "coastdown":
        sweep_s = coast_stop_s(motor.coast_down_s)
        switch_s = sweep_s / 3.0
    elif run == "runup":
        sweep_s = math.log(200.0) * motor.spin_up_s / 4.0
        switch_s = sweep_s / 3.0
    else:
        return {"switch_s": 0.0, "sweep_s": 0.0, "record_s": 0.0}
    return {"switch_s": round(switch_s, 3), "sweep_s": round(sweep_s, 3),
            "record_s": round(switch_s + sweep_s + 1.0, 1)}


#: ``sim://NAME?response=...``: how the rotor's 1x follows a changing speed.
RESPONSES = {
    "quasi-static": "the steady 1x of the speed of the moment (no build-up, no lag)",
    "transient": "the rotor's motion integrated in time (trueturn.sim.transient): through a "
                 "lightly damped resonance passed quickly the 1x builds up late, peaks later "
                 "and lower and rings on after it",
}

#: ``sim://NAME?tach=...``: what a worn set-up does to the once-per-rev signal. Each fault hits
#: about one edge in ten (its own random stream, so the signals stay as without it).
TACH_FAULTS = {
    "none": "a clean mark and sensor",
    "missing": "the sensor misses an edge now and then (mark too small, sensor too far)",
    "double": "a second spot on the shaft (scratch, dirt) triggers an extra edge",
    "knocked": "an edge comes 5-15 degrees early or late (smudged or peeling mark)",
    "off": "no tach signal at all (unplugged, not aimed, no mark)",
    "chatter": "every edge comes with a burst of extra edges (a comparator without hysteresis "
               "on a slow mark edge, a noisy cable); the board's hold-off drops them",
}
#: ``tach=chatter``: extra edges after each real one, 160 CPU cycles (20 ticks) apart, the
#: same burst as ``emu://...?tach=chatter`` gives the real firmware.
TACH_CHATTER_EDGES = 10
TACH_CHATTER_GAP_TICKS = 20
# The firmware's tach hold-off (firmware/core/tt_tachq.h): capture off after an accepted
# edge for 1/16 of the last period, at least 100 us, at most 15 ms.
TACH_HOLDOFF_MIN_TICKS = 200
TACH_HOLDOFF_MAX_TICKS = 30_000
TACH_HOLDOFF_SHIFT = 4


def tach_holdoff_ticks(last_period_ticks: int) -> int:
    """The board's hold-off after an accepted edge (as tt_tach_holdoff_ticks in C)."""
    return min(TACH_HOLDOFF_MAX_TICKS,
               max(TACH_HOLDOFF_MIN_TICKS, (last_period_ticks & 0xFFFFFFFF) >> TACH_HOLDOFF_SHIFT))
TACH_FAULT_SHARE = 0.1

#: ``floating=N``: an input with nothing connected reads mostly the charge the ADC's sample
#: capacitor kept from the conversion before it (a ghost copy of the other channel); the
#: share kept is our invented figure for the demo, the rest is the pin drifting at mid-rail.
FLOATING_CARRY = 0.9
#: ``reset_on_open=0``: how long the board has been running when the port opens.
RUNNING_UPTIME_S = 60.0


@dataclass
class _Stream:
    rate_hz: int = DEFAULT_RATE_HZ
    channels: int = DEFAULT_CHANNELS
    tach_edge: int = 1
    streaming: bool = False
    start_tick: int = 0
    next_index: int = 0
    pending: list[int] = field(default_factory=list)
    pending_first: int = 0

    @property
    def period_ticks(self) -> int:
        return TICK_HZ // (self.rate_hz * self.channels)


class VirtualBoard:
    """Physics + firmware behaviour; bytes in with :meth:`receive`, out with :meth:`advance_to`.

    Thread-safe: the rig controls (masses, motor) may be called from another thread while a
    reader advances the clock.
    """

    def __init__(self, scenario: Scenario, options: BoardOptions | None = None) -> None:
        self.scenario = scenario
        self.options = options or BoardOptions()
        self.catalogue = load_catalogue()
        self.lock = threading.RLock()
        self.rng = np.random.default_rng(self.options.seed)
        self.tick = self.options.tick0  # the board's clock (unbounded int; sent mod 2^32)
        self._boot_tick = self.tick
        self._seq = 0
        self._out = bytearray()
        self._stream = _Stream()
        self._added: list[Mass] = []
        self._hidden = list(scenario.as_found) if self.options.unbalance != "none" else []
        self._shifted: list[Mass] = []  # loose parts where they settled at the last start
        # their own stream: where they settle depends on the seed and the number of starts,
        # not on how much signal was made in between
        self._loose_rng = np.random.default_rng(self.options.seed + 104729)
        motor = scenario.motor
        if self.options.speed_rpm is not None and motor.kind != "variable":
            raise ValueError(f"{scenario.name} runs at a fixed speed (induction motor); "
                             "rpm= is for variable-speed scenarios")
        self.target_speed_rpm = self.options.speed_rpm or motor.nominal_speed_rpm()
        self._check_speed(self.target_speed_rpm)
        if self.options.run not in RUNS:
            raise ValueError(f"run must be one of {', '.join(RUNS)}")
        if self.options.response not in RESPONSES:
            raise ValueError(f"response must be one of {', '.join(RESPONSES)}")
        self.running = self.options.motor_on if self.options.run == "steady" \
            else self.options.run == "coastdown"
        #: the tick at which a run= switches the motor (None: no switch ahead)
        self._switch_tick: int | None = None
        #: run=bump: the tick of the next tap, how many so far, their own random stream
        self._tap_tick: int | None = None
        self._taps = 0
        self._tap_rng = np.random.default_rng(self.options.seed + 15485863)
        if self.options.run == "bump":
            self._tap_tick = self.tick + int(round(BUMP_FIRST_S * TICK_HZ))
        elif self.options.run != "steady":
            switch_s = run_times(scenario, self.options.run)["switch_s"]
            self._switch_tick = self.tick + int(round(switch_s * TICK_HZ))
        self._omega = rpm_to_rad_s(self.target_speed_rpm) if self.running else 0.0
        self._theta = float(self.rng.uniform(0, TWO_PI))  # shaft angle, rad, 0 = mark at tach
        self._turns = 0  # whole turns before self._theta (non-integer orders need the total)
        self._drift_phases = self.rng.uniform(0, TWO_PI, size=2)
        self._tone_phases = self.rng.uniform(0, TWO_PI, size=8)
        self._settle_loose_parts()
        # the rotor's vibration, integrated in time; steady at power-up (trueturn.sim.transient)
        self._motion = RotorMotion(scenario.rotor)
        self._motion.settle(scenario.rotor.unbalance_phasors(self.all_masses()), self._theta,
                            self._omega)
        self._accel = 0.0  # the last step's angular acceleration, rad/s^2
        # a bump test is the rotor's free response: always integrated in time
        self._transient = self.options.response == "transient" or self.options.run == "bump"
        self._edges_seen = 0
        self._last_edge_tick = self.tick  # as the firmware's 0 at reset
        self._holdoff_until = self.tick
        if self.options.tach_fault not in TACH_FAULTS:
            raise ValueError(f"tach fault must be one of {', '.join(TACH_FAULTS)}")
        self._fault_rng = np.random.default_rng(self.options.seed + 7919)
        self._next_status_tick = self.tick + STATUS_PERIOD_TICKS
        self._counters = {"samples_dropped": 0, "frames_dropped": 0, "adc_overruns": 0,
                          "rx_bad_frames": 0, "tach_suppressed": 0}
        self._error_flags = 0
        self._reset_flags = RESET_FLAGS["power_on"]
        self._rx = bytearray()
        self._rx_discarding = False
        # the last two responses solved (a step's two ends)
        self._response_cache: list[tuple[float, tuple[Mass, ...], np.ndarray]] = []
        if self.options.bootloader not in BOOTLOADER_WAIT_S:
            raise ValueError(f"bootloader must be one of {', '.join(BOOTLOADER_WAIT_S)}")
        self._boot_at: int | None = None  # in the bootloader until this tick
        self.bootloader_bytes = 0  # bytes the host sent into the bootloader's window
        if self.options.reset_on_open:
            self._boot_at = self.tick + self._bootloader_wait_ticks
            # the reset pin started it; the newer bootloader passes the flags on (SPEC 4.1)
            self._reset_flags = RESET_FLAGS["external"] | (
                RESET_FLAGS["from_bootloader"] if self.options.bootloader == "new" else 0)
        elif self.options.reset_on_open is False:
            # running for a while already: its power-up identity went out long ago
            self._boot_tick = self.tick - int(RUNNING_UPTIME_S * TICK_HZ)
            self._seq = int(self.rng.integers(1, 256))
        else:
            self._send("identity", self._identity_values())

    @property
    def _bootloader_wait_ticks(self) -> int:
        return int(BOOTLOADER_WAIT_S[self.options.bootloader] * TICK_HZ)

    @property
    def in_bootloader(self) -> bool:
        """True while the bootloader listens after the reset of opening the port."""
        with self.lock:
            return self._boot_at is not None

    def _power_up(self) -> None:
        """Our firmware starts (power-up, a reset, the bootloader's end): sequence numbers,
        uptime, edge count, counters and stream settings from zero, identity with seq 0."""
        self._seq = 0
        self._stream = _Stream()
        self._boot_tick = self.tick
        self._edges_seen = 0
        self._last_edge_tick = self.tick
        self._holdoff_until = self.tick
        self._counters = dict.fromkeys(self._counters, 0)
        self._error_flags = 0
        self._next_status_tick = self.tick + STATUS_PERIOD_TICKS
        self._send("identity", self._identity_values())

    # --- rig controls (the host's demo mode uses these through ``port.rig``) ----------------

    @property
    def masses(self) -> list[Mass]:
        """Weights added by the operator (the as-found unbalance is hidden, as on a real rotor)."""
        with self.lock:
            return list(self._added)

    def set_masses(self, masses: list[Mass]) -> None:
        """Replace all added weights."""
        for m in masses:
            if m.plane not in self.scenario.balancing_planes:
                self._bad_plane(m.plane)
        with self.lock:
            self._added = list(masses)

    def add_mass(self, mass: Mass) -> None:
        """Attach one weight."""
        self.set_masses(self.masses + [mass])

    def remove_mass(self, mass: Mass) -> None:
        """Take off a weight that was attached (ValueError if it is not on the rotor)."""
        with self.lock:
            if mass not in self._added:
                raise ValueError(f"no weight {mass} is attached")
            self._added.remove(mass)

    def clear_masses(self) -> None:
        """Take off every added weight."""
        self.set_masses([])

    def all_masses(self) -> list[Mass]:
        """Hidden as-found unbalance (loose parts where they settled last) plus the added
        weights (for tests and honest demos)."""
        with self.lock:
            return self._hidden + self._shifted + self._added

    def _settle_loose_parts(self) -> None:
        """Each loose part of the scenario settles at a new angle (at power-up and at every
        start from standstill)."""
        if self.options.unbalance == "none":
            return
        self._shifted = [Mass(p.plane, p.mass_g, p.angle_deg + float(
            self._loose_rng.uniform(-p.wander_deg, p.wander_deg)))
            for p in self.scenario.shifting]

    def motor_start(self) -> None:
        """Switch the virtual motor on; the rotor spins up over the scenario's spin-up time.
        A loose part settles at a new angle when the rotor starts from standstill."""
        with self.lock:
            if not self.running and self._omega == 0.0:
                self._settle_loose_parts()
            self.running = True
            self._switch_tick = None  # the person took over from a run=

    def motor_stop(self) -> None:
        """Switch the motor off; the rotor coasts down and stops (no more tach edges)."""
        with self.lock:
            self.running = False
            self._switch_tick = None  # the person took over from a run=

    def tap_test(self, on: bool) -> None:
        """Someone strikes the bearing housings in turn every ~2 s from now (``on``; as
        ``run=bump`` does from power-up), or stops. Refused while the rotor turns: a tap
        test is made at standstill. The rotor's free response is integrated in time."""
        with self.lock:
            if on and (self.running or self._omega > 0.0):
                raise ValueError("a tap test is made at standstill: the rotor turns")
            if on:
                self._motion.settle(self.scenario.rotor.unbalance_phasors(self.all_masses()),
                                    self._theta, 0.0)
                self._transient = True
                self._tap_tick = self.tick + int(round(BUMP_FIRST_S * TICK_HZ))
            else:
                self._tap_tick = None
                self._transient = (self.options.response == "transient"
                                   or self.options.run == "bump")

    def set_speed_rpm(self, speed_rpm: float) -> None:
        """Set the drive speed (variable-speed scenarios only, within their range)."""
        with self.lock:
            self._check_speed(speed_rpm)
            if self.scenario.motor.kind != "variable" and \
                    abs(speed_rpm - self.scenario.motor.nominal_speed_rpm()) > 1e-6:
                raise ValueError(f"{self.scenario.name} runs at a fixed speed")
            self.target_speed_rpm = float(speed_rpm)

    @property
    def speed_rpm(self) -> float:
        """The shaft's present speed."""
        with self.lock:
            return self._omega * 60.0 / TWO_PI

    @property
    def standstill(self) -> bool:
        with self.lock:
            return self._omega == 0.0

    @property
    def time_s(self) -> float:
        """Simulated seconds since power-up."""
        return (self.tick - self._boot_tick) / TICK_HZ

    def exact_response_1x(self, speed_rpm: float | None = None) -> dict[str, complex]:
        """The model's steady 1x acceleration (m/s^2, project phasors) with the present weights."""
        return self.scenario.rotor.response_1x(speed_rpm or self.target_speed_rpm,
                                               self.all_masses())

    def vibration_1x(self) -> dict[str, complex]:
        """The rotor's 1x at this instant as each pickup feels it (m/s^2, project phasors),
        from the motion integrated in time (:mod:`trueturn.sim.transient`) through the
        model's amplitude-dependent gain. Steady running: :meth:`exact_response_1x` at the
        present speed; during a sweep the build-up and lag of the moment (with
        ``response=quasi-static``: the steady response at the present speed)."""
        with self.lock:
            if not self._transient:
                return self.scenario.rotor.response_1x(self.speed_rpm, self.all_masses()) \
                    if self._omega > 0 else {p.name: 0j for p in self.scenario.rotor.pickups}
            turned = nonlinear_accel(self._motion.one_x(self._theta, self._omega, self._accel),
                                     self.scenario.rotor.nonlinearity)
            return {p.name: complex(np.conj(v))
                    for p, v in zip(self.scenario.rotor.pickups, turned, strict=True)}

    def _check_speed(self, speed_rpm: float) -> None:
        rng = self.scenario.motor.speed_range_rpm
        if not speed_rpm > 0:
            raise ValueError("speed must be positive")
        if rng is not None and not rng[0] <= speed_rpm <= rng[1]:
            raise ValueError(f"speed {speed_rpm:g} rpm is outside {rng[0]:g}-{rng[1]:g} rpm")

    def _bad_plane(self, plane: str) -> None:
        raise ValueError(f"no correction plane named {plane!r}; planes are "
                         f"{', '.join(self.scenario.balancing_planes)}")

    # --- byte interface ----------------------------------------------------------------------

    def take_output(self, max_bytes: int | None = None) -> bytes:
        """Remove and return up to ``max_bytes`` of what the board has sent."""
        with self.lock:
            n = len(self._out) if max_bytes is None else min(max_bytes, len(self._out))
            data = bytes(self._out[:n])
            del self._out[:n]
            return data

    @property
    def output_pending(self) -> int:
        return len(self._out)

    def receive(self, data: bytes) -> None:
        """Bytes from the host, handled at the board's present time (swallowed by the
        bootloader in its window, which then waits again from now)."""
        with self.lock:
            if self._boot_at is not None and data:
                self.bootloader_bytes += len(data)
                self._boot_at = max(self._boot_at, self.tick + self._bootloader_wait_ticks)
                return
            for byte in data:
                if byte == 0:
                    if not self._rx_discarding and self._rx:
                        self._handle_frame(bytes(self._rx))
                    self._rx.clear()
                    self._rx_discarding = False
                elif not self._rx_discarding:
                    self._rx.append(byte)
                    if len(self._rx) > self.catalogue.max_frame_bytes + 2:
                        self._rx.clear()
                        self._rx_discarding = True
                        self._bad_rx()

    def advance_to(self, tick: int) -> None:
        """Run the simulated board until its clock reaches ``tick``."""
        with self.lock:
            while self.tick < tick:
                n = min(STEP_TICKS, tick - self.tick)
                if self._boot_at is not None:
                    n = max(1, min(n, self._boot_at - self.tick))
                if self._switch_tick is not None:
                    if self.tick >= self._switch_tick:  # run=: the motor switches now
                        self.running = self.options.run == "runup"
                        self._switch_tick = None
                    else:
                        n = max(1, min(n, self._switch_tick - self.tick))
                if self._tap_tick is not None:
                    if self.tick >= self._tap_tick:  # run=bump: a tap now
                        self._tap()
                    n = max(1, min(n, self._tap_tick - self.tick))
                self._step(n)
                if self._boot_at is not None and self.tick >= self._boot_at:
                    self._boot_at = None
                    self._power_up()

    def _tap(self) -> None:
        """run=bump: strike the housing of the next pickup in turn along its direction (a
        1 N s impulse scaled as BUMP_PEAK_G says), and set the next tap's tick."""
        rotor = self.scenario.rotor
        if rotor.pickups:
            struck = rotor.pickups[self._taps % len(rotor.pickups)]
            out = rotor.equations_of_motion(0.0)[3]
            modes = rotor.modes_at_rest(struck.name)
            # the sum of the modes' envelopes bounds each pickup's peak (m/s^2 per N s)
            bound = max((sum(m.accel_per_impulse[p.name] for m in modes)
                         for p in rotor.pickups), default=0.0)
            if bound > 0:
                share = float(self._tap_rng.uniform(*BUMP_SHARE))
                impulse_n_s = BUMP_PEAK_G * STANDARD_GRAVITY_M_S2 * share / bound
                self._motion.strike(out[rotor.pickups.index(struck)] * impulse_n_s)
        self._taps += 1
        jitter = float(self._tap_rng.uniform(-BUMP_JITTER_S, BUMP_JITTER_S))
        self._tap_tick = self.tick + int(round((BUMP_PERIOD_S + jitter) * TICK_HZ))

    def advance_s(self, seconds: float) -> None:
        """Run for ``seconds`` of simulated time."""
        self.advance_to(self.tick + int(round(seconds * TICK_HZ)))

    # --- protocol ----------------------------------------------------------------------------

    def _send(self, name: str, values: dict) -> None:
        self._out += encode_frame(name, self._seq, values, self.catalogue)
        self._seq = (self._seq + 1) & 0xFF

    def _identity_values(self) -> dict:
        major, minor, patch = FIRMWARE_VERSION
        return {"protocol_version": self.catalogue.protocol_version,
                "definition_hash": self.catalogue.definition_hash,
                "firmware_major": major, "firmware_minor": minor, "firmware_patch": patch,
                "board_id": BOARD_ID_SIMULATED, "tick_hz": TICK_HZ, "adc_bits": 10,
                "adc_reference_mv": int(ADC_REFERENCE_V * 1000),
                "adc_reference_kind": REFERENCE_KINDS["nominal"], "aperture_delay_ticks": 0,
                "max_channels": _CAT.limit("channels").max, "channel0_pin": 0,
                "channel1_pin": 1, "tach_pin": 8, "reset_flags": self._reset_flags}

    def _stream_config_values(self) -> dict:
        s = self._stream
        return {"rate_hz": s.rate_hz, "channels": s.channels, "period_ticks": s.period_ticks,
                "tach_edge": s.tach_edge,
                "start_tick": (s.start_tick & 0xFFFFFFFF) if s.streaming else 0,
                "adc_reference_mv": int(ADC_REFERENCE_V * 1000)}

    def _reply(self, type_id: int, seq: int, error: str) -> None:
        self._send("reply", {"command_type": type_id, "command_seq": seq,
                             "error": ERROR_CODES[error]})

    def _bad_rx(self) -> None:
        self._counters["rx_bad_frames"] += 1
        self._error_flags |= ERROR_FLAGS["rx_bad_frame"]

    def _handle_frame(self, body: bytes) -> None:
        try:
            frame = cobs_decode(body)
        except CobsError:
            self._bad_rx()
            return
        if len(frame) < self.catalogue.overhead_bytes or len(frame) > self.catalogue.max_frame_bytes \
                or crc16_ibm3740(frame[:-2]) != int.from_bytes(frame[-2:], "big"):
            self._bad_rx()
            return
        type_id, seq = frame[0], frame[1]
        mdef = self.catalogue.by_id(type_id)
        if mdef is None or mdef.direction != "host":
            self._reply(type_id, seq, "unknown_command")
            return
        try:
            values = decode_payload(mdef, frame[2:-2])
        except FrameError:
            self._reply(type_id, seq, "bad_length")
            return
        getattr(self, f"_cmd_{mdef.name}")(type_id, seq, values)

    def _cmd_identify(self, type_id: int, seq: int, values: dict) -> None:
        self._reply(type_id, seq, "ok")
        self._send("identity", self._identity_values())

    def _cmd_ping(self, type_id: int, seq: int, values: dict) -> None:
        self._reply(type_id, seq, "ok")
        self._send("pong", {"token": values["token"], "tick": self.tick & 0xFFFFFFFF})

    def _cmd_configure(self, type_id: int, seq: int, values: dict) -> None:
        s = self._stream
        if s.streaming:
            self._reply(type_id, seq, "busy")
            return
        rate, channels, edge = values["rate_hz"], values["channels"], values["tach_edge"]
        lim = self.catalogue.limits
        if not (rate in lim["rate_hz"] and channels in lim["channels"] and edge in (0, 1)
                and TICK_HZ % (rate * channels) == 0
                and TICK_HZ // (rate * channels) in lim["period_ticks"]):
            self._reply(type_id, seq, "bad_value")
            return
        s.rate_hz, s.channels, s.tach_edge = rate, channels, edge
        self._reply(type_id, seq, "ok")
        self._send("stream_config", self._stream_config_values())

    def _cmd_start(self, type_id: int, seq: int, values: dict) -> None:
        s = self._stream
        if s.streaming:
            self._reply(type_id, seq, "busy")
            return
        s.streaming = True
        self._error_flags = 0  # SPEC 4.6: the flags describe the stream from its start
        s.start_tick = self.tick + START_DELAY_TICKS
        if s.start_tick & 0xFFFFFFFF == 0:
            s.start_tick += 1  # SPEC 4.3: start_tick 0 means "no stream"
        s.next_index = 0
        s.pending = []
        s.pending_first = 0
        self._reply(type_id, seq, "ok")
        self._send("stream_config", self._stream_config_values())

    def _cmd_stop(self, type_id: int, seq: int, values: dict) -> None:
        s = self._stream
        if not s.streaming:
            self._reply(type_id, seq, "not_streaming")
            return
        self._flush_samples(final=True)
        s.streaming = False
        self._reply(type_id, seq, "ok")

    def _flush_samples(self, final: bool) -> None:
        """Send full blocks; at the end of a stream also the last whole channel sets (a set
        cut by the stop command is not sent: it was never complete)."""
        s = self._stream
        block = MAX_BLOCK_SAMPLES - MAX_BLOCK_SAMPLES % s.channels
        timebase = {"start_tick": s.start_tick & 0xFFFFFFFF, "period_ticks": s.period_ticks}
        if final:
            del s.pending[len(s.pending) - len(s.pending) % s.channels:]
        while len(s.pending) >= block or (final and s.pending):
            chunk = s.pending[:block]
            s.pending = s.pending[block:]
            self._send("samples", {"first_index": s.pending_first & 0xFFFFFFFF,
                                   "channels": s.channels, **timebase, "samples": chunk})
            s.pending_first += len(chunk)

    # --- physics over one generation step ----------------------------------------------------

    def _target_omega(self, t_s: float) -> float:
        """Where the drive pulls the shaft speed at time ``t_s`` (slip wander / drift)."""
        if not self.running:
            return 0.0
        motor = self.scenario.motor
        wander = 0.7 * math.sin(TWO_PI * t_s / motor.drift_period_s + self._drift_phases[0]) \
            + 0.3 * math.sin(TWO_PI * t_s / (0.37 * motor.drift_period_s) + self._drift_phases[1])
        base = rpm_to_rad_s(self.target_speed_rpm)
        if motor.kind == "variable":
            return base * (1.0 + motor.drift_fraction * wander)
        # induction: speed below synchronous by the slip, the slip follows the load wander
        synchronous = rpm_to_rad_s(120.0 * motor.mains_hz / motor.poles * motor.pulley_ratio)
        slip_now = (1.0 - base / synchronous) * (1.0 + motor.load_wander * wander)
        return synchronous * (1.0 - slip_now)

    def _next_omega(self, omega: float, dt_s: float, t_end_s: float) -> float:
        motor = self.scenario.motor
        target = self._target_omega(t_end_s)
        if self.running:
            tau = max(motor.spin_up_s / 4.0, 1e-3)
            return target + (omega - target) * math.exp(-dt_s / tau)
        # coast-down: windage (proportional) plus bearing friction (constant) -> stops in time
        tau = max(motor.coast_down_s / 2.0, 1e-3)
        friction = rpm_to_rad_s(self.scenario.speed_rpm) / (2.0 * motor.coast_down_s)
        new = omega * math.exp(-dt_s / tau) - friction * dt_s
        return new if new > STANDSTILL_RAD_S else 0.0

    def _pickup_phasors_v(self, omega: float) -> np.ndarray:
        """1x volts phasors (project convention) at each channel for the present weights."""
        # The response changes slowly with speed: re-solve when the speed moves by 0.05 rpm.
        key = (round(omega * 60.0 / TWO_PI / 0.05) * 0.05, tuple(self.all_masses()))
        for cached in self._response_cache:
            if cached[:2] == key:
                return cached[2]
        sc = self.scenario
        if omega <= 0:
            volts = np.zeros(len(sc.rotor.pickups), dtype=complex)
        else:
            resp = sc.rotor.response_1x(key[0], list(key[1]))
            volts = np.array([sc.pickup_volts(resp[p.name], i)
                              for i, p in enumerate(sc.rotor.pickups)])
        self._response_cache = [self._response_cache[-1], (key[0], key[1], volts)] \
            if self._response_cache else [(key[0], key[1], volts)]
        return volts

    def _step(self, n_ticks: int) -> None:
        t0_tick = self.tick
        t1_tick = t0_tick + n_ticks
        dt_s = n_ticks / TICK_HZ
        omega0 = self._omega
        omega1 = self._next_omega(omega0, dt_s, (t1_tick - self._boot_tick) / TICK_HZ)
        accel = (omega1 - omega0) / dt_s
        theta0 = self._theta

        def theta_at(tick: np.ndarray | int) -> np.ndarray:
            tau = (np.asarray(tick, dtype=np.float64) - t0_tick) / TICK_HZ
            return theta0 + omega0 * tau + 0.5 * accel * tau * tau

        events: list[tuple[int, int, str, dict]] = []  # (tick, order, name, values)
        self._tach_events(t0_tick, t1_tick, theta0, omega0, accel, events)
        s = self._stream
        sampled = self._sample_ticks(t0_tick, t1_tick) if s.streaming else None
        vibration = self._move_rotor(t0_tick, t1_tick, theta_at, omega0, omega1, accel,
                                     None if sampled is None else sampled[1]) \
            if self._transient else None
        if sampled is not None:
            self._sample_events(*sampled, t0_tick, t1_tick, theta_at, omega0, omega1,
                                vibration, events)
        while self._next_status_tick < t1_tick:
            events.append((self._next_status_tick, 2, "status", {}))
            self._next_status_tick += STATUS_PERIOD_TICKS
        events.sort(key=lambda e: (e[0], e[1]))
        if self._boot_at is not None:
            events = []  # the bootloader runs: our firmware sends nothing yet
        for tick, _, name, values in events:
            if name == "status":
                self._send("status", self._status_values(tick))
            elif name == "samples":
                self._send("samples", values)
            else:
                self._send(name, values)
        if omega1 or omega0:
            theta_end = float(theta_at(t1_tick))
            turns = math.floor(theta_end / TWO_PI)
            self._turns += turns
            self._theta = theta_end - turns * TWO_PI
        self._omega = omega1
        self._accel = accel
        self.tick = t1_tick

    def _tach_events(self, t0_tick: int, t1_tick: int, theta0: float, omega0: float,
                     accel: float, events: list) -> None:
        if omega0 <= 0 and accel <= 0:
            return
        mark = 0.0 if self._stream.tach_edge == 1 else math.radians(
            self.scenario.signals.tach_mark_width_deg)
        dt = (t1_tick - t0_tick) / TICK_HZ
        theta1 = theta0 + omega0 * dt + 0.5 * accel * dt * dt
        k_first = math.floor((theta0 - mark) / TWO_PI) + 1  # edges after theta0, up to theta1
        k_last = math.floor((theta1 - mark) / TWO_PI)
        jitter_s = self.scenario.signals.tach_jitter_us * 1e-6 * self.options.noise_scale
        for k in range(k_first, k_last + 1):
            delta = k * TWO_PI + mark - theta0
            if delta < 0:
                continue
            root = omega0 * omega0 + 2.0 * accel * delta
            tau = 2.0 * delta / (omega0 + math.sqrt(max(root, 0.0))) if omega0 + math.sqrt(
                max(root, 0.0)) > 0 else 0.0
            if jitter_s:
                tau += float(self.rng.normal(0.0, jitter_s))
            fault = self.options.tach_fault
            hit = fault != "none" and self._fault_rng.random() < TACH_FAULT_SHARE
            period_s = TWO_PI / max(omega0 + accel * tau, 1e-9)
            if fault == "off" or (hit and fault == "missing"):
                continue  # the sensor never saw it: no message, the edge count stays
            if hit and fault == "knocked":
                tau += float(self._fault_rng.choice([-1.0, 1.0])
                             * self._fault_rng.uniform(5.0, 15.0)) / 360.0 * period_s
            for extra in ((0.0, 0.4) if hit and fault == "double" else (0.0,)):
                at = int(round((tau + extra * period_s) * TICK_HZ))
                tick = t0_tick + max(0, min(at, t1_tick - t0_tick - 1))
                self._accept_edge(tick, events)
                if fault == "chatter":
                    self._chatter(tick, events)

    def _accept_edge(self, tick: int, events: list) -> None:
        """An edge the capture interrupt takes: queued, counted, hold-off started."""
        self._holdoff_until = tick + tach_holdoff_ticks(tick - self._last_edge_tick)
        self._last_edge_tick = tick
        self._edges_seen += 1
        events.append((tick, 0, "tach", {"tick": tick & 0xFFFFFFFF,
                                         "edge_count": self._edges_seen & 0xFFFF}))

    def _chatter(self, tick: int, events: list) -> None:
        """The burst after an accepted edge, through the board's hold-off: edges inside it
        only count the window as suppressed (once); any after it are taken as edges."""
        window_hit = False
        for k in range(1, TACH_CHATTER_EDGES + 1):
            at = tick + k * TACH_CHATTER_GAP_TICKS
            if at <= self._holdoff_until:
                window_hit = True
            else:
                if window_hit:
                    self._counters["tach_suppressed"] += 1
                    window_hit = False
                self._accept_edge(at, events)
        if window_hit:
            self._counters["tach_suppressed"] += 1

    def _sample_ticks(self, t0_tick: int, t1_tick: int) -> tuple[np.ndarray, np.ndarray] | None:
        """The stream's conversions in this step: (indices, ticks), None when there is none."""
        s = self._stream
        period = s.period_ticks
        first = max(s.next_index, -(-(t0_tick - s.start_tick) // period))
        last = (t1_tick - 1 - s.start_tick) // period  # inclusive
        if last < first:
            return None
        index = np.arange(first, last + 1, dtype=np.int64)
        return index, s.start_tick + index * period

    def _move_rotor(self, t0_tick: int, t1_tick: int,
                    theta_at: Callable[[np.ndarray | int], np.ndarray], omega0: float,
                    omega1: float, accel: float, sample_ticks: np.ndarray | None
                    ) -> np.ndarray | None:
        """Integrate the rotor's vibration over the step (:mod:`trueturn.sim.transient`);
        the pickups' complex accelerations (m/s^2, pickups x conversions) at the
        conversions' instants, None when the step has none."""
        motion = self._motion
        motion.set_unbalance(self.scenario.rotor.unbalance_phasors(self.all_masses()),
                             self._theta, omega0)
        if omega0 == 0.0 and omega1 == 0.0 and motion.at_rest:
            return None if sample_ticks is None else \
                np.zeros((len(self.scenario.rotor.pickups), len(sample_ticks)), dtype=complex)
        grid = np.union1d(np.arange(t0_tick, t1_tick, MOTION_GRID_TICKS, dtype=np.int64),
                          [t1_tick] if sample_ticks is None else
                          np.append(sample_ticks, t1_tick))
        tau = (grid - t0_tick) / TICK_HZ
        vibration = motion.advance(tau, theta_at(grid), omega0 + accel * tau, accel,
                                   0.5 * (omega0 + omega1))
        if omega1 == 0.0 and float(np.abs(motion.state).max()) < REST_LIMIT:
            motion.state[:] = 0.0
        if sample_ticks is None:
            return None
        return vibration[:, np.searchsorted(grid, sample_ticks)]

    def _sample_events(self, index: np.ndarray, ticks: np.ndarray, t0_tick: int, t1_tick: int,
                       theta_at: Callable[[np.ndarray | int], np.ndarray], omega0: float,
                       omega1: float, vibration: np.ndarray | None, events: list) -> None:
        s = self._stream
        period = s.period_ticks
        last = int(index[-1])
        share = (ticks - t0_tick) / float(t1_tick - t0_tick)  # of the step, per sample
        volts = self._voltages(index % s.channels, ticks, theta_at(ticks), omega0, omega1,
                               share, vibration)
        if self.options.floating_channel is not None:
            self._float(volts, index % s.channels)
        counts = np.clip(np.rint(volts / ADC_REFERENCE_V * ADC_COUNTS_PER_REFERENCE), 0,
                         ADC_MAX_COUNT).astype(int)
        block = MAX_BLOCK_SAMPLES - MAX_BLOCK_SAMPLES % s.channels
        s.next_index = last + 1
        for i, c in zip(index.tolist(), counts.tolist(), strict=True):
            if not s.pending:
                s.pending_first = i
            s.pending.append(c)
            if len(s.pending) == block:
                events.append((s.start_tick + i * period, 1, "samples",
                               {"first_index": s.pending_first & 0xFFFFFFFF,
                                "channels": s.channels,
                                "start_tick": s.start_tick & 0xFFFFFFFF,
                                "period_ticks": period, "samples": s.pending}))
                s.pending = []
                s.pending_first = i + 1

    def _float(self, volts: np.ndarray, channel: np.ndarray) -> None:
        """The floating input's conversions: the previous conversion's voltage, mostly."""
        prev = getattr(self, "_last_volts", ADC_REFERENCE_V / 2)
        mid = ADC_REFERENCE_V / 2
        floating = channel == self.options.floating_channel
        noise = self.rng.normal(0.0, 0.001, int(floating.sum()))
        k = 0
        for j in range(len(volts)):
            if floating[j]:
                volts[j] = FLOATING_CARRY * prev + (1.0 - FLOATING_CARRY) * mid + noise[k]
                k += 1
            prev = volts[j]
        self._last_volts = prev

    def _voltages(self, channel: np.ndarray, ticks: np.ndarray, theta: np.ndarray,
                  omega0: float, omega1: float, share: np.ndarray,
                  vibration: np.ndarray | None) -> np.ndarray:
        """Each conversion's volts, the rotor's 1x plus the shop's signals.

        ``response=transient`` (``vibration`` given): the rotor's vibration at that instant,
        the pickups' complex accelerations integrated in time (:mod:`trueturn.sim.transient`:
        steady at constant speed, building up and lagging through a resonance passed
        quickly), through the model's amplitude-dependent gain. ``response=quasi-static``:
        the steady response at the speed of the moment (interpolated across the step between
        the responses at speeds at most :data:`SWEEP_STEP_RAD_S` apart, so a coast-down or
        run-up sweeps the response smoothly and a resonance passed within one step keeps its
        shape; no build-up, no lag)."""
        sc = self.scenario
        sig = sc.signals
        scale = self.options.noise_scale
        t_s = ticks.astype(np.float64) / TICK_HZ
        out = np.zeros(len(ticks))
        omega = 0.5 * (omega0 + omega1)
        # the 1x volts phasor at nodes across the step (rows; the speed is linear in time
        # within it): one node at the mean speed when steady, else nodes at most
        # SWEEP_STEP_RAD_S apart (a straight chord between the step's two ends would cut
        # across a lightly damped resonance passed within one step and widen its peak)
        if vibration is not None:
            nodes = np.zeros((1, 0), dtype=complex)
        elif abs(omega1 - omega0) > SWEEP_STEP_RAD_S:  # run-up or coast-down: follow the speed
            count = math.ceil(abs(omega1 - omega0) / SWEEP_STEP_RAD_S)
            nodes = np.array([self._pickup_phasors_v(omega0 + (omega1 - omega0) * j / count)
                              for j in range(count + 1)])
        else:  # steady (slow wander): the response at the step's mean speed
            nodes = self._pickup_phasors_v(omega)[None, :]
        node_at = np.arange(nodes.shape[0], dtype=float)
        speed_ratio_sq = (omega / rpm_to_rad_s(sc.speed_rpm)) ** 2
        line = sc.motor.mains_hz
        for ch in range(int(channel.max()) + 1 if len(channel) else 0):
            sel = channel == ch
            th = theta[sel]
            if ch >= len(sc.electrical):  # an input with nothing connected: mid-rail and noise
                out[sel] = ADC_REFERENCE_V / 2 + self.rng.normal(0, 0.002 * scale, th.size)
                continue
            el = sc.electrical[ch]
            v_per_g = el.sensitivity_v_per_g
            if vibration is not None:
                accel = nonlinear_accel(vibration[ch, sel], sc.rotor.nonlinearity)
                v = el.zero_g_v + np.real(accel) * sc.pickup_volts(1.0, ch)
            else:
                if nodes.shape[0] == 1:
                    p = nodes[0, ch]
                else:
                    where = share[sel] * (nodes.shape[0] - 1)
                    p = (np.interp(where, node_at, nodes[:, ch].real)
                         + 1j * np.interp(where, node_at, nodes[:, ch].imag))
                # A cos(theta - phi) with the project phasor p = A e^{i phi}
                v = el.zero_g_v + np.real(p) * np.cos(th) + np.imag(p) * np.sin(th)
            for k, h in enumerate(sig.harmonics + sig.tones):
                amp_v = h.amplitude_g * v_per_g * scale
                if not amp_v:
                    continue
                ph = math.radians(h.phase_deg) + 0.7 * ch + (0.0 if k < len(sig.harmonics)
                                                             else self._tone_phases[k % 8])
                if h.hz is not None:
                    if not self.running:  # a fixed-frequency tone comes from the live motor
                        continue
                    v = v + amp_v * np.cos(TWO_PI * h.hz * t_s[sel] - ph)
                    continue
                assert h.order is not None  # Tone: exactly one of order and hz (the validator)
                if not float(h.order).is_integer():  # belt, motor through a pulley
                    turns_phase = (h.order * (self._turns % 1_000_000)) % 1.0 * TWO_PI
                    v = v + amp_v * speed_ratio_sq * np.cos(h.order * th + turns_phase - ph)
                else:
                    v = v + amp_v * speed_ratio_sq * np.cos(h.order * th - ph)
            v = v + scale * sig.hum_line_v * np.cos(TWO_PI * line * t_s[sel] + 0.3 * ch)
            v = v + scale * sig.hum_double_v * np.cos(TWO_PI * 2 * line * t_s[sel] + 1.1 + ch)
            if sig.noise_rms_g and scale:
                # The sensor's own floor is always there; the machine's share (turbulence,
                # rubbing, belts) grows with speed like the tones above, so a still rotor
                # leaves the pickups at their floor and the total is noise_rms_g at the
                # nominal speed.
                sensor_g = min(sig.noise_rms_g, SENSOR_FLOOR_G)
                machine_g = math.sqrt(sig.noise_rms_g ** 2 - sensor_g ** 2) * speed_ratio_sq
                v = v + self.rng.normal(0.0, math.hypot(sensor_g, machine_g) * v_per_g * scale,
                                        th.size)
            out[sel] = v
        return out

    def _status_values(self, tick: int) -> dict:
        return {"uptime_ms": ((tick - self._boot_tick) * 1000 // TICK_HZ) & 0xFFFFFFFF,
                "state": STATES["streaming" if self._stream.streaming else "idle"],
                "samples_dropped": self._counters["samples_dropped"],
                "frames_dropped": self._counters["frames_dropped"],
                "adc_overruns": self._counters["adc_overruns"],
                "tach_edges": self._edges_seen & 0xFFFFFFFF,
                "rx_bad_frames": self._counters["rx_bad_frames"] & 0xFFFF,
                "tach_suppressed": self._counters["tach_suppressed"] & 0xFFFF,
                "capture_overwrites": 0,  # the model has no interrupt latency
                "error_flags": self._error_flags}


