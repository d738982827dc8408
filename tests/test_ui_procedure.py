"""The guided procedure without Textual: safety gates, run checks, and the balance it leads to.

Physics truth: the simulated rigid rotor (trueturn.sim.rotor.RigidRotor.response_1x) of the
demo scenarios; readings fed to the procedure are the model's exact 1x vectors, and the
correction the procedure asks the person to place must cut the modelled 1x.
"""

from __future__ import annotations

import math

import pytest

from trueturn.sim.rotor import Mass
from trueturn.sim.scenario import load_scenario
from trueturn.ui.engine import BalanceEngine
from trueturn.ui.machine import profile_from_scenario, setup_from_profile
from trueturn.ui.procedure import (
    DONE_CHECKLIST,
    LOCKOUT_CHECKLIST,
    GateRefused,
    Mode,
    Procedure,
    SensorReading,
    StandstillWatch,
)

ALL_LOCKOUT = set(range(len(LOCKOUT_CHECKLIST)))
ALL_DONE = set(range(len(DONE_CHECKLIST)))


class Rig:
    """A bench for the procedure: the scenario's rotor physics and a board clock."""

    def __init__(self, name: str, mode: Mode, correction_scale: float = 1.0) -> None:
        self.correction_scale = correction_scale  # < 1: the person's weights come out light
        self.scenario = load_scenario(name)
        self.profile = profile_from_scenario(self.scenario)
        self.setup = setup_from_profile(self.profile, mode, standstill_s=3.0,
                                        revolutions_per_run=30)
        self.proc = Procedure(self.setup, BalanceEngine(self.profile))
        self.masses: list[Mass] = list(self.scenario.as_found)
        self.t = 0.0

    def spin(self, seconds: float, rpm: float) -> None:
        """Board time passes with the rotor turning: a tach edge every revolution."""
        period = 60.0 / rpm
        end = self.t + seconds
        while self.t < end:
            self.t += period
            self.proc.watch.edge(self.t)

    def rest(self, seconds: float) -> None:
        """Board time passes at standstill: samples keep arriving, no tach edges."""
        end = self.t + seconds
        while self.t < end:
            self.t += 0.05
            self.proc.watch.data(self.t)

    def readings(self, scale: float = 1.0) -> dict[str, SensorReading]:
        response = self.scenario.rotor.response_1x(self.setup.speed_rpm, self.masses)
        out = {}
        for name, z in response.items():
            amp = abs(z) * scale
            phase = math.degrees(math.atan2(z.imag, z.real)) % 360.0
            out[name] = SensorReading(name, amp, "m/s2 pk", phase, 0.5, 40, True,
                                      self.setup.speed_rpm, amp * 0.005)
        return out

    def hands_on(self) -> None:
        self.rest(3.5)
        self.proc.lock_out(ALL_LOCKOUT, self.t)
        changes = self.proc.hands_on_done(ALL_DONE, self.t)
        for c in changes:
            if c.mass is None:
                continue
            m = c.mass
            grams = m.mass_g * (self.correction_scale if m.kind == "correction" else 1.0)
            mass = Mass(m.plane, -grams if m.removal else grams, m.angle_deg)
            if c.action == "attach":
                self.masses.append(mass)
            else:
                self.masses.remove(mass)

    def run(self) -> None:
        self.proc.arm_run(True, self.t)
        self.spin(2.0, self.setup.speed_rpm)
        r = self.readings()
        assert self.proc.ready(r)
        self.proc.record(r, self.setup.speed_rpm, self.t)

    def complete(self) -> None:
        for _ in range(20):
            kind = self.proc.step.kind
            if kind == "hands-on":
                self.hands_on()
            elif kind == "run":
                self.run()
            elif kind == "correction":
                self.proc.accept_correction()
            else:
                return
        raise AssertionError("procedure did not reach a verdict in 20 steps")


def test_standstill_needs_quiet_tach_and_live_data() -> None:
    wall = [100.0]
    watch = StandstillWatch(3.0, clock=lambda: wall[0], stale_s=1.0)
    assert not watch.standstill  # no data at all: nothing proven
    for k in range(100):
        watch.edge(k * 0.02)
    assert not watch.standstill
    watch.data(2.0 + 2.9)
    assert not watch.standstill  # 2.9 s since the last edge
    watch.data(2.0 + 3.1)
    assert watch.standstill
    wall[0] += 1.5  # then the data stops coming: the old quiet proves nothing now
    assert not watch.standstill
    watch.data(2.0 + 3.2)
    assert watch.standstill


def test_confirm_while_rotor_turns_is_refused() -> None:
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.spin(5.0, 3500.0)
    with pytest.raises(GateRefused, match="standstill"):
        rig.proc.lock_out(ALL_LOCKOUT, rig.t)
    assert rig.proc.step.phase == "lockout"
    # Stopped, but the person has not ticked everything: still refused.
    rig.rest(3.5)
    with pytest.raises(GateRefused, match="tick every item"):
        rig.proc.lock_out({0}, rig.t)
    rig.proc.lock_out(ALL_LOCKOUT, rig.t)
    # The rotor turns again before the work is declared done: refused.
    rig.spin(1.0, 600.0)
    with pytest.raises(GateRefused, match="standstill"):
        rig.proc.hands_on_done(ALL_DONE, rig.t)
    rig.rest(3.5)
    rig.proc.hands_on_done(ALL_DONE, rig.t)
    assert rig.proc.step.kind == "run"


def test_run_needs_force_confirmation_and_a_ready_reading() -> None:
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.hands_on()
    with pytest.raises(GateRefused, match="force"):
        rig.proc.arm_run(False, rig.t)
    rig.proc.arm_run(True, rig.t)
    unsteady = {k: SensorReading(k, 1.0, "g", 10.0, 30.0, 5, False, 3500.0, 0.5)
                for k in rig.setup.sensors}
    assert not rig.proc.ready(unsteady)
    with pytest.raises(GateRefused, match="not steady"):
        rig.proc.record(unsteady, 3500.0, rig.t)
    assert rig.proc.progress(unsteady) == pytest.approx(5 / 30)


def test_overspeed_and_runaway_are_warned_and_recorded() -> None:
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.hands_on()
    rig.run()  # as found
    rig.hands_on()  # trial mass on
    rig.proc.arm_run(True, rig.t)
    events = rig.proc.observe(rig.readings(scale=3.5), rig.setup.max_speed_rpm + 50, rig.t)
    kinds = sorted(e.kind for e in events)
    assert kinds == ["overspeed", "runaway", "runaway"]
    assert all("STOP THE MACHINE" in e.detail for e in events)
    # Told once per run, not at every refresh.
    assert rig.proc.observe(rig.readings(scale=3.5), rig.setup.max_speed_rpm + 50, rig.t) == []
    rig.spin(1.0, rig.setup.speed_rpm)
    rig.proc.record(rig.readings(), rig.setup.speed_rpm, rig.t)
    assert [e.kind for e in rig.proc.runs[-1].events].count("runaway") == 2


def test_force_shown_before_a_run_is_m_r_omega_squared() -> None:
    # 1 g at 100 mm and 3000 rpm: F = m r w^2 = 0.001 kg * 0.1 m * (100 pi rad/s)^2
    # = 9.87 N (centripetal force, any mechanics text; worked by hand here).
    assert BalanceEngine().force_n(1.0, 100.0, 3000.0) == pytest.approx(9.8696, rel=1e-4)


def test_two_plane_bench_grinder_reaches_the_grade_on_the_physics() -> None:
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    before = rig.scenario.rotor.response_1x(rig.setup.speed_rpm, rig.masses)
    rig.complete()
    proc = rig.proc
    assert proc.step.kind == "verdict" and proc.verdict is not None and proc.verdict.passed
    assert [r.label for r in proc.runs][:3] == ["as found", "trial left-wheel",
                                                "trial right-wheel"]
    after = rig.scenario.rotor.response_1x(rig.setup.speed_rpm, rig.masses)
    for name in before:
        # Physics truth: the placed correction cuts the modelled 1x by at least 90 %.
        assert abs(after[name]) < 0.1 * abs(before[name])
    # ISO 21940-11:2016: U_per = e_per * m with e_per = G / omega; two planes share it.
    omega = 2 * math.pi * rig.setup.speed_rpm / 60.0
    u_per_gmm = 1000.0 * rig.setup.grade_mm_per_s / omega * rig.setup.rotor_mass_kg
    assert sum(proc.verdict.permissible_gmm.values()) == pytest.approx(u_per_gmm, rel=1e-6)
    # Every hands-on step left two confirmations (lock-out and done), each after standstill.
    assert len(proc.confirmations) >= 2 * 4


def test_single_plane_shop_fan_splits_onto_blades_and_removal_option() -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    rig.hands_on()
    rig.run()
    rig.hands_on()
    rig.run()
    proc = rig.proc
    assert proc.step.kind == "correction" and proc.solution is not None
    blade_angles = {0.0, 60.0, 120.0, 180.0, 240.0, 300.0}
    parts = proc.solution.parts
    assert 1 <= len(parts) <= 2
    assert all(round(p.angle_deg, 6) % 360 in blade_angles for p in parts)
    # The parts add up to the correction (vector sum), to the rounding of 0.01 g.
    total = sum(p.mass_g * complex(math.cos(math.radians(p.angle_deg)),
                                   math.sin(math.radians(p.angle_deg))) for p in parts)
    c = proc.solution.corrections[0]
    want = c.mass_g * complex(math.cos(math.radians(c.angle_deg)), math.sin(math.radians(c.angle_deg)))
    assert abs(total - want) < 0.02
    proc.set_removal(True)
    assert all(p.removal for p in proc.solution.parts)
    proc.set_removal(False)
    rig.complete()
    assert proc.verdict is not None and proc.verdict.passed


def test_amplitude_only_four_run_method_on_the_fan() -> None:
    rig = Rig("shop-fan", Mode.AMPLITUDE_ONLY)
    before = rig.scenario.rotor.response_1x(rig.setup.speed_rpm, rig.masses)
    rig.complete()
    labels = [r.label for r in rig.proc.runs]
    assert labels[:4] == ["as found", "trial blades at 0 deg", "trial blades at 120 deg",
                          "trial blades at 240 deg"]
    after = rig.scenario.rotor.response_1x(rig.setup.speed_rpm, rig.masses)
    name = next(iter(before))
    assert abs(after[name]) < 0.25 * abs(before[name])


def test_a_light_correction_leads_to_a_trim_and_then_a_pass() -> None:
    # The person's correction weights come out 40 % light: the check run fails the grade,
    # the guide computes a trim from every run so far, and the trim brings it within.
    rig = Rig("bench-grinder", Mode.TWO_PLANE, correction_scale=0.6)
    before = rig.scenario.rotor.response_1x(rig.setup.speed_rpm, rig.masses)
    rig.complete()
    proc = rig.proc
    assert proc.trims_done >= 1
    assert proc.runs[4].label == "check after trim 1"
    assert proc.verdict is not None and proc.verdict.passed
    assert any(m.kind == "trim" for m in proc.on_rotor)
    after = rig.scenario.rotor.response_1x(rig.setup.speed_rpm, rig.masses)
    for name in before:
        assert abs(after[name]) < 0.1 * abs(before[name])  # physics truth, as above


def test_a_silent_tach_proves_nothing_after_a_board_reset() -> None:
    # After the link restarts (board reset), "no tach edges" could be a dead tach: the gate
    # wants to see the tach working again before it trusts the quiet.
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.hands_on()
    rig.run()
    rig.proc.watch.reset()
    rig.rest(10.0)
    with pytest.raises(GateRefused, match="tach has not seen the rotor turn"):
        rig.proc.lock_out(ALL_LOCKOUT, rig.t)
    rig.spin(2.0, 600.0)  # 20 edges: the tach works
    rig.rest(3.5)
    rig.proc.lock_out(ALL_LOCKOUT, rig.t)


def test_one_run_trim_with_coefficients_saved_by_an_earlier_job() -> None:
    from trueturn.jobs.records import CoefficientSet, InfluenceEntry

    first = Rig("bench-grinder", Mode.TWO_PLANE)
    first.complete()
    model = first.proc.solution.coefficients
    saved = CoefficientSet(first.setup.speed_rpm, "m/s2", [
        InfluenceEntry(c.sensor, c.plane, c.amp_per_g, c.phase_deg % 360.0)
        for c in model.as_saved()])
    # Another day, the same machine, fresh unbalance (the scenario's as-found again).
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.setup = setup_from_profile(rig.profile, Mode.SAVED_TRIM, saved=saved)
    rig.proc = Procedure(rig.setup, BalanceEngine(rig.profile))
    before = rig.scenario.rotor.response_1x(rig.setup.speed_rpm, rig.masses)
    rig.complete()
    assert [r.label for r in rig.proc.runs] == ["as found", "check"]  # no trial runs
    assert rig.proc.verdict is not None and rig.proc.verdict.passed
    after = rig.scenario.rotor.response_1x(rig.setup.speed_rpm, rig.masses)
    for name in before:
        assert abs(after[name]) < 0.1 * abs(before[name])  # physics truth


def test_a_run_the_engine_cannot_use_is_measured_again() -> None:
    rig = Rig("shop-fan", Mode.ONE_PLANE)
    rig.hands_on()
    rig.run()
    rig.hands_on()
    rig.proc.arm_run(True, rig.t)
    # The trial run went at half speed (belt slipping): no common speed with the as-found.
    rig.proc.record(rig.readings(), rig.setup.speed_rpm / 2, rig.t)
    assert rig.proc.step.kind == "correction" and rig.proc.problem
    with pytest.raises(GateRefused, match="no correction"):
        rig.proc.accept_correction()
    rig.proc.repeat_run()
    assert rig.proc.step.kind == "run" and len(rig.proc.runs) == 1
    rig.run()
    assert rig.proc.step.kind == "correction" and rig.proc.solution is not None
