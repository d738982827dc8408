"""The invented demo job is consistent with the published methods the report names.

The numbers in tests/data/demo_bench_grinder_job.yaml are made up (a bench grinder that does
not exist), but what the report says about them must follow from the stored runs by the
methods it cites, so the demo never shows a person an impossible balancing job.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from trueturn.angles import amplitude_phase, phasor
from trueturn.jobs.store import read_document

DEMO_JOB = Path(__file__).parent / "data" / "demo_bench_grinder_job.yaml"


def test_permissible_residual_follows_iso_21940_11() -> None:
    job = read_document(DEMO_JOB, "job")
    verdict = job.verdict
    # ISO 21940-11:2016, U_per = 1000 * G * m / omega (g*mm; G mm/s, m kg, omega rad/s),
    # shared equally between two planes for a rotor symmetric between its bearings.
    omega = 2 * math.pi * verdict.speed_rpm / 60
    u_per_gmm = 1000 * verdict.grade * job.machine.rotor_mass_kg / omega
    for plane in verdict.planes:
        assert plane.permissible_gmm == pytest.approx(u_per_gmm / 2, abs=0.05)
        assert plane.passed == (plane.residual_gmm <= plane.permissible_gmm)
    assert verdict.passed == all(p.passed for p in verdict.planes)


def test_corrections_and_coefficients_follow_from_the_runs() -> None:
    """Two-plane influence coefficient method (from memory: Wowk, Machinery Vibration:
    Balancing, McGraw-Hill 1995, two-plane chapter): H[:, j] = (V_j - V_0) / T_j and the
    correction W = -H^-1 V_0, solved here with numpy.linalg as the reference."""
    job = read_document(DEMO_JOB, "job")
    sensors = [p.name for p in job.machine.pickups]
    planes = [p.name for p in job.machine.planes]

    def vector(run_index: int) -> np.ndarray:
        run = job.runs[run_index - 1]
        return np.array([phasor(run.reading(s).amplitude, run.reading(s).phase_deg)
                         for s in sensors])

    trial_g = [next(c.mass_g for c in job.runs[k].changes
                    if c.action == "attach" and c.purpose == "trial") for k in (1, 2)]
    trial_angle = [next(c.angle_deg for c in job.runs[k].changes
                        if c.action == "attach" and c.purpose == "trial") for k in (1, 2)]
    v0 = vector(1)
    h = np.column_stack([(vector(2 + j) - v0) / phasor(trial_g[j], trial_angle[j])
                         for j in range(2)])
    w = -np.linalg.solve(h, v0)
    for correction, value in zip(job.runs[2].corrections, w, strict=True):
        mass_g, angle_deg = amplitude_phase(complex(value))
        assert correction.mass_g == pytest.approx(mass_g, abs=0.01)
        assert correction.angle_deg == pytest.approx(angle_deg, abs=0.1)
    stored = job.influence.matrix(sensors, planes)
    assert np.allclose(np.array(stored), h, rtol=2e-3, atol=2e-4)
    # Each split puts the two parts' vector sum back on the correction (vector addition).
    for correction in job.runs[2].corrections:
        total = sum(phasor(p.mass_g, p.angle_deg) for p in correction.split)
        assert abs(total - phasor(correction.mass_g, correction.angle_deg)) < 0.02
    # The verdict's residual: run 4 seen through the same coefficients, times the radius.
    residual_g = np.abs(np.linalg.solve(h, vector(4)))
    for plane_verdict, mass_g, name in zip(job.verdict.planes, residual_g, planes, strict=True):
        radius_mm = job.machine.plane(name).radius_mm
        assert plane_verdict.residual_gmm == pytest.approx(mass_g * radius_mm, abs=0.1)
