"""Rotor physics of trueturn.sim.rotor against closed forms and an independent time integration."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from trueturn.angles import amplitude_phase, angle_difference_deg
from trueturn.sim.rotor import (
    CorrectionPlane,
    Mass,
    PickupMount,
    RigidRotor,
    Support,
    rpm_to_rad_s,
    unbalance_force_n,
)


def symmetric_rotor(k: float = 2e5, c: float = 60.0, mass_kg: float = 5.0) -> RigidRotor:
    """Equal isotropic bearings at +-100 mm, one plane at the centre of mass."""
    bearing = [Support(-100.0, k, k, c, c), Support(100.0, k, k, c, c)]
    return RigidRotor(
        mass_kg=mass_kg, transverse_inertia_kg_m2=0.02, polar_inertia_kg_m2=0.0,
        centre_of_mass_axial_mm=0.0, bearings=bearing,
        planes=[CorrectionPlane("mid", 0.0, 80.0)],
        pickups=[PickupMount("h0", 0, 0.0), PickupMount("v1", 1, 90.0)],
    )


def test_unbalance_force_units() -> None:
    # F = m*r*omega^2: 1 g at 100 mm at 3000 rpm = 1e-4 kg m * (100*pi rad/s)^2 = 9.8696 N
    # (from memory: any dynamics text, rotating unbalance force)
    assert unbalance_force_n(1.0, 100.0, 3000.0) == pytest.approx(1e-4 * (100 * math.pi) ** 2)
    assert unbalance_force_n(1.0, 100.0, 3000.0) == pytest.approx(9.8696, rel=1e-4)


@pytest.mark.parametrize("speed_rpm", [600.0, 1500.0, 1900.0, 3000.0, 6000.0])
def test_single_plane_symmetric_matches_jeffcott(speed_rpm: float) -> None:
    # Single-degree-of-freedom forced response to rotating unbalance,
    # X = m e w^2 / (k_total - M w^2 + i c_total w) (from memory: Den Hartog, Mechanical
    # Vibrations, "rotating unbalance"; the Jeffcott rotor on rigid-shaft/soft supports).
    rotor = symmetric_rotor()
    w = rpm_to_rad_s(speed_rpm)
    m_kg, e_m = 3e-3, 0.080
    x_std = m_kg * e_m * w**2 / (2 * 2e5 - 5.0 * w**2 + 1j * 2 * 60.0 * w)
    accel_proj = np.conj(-(w**2) * x_std)  # project phasor of Re(X e^{iwt}) is conj(X)
    got = rotor.response_1x(speed_rpm, [Mass("mid", 3.0, 0.0)])
    assert got["h0"] == pytest.approx(accel_proj, rel=1e-9)
    # Vertical pickup (90 deg with rotation) sees the same amplitude, 90 deg later.
    amp_h, ph_h = amplitude_phase(got["h0"])
    amp_v, ph_v = amplitude_phase(got["v1"])
    assert amp_v == pytest.approx(amp_h, rel=1e-9)
    assert angle_difference_deg(ph_v, ph_h) == pytest.approx(90.0, abs=1e-6)


def test_far_above_resonance_centre_of_mass_stays_put() -> None:
    # Well above the support resonance the displacement tends to m*e/M (the rotor spins about
    # its centre of mass); from memory: Den Hartog, Mechanical Vibrations, rotating unbalance.
    rotor = symmetric_rotor(k=1e3, c=1.0)
    speed = 20000.0
    a = rotor.response_1x(speed, [Mass("mid", 5.0, 0.0)])["h0"]
    disp_m = abs(a) / rpm_to_rad_s(speed) ** 2
    assert disp_m == pytest.approx(5e-3 * 0.080 / 5.0, rel=1e-3)


@pytest.mark.parametrize("angle_deg", [0.0, 37.0, 200.0])
def test_phase_follows_heavy_spot_below_resonance(angle_deg: float) -> None:
    # Well below resonance the displacement is in phase with the force, so the acceleration
    # (-w^2 x) is opposite to it; the force along a pickup at direction psi peaks when the
    # heavy spot passes psi: acceleration phase = angle + psi - tach + 180 (project convention,
    # trueturn/angles.py; from memory: Den Hartog, Mechanical Vibrations, phase below resonance).
    stiff = symmetric_rotor(k=1e8, c=1.0)
    rotor = RigidRotor(
        mass_kg=5.0, transverse_inertia_kg_m2=0.02, polar_inertia_kg_m2=0.0,
        centre_of_mass_axial_mm=0.0, bearings=stiff.bearings, planes=stiff.planes,
        pickups=[PickupMount("p", 0, 30.0)], tach_direction_deg=10.0)
    _, phase = amplitude_phase(rotor.response_1x(600.0, [Mass("mid", 2.0, angle_deg)])["p"])
    assert angle_difference_deg(phase, angle_deg + 30.0 - 10.0 + 180.0) == pytest.approx(0.0, abs=0.05)


def test_masses_add_linearly_and_match_influence_matrix() -> None:
    rotor = general_rotor(nonlinearity=0.0)
    masses = [Mass("left", 4.0, 30.0), Mass("right", 2.5, 250.0), Mass("left", 1.0, 90.0)]
    got = rotor.response_1x(2400.0, masses)
    h = rotor.influence_matrix(2400.0)
    u = np.array([4.0 * np.exp(1j * np.radians(30.0)) + 1.0 * np.exp(1j * np.radians(90.0)),
                  2.5 * np.exp(1j * np.radians(250.0))])
    want = h @ u
    assert [got[p.name] for p in rotor.pickups] == pytest.approx(list(want), rel=1e-12)


def test_nonlinearity_makes_coefficients_amplitude_dependent() -> None:
    rotor = general_rotor(nonlinearity=0.05)
    small = rotor.response_1x(2400.0, [Mass("left", 1.0, 0.0)])["A"]
    big = rotor.response_1x(2400.0, [Mass("left", 5.0, 0.0)])["A"]
    assert abs(big / 5.0 - small) / abs(small) > 1e-3
    assert abs(big / 5.0 - small) / abs(small) < 0.5


def general_rotor(nonlinearity: float = 0.0) -> RigidRotor:
    """Overhung-ish, anisotropic, gyroscopic: nothing symmetric to hide a sign error."""
    return RigidRotor(
        mass_kg=3.2, transverse_inertia_kg_m2=0.015, polar_inertia_kg_m2=0.006,
        centre_of_mass_axial_mm=40.0,
        bearings=[Support(0.0, 3e5, 1.5e5, 80.0, 50.0), Support(150.0, 2e5, 4e5, 40.0, 90.0)],
        planes=[CorrectionPlane("left", -60.0, 75.0), CorrectionPlane("right", 210.0, 75.0)],
        pickups=[PickupMount("A", 0, 0.0), PickupMount("B", 1, 60.0)],
        nonlinearity=nonlinearity, tach_direction_deg=25.0,
    )


def test_frequency_solution_matches_time_integration() -> None:
    # Independent check: integrate the equations of motion in time with scipy's solve_ivp
    # (reference library: scipy.integrate), forces written directly from the geometry, then
    # fit the steady 1x at the pickups and compare amplitude and phase with response_1x.
    rotor = general_rotor()
    speed = 1800.0
    w = rpm_to_rad_s(speed)
    masses = [Mass("left", 6.0, 40.0), Mass("right", 3.0, 300.0)]
    zc = rotor.centre_of_mass_axial_mm * 1e-3
    kk = np.zeros((4, 4))
    cc = np.zeros((4, 4))
    for b in rotor.bearings:
        d = b.axial_mm * 1e-3 - zc
        for k_dir, c_dir, sl in ((b.stiffness_h_n_per_m, b.damping_h_ns_per_m, slice(0, 2)),
                                 (b.stiffness_v_n_per_m, b.damping_v_ns_per_m, slice(2, 4))):
            kk[sl, sl] += k_dir * np.array([[1, d], [d, d * d]])
            cc[sl, sl] += c_dir * np.array([[1, d], [d, d * d]])
    ip = rotor.polar_inertia_kg_m2
    cc[1, 3] += ip * w
    cc[3, 1] -= ip * w
    minv = 1 / np.array([rotor.mass_kg, rotor.transverse_inertia_kg_m2] * 2)
    tach = math.radians(rotor.tach_direction_deg)

    def force(t: float) -> np.ndarray:
        f = np.zeros(4)
        for m in masses:
            pl = rotor.plane(m.plane)
            ang = w * t + tach - math.radians(m.angle_deg)  # fixed-frame angle of the mass
            amp = m.mass_g * 1e-3 * pl.radius_mm * 1e-3 * w**2
            d = pl.axial_mm * 1e-3 - zc
            fx, fy = amp * math.cos(ang), amp * math.sin(ang)
            f += [fx, fx * d, fy, fy * d]
        return f

    def rhs(t: float, s: np.ndarray) -> np.ndarray:
        q, v = s[:4], s[4:]
        return np.concatenate([v, minv * (force(t) - kk @ q - cc @ v)])

    periods = 30
    t_end = periods * 2 * math.pi / w
    t_fit = np.linspace(t_end - 5 * 2 * math.pi / w, t_end, 800)
    sol = solve_ivp(rhs, (0, t_end), np.zeros(8), t_eval=t_fit, rtol=1e-8, atol=1e-11,
                    method="DOP853")
    acc = np.array([rhs(t, s)[4:] for t, s in zip(sol.t, sol.y.T, strict=True)])
    want = rotor.response_1x(speed, masses)
    for p in rotor.pickups:
        d = rotor.bearings[p.bearing].axial_mm * 1e-3 - zc
        c, s = math.cos(math.radians(p.direction_deg)), math.sin(math.radians(p.direction_deg))
        signal = acc @ np.array([c, c * d, s, s * d])
        theta = w * sol.t  # tach event at t = 0
        design = np.column_stack([np.cos(theta), np.sin(theta)])
        (re, im), *_ = np.linalg.lstsq(design, signal, rcond=None)
        # A cos(theta - phi) = A cos(phi) cos(theta) + A sin(phi) sin(theta)
        fitted = complex(re, im)
        assert abs(fitted - want[p.name]) / abs(want[p.name]) < 2e-3, p.name


def test_bad_plane_name_is_reported() -> None:
    with pytest.raises(ValueError, match="no correction plane named"):
        symmetric_rotor().response_1x(1000.0, [Mass("nowhere", 1.0, 0.0)])
