"""A job recorded through the simulated rig survives kill -9 at any moment and is carried on.

The whole chain: the virtual bench grinder (sim://, fast mode) streams protocol v1 bytes,
trueturn.dsp's meter turns them into 1x readings, a two-plane four-run procedure stores every
run and every hands-on step in a job file, and a forked process doing all this is killed with
SIGKILL at random moments. Each new process reopens the job, puts the parts the job says are
on the rotor back on the virtual rotor (a real rotor keeps its weights through a crash), and
carries on from the last completed step. At the end the job is closed and its report renders.

Outside checks: the two-plane influence coefficient method (from memory: Wowk, Machinery
Vibration: Balancing, McGraw-Hill 1995, two-plane chapter) solved with numpy.linalg, and the
ISO 21940-11:2016 permissible residual U_per = 1000 * G * m / omega.
"""

from __future__ import annotations

import math
import os
import random
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

import kill_points
from trueturn.angles import amplitude_phase, phasor
from trueturn.dsp.meter import LiveAnalyzer
from trueturn.dsp.units import PickupProfile
from trueturn.jobs import (
    CoefficientSet,
    Confirmation,
    CorrectionEntry,
    InfluenceEntry,
    JobRecord,
    MachineProfile,
    MassChange,
    PendingStep,
    Pickup,
    Plane,
    PlaneVerdict,
    RunEntry,
    VerdictEntry,
    Workspace,
)
from trueturn.jobs.records import now_iso
from trueturn.jobs.report import html_report
from trueturn.jobs.store import read_document
from trueturn.link.codec import Message, StreamDecoder, encode_frame
from trueturn.link.ports import open_port
from trueturn.model import Reading
from trueturn.sim import Mass

pytestmark = pytest.mark.skipif(not hasattr(os, "fork") or sys.platform == "darwin",
                                reason="needs fork() (POSIX, Linux)")

PORT = "sim://bench-grinder?realtime=0&seed=5"
TRIAL_G = 3.0
GRADE = 6.3


def profile_of(rig) -> MachineProfile:  # noqa: ANN001 - the sim rig object
    scenario = rig.scenario
    rotor = scenario.rotor
    nominal = scenario.speed_rpm
    return MachineProfile(
        name="Virtual bench grinder", rotor_kind="simulated grinder arbor",
        rotor_mass_kg=rotor.mass_kg, speed_min_rpm=round(nominal * 0.95),
        speed_max_rpm=round(nominal * 1.05), max_speed_rpm=round(nominal * 1.1), rotation="cw",
        planes=[Plane(p.name, radius_mm=p.radius_mm, axial_mm=p.axial_mm)
                for p in rotor.planes],
        pickups=[Pickup(p.name, sensitivity_mv_per_g=1000 * e.sensitivity_v_per_g)
                 for p, e in zip(rotor.pickups, scenario.electrical, strict=True)],
        mains_hz=int(scenario.motor.mains_hz), target_grade=GRADE)


def measure(port) -> list[Reading]:  # noqa: ANN001 - a pyserial port with a rig
    """Start, stream 3 s, stop; the meter's readings as job readings."""
    rig = port.rig
    decoder = StreamDecoder()
    profiles = [PickupProfile(p.name, sensitivity_v_per_g=e.sensitivity_v_per_g,
                              zero_g_v=e.zero_g_v)
                for p, e in zip(rig.scenario.rotor.pickups, rig.scenario.electrical, strict=True)]
    meter = LiveAnalyzer(profiles=profiles, mains_hz=rig.scenario.motor.mains_hz, max_revs=10_000)
    port.write(encode_frame("start", 1))
    rig.advance_s(3.0)
    port.write(encode_frame("stop", 2))
    for item in decoder.feed(rig.take_output()):
        if isinstance(item, Message):
            meter.feed(item)
    return [Reading(sensor=r.sensor, amplitude=r.amplitude, unit=r.unit,  # type: ignore[arg-type]
                    phase_deg=r.phase_deg % 360.0, confidence_deg=min(180.0, r.confidence_deg),
                    revolutions=r.revolutions, speed_rpm=r.speed_rpm,
                    confidence_radius=r.confidence_radius)
            for r in meter.readings()]


def vector(run: RunEntry, sensors: list[str]) -> np.ndarray:
    return np.array([phasor(run.reading(s).amplitude, run.reading(s).phase_deg) for s in sensors])


def put_back_parts(job: JobRecord, rig) -> None:  # noqa: ANN001
    rig.set_masses([Mass(p.plane, p.mass_g, p.angle_deg) for p in job.parts_on_rotor()])


def stop_and_confirm(rig, step: str) -> Confirmation:  # noqa: ANN001
    rig.motor_stop()
    rig.advance_s(rig.scenario.motor.coast_down_s + 2)
    assert rig.standstill
    return Confirmation(time=now_iso(), step=step, standstill_by_tach=True, tach_rpm=0.0,
                        text="rotor stopped (no tach edges), switched off")


def run_now(ws: Workspace, job: JobRecord, port, kind: str, label: str) -> None:  # noqa: ANN001
    rig = port.rig
    rig.motor_start()
    rig.advance_s(rig.scenario.motor.spin_up_s * 3)
    readings = measure(port)
    ws.append_run(job, RunEntry(index=job.next_run_index, kind=kind, time=now_iso(),  # type: ignore[arg-type]
                           speed_rpm=float(np.mean([r.speed_rpm for r in readings])),
                           readings=readings, label=label))


def influence(job: JobRecord) -> np.ndarray:
    sensors = [p.name for p in job.machine.pickups]
    v0 = vector(job.runs[0], sensors)
    return np.column_stack([(vector(job.runs[1 + j], sensors) - v0) / TRIAL_G for j in range(2)])


def next_step(ws: Workspace, job: JobRecord, port) -> bool:  # noqa: ANN001
    """Do the next step of the four-run procedure from what the job records; False when done."""
    rig = port.rig
    planes = [p.name for p in job.machine.planes]
    sensors = [p.name for p in job.machine.pickups]
    done = len(job.runs)
    if done == 0:
        rig.motor_start()
        run_now(ws, job, port, "initial", "as found")
    elif done in (1, 2) and job.pending is None:
        changes = []
        if done == 2:
            changes.append(MassChange("remove", planes[0], TRIAL_G, 0.0, purpose="trial",
                                      position=1))
        changes.append(MassChange("attach", planes[done - 1], TRIAL_G, 0.0, purpose="trial",
                                  position=1, part="clip weight"))
        confirmation = stop_and_confirm(rig, f"trial weight on {planes[done - 1]}")
        ws.record_pending(job, PendingStep(changes=changes, confirmations=[confirmation]))
        put_back_parts(job, rig)
    elif done in (1, 2):
        run_now(ws, job, port, "trial", f"trial weight, {planes[done - 1]}")
    elif done == 3 and job.pending is None:
        h = influence(job)
        w = -np.linalg.solve(h, vector(job.runs[0], sensors))
        corrections = [CorrectionEntry(plane, *amplitude_phase(complex(w[j])))
                       for j, plane in enumerate(planes)]
        job.runs[2].corrections = corrections
        job.influence = CoefficientSet(
            speed_rpm=job.runs[0].speed_rpm, unit=job.runs[0].readings[0].unit,
            job_id=job.job_id, created=now_iso(),
            entries=[InfluenceEntry(s, p, *amplitude_phase(complex(h[i, j])))
                     for i, s in enumerate(sensors) for j, p in enumerate(planes)])
        ws.save_job(job)
        changes = [MassChange("remove", planes[1], TRIAL_G, 0.0, purpose="trial", position=1)]
        changes += [MassChange("attach", c.plane, c.mass_g, c.angle_deg, purpose="correction")
                    for c in corrections]
        confirmation = stop_and_confirm(rig, "remove trial weight, place corrections")
        ws.record_pending(job, PendingStep(changes=changes, confirmations=[confirmation]))
        put_back_parts(job, rig)
    elif done == 3:
        run_now(ws, job, port, "check", "corrections placed")
    else:
        h = influence(job)
        residual_g = np.abs(np.linalg.solve(h, vector(job.runs[3], sensors)))
        omega = 2 * math.pi * job.runs[3].speed_rpm / 60
        u_per = 1000 * GRADE * job.machine.rotor_mass_kg / omega  # ISO 21940-11:2016
        verdicts = [PlaneVerdict(p.name, float(residual_g[j] * p.radius_mm), u_per / 2,
                                 bool(residual_g[j] * p.radius_mm <= u_per / 2))
                    for j, p in enumerate(job.machine.planes)]
        ws.close_job(job, VerdictEntry(GRADE, job.runs[3].speed_rpm, 4, verdicts,
                                  all(v.passed for v in verdicts)))
        return False
    return True


def carry_on(root: Path, job_id: str) -> None:
    """Reopen the job, restore the rotor's parts, do steps until the job is closed."""
    ws = Workspace(root)
    job = ws.load_job(job_id)
    if job.status == "closed":
        return
    port = open_port(PORT)
    put_back_parts(job, port.rig)
    advance = port.rig.advance_s

    def advance_with_pause(seconds: float) -> None:  # a kill may land between signal blocks
        kill_points.pause(kill_points.SIM_BLOCK)
        advance(seconds)

    port.rig.advance_s = advance_with_pause
    while next_step(ws, job, port):
        pass


def test_job_through_the_virtual_rig_survives_kills_and_is_finished(tmp_path: Path) -> None:
    # The kills land inside steps by construction: the child pauses before every block of
    # simulated signal and inside every save (half written, before and after the rename), and
    # the parent kills it at a seeded point of that sequence (tests/kill_points.py). The same
    # seed gives the same kills on an idle or a loaded machine.
    rng = random.Random(7)
    port = open_port(PORT)
    ws = Workspace(tmp_path)
    job = ws.new_job(profile_of(port.rig), method="two-plane")
    hidden = port.rig.scenario.rotor.unbalance_phasors(port.rig.scenario.as_found)
    port.close()
    path = ws.job_path(job.job_id)
    kinds_killed: set[int] = set()
    states: list[tuple[int, bool, str]] = []
    committed = [path.read_bytes()]  # the file as the last finished save left it

    def look(point: int) -> None:
        if point == kill_points.AFTER_RENAME:
            committed.append(path.read_bytes())

    for _ in range(8):
        outcome = kill_points.run_child(lambda: carry_on(tmp_path, job.job_id),
                                        kill_at=rng.randint(1, 9), on_point=look)
        assert outcome.killed or outcome.exit_code == 0, "the procedure failed in the child"
        if not outcome.killed:
            break
        kinds_killed.add(outcome.killed_at)  # type: ignore[arg-type]
        if outcome.killed_at in (kill_points.WRITE_HALF, kill_points.BEFORE_RENAME):
            assert path.read_bytes() == committed[-1]  # a save cut short leaves the last one
        committed.append(path.read_bytes())
        seen = read_document(path, "job")  # valid after every kill
        states.append((len(seen.runs), seen.pending is not None, seen.status))
    carry_on(tmp_path, job.job_id)  # whatever is left, without interruption
    assert len(states) >= 4, states
    # Kills landed inside saves (both sides of the rename) and inside measurements.
    assert kinds_killed >= {kill_points.WRITE_HALF, kill_points.SIM_BLOCK}, kinds_killed
    # The kills landed part-way through: the job was reopened from several different steps.
    assert len({s for s in states if s[0] > 0 and s[2] == "open"}) >= 2, states

    final = ws.load_job(job.job_id)
    assert final.status == "closed" and final.pending is None
    assert [r.kind for r in final.runs] == ["initial", "trial", "trial", "check"]
    assert [(c.action, c.plane) for c in final.runs[2].changes] == [
        ("remove", final.machine.planes[0].name), ("attach", final.machine.planes[1].name)]
    assert all(r.confirmations and r.confirmations[-1].standstill_by_tach
               for r in final.runs[1:])
    assert len(final.parts_on_rotor()) == 2  # the two corrections, no trial weight left
    # The corrections cancel the hidden as-found unbalance (grams at each plane's radius).
    w = np.array([phasor(c.mass_g, c.angle_deg) for c in final.runs[2].corrections])
    assert np.allclose(-w, hidden, rtol=0.1, atol=0.15)
    sensors = [p.name for p in final.machine.pickups]
    assert np.all(np.abs(vector(final.runs[3], sensors)) < 0.1 * np.abs(vector(final.runs[0],
                                                                                sensors)))
    assert final.verdict is not None and final.verdict.after_run == 4
    page = ET.fromstring(html_report(final))
    assert sum(1 for t in page.iter("{http://www.w3.org/1999/xhtml}table")
               if t.get("class") == "runs") == 1
