"""A run whose pickup clipped is said so by the meter, per reading, and never carries a PASS
(issue #20): the whole chain on the simulator - the virtual bench grinder streams protocol
bytes (sim://, fast mode), trueturn.dsp's meter reads them, the guided two-plane procedure
balances on those readings.

The check run is taken while a loose part rattles at twice the running speed, loud enough to
drive both pickups past the ADC's range (a scenario copy with a 6 g 2x, sim/README.md "Add a
scenario"; 6 g at 0.3 V/g is 1.8 V, beyond the 1.65 V either side of the pickup's zero: the
10-bit result saturates at 0 and 1023, ATmega328P datasheet, "ADC Conversion Result"). The
1x left after the correction is small, so the clipped run would read within the grade:
the flag is what stops a confidently wrong PASS (ISO 21940-11's verdict needs a true
reading; the engine's rule, balance/influence.py ``clipped_last_run``).

Model first (issue #20 item 4): a clipped as-found reading gives no model correction (the
model starts from it), and a clipped check run neither refutes the model nor is judged.
"""

from __future__ import annotations

import statistics
from dataclasses import replace
from pathlib import Path

import pytest
import yaml

from test_ui_procedure import Rig
from trueturn.dsp.meter import LiveAnalyzer
from trueturn.dsp.units import PickupProfile
from trueturn.link.codec import Message, StreamDecoder, encode_frame
from trueturn.link.ports import open_port
from trueturn.model import Reading, RunKind, VerdictFlag
from trueturn.procedure.guide import CLIPPED_CHECK_RUN, GateRefused, Mode, ModelRefuted
from trueturn.sim import Mass
from trueturn.sim.scenario import load_scenario

SCENARIOS = Path(__file__).resolve().parents[1] / "host" / "trueturn" / "sim" / "scenarios"


def rattling_copy(folder: Path) -> Path:
    """The bench grinder with a loose part: a 6 g 2x at both pickups (demo numbers)."""
    doc = yaml.safe_load((SCENARIOS / "bench-grinder.yaml").read_text())
    doc["name"] = "bench-grinder-rattle"
    doc["signals"]["harmonics"] = [{"order": 2, "amplitude_g": 6.0, "phase_deg": 110.0}]
    path = folder / "bench-grinder-rattle.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False))
    return path


def measure(url: str, added: list[Mass], seconds: float = 3.0,
            max_revs: int = 100) -> dict[str, Reading]:
    """The sim rig with ``added`` on it brought to speed, streamed for ``seconds``; the
    meter's readings over its last ``max_revs`` revolutions as the procedure takes them (as
    the app does: ``as_reading``)."""
    port = open_port(url)
    try:
        rig = port.rig
        rig.set_masses(added)
        rig.motor_start()
        rig.advance_s(rig.scenario.motor.spin_up_s * 3)
        profiles = [PickupProfile(p.name, sensitivity_v_per_g=e.sensitivity_v_per_g,
                                  zero_g_v=e.zero_g_v)
                    for p, e in zip(rig.scenario.rotor.pickups, rig.scenario.electrical,
                                    strict=True)]
        meter = LiveAnalyzer(profiles=profiles, unit="m/s2 pk",
                             mains_hz=rig.scenario.motor.mains_hz, max_revs=max_revs)
        port.write(encode_frame("start", 1))
        rig.advance_s(seconds)
        port.write(encode_frame("stop", 2))
        for item in StreamDecoder().feed(rig.take_output()):
            if isinstance(item, Message):
                meter.feed(item)
        meter.end_of_stream()
        return {r.sensor: r.as_reading() for r in meter.readings()}
    finally:
        port.close()


class SimRig(Rig):
    """The procedure's bench with every reading measured by the meter on the sim's stream;
    ``check_url``: where the first check run (the first run after the correction) is
    measured; later runs are measured on the grinder as it is (the loose part tightened)."""

    def __init__(self, check_url: str) -> None:
        super().__init__("bench-grinder", Mode.TWO_PLANE)
        self.url = "sim://bench-grinder?realtime=0&seed=11"
        self.check_url = check_url
        self.measured: list[dict[str, Reading]] = []
        self.before = self.response()
        self.checks = 0  # check runs measured so far

    def run(self) -> None:
        hidden = load_scenario("bench-grinder").as_found
        added = [m for m in self.masses if m not in hidden]
        corrected = any(m.kind == "correction" for m in self.proc.on_rotor)
        self.proc.arm_run(True, self.t)
        self.spin(2.0, self.setup.speed_rpm)
        first_check = corrected and not self.checks
        self.checks += corrected
        # the meter's window holds what the run wants (a check run: more), as the app sets it
        readings = measure(self.check_url if first_check else self.url, added,
                           max_revs=max(100, self.proc.revolutions_wanted))
        self.measured.append(readings)
        assert self.proc.ready(readings), readings
        speed = statistics.fmean(r.speed_rpm or 0.0 for r in readings.values())
        self.proc.record(readings, speed, self.t)
        self.coast(self.setup.speed_rpm)


@pytest.fixture(scope="module")
def rattled(tmp_path_factory: pytest.TempPathFactory) -> SimRig:
    """The two-plane job up to the check run taken while the loose part rattled."""
    folder = tmp_path_factory.mktemp("scenario")
    rig = SimRig(f"sim://{rattling_copy(folder)}?realtime=0&seed=11")
    for _ in range(20):
        if rig.proc.problem or rig.proc.step.kind == "verdict":
            break
        kind = rig.proc.step.kind
        if kind == "hands-on":
            rig.hands_on()
        elif kind == "run":
            rig.run()
        else:
            rig.proc.accept_correction()
    return rig


def test_the_meter_flags_each_clipped_reading_and_only_those(rattled: SimRig) -> None:
    proc = rattled.proc
    assert [run.kind for run in proc.runs] == [RunKind.AS_FOUND, RunKind.TRIAL, RunKind.TRIAL,
                                               RunKind.CHECK]
    for run, measured in zip(proc.runs, rattled.measured, strict=True):
        rattling = run.kind is RunKind.CHECK
        assert all(r.clipped is rattling for r in measured.values()), (run.label, measured)
        # the run the procedure keeps carries the flag (the job file stores Reading.clipped)
        assert all(r.clipped is rattling for r in run.readings.values())


def test_a_clipped_check_run_is_neither_passed_nor_trimmed_from(rattled: SimRig) -> None:
    proc = rattled.proc
    # the engine withholds the pass (VerdictFlag.CLIPPED) ...
    verdict, _ = proc.engine.assess(proc.setup, proc.runs, proc.removal)
    assert not verdict.passed and VerdictFlag.CLIPPED in verdict.flags
    # ... which without the flag the same readings would have had: the 1x under the rattle
    # is small (the correction worked), so only the flag stops a confidently wrong PASS
    runs = [*proc.runs[:-1], replace(proc.runs[-1], readings={
        n: replace(r, clipped=False) for n, r in proc.runs[-1].readings.items()})]
    unflagged, _ = proc.engine.assess(proc.setup, runs, proc.removal)
    assert unflagged.passed and VerdictFlag.CLIPPED not in unflagged.flags
    # the procedure gives no verdict and no trim from it: the run is measured again
    assert proc.step.kind == "correction" and proc.problem == CLIPPED_CHECK_RUN
    assert proc.verdict is None and proc.trims_done == 0
    with pytest.raises(GateRefused, match="no correction"):
        proc.accept_correction()
    proc.repeat_run()
    rattled.run()   # the loose part tightened: the same rotor measured cleanly
    assert not any(r.clipped for r in proc.runs[-1].readings.values())
    assert proc.verdict is not None and proc.verdict.passed
    rattled.assert_cut(rattled.before)


class FlaggedRig(Rig):
    """The procedure bench (the rotor model's exact 1x) with the runs numbered in
    ``clipped`` read as a meter reads a pickup that something loose drives past the ADC's
    range: flagged, the 1x that of the loose part (as loud as the as-found 1x, a third of a
    turn away; demo numbers) cut by the rail."""

    def __init__(self, mode: Mode, clipped: set[int]) -> None:
        super().__init__("bench-grinder", mode)
        self.clipped = clipped
        self.runs_measured = 0

    def readings(self, scale: float = 1.0) -> dict[str, Reading]:
        out = super().readings(scale)
        if self.runs_measured in self.clipped:
            loud = self.scenario.rotor.response_1x(self.setup.speed_rpm,
                                                   list(self.scenario.as_found))
            out = {n: replace(r, amplitude=0.8 * abs(loud[n]),
                              phase_deg=((r.phase_deg or 0.0) + 120.0) % 360.0, clipped=True)
                   for n, r in out.items()}
        self.runs_measured += 1
        return out


def test_model_first_does_not_start_from_a_clipped_as_found_run() -> None:
    # the model's first correction comes from the as-found 1x alone: read low, it would be
    # confidently wrong, so the model is not trusted and trials follow (their solve leaves
    # the clipped reading out)
    from test_procedure_model_first import as_found_and_sweep, coast_down_resonances
    rig = FlaggedRig(Mode.MODEL_FIRST, {0})
    as_found_and_sweep(rig, coast_down_resonances(rig))
    model = rig.proc.model
    assert model is not None and not model.trusted and model.distrust == ("clipped",)
    assert rig.proc.step.kind == "hands-on" and "trial" in rig.proc.step.title


def test_a_clipped_check_run_neither_refutes_the_model_nor_passes() -> None:
    from test_procedure_model_first import as_found_and_sweep, coast_down_resonances
    rig = FlaggedRig(Mode.MODEL_FIRST, {1})
    before = rig.response()
    as_found_and_sweep(rig, coast_down_resonances(rig))
    proc = rig.proc
    assert proc.model is not None and proc.model.trusted
    proc.accept_correction()
    rig.hands_on()
    rig.run()   # the check run, clipped: its 1x far from what the model predicts
    assert proc.model.trusted and not proc.fallback  # a low reading refutes nothing
    assert proc.problem == CLIPPED_CHECK_RUN and proc.verdict is None
    # unflagged, the same readings would have dropped the model (what the flag prevents)
    unflagged = [*proc.runs[:-1], replace(proc.runs[-1], readings={
        n: replace(r, clipped=False) for n, r in proc.runs[-1].readings.items()})]
    with pytest.raises(ModelRefuted):
        proc.engine.model_estimate(proc.setup, unflagged, proc.model.prior)
    proc.repeat_run()
    rig.run()   # measured again, clean
    assert proc.verdict is not None and proc.verdict.passed
    rig.assert_cut(before)
