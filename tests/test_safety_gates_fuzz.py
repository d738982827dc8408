"""Property (issue #13): whatever keys are pressed and whatever the rig does, no hands-on step
is unlocked while the rotor turns faster than 1 rpm. Random sequences of the person's keys
and the rig's events (tach dark, tach flicker, motor on/off, link lost, overspeed, board
restart) drive the procedure through tests/safety_fuzz.py (hypothesis, PyPI).
"""

from __future__ import annotations

from hypothesis import given, settings
from hypothesis import strategies as st

from safety_fuzz import WEIGHTED_ACTIONS, run_sequence


@settings(max_examples=300, deadline=None, derandomize=True)
@given(seed=st.integers(0, 2**16), actions=st.lists(st.sampled_from(WEIGHTED_ACTIONS), max_size=60))
def test_no_hands_on_step_unlocks_while_the_rotor_turns(seed: int, actions: list[str]) -> None:
    rig = run_sequence(seed, actions)
    assert rig.unlocked_while_turning == 0


def test_the_fuzz_rig_can_reach_the_gates() -> None:
    # The property is not empty: a plain sequence unlocks gates at standstill and gets runs.
    rig = run_sequence(1, ["wait_long"] * 6 + ["tick", "tick", "enter", "tick", "tick", "tick",
                                               "tick", "enter", "arm", "wait_long", "enter"])
    assert rig.proc.confirmations and rig.proc.runs
    assert rig.unlocked_while_turning == 0
