"""Safety gates under random keys and rig events (issue #13): sequences tried, gates unlocked
while the rotor turned. The same light rig as the property test (tests/safety_fuzz.py)."""

from __future__ import annotations

import random
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))

from common import Row  # noqa: E402
from safety_fuzz import WEIGHTED_ACTIONS, run_sequence  # noqa: E402

SEQUENCES = 10_000


def rows() -> list[Row]:
    rng = random.Random(20261202)
    unlocked = 0
    gates_passed = 0
    runs = 0
    started = time.perf_counter()
    for k in range(SEQUENCES):
        actions = [rng.choice(WEIGHTED_ACTIONS) for _ in range(rng.randint(10, 80))]
        rig = run_sequence(k, actions)
        unlocked += rig.unlocked_while_turning
        gates_passed += len(rig.proc.confirmations)
        runs += len(rig.proc.runs)
    wall = time.perf_counter() - started
    return [
        Row("safety: random key/rig sequences tried", str(SEQUENCES), ">= 10000",
            SEQUENCES >= 10_000),
        Row("safety: hands-on gates unlocked while turning > 1 rpm", str(unlocked), "0",
            unlocked == 0),
        Row("safety: confirmations given at proven standstill (all sequences)",
            str(gates_passed), "-", None),
        Row("safety: runs recorded (all sequences)", str(runs), "-", None),
        Row("safety: fuzz wall time", f"{wall:.0f} s", "-", None),
    ]
