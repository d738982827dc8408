"""The supports fitted to a whole coast-down (trueturn.balance.support_fit) and the
prediction made from that fit (trueturn.balance.model_first.predict_influence with a
curve).

Checks against the outside world:
- the fitted model's equations against an independent implementation: the simulator's
  four-degree-of-freedom rigid rotor with gyroscopic coupling (trueturn.sim.rotor,
  Lalanne & Ferraris 1998, ch. 2-4, from memory), to round-off;
- its symmetric limit against Den Hartog's rotating-unbalance SDOF (1956, §3.3, from
  memory);
- the prediction's honesty: over random rigid rotors of the simulator (anisotropic
  supports, gyroscopics, a nonlinear mount), the share of the as-found 1x the model's own
  correction truly leaves lies within its stated 95 % bound at about that rate, and a
  sweep that cannot tell the stiffness (a stiff mount) is never trusted with a wrong
  answer. Tolerances from the binomial spread of the counts.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from trueturn.balance.model_first import (
    MAX_RESIDUAL_FRACTION_95,
    Distrust,
    PickupPlacement,
    PredictedInfluence,
    RotorLayout,
    SupportResonance,
    _cg,
    _lever_masses,
    _with_rivals,
    predict_influence,
)
from trueturn.balance.support_fit import (
    InertiaPrior,
    SupportGeometry,
    SweepCurve,
    fit_support_model,
    support_model_coefficients,
)
from trueturn.sim import CorrectionPlane, Mass, PickupMount, RigidRotor, Support


def _rotor(rng: np.random.Generator, soft: bool, n_planes: int,
           nonlinearity: float = 0.0) -> tuple[RigidRotor, float]:
    """A random rigid rotor on anisotropic supports (as bench/bench_balance.py draws them:
    soft, the lowest mode at 0.25-0.6 of the speed; stiff, above 1.6 of it)."""
    mass = rng.uniform(1, 20)
    span = rng.uniform(150, 500)
    radius = rng.uniform(30, 150)
    speed = rng.uniform(1000, 3600)
    omega = speed * math.pi / 30
    k = mass * (omega * (rng.uniform(0.25, 0.6) if soft else rng.uniform(1.6, 4.0))) ** 2
    c = 0.03 * 2 * math.sqrt(k * mass)
    inset = rng.uniform(0.05, 0.3) * span
    cg = rng.uniform(-0.15, 0.15) * span
    planes = [CorrectionPlane("left", -span / 2 + inset, radius),
              CorrectionPlane("right", span / 2 - inset, radius)][:n_planes]
    if n_planes == 1:
        planes = [CorrectionPlane("disc", cg + rng.uniform(-0.1, 0.1) * span, radius)]
    rotor = RigidRotor(
        mass_kg=mass, transverse_inertia_kg_m2=mass * span**2 * 1e-6 * rng.uniform(0.05, 0.15),
        polar_inertia_kg_m2=mass * (radius * 1e-3) ** 2 * rng.uniform(0.25, 0.75),
        centre_of_mass_axial_mm=cg,
        bearings=[Support(-span / 2, k, k * 0.8, c, c), Support(span / 2, k * 1.1, k * 0.9, c, c)],
        planes=planes,
        pickups=[PickupMount("inboard", 0, 90.0), PickupMount("outboard", 1, 90.0)],
        nonlinearity=nonlinearity, tach_direction_deg=float(rng.uniform(0, 360)))
    return rotor, speed


def _layout(rotor: RigidRotor) -> RotorLayout:
    return RotorLayout(rotor.mass_kg, (rotor.bearings[0].axial_mm, rotor.bearings[1].axial_mm),
                       tuple(p.axial_mm for p in rotor.planes),
                       tuple(p.radius_mm for p in rotor.planes), rotor.centre_of_mass_axial_mm,
                       mounted_mass_kg=rotor.mounted_mass_kg)


def _placements(rotor: RigidRotor) -> list[PickupPlacement]:
    return [PickupPlacement(p.name, p.bearing, p.direction_deg - rotor.tach_direction_deg)
            for p in rotor.pickups]


def _geometry(rotor: RigidRotor) -> SupportGeometry:
    layout, placements = _layout(rotor), _placements(rotor)
    zc = _cg(layout)
    bearings = (np.array(layout.bearings_axial_mm) - zc) * 1e-3
    return SupportGeometry(layout.rotor_mass_kg, _lever_masses(layout), bearings,
                           (np.array(layout.planes_axial_mm) - zc) * 1e-3,
                           np.array(layout.planes_radius_mm),
                           np.array([bearings[p.bearing] for p in placements]),
                           np.array([float(p.angle_from_tach_deg or 0.0) for p in placements]))


def _curve(rotor: RigidRotor, speed: float, masses: list[Mass], rng: np.random.Generator,
           sigma_m_s2: float = 0.05) -> SweepCurve:
    """A coast-down's points, one per 0.5 % of speed down to a quarter of it, each with a
    circular Gaussian error of ``sigma_m_s2`` per part plus 0.3 % of the 1x."""
    speeds = speed * np.geomspace(1.0, 0.25, 278)
    names = [p.name for p in rotor.pickups]
    truth = np.array([[rotor.response_1x(float(n), masses)[k] for k in names] for n in speeds])
    sigma = sigma_m_s2 + 0.003 * np.abs(truth)
    noisy = truth + sigma * (rng.normal(size=truth.shape) + 1j * rng.normal(size=truth.shape))
    return SweepCurve(speeds, noisy, sigma)


@pytest.mark.parametrize("soft", [False, True])
@pytest.mark.parametrize("n_planes", [1, 2])
def test_the_fitted_model_is_the_simulators_rotor(soft: bool, n_planes: int) -> None:
    # the same physics written twice: the simulator's 4-DOF rotor (horizontal/vertical
    # axes, any tach direction) and the fit's (axes along/across the first pickup); with
    # the simulator's stiffnesses, inertias and a damping 2 zeta sqrt(k m_b) they agree to
    # round-off, pickups pointing opposite ways included
    rng = np.random.default_rng(11 + n_planes + 2 * soft)
    rotor, speed = _rotor(rng, soft, n_planes)
    rotor.pickups = [PickupMount("inboard", 0, 90.0), PickupMount("outboard", 1, 270.0)]
    geometry = _geometry(rotor)
    zeta = 0.04
    rotor.bearings = [dataclasses.replace(
        b, damping_v_ns_per_m=2 * zeta * math.sqrt(b.stiffness_v_n_per_m * m),
        damping_h_ns_per_m=2 * zeta * math.sqrt(b.stiffness_h_n_per_m * m))
        for b, m in zip(rotor.bearings, geometry.bearing_masses_kg, strict=True)]
    b0, b1 = rotor.bearings
    # along the first pickup (vertical), then across (horizontal)
    theta = np.log([b0.stiffness_v_n_per_m, b0.stiffness_h_n_per_m, b1.stiffness_v_n_per_m,
                    b1.stiffness_h_n_per_m, zeta, rotor.transverse_inertia_kg_m2,
                    rotor.polar_inertia_kg_m2])
    for n in (0.3 * speed, speed, 1.7 * speed):
        ours = support_model_coefficients(theta, geometry, np.array([n * math.pi / 30]))[0]
        np.testing.assert_allclose(ours, rotor.influence_matrix(n), rtol=1e-9)


def test_the_symmetric_limit_is_den_hartogs_rotating_unbalance() -> None:
    # from memory: Den Hartog, Mechanical Vibrations, 4th ed. 1956, §3.3: a mass M on a
    # spring k with a rotating unbalance m e: X = (m e / M) r^2 / |1 - r^2 + 2 i zeta r|;
    # a plane through the centre of mass of a symmetric rotor excites only the bounce
    mass, k, zeta = 10.0, 4.0e5, 0.05
    geometry = SupportGeometry(mass, np.array([5.0, 5.0]), np.array([-0.1, 0.1]),
                               np.array([0.0]), np.array([100.0]), np.array([-0.1]),
                               np.array([0.0]))
    theta = np.log([k, k, k, k, zeta, 0.1, 1e-9])
    omega_n = math.sqrt(2 * k / mass)
    for ratio in (0.3, 1.0, 3.0):
        h = support_model_coefficients(theta, geometry, np.array([ratio * omega_n]))[0, 0, 0]
        x = (1e-4 / mass) * ratio**2 / math.hypot(1 - ratio**2, 2 * zeta * ratio)
        assert abs(h) == pytest.approx((ratio * omega_n) ** 2 * x, rel=1e-9)


def test_a_clean_soft_sweep_gives_back_the_unbalance() -> None:
    # a soft mount, a linear rotor, a quiet sweep: the coefficients at speed come out
    # within the prediction's own 95 % spreads in size and phase, and those spreads are
    # tens of per cent and a few degrees (the priors on the inertias are the profile's
    # guesses, not the truth; the simulator's supports are not along the pickups' damping
    # model)
    rng = np.random.default_rng(5)
    rotor, speed = _rotor(rng, True, 2)
    masses = [Mass("left", 3.0, 40.0), Mass("right", 2.0, 250.0)]
    prediction = predict_influence(_layout(rotor), _placements(rotor), speed,
                                   curve=_curve(rotor, speed, masses, rng, 0.01))
    assert Distrust.TOO_UNCERTAIN not in prediction.distrust
    ratio = rotor.influence_matrix(speed) / prediction.matrix
    assert np.all(np.abs(np.abs(ratio) - 1) <= prediction.magnitude_rel_95)
    assert np.all(np.abs(np.degrees(np.angle(ratio))) <= prediction.phase_95_deg)
    # the size's band: mostly the mass on the mounts' own 10 % (log, 1 sigma:
    # model_first.MOUNTED_MASS_LOG_SIGMA), about 20 % at 95 %, which no sweep can narrow
    assert np.all(prediction.magnitude_rel_95 < 0.3) and np.all(prediction.phase_95_deg < 15)


def _honesty(n_planes: int, rotors: int, seed: int) -> tuple[int, int, int]:
    """Over random rotors (soft and stiff, nonlinear mounts): how many predictions were
    trusted, how many of those left more of the as-found 1x than their 95 % bound, and
    how many trusted ones left more than any trusted prediction may promise
    (model_first.MAX_RESIDUAL_FRACTION_95: what a trial sized to be seen may leave)."""
    rng = np.random.default_rng(seed)
    trusted = over = failed = 0
    for k in range(rotors):
        rotor, speed = _rotor(rng, bool(k % 2), n_planes, float(rng.uniform(0.005, 0.03)))
        masses = [Mass(p.name, float(rng.uniform(2, 20)), float(rng.uniform(0, 360)))
                  for p in rotor.planes]
        r0 = rotor.response_1x(speed, masses)
        prediction = predict_influence(_layout(rotor), _placements(rotor), speed, as_found=r0,
                                       curve=_curve(rotor, speed, masses, rng))
        if not prediction.trusted:
            continue
        trusted += 1
        c = np.linalg.lstsq(prediction.matrix, -np.array(list(r0.values())), rcond=None)[0]
        after = rotor.response_1x(speed, masses + [
            Mass(p.name, abs(c[j]), math.degrees(np.angle(c[j])))
            for j, p in enumerate(rotor.planes)])
        left = np.linalg.norm(list(after.values())) / np.linalg.norm(list(r0.values()))
        assert prediction.residual_fraction_95 is not None
        over += left > prediction.residual_fraction_95
        failed += left > MAX_RESIDUAL_FRACTION_95
    return trusted, over, failed


@pytest.mark.parametrize("n_planes", [1, 2])
def test_a_trusted_prediction_keeps_its_95_percent_bound(n_planes: int) -> None:
    trusted, over, failed = _honesty(n_planes, 40, 100 + n_planes)
    # half the soft mounts or more are trusted (each prediction's size carries the mass on
    # the mounts' own uncertainty, model_first.MOUNTED_MASS_LOG_SIGMA)
    assert trusted >= 10
    # at most 5 % above the bound: with ~20 trusted, 3 or more would be p < 0.08 (binomial)
    assert over <= max(2, math.ceil(0.1 * trusted)), (trusted, over)
    assert failed <= 1, (trusted, failed)


def test_a_stiff_mount_with_a_quiet_1x_is_not_trusted() -> None:
    # supports four times stiffer than the speed needs: the 1x rises as speed^4 with no
    # curvature the noise lets through, so the stiffness (and with it the coefficients'
    # size) is unknown; the fit must say so, not guess
    rng = np.random.default_rng(9)
    rotor, speed = _rotor(rng, False, 2)
    rotor.bearings = [dataclasses.replace(b, stiffness_h_n_per_m=b.stiffness_h_n_per_m * 4,
                                          stiffness_v_n_per_m=b.stiffness_v_n_per_m * 4)
                      for b in rotor.bearings]
    masses = [Mass("left", 60.0, 10.0), Mass("right", 60.0, 200.0)]
    r0 = rotor.response_1x(speed, masses)
    curve = _curve(rotor, speed, masses, rng, 0.1)
    assert fit_support_model(_geometry(rotor), curve, InertiaPrior(0.1, 0.3, 0.01, 0.3))
    prediction = predict_influence(_layout(rotor), _placements(rotor), speed, as_found=r0,
                                   curve=curve)
    assert not prediction.trusted
    assert Distrust.TOO_UNCERTAIN in prediction.distrust


def test_a_fitted_mode_the_sweep_did_not_show_is_not_trusted() -> None:
    # our rule (model_first._unseen_resonances): when the sweep's peak finding saw no
    # resonance, the fit may not put one inside the sweep's clear span; a soft mount's fit
    # passes with its own resonances (only the lowest: a weaker one may hide), and fails
    # when told the sweep found none
    rng = np.random.default_rng(5)
    rotor, speed = _rotor(rng, True, 2)
    masses = [Mass("left", 3.0, 40.0), Mass("right", 2.0, 250.0)]
    curve = _curve(rotor, speed, masses, rng, 0.01)
    seen = {p.name: [SupportResonance(min(rotor.direction_criticals_rpm(p)), 0.04)]
            for p in rotor.pickups}
    told = predict_influence(_layout(rotor), _placements(rotor), speed, seen, curve=curve)
    assert Distrust.UNSEEN_RESONANCE not in told.distrust
    none_seen = {p.name: [] for p in rotor.pickups}
    blind = predict_influence(_layout(rotor), _placements(rotor), speed, none_seen, curve=curve)
    assert Distrust.UNSEEN_RESONANCE in blind.distrust and not blind.trusted


def test_a_rival_fit_widens_the_prediction_and_can_refuse_it() -> None:
    # a second minimum the sweep cannot rule out (SupportModelFit.rivals): the spreads
    # reach it, and a rival under which the offered correction would leave more than
    # 150 % of the 1x (model_first.MAX_RESIDUAL_FRACTION_95, what a trial may leave) or
    # change it by less than a trial must (MIN_EFFECT_FRACTION_05, 25 %) refuses it
    nominal = np.array([[1.0 + 0.0j], [0.5j]])
    base = PredictedInfluence(("a", "b"), nominal, np.abs(nominal),
                              (np.array([[1e-4 + 0j]]), np.array([[1e-4 + 0j]])),
                              np.full((2, 1), 3.0), np.full((2, 1), 0.05), False, 0.1)
    as_found = {"a": 2.0 + 0j, "b": 1.0j}
    near = _with_rivals(base, [nominal * 1.2], as_found)
    assert near.trusted and np.allclose(near.magnitude_rel_95, 0.2)
    assert near.residual_fraction_95 == pytest.approx(0.2)
    assert near.covariance[0][0, 0].real == pytest.approx(1e-4 + 0.04)
    flipped = _with_rivals(base, [-nominal], as_found)
    assert Distrust.TOO_UNCERTAIN in flipped.distrust      # leaves |1 + 1| = 200 %
    assert np.allclose(flipped.phase_95_deg, 180.0)
    # lagging 90 deg: leaves |1 - 1j| = 141 % (within what a trial may leave) and changes
    # the 1x by 100 %: a correction run that measures the coefficients as a trial would
    turned = _with_rivals(base, [nominal * 1j], as_found)
    assert turned.trusted and turned.residual_fraction_95 == pytest.approx(math.sqrt(2))
    # a machine a tenth as responsive as the model: the correction changes the 1x by 10 %
    # (leaving 90 %), too little to be seen
    dull = _with_rivals(base, [nominal * 0.1], as_found)
    assert dull.distrust == (Distrust.UNSEEN_EFFECT,)
    assert dull.residual_fraction_95 == pytest.approx(0.9)


def test_a_curve_too_short_leaves_the_resonance_route() -> None:
    # ten points over 5 % of speed: nothing to fit; without resonances the model says
    # there was no sweep rather than inventing supports
    rng = np.random.default_rng(3)
    rotor, speed = _rotor(rng, True, 1)
    masses = [Mass("disc", 5.0, 0.0)]
    curve = _curve(rotor, speed, masses, rng)
    short = SweepCurve(curve.speeds_rpm[:10], curve.phasors_m_s2[:10], curve.sigma_m_s2[:10])
    geometry = _geometry(rotor)
    assert fit_support_model(geometry, short, InertiaPrior(0.1, 0.3, 0.01, 0.3)) is None
    prediction = predict_influence(_layout(rotor), _placements(rotor), speed, curve=short)
    assert Distrust.NO_SWEEP in prediction.distrust and not prediction.trusted


def test_the_grinders_own_coast_down_through_the_apps_recorder() -> None:
    # the virtual bench grinder on its rubber feet, its coast-down through the app's sweep
    # recorder (the same fixture the speed-slope tests use), as procedure.engine hands it to
    # the model: the true coefficients (the simulator's physics) lie within the prediction's
    # own 95 % spreads, and the correction from it leaves no more of the as-found 1x than
    # its stated bound; a recording that clipped gives no curve at all
    from test_procedure_speed_slopes import coast_down
    from trueturn.procedure.engine import curve_from_sweep
    from trueturn.sim.scenario import load_scenario

    outcome = coast_down.__wrapped__()  # type: ignore[attr-defined]
    scenario = load_scenario("bench-grinder")
    rotor = scenario.rotor
    names = [p.name for p in rotor.pickups]
    curve = curve_from_sweep(outcome, names)
    assert curve is not None and curve.speeds_rpm.size >= 100
    assert curve_from_sweep(dataclasses.replace(outcome, clipped_samples=3), names) is None
    assert outcome.balancing_rpm is not None
    speed = outcome.balancing_rpm
    masses = list(scenario.as_found)
    r0 = rotor.response_1x(speed, masses)
    placements = [PickupPlacement(p.name, p.bearing, -rotor.angle_from_tach_deg(p))
                  for p in rotor.pickups]
    prediction = predict_influence(_layout(rotor), placements, speed, as_found=r0, curve=curve)
    assert prediction.trusted, prediction.distrust
    ratio = rotor.influence_matrix(speed) / prediction.matrix
    assert np.all(np.abs(np.abs(ratio) - 1) <= prediction.magnitude_rel_95)
    assert np.all(np.abs(np.degrees(np.angle(ratio))) <= prediction.phase_95_deg)
    c = np.linalg.lstsq(prediction.matrix, -np.array(list(r0.values())), rcond=None)[0]
    after = rotor.response_1x(speed, masses + [
        Mass(p.name, abs(c[j]), math.degrees(np.angle(c[j]))) for j, p in enumerate(rotor.planes)])
    left = np.linalg.norm(list(after.values())) / np.linalg.norm(list(r0.values()))
    assert prediction.residual_fraction_95 is not None
    assert left <= prediction.residual_fraction_95
