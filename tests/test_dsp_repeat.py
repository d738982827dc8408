"""Is the 1x the same after a stop and restart? (issue #22: 1x phase repeatable between starts)

The rule is common practice, no source: a steady unbalance gives the same 1x, within a few
degrees, after a restart; a 1x that moves between starts points at a part that shifts, a rub
or a thermal bow. Checked here against the closed form of the chord between two phasors of
equal length (``2 sin(d/2)``), against the sum of the two 95 % circles for independent
estimates, and on the simulator: the bench grinder (plain unbalance) repeats, the saw arbor
with a loose flange (invented demo scenario ``loose-hub``) does not.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from cli_helpers import run_cli
from trueturn.dsp.analysis import compare_starts
from trueturn.dsp.findings import Code, describe
from trueturn.dsp.unbalance import (
    REPEAT_DIFFERENCE_MAX,
    REPEAT_SPEED_TOLERANCE,
    repeat_evidence,
    same_speed,
)
from trueturn.model import Reading
from trueturn.sim import load_scenario
from trueturn.sim.board import BoardOptions, VirtualBoard


def _reading(amplitude: float, phase_deg: float | None, radius: float | None = 0.001,
             unit: str = "mm/s rms", name: str = "p") -> Reading:
    return Reading(name, amplitude, unit, phase_deg, confidence_radius=radius)  # type: ignore[arg-type]


def test_a_few_degrees_repeat_ten_do_not():
    # closed form: equal amplitudes d degrees apart differ by 2 sin(d/2) of the 1x; the
    # rule allows 0.1 (common practice: "within a few degrees"), i.e. 5.7 degrees
    limit_deg = math.degrees(2 * math.asin(REPEAT_DIFFERENCE_MAX / 2))
    assert limit_deg == pytest.approx(5.73, abs=0.01)
    for shift, ok in ((0.0, True), (3.0, True), (5.5, True), (6.0, False), (10.0, False),
                      (-40.0, False)):
        f = repeat_evidence(_reading(2.0, 350.0), _reading(2.0, (350.0 + shift) % 360))
        assert f is not None and f.code is Code.PHASE_REPEATABLE
        assert f.details["ok"] is ok, shift
        assert f.details["difference"] == pytest.approx(2 * math.sin(math.radians(abs(shift)) / 2),
                                                        abs=1e-4)
        assert f.details["phase_change_deg"] == pytest.approx(shift, abs=0.05)


def test_amplitude_change_counts_too():
    # same phase, amplitude 8 % or 15 % apart: the vector difference is the amplitude change
    assert repeat_evidence(_reading(1.0, 90.0), _reading(1.08, 90.0)).details["ok"]
    worse = repeat_evidence(_reading(1.0, 90.0), _reading(1.15, 90.0))
    assert not worse.details["ok"] and worse.details["amplitude_ratio"] == pytest.approx(1.15)
    assert "moved between starts" in describe(worse) and "balancing may not help" in describe(worse)


def test_the_95_percent_circles_widen_the_limit_or_leave_it_undecided():
    # independent estimates: their difference lies within the sum of the two 95 % circles
    # (at least 95 %): a 10 degree change with circles of 0.05 each (sum 0.1 of the 1x) passes
    f = repeat_evidence(_reading(1.0, 0.0, 0.05), _reading(1.0, 10.0, 0.05))
    assert f.details["ok"] and f.details["limit"] == pytest.approx(REPEAT_DIFFERENCE_MAX + 0.1)
    # circles wider than the rule itself: it cannot tell, and says nothing rather than "ok"
    assert repeat_evidence(_reading(1.0, 0.0, 0.06), _reading(1.0, 1.0, 0.06)) is None
    assert repeat_evidence(_reading(1.0, None), _reading(1.0, 1.0)) is None
    assert repeat_evidence(_reading(1.0, 0.0, None), _reading(1.0, 1.0)) is None
    assert repeat_evidence(_reading(0.0, 0.0), _reading(0.0, 1.0)) is None
    with pytest.raises(ValueError, match="one unit"):
        repeat_evidence(_reading(1.0, 0.0), _reading(1.0, 0.0, unit="g pk"))


def test_same_speed_within_three_percent():
    # common practice, no source: a rotor's 1x changes with speed (most near a resonance)
    assert same_speed(3000.0, 3000.0 * (1 + 0.9 * REPEAT_SPEED_TOLERANCE))
    assert not same_speed(3000.0, 3000.0 * (1 + 1.2 * REPEAT_SPEED_TOLERANCE))
    assert not same_speed(math.nan, 3000.0) and not same_speed(0.0, 0.0)


def test_the_loose_flange_settles_anew_at_every_start_and_only_then():
    # the simulator's loose part (invented scenario): a new angle after a stop and restart;
    # within a run and on machines without loose parts, nothing moves
    board = VirtualBoard(load_scenario("loose-hub"), BoardOptions(seed=4))
    first = board.exact_response_1x()
    assert board.exact_response_1x() == first
    board.motor_start()  # already running: nothing settles
    assert board.exact_response_1x() == first
    board.motor_stop()
    board.advance_s(20.0)
    assert board.standstill
    board.motor_start()
    assert board.exact_response_1x() != first
    grinder = VirtualBoard(load_scenario("bench-grinder"), BoardOptions(seed=4))
    before = grinder.exact_response_1x()
    grinder.motor_stop()
    grinder.advance_s(30.0)
    grinder.motor_start()
    assert grinder.exact_response_1x() == before


def _record(tmp_path: Path, scenario: str, seed: int) -> Path:
    cap = tmp_path / f"{scenario}-{seed}.cap"
    code, _, err = run_cli(["record", "--port", f"sim://{scenario}?realtime=0&seed={seed}",
                            "--seconds", "6", "-o", str(cap)])
    assert code == 0, err
    return cap


def test_analyze_two_starts_of_the_loose_flange_says_balancing_may_not_help(tmp_path):
    # two starts of the same machine as found (a new seed: another start of the simulator)
    first, second = _record(tmp_path, "loose-hub", 1), _record(tmp_path, "loose-hub", 7)
    code, out, err = run_cli(["analyze", str(first), "--json"])
    assert code == 0, err
    alone = json.loads(out)
    assert alone["unbalance"]["verdict"] == "unbalance_likely"  # one start cannot tell
    assert alone["second_start"] is None
    code, out, err = run_cli(["analyze", str(first), str(second), "--json"])
    assert code == 0, err
    both = json.loads(out)
    assert both["unbalance"]["verdict"] == "balancing_may_not_help"
    failing = [e for e in both["unbalance"]["evidence"] if not e["ok"]]
    assert [e["code"] for e in failing] == ["phase_repeatable"]
    assert abs(failing[0]["phase_change_deg"]) > 6
    assert failing[0]["difference"] > failing[0]["limit"]
    assert "moved between starts" in failing[0]["words"]
    assert both["second_start"]["pickups"][0]["name"] == "pulley-bearing"
    code, text, _ = run_cli(["analyze", str(first), str(second)])
    assert "second start:" in text and "1x not the same after a restart" in text


def test_analyze_two_starts_of_the_grinder_repeats(tmp_path):
    first, second = _record(tmp_path, "bench-grinder", 1), _record(tmp_path, "bench-grinder", 2)
    code, out, err = run_cli(["analyze", str(first), str(second), "--json"])
    assert code == 0, err
    got = json.loads(out)
    assert got["unbalance"]["verdict"] == "unbalance_likely"
    repeat = [e for e in got["unbalance"]["evidence"] if e["code"] == "phase_repeatable"]
    assert len(repeat) == 2 and all(e["ok"] for e in repeat)
    assert got["second_start"]["not_compared"] == []


def test_two_starts_at_different_speeds_are_refused_in_one_line(tmp_path):
    grinder, arbor = _record(tmp_path, "bench-grinder", 1), _record(tmp_path, "loose-hub", 1)
    code, out, err = run_cli(["analyze", str(grinder), str(arbor)])
    assert code == 2 and out == ""
    assert "same speed" in err and err.count("\n") == 1


def test_compare_starts_keeps_the_first_start_and_adds_the_rule(tmp_path):
    from trueturn.dsp.analysis import analyze_capture
    from trueturn.link.capture import read_capture

    runs = [analyze_capture(read_capture(_record(tmp_path, "loose-hub", s))[1])
            for s in (1, 2)]
    both = compare_starts(*runs)
    assert both.readings == runs[0].readings and both.severity == runs[0].severity
    assert both.second_start is not None and both.second_start.readings == runs[1].readings
    assert both.unbalance[0].code is Code.BALANCING_MAY_NOT_HELP
    assert both.unbalance[0].details["because"] == ["phase_repeatable"]
    assert both.unbalance[1:-1] == runs[0].unbalance[1:]
