"""The support fit held to a tap (bump) test's standstill modes
(trueturn.balance.support_fit ``standstill``, model_first.predict_influence
``standstill``).

Checks against the outside world:
- the model's standstill frequencies against an independent implementation: the
  simulator's undamped natural frequencies (trueturn.sim.rotor, ``eig(M^-1 K)``; the
  eigenvalue problem of K and M, any vibration text, e.g. Rao, *Mechanical Vibrations*,
  from memory), to round-off;
- the prediction's honesty on stiff mounts, whose coast-down alone cannot tell the
  stiffness: with the tap's modes the true coefficients lie within the prediction's 95 %
  spreads, and over random rotors of the simulator (nonlinear mounts) the share of the
  as-found 1x the model's own correction truly leaves exceeds its stated 95 % bound no
  more often than the binomial spread of 5 % allows.
"""

from __future__ import annotations

import numpy as np

from test_balance_support_fit import _curve, _geometry, _layout, _placements, _rotor
from trueturn.balance.model_first import Distrust, SupportResonance, predict_influence
from trueturn.balance.support_fit import StandstillMode, standstill_frequencies_hz
from trueturn.sim import Mass, PickupMount, RigidRotor

#: a mode counts as found on a pickup when a tap there starts it at this share of the
#: strongest (as bench/bench_balance.py's tap_test)
SEEN_SHARE = 0.05


def _tap(rotor: RigidRotor, rng: np.random.Generator, lowest_only: bool = False,
         rel_err: float = 0.01) -> dict[str, list[StandstillMode]]:
    """What a tap at each pickup finds: the simulator's modes at rest that pickup sees,
    each frequency with a ``rel_err`` (1 sigma) error and that standard error."""
    out = {}
    for p in rotor.pickups:
        modes = rotor.modes_at_rest(struck=p.name)
        strongest = max(m.accel_per_impulse[p.name] for m in modes)
        seen = [m for m in modes if m.accel_per_impulse[p.name] >= SEEN_SHARE * strongest]
        out[p.name] = [StandstillMode(
            m.natural_frequency_hz * (1 + rel_err * float(rng.normal())),
            rel_err * m.natural_frequency_hz) for m in seen[: 1 if lowest_only else None]]
    return out


def test_the_standstill_frequencies_are_the_simulators() -> None:
    # the same eigenproblem written twice: the simulator's eig(M^-1 K) over all four DOFs
    # and the fit's per-direction generalised problem, axes along/across the first pickup
    rng = np.random.default_rng(21)
    rotor, _ = _rotor(rng, False, 2)
    rotor.pickups = [PickupMount("inboard", 0, 90.0), PickupMount("outboard", 1, 0.0)]
    b0, b1 = rotor.bearings
    theta = np.log([b0.stiffness_v_n_per_m, b0.stiffness_h_n_per_m, b1.stiffness_v_n_per_m,
                    b1.stiffness_h_n_per_m, 0.03, rotor.transverse_inertia_kg_m2,
                    rotor.polar_inertia_kg_m2])
    along, across = standstill_frequencies_hz(theta, _geometry(rotor))
    np.testing.assert_allclose(np.sort(np.concatenate([along, across])),
                               rotor.natural_frequencies_hz(), rtol=1e-9)
    # along the first (vertical) pickup: _rotor's vertical supports are 0.8-0.9 of the
    # horizontal ones, so the along modes lie below the across ones
    assert along.max() < across.max()


def test_a_tap_pins_a_stiff_mounts_coefficients() -> None:
    # one plane near the centre of mass on supports two to four times stiffer than the
    # speed needs: the coast-down alone leaves the stiffness open (too uncertain, a band of
    # hundreds of per cent); the tap's modes pin it: the true coefficients lie within a
    # band of tens of per cent. Still not trusted: the fit's model error counts the quiet
    # low-speed points' noise (model_first.FIT_MODEL_REL_SIGMA or the relative misfit)
    rng = np.random.default_rng(1)
    rotor, speed = _rotor(rng, False, 1, 0.01)
    masses = [Mass("disc", 8.0, 30.0)]
    r0 = rotor.response_1x(speed, masses)
    curve = _curve(rotor, speed, masses, rng)
    blind = predict_influence(_layout(rotor), _placements(rotor), speed, as_found=r0,
                              curve=curve)
    assert not blind.trusted and Distrust.TOO_UNCERTAIN in blind.distrust
    assert np.all(blind.magnitude_rel_95 > 1.0)
    tapped = predict_influence(_layout(rotor), _placements(rotor), speed, as_found=r0,
                               curve=curve, standstill=_tap(rotor, rng))
    assert np.all(tapped.magnitude_rel_95 < 0.6)
    ratio = rotor.influence_matrix(speed) / tapped.matrix
    assert np.all(np.abs(np.abs(ratio) - 1) <= tapped.magnitude_rel_95)
    assert np.all(np.abs(np.degrees(np.angle(ratio))) <= tapped.phase_95_deg)


def test_a_resonance_the_tap_found_is_not_unseen() -> None:
    # model_first._unseen_resonances: a sweep whose peak finding saw nothing, a fit that
    # puts a mode in the sweep's span (a soft mount) - refused, unless a tap found every
    # standstill mode of that direction; a tap that found only the lowest does not excuse
    rng = np.random.default_rng(5)
    rotor, speed = _rotor(rng, True, 2)
    masses = [Mass("left", 3.0, 40.0), Mass("right", 2.0, 250.0)]
    curve = _curve(rotor, speed, masses, rng, 0.01)
    none_seen: dict[str, list[SupportResonance]] = {p.name: [] for p in rotor.pickups}
    full = predict_influence(_layout(rotor), _placements(rotor), speed, none_seen,
                             curve=curve, standstill=_tap(rotor, rng))
    assert Distrust.UNSEEN_RESONANCE not in full.distrust
    lowest = predict_influence(_layout(rotor), _placements(rotor), speed, none_seen,
                               curve=curve, standstill=_tap(rotor, rng, lowest_only=True))
    assert Distrust.UNSEEN_RESONANCE in lowest.distrust and not lowest.trusted


def test_with_a_tap_the_true_coefficients_stay_within_the_spreads() -> None:
    # random stiff rotors (one and two planes, nonlinear mounts), each with a tap (half the
    # time only the lowest mode per pickup): the fit held to the tap's modes does not
    # overstate what it knows: the true coefficients stay within the prediction's 95 %
    # spreads. Counted per rotor (all its coefficients inside): at a 5 % miss rate, 3 or
    # more misses of 10 have probability 1 % (binomial)
    rng = np.random.default_rng(77)
    fitted = missed = 0
    for k in range(10):
        rotor, speed = _rotor(rng, False, 1 + k % 2, float(rng.uniform(0.005, 0.03)))
        masses = [Mass(p.name, float(rng.uniform(2, 20)), float(rng.uniform(0, 360)))
                  for p in rotor.planes]
        r0 = rotor.response_1x(speed, masses)
        curve = _curve(rotor, speed, masses, rng)
        tapped = predict_influence(_layout(rotor), _placements(rotor), speed, as_found=r0,
                                   curve=curve, standstill=_tap(
                                       rotor, rng, lowest_only=bool(rng.uniform() < 0.5)))
        if not np.all(np.isfinite(tapped.matrix)):
            continue   # a curve too quiet to fit: no fit, the tap unused
        fitted += 1
        ratio = rotor.influence_matrix(speed) / tapped.matrix
        missed += not (np.all(np.abs(np.abs(ratio) - 1) <= tapped.magnitude_rel_95)
                       and np.all(np.abs(np.degrees(np.angle(ratio))) <= tapped.phase_95_deg))
    assert fitted >= 7, fitted
    assert missed <= 2, (fitted, missed)
