"""A light rig for fuzzing the safety gates: rotor speed, tach, pickups and link as events.

The physics is kept to what the gates depend on (invented numbers, demo only): the motor
spins the rotor up or lets it coast down linearly; the tach gives one edge per turn when it
works, none when dark, and stray edges when it flickers; the pickups see a line at the
rotation frequency whenever its 1x (growing with the square of speed) stands above what
:mod:`trueturn.dsp.motion` can see (a few mg), and broadband shaking while the rotor is bumped
or overspeeds; the link can be lost (no data) and the board can restart (the watch forgets).
The procedure is driven through its public methods, exactly as the app does on key presses.

The property (issue #13): no hands-on step is ever unlocked - no tick accepted, no lock-out,
no done gate passed - while the rotor turns faster than 1 rpm.
"""

from __future__ import annotations

import math
import random
from dataclasses import dataclass

from trueturn.dsp.motion import PickupMotion
from trueturn.model import Reading
from trueturn.procedure.engine import BalanceEngine
from trueturn.procedure.guide import GateRefused, Mode, Procedure
from trueturn.procedure.standstill import StandstillWatch
from trueturn.ui.machine import setup_from_profile

RATED_RPM = 3540.0
SPIN_UP_S = 2.0
COAST_S = 12.0
FULL_1X_G = 0.5  # the 1x at rated speed (invented)
VISIBLE_G = 0.004  # a line smaller than this is not seen by the pickups (dsp.motion)
STEP_S = 0.1

ACTIONS = ("tick", "untick", "enter", "abort", "motor_on", "motor_off", "tach_dark",
           "tach_ok", "tach_flicker", "link_lost", "link_back", "board_restart", "overspeed",
           "wait", "wait_long", "arm")
# Drawn from with these repeats, so random sequences get past the gates often enough for
# the property to be tested where it matters (a person mostly ticks, confirms and waits).
WEIGHTED_ACTIONS = ACTIONS + ("tick",) * 6 + ("enter",) * 6 + ("wait_long",) * 6 + \
    ("arm",) * 2 + ("motor_off",) * 2


@dataclass
class FuzzRig:
    """The rotor and its signals, advanced in steps of board time."""

    proc: Procedure
    sensors: tuple[str, ...]
    rpm: float = 0.0
    motor: bool = False
    tach: str = "ok"  # ok | dark | flicker
    link: bool = True
    over: bool = False
    t: float = 0.0
    angle_turns: float = 0.0
    unlocked_while_turning: int = 0
    wall: float = 0.0
    _judged: float = -1.0
    rng: random.Random = random.Random(0)

    def advance(self, seconds: float) -> None:
        end = self.t + seconds
        while self.t < end:
            self.t += STEP_S
            self.wall += STEP_S
            target = (RATED_RPM * (1.3 if self.over else 1.0)) if self.motor else 0.0
            rate = RATED_RPM / (SPIN_UP_S if target > self.rpm else COAST_S) * STEP_S
            self.rpm = min(target, self.rpm + rate) if target > self.rpm else \
                max(target, self.rpm - rate)
            if not self.link:
                continue
            turns_before = self.angle_turns
            self.angle_turns += self.rpm / 60.0 * STEP_S
            watch = self.proc.watch
            if self.tach == "ok":
                for k in range(math.floor(turns_before) + 1, math.floor(self.angle_turns) + 1):
                    frac = (k - turns_before) / max(self.angle_turns - turns_before, 1e-12)
                    watch.edge(self.t - STEP_S + frac * STEP_S)
            elif self.tach == "flicker" and self.rng.random() < 0.3:
                watch.edge(self.t)
            watch.data(self.t)
            if self.t - self._judged >= 0.2 - 1e-9:
                self._judged = self.t
                watch.motion(self.t, self.pickups())

    def pickups(self) -> tuple[PickupMotion, ...]:
        one_x = FULL_1X_G * (self.rpm / RATED_RPM) ** 2
        line = self.rpm / 60.0 if one_x >= VISIBLE_G and self.rpm > 0 else None
        level = 0.006 + 0.7 * one_x
        return tuple(PickupMotion(n, level, 0.02, line, one_x if line else None, 4.0)
                     for n in self.sensors)

    def readings(self) -> dict[str, Reading]:
        amp = FULL_1X_G * (self.rpm / RATED_RPM) ** 2
        revs = max(40, self.proc.revolutions_wanted)
        return {n: Reading(n, amp + 0.01 * k, "g pk", 30.0 + 40 * k, 0.5, revs, True,
                                 self.rpm, 0.002) for k, n in enumerate(self.sensors)}

    def act(self, action: str) -> None:
        proc = self.proc
        turning = self.rpm > 1.0
        try:
            if action in ("tick", "enter", "wait", "wait_long"):
                proc.check_ticks()
            if action == "tick":
                proc.tick_next()
                self.unlocked_while_turning += turning
            elif action == "untick":
                proc.untick_last()
            elif action == "enter":
                step = proc.step
                if proc.alarm is not None:
                    proc.acknowledge_alarm()
                elif step.kind == "hands-on":
                    if step.phase == "lockout":
                        proc.lock_out(self.t)
                    else:
                        proc.hands_on_done(self.t)
                    self.unlocked_while_turning += turning
                elif step.kind == "run" and step.phase == "running":
                    self.motor = True
                    if proc.ready(self.readings()):
                        proc.record(self.readings(), max(self.rpm, 1.0), self.t)
                elif step.kind == "correction":
                    if proc.problem:
                        proc.repeat_run()
                    else:
                        proc.accept_correction()
                elif step.kind == "verdict" and not proc.finished:
                    proc.finish()
            elif action == "arm":
                if proc.step.kind == "run" and proc.step.phase == "arming":
                    proc.arm_run(True, self.t)
                    self.motor = True
            elif action == "abort":
                if proc.step.kind == "run":
                    proc.abort_run(self.t)
                    self.motor = False
            elif action == "motor_on":
                self.motor = True
            elif action == "motor_off":
                self.motor = False
            elif action in ("tach_dark", "tach_ok", "tach_flicker"):
                self.tach = action.removeprefix("tach_")
            elif action == "link_lost":
                self.link = False
                proc.watch.reset()
                proc.interrupt_run("link-lost", "fuzz", self.t)
            elif action == "link_back":
                if not self.link:
                    self.link = True
                    if proc.step.kind == "run" and proc.step.phase == "interrupted":
                        proc.resume_run()
            elif action == "board_restart":
                proc.watch.reset()
                proc.interrupt_run("board-restart", "fuzz", self.t)
            elif action == "overspeed":
                self.over = not self.over
            elif action == "wait":
                pass
            elif action == "wait_long":
                self.advance(5.0)
            if proc.step.kind == "run" and proc.step.phase == "running":
                if proc.observe(self.readings(), self.rpm, self.t):
                    self.motor = False  # the demo switches its motor off on an alarm
        except GateRefused:
            pass
        self.advance(0.5)
        proc.check_ticks()  # the app does this at every refresh


def new_rig(seed: int) -> FuzzRig:
    from trueturn.sim.scenario import load_scenario
    from trueturn.ui.machine import profile_from_scenario

    profile = profile_from_scenario(load_scenario("bench-grinder"))
    setup = setup_from_profile(profile, Mode.TWO_PLANE, standstill_s=3.0,
                               revolutions_per_run=30)
    rig_box: list[FuzzRig] = []
    watch = StandstillWatch(3.0, clock=lambda: rig_box[0].wall, stale_s=1.0)
    proc = Procedure(setup, BalanceEngine(), watch)
    rig = FuzzRig(proc, setup.sensors, rng=random.Random(seed))
    rig_box.append(rig)
    return rig


def run_sequence(seed: int, actions: list[str]) -> FuzzRig:
    """Drive a fresh rig through ``actions``; the caller checks ``unlocked_while_turning``."""
    rig = new_rig(seed)
    rig.motor = seed % 2 == 0  # half the machines are running at power-up
    rig.advance(1.0)
    for action in actions:
        rig.act(action)
    return rig
