"""The guide's parts to place leave out a split part that is negligible against the
tolerance (issue #17 item 10): the engine's rule, end to end from two runs."""

from __future__ import annotations

import math

import pytest

from trueturn.angles import amplitude_phase, phasor
from trueturn.balance.iso21940 import per_plane_permissible, permissible_unbalance_gmm
from trueturn.balance.splitting import NEGLIGIBLE_SHARE_OF_TOLERANCE
from trueturn.model import MassKind, PlacedMass, Reading, Run, RunKind
from trueturn.procedure.engine import BalanceEngine
from trueturn.procedure.guide import Mode
from trueturn.sim.scenario import load_scenario
from trueturn.ui.machine import profile_from_scenario, setup_from_profile

SPEED_RPM = 1450.0


def _runs(setup, correction: complex) -> list[Run]:  # type: ignore[no-untyped-def]
    """As found and one trial with an exact linear rotor whose correction is ``correction``
    (grams at the plane's radius, a phasor): influence 1 unit/g at 0 deg at every pickup,
    R0 = -C (invented numbers for the test)."""
    plane = setup.planes[0]
    r0 = -correction
    trial = PlacedMass(plane.name, 5.0, plane.position_angles_deg[0], 0, MassKind.TRIAL)
    r1 = r0 + trial.vector_g

    def reading(z: complex) -> dict[str, Reading]:
        amp, phase = amplitude_phase(z)
        return {s: Reading(s, amp, "mm/s rms", phase, 1.0, 60, True, SPEED_RPM)
                for s in setup.sensors}

    return [Run("as found", (), reading(r0), SPEED_RPM, RunKind.AS_FOUND),
            Run("trial", (trial,), reading(r1), SPEED_RPM, RunKind.TRIAL)]


@pytest.mark.parametrize("keep", [False, True])
def test_a_part_within_a_tenth_of_the_tolerance_is_not_listed(keep: bool) -> None:
    scenario = load_scenario("shop-fan")
    profile = profile_from_scenario(scenario)
    setup = setup_from_profile(profile, Mode.ONE_PLANE)
    plane = setup.planes[0]
    pitch = plane.position_angles_deg[1] - plane.position_angles_deg[0]
    # ISO 21940-11: U_per = G m / omega at the service speed, one plane takes all of it
    allowed = per_plane_permissible(permissible_unbalance_gmm(
        setup.grade_mm_per_s, setup.speed_rpm, setup.rotor_mass_kg), 1)[0]
    limit_g = NEGLIGIBLE_SHARE_OF_TOLERANCE * allowed / plane.radius_mm
    # a correction of 20 g just past position 1: the part on position 2 is
    # m sin(a) / sin(pitch) (law of sines); choose a so it is 0.5x or 2x the limit
    target = (2.0 if keep else 0.5) * limit_g
    a = math.degrees(math.asin(target * math.sin(math.radians(pitch)) / 20.0))
    angle = plane.position_angles_deg[0] + a
    solution = BalanceEngine().solve(setup, _runs(setup, phasor(20.0, angle)), removal=False)
    parts = {p.position: p.mass_g for p in solution.parts}
    assert parts[0] == pytest.approx(20.0 * math.sin(math.radians(pitch - a))
                                     / math.sin(math.radians(pitch)), abs=0.01)
    assert (1 in parts) is keep
    if keep:
        assert parts[1] == pytest.approx(target, abs=0.01)
