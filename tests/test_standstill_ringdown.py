"""A stopped machine's supports ring on: the standstill evidence waits for it, and blames no tach.

Physics (S. S. Rao, Mechanical Vibrations, 2.6, from memory): after its rotor stops, a
lightly damped support mode vibrates freely, ``X e^{-zeta omega_n t} cos(omega_d t)``, at its
own frequency; the envelope falls by e every ``1 / (zeta omega_n)`` seconds. With the rotor's
motion integrated in time (``sim://NAME?response=transient``) the simulated grinder's rubber
feet (13.8 Hz, 3 %) ring for about a second after a quick stop, the fan's supports (10.2 Hz
at 1.3 % and 14.2 Hz at 1.4 %) for two or three.

The rule (trueturn.procedure.standstill): a silent tach while the pickups see a *running*
machine is a tach fault; a ring-down (dsp.motion.free_vibration: one frequency, an envelope
dying out) is no running machine. While it rings the pickups are not quiet, so nothing is
proven; once it has died out the trusted tach and the quiet pickups agree. Safety both ways:
the stop is never proven while the rotor turns or while the supports still visibly ring, and
a line that is not a ring-down behind a silent tach is still a fault.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
import scipy.linalg
import yaml

from trueturn.constants import STANDARD_GRAVITY_M_S2
from trueturn.dsp.motion import PERIODIC_MIN_G, WINDOW_S, PickupMotion
from trueturn.procedure.standstill import Basis, StandstillState, StandstillWatch
from trueturn.sim.board import BoardOptions, VirtualBoard
from trueturn.sim.scenario import load_scenario, scenario_dir
from trueturn.ui.launch import scenario_profile
from trueturn.ui.session import LinkSession

HOLD_S = 3.0


def _pickups(line_hz: float | None, line_g: float = 0.03, ringing: bool = False
             ) -> tuple[PickupMotion, ...]:
    level = 0.006 if line_hz is None else 0.05
    return tuple(PickupMotion(n, level, 0.02, line_hz, None if line_hz is None else line_g,
                              WINDOW_S, ringing=ringing) for n in ("a", "b"))


class _Bench:
    """A watch fed as the app feeds it: board time, a fresh wall clock, a coast-down's
    edges ever farther apart (a trusted tach), then the pickups every 0.2 s."""

    def __init__(self) -> None:
        self.wall = [0.0]
        self.watch = StandstillWatch(HOLD_S, clock=lambda: self.wall[0])
        t = 0.0
        for k in range(40):  # slowing by 10 % a turn: a rotor coasting to its stop
            t += 0.02 * 1.1 ** max(0, k - 30)
            self.watch.edge(t)
        self.last_edge_s = t
        self.t = t

    def judge(self, seconds: float, pickups: tuple[PickupMotion, ...]) -> list[StandstillState]:
        states = []
        end = self.t + seconds
        while self.t < end - 1e-9:
            self.t += 0.2
            self.wall[0] += 0.2
            self.watch.motion(self.t, pickups)
            states.append(self.watch.evidence().state)
        return states


def test_a_ring_down_after_the_stop_is_no_tach_fault_and_the_stop_rests_on_both() -> None:
    bench = _Bench()
    assert bench.watch.tach_trusted
    # the tail of the run, then the supports ringing in windows that began after the last edge
    seen = bench.judge(WINDOW_S + 1.0, _pickups(13.8, 0.03, ringing=True))
    assert StandstillState.PROVEN not in seen and StandstillState.TACH_FAULT not in seen
    assert bench.watch.tach_trusted and not bench.watch.fault_latched
    seen = bench.judge(HOLD_S + 0.4, _pickups(None))
    ev = bench.watch.evidence()
    assert ev.proven and ev.basis is Basis.TACH_AND_PICKUPS
    assert StandstillState.TACH_FAULT not in seen


def test_a_line_that_does_not_ring_down_behind_a_silent_tach_is_still_a_fault() -> None:
    bench = _Bench()
    seen = bench.judge(WINDOW_S + 1.0, _pickups(29.0, 0.03, ringing=False))
    assert seen[-1] is StandstillState.TACH_FAULT and bench.watch.fault_latched
    bench.judge(HOLD_S + 0.4, _pickups(None))
    ev = bench.watch.evidence()  # the long hold now: the tach's silence proves nothing
    assert not ev.proven and not ev.tach_trusted and ev.tach_hold_needed_s >= 20.0


def test_the_faint_tail_of_a_ring_is_that_ring_a_stronger_or_other_line_is_not() -> None:
    # Near the floor a ring is too faint to fit again: the same line, no stronger, is its
    # tail. A line as strong as before or stronger, or at another frequency, may be a rotor.
    for line_hz, line_g, fault in ((13.9, 0.004, False), (13.8, 0.05, True),
                                   (20.1, 0.004, True)):
        bench = _Bench()
        bench.judge(WINDOW_S + 0.2, _pickups(13.8, 0.03, ringing=True))
        seen = bench.judge(1.0, _pickups(line_hz, line_g, ringing=False))
        assert (seen[-1] is StandstillState.TACH_FAULT) is fault, (line_hz, line_g)


def test_an_edge_ends_what_rang_before_it() -> None:
    bench = _Bench()
    bench.judge(WINDOW_S + 0.2, _pickups(13.8, 0.03, ringing=True))
    for k in range(1, 4):  # the rotor turns again (edges); then it falls silent
        bench.watch.edge(bench.t + 0.1 * k)
    bench.t += 0.3
    seen = bench.judge(WINDOW_S + HOLD_S + 0.4, _pickups(13.8, 0.004, ringing=False))
    assert seen[-1] is StandstillState.TACH_FAULT  # no longer the tail of the old ring


# --- the simulated machines, their motion integrated in time ---------------------------------

def _quick(name: str, tmp_path: Path) -> str:
    """The scenario as shipped but stopping in about a second (the app tests' quick copy):
    a fast passage of the support modes, so they ring hardest after the stop."""
    raw = yaml.safe_load((scenario_dir() / f"{name}.yaml").read_text(encoding="utf-8"))
    raw["motor"]["spin_up_s"] = 1.0
    raw["motor"]["coast_down_s"] = 1.5
    path = tmp_path / f"{name}.yaml"
    path.write_text(yaml.safe_dump(raw), encoding="utf-8")
    return str(path)


def _slowest_decay_per_s(scenario_path: str) -> float:
    """``zeta omega_n`` of the model's slowest-dying mode at standstill: the eigenvalues of
    ``M q'' + C q' + K q = 0`` as the generalised problem of its first-order form (scipy's
    QZ, not the simulator's modal form)."""
    mass, damp, stiff, _ = load_scenario(scenario_path).rotor.equations_of_motion(0.0)
    n = len(mass)
    a = np.block([[np.zeros((n, n)), np.eye(n)], [-stiff, -damp]])
    b = np.block([[np.eye(n), np.zeros((n, n))], [np.zeros((n, n)), mass]])
    lam = scipy.linalg.eigvals(a, b)
    return float(-lam.real.max())


@pytest.mark.parametrize("name", ["bench-grinder", "shop-fan"])
def test_a_simulated_stop_is_proven_on_tach_and_pickups_once_the_ringing_dies(
        name: str, tmp_path: Path) -> None:
    path = _quick(name, tmp_path)
    wall = [0.0]
    session = LinkSession.for_machine(f"sim://{path}?realtime=0&motor=off&response=transient",
                                      scenario_profile(path), standstill_s=HOLD_S,
                                      clock=lambda: wall[0])
    session.open()
    session.start()
    rig = session.rig

    def pump_to(board_s: float) -> None:
        while session.watch.evidence().board_time_s < board_s:
            wall[0] += 0.001
            session.pump()

    pump_to(1.0)
    rig.motor_start()
    pump_to(6.0)
    session.remember_running_level()
    rig.motor_stop()
    stopped_s = ring_g = None
    states = []
    while True:
        wall[0] += 0.001
        session.pump()
        ev = session.watch.evidence()
        ringing_g = max(abs(v) for v in rig.vibration_1x().values()) / STANDARD_GRAVITY_M_S2
        if stopped_s is None and rig.standstill:
            stopped_s, ring_g = ev.board_time_s, ringing_g
        if ev.proven:
            # never while the rotor turns, never while the supports visibly ring
            assert rig.standstill and ringing_g < PERIODIC_MIN_G
            break
        states.append(ev.state)
        assert ev.board_time_s < 60.0, "standstill never proven"
    session.close()
    assert ev.basis is Basis.TACH_AND_PICKUPS and ev.tach_trusted
    assert StandstillState.TACH_FAULT not in states
    # As soon as the physics allows, through the method: the ring falls below what a pickup
    # takes for a line (ln(A / PERIODIC_MIN_G) / (zeta omega_n)), the pickups' window passes
    # over it, the hold runs; plus one judgement step and a little.
    assert stopped_s is not None and ring_g is not None
    ring_s = max(0.0, math.log(ring_g / PERIODIC_MIN_G)) / _slowest_decay_per_s(path)
    assert ev.board_time_s <= stopped_s + ring_s + WINDOW_S + HOLD_S + 1.0


def test_the_simulated_ring_down_decays_at_zeta_omega_n(tmp_path: Path) -> None:
    # The simulator's rotor after it stopped: the pickups' motion dies out at the rate of the
    # model's slowest mode (free vibration, no forcing); not a simulator artefact.
    path = _quick("bench-grinder", tmp_path)
    board = VirtualBoard(load_scenario(path), BoardOptions(seed=1, response="transient"))
    board.advance_s(3.0)
    board.motor_stop()
    while not board.standstill:
        board.advance_s(0.01)
    envelope = []
    for _ in range(2):
        board.advance_s(0.5)
        envelope.append(max(abs(v) for v in board.vibration_1x().values()))
    rate_per_s = math.log(envelope[0] / envelope[1]) / 0.5
    assert rate_per_s == pytest.approx(_slowest_decay_per_s(path), rel=0.02)
