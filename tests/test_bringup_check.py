"""`trueturn check` (issue #19 item 2): the bring-up check, against the sim:// faults.

Each fault the virtual rig can put on the kit (tach off, missed, extra, knocked or chattering
edges, an open pickup input, noise) must fail the item that names it and only that; a
healthy rig passes everything. The judging (trueturn.bringup.judge) is checked on its own
against closed forms.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import yaml

from cli_helpers import run_cli
from trueturn.bringup.judge import (
    BringupData,
    Item,
    all_passed,
    ghost_of,
    judge,
    noise_floor_counts,
    tach_duty,
)
from trueturn.sim.scenario import scenario_dir


def _check(url: str, *extra: str) -> tuple[int, dict]:
    code, out, err = run_cli(["check", "--port", url, "--json", *extra])
    assert code in (0, 1), err
    return code, json.loads(out)


def _failed(report: dict) -> set[tuple[str, int | None, str]]:
    return {(f["item"], f["channel"], f["code"]) for f in report["findings"] if not f["passed"]}


def test_a_healthy_rig_passes_and_the_duty_is_the_scenario_mark() -> None:
    code, report = _check("sim://bench-grinder?realtime=0")
    assert code == 0 and report["passed"] and not _failed(report)
    by_item = {(f["item"], f["channel"]): f for f in report["findings"]}
    # the scenario file's own mark width (an input of the model, not of the check)
    raw = yaml.safe_load((scenario_dir() / "bench-grinder.yaml").read_text(encoding="utf-8"))
    mark_deg = raw["signals"]["tach_mark_width_deg"]
    assert by_item[("tach_duty", None)]["values"]["mark_deg"] == pytest.approx(mark_deg, abs=1.5)
    assert by_item[("dc_level", 0)]["code"] == "horizontal"
    assert {f["item"] for f in report["findings"]} == {i.value for i in Item}


@pytest.mark.parametrize(("query", "expected"), [
    ("tach=off", {("tach_rate", None, "no_edges")}),
    ("tach=missing", {("tach_edges", None, "missing")}),
    ("tach=double", {("tach_edges", None, "double")}),
    ("tach=chatter", {("tach_chatter", None, "chatter")}),
    ("floating=2", {("floating", 1, "ghost")}),
    ("floating=1", {("floating", 0, "ghost")}),
    ("noise=6", {("noise", 0, "noisy"), ("noise", 1, "noisy")}),
])
def test_each_fault_fails_the_item_that_names_it(query: str, expected: set) -> None:
    code, report = _check(f"sim://bench-grinder?realtime=0&{query}")
    assert code == 1 and not report["passed"]
    failed = _failed(report)
    if query.startswith("noise="):
        # noise=F scales every disturbance, the tach's timing jitter too
        assert expected <= failed and {f[0] for f in failed - expected} <= {
            "tach_edges", "tach_jitter"}, failed
    else:
        assert failed == expected, failed
    for f in report["findings"]:
        if not f["passed"]:
            assert f["fix"]  # every failure says what to do


def test_knocked_edges_fail_the_tach_edges() -> None:
    code, report = _check("sim://bench-grinder?realtime=0&tach=knocked")
    assert code == 1
    failed = _failed(report)
    assert ("tach_edges", None, "knocked") in failed
    assert failed <= {("tach_edges", None, "knocked"), ("tach_jitter", None, "unsteady")}


def test_words_name_the_tach_when_it_is_off() -> None:
    code, out, _ = run_cli(["check", "--port", "sim://bench-grinder?realtime=0&tach=off"])
    assert code == 1
    line = next(ln for ln in out.splitlines() if ln.startswith("FAIL"))
    assert "tach" in line and "no tach edges" in line
    assert "fix: run the machine" in out and out.rstrip().endswith("tach speed")


def test_a_resetting_board_is_checked_without_talking_into_its_bootloader() -> None:
    code, report = _check("sim://bench-grinder?realtime=0&reset_on_open=1&bootloader=old")
    assert code == 0 and report["passed"]


def test_one_pickup_kit_sets_one_channel() -> None:
    code, report = _check("sim://bench-grinder?realtime=0", "--channels", "1")
    assert code == 0
    assert not [f for f in report["findings"] if f["channel"] == 1]


def test_a_port_that_is_not_there_is_one_line_exit_2() -> None:
    code, _, err = run_cli(["check", "--port", "/dev/ttyNOPE9"])
    assert code == 2 and err.count("\n") == 1 and "no serial port" in err


# --- the judgement on its own ------------------------------------------------------------------

def test_noise_floor_is_the_white_noise_sigma_and_ignores_tones() -> None:
    rng = np.random.default_rng(4)
    rate = 4000.0
    t = np.arange(16000) / rate
    sigma = 2.0
    tones = 40 * np.sin(2 * np.pi * 59 * t) + 15 * np.sin(2 * np.pi * 120 * t + 1) \
        + 8 * np.sin(2 * np.pi * 177 * t)
    x = 512 + tones + rng.normal(0, sigma, t.size)
    # closed form: white noise of sigma has a flat one-sided PSD of 2 sigma^2 / rate
    assert noise_floor_counts(x, rate) == pytest.approx(sigma, rel=0.08)


def test_ghost_is_found_and_two_real_pickups_are_not() -> None:
    rng = np.random.default_rng(5)
    t = np.arange(12000) / 4000.0
    common = 30 * np.sin(2 * np.pi * 59 * t)  # the same machine at both bearings
    a = 338 + common + rng.normal(0, 1.5, t.size)
    b_real = 338 + 0.8 * common + rng.normal(0, 1.5, t.size)
    assert ghost_of(np.vstack([a, b_real]), 4000.0)[0] is None
    b_ghost = 0.9 * a + 0.1 * 512 + rng.normal(0, 0.2, t.size)  # copies a, converted just after
    assert ghost_of(np.vstack([a, b_ghost]), 4000.0)[0] == 1
    a_ghost = 0.9 * np.concatenate([[338.0], b_real[:-1]]) + 0.1 * 512  # copies the previous b
    assert ghost_of(np.vstack([a_ghost, b_real]), 4000.0)[0] == 0


def test_tach_duty_of_a_known_mark_on_a_speeding_up_shaft() -> None:
    tick_hz = 2_000_000
    f0, accel = 50.0, 0.8  # rev/s and rev/s^2: a steady spin-up
    turns = np.arange(0, 400)
    rise_t = (-f0 + np.sqrt(f0 ** 2 + 2 * accel * turns)) / accel  # theta(t) = f0 t + a t^2 / 2
    mark = 0.1  # the sensor sees the mark for a tenth of a turn
    fall_t = (-f0 + np.sqrt(f0 ** 2 + 2 * accel * (turns + mark))) / accel
    rising = (rise_t[:150] * tick_hz).round().astype(int).tolist()
    falling = (fall_t[170:200] * tick_hz).round().astype(int).tolist()
    after = (rise_t[230:245] * tick_hz).round().astype(int).tolist()
    assert tach_duty(rising + after, falling) == pytest.approx(mark, abs=0.002)


def test_levels_and_rails() -> None:
    rng = np.random.default_rng(6)
    n = 8000
    # 1.98 V on a 1.65 V / 0.33 V/g module is +1 g (an axis pointing up); 0 V is no pickup
    up = np.round(1.98 / 5.0 * 1024 + rng.normal(0, 1, n))
    dead = np.zeros(n)
    data = BringupData(identity={"adc_bits": 10, "adc_reference_mv": 5000, "tick_hz": 2_000_000},
                       seconds=2.0, rate_hz=4000.0, samples=np.vstack([up, dead]),
                       link={"frames_ok": 100}, board_counters={})
    found = {(f.item, f.channel): f for f in judge(data)}
    assert found[(Item.DC_LEVEL, 0)].code == "gravity_up"
    assert found[(Item.DC_LEVEL, 0)].values["g"] == pytest.approx(1.0, abs=0.02)
    assert found[(Item.DC_LEVEL, 1)].code == "at_ground" and not found[(Item.DC_LEVEL, 1)].passed
    assert found[(Item.CLIPPING, 1)].code == "clipped"
    assert found[(Item.TACH_RATE, None)].code == "no_edges"
    assert found[(Item.FLOATING, 1)].passed  # flat: no ghost of anything
    assert not all_passed(judge(data))


@pytest.mark.parametrize(("kind", "mv", "code", "passed"), [
    (1, 4950, "measured", True), (1, 3900, "low", False), (1, 6000, "high", False),
    (0, 5000, "nominal", True), (1, 3300, "low", False),
    # 2 = the AREF build's AREF pin against the bandgap (limits.usable_aref_mv 2000..5500):
    # 3298 mV is what a 3.3 V pin reads, 1101 mV an open pin (the bandgap at full scale)
    (2, 3298, "aref", True), (2, 1101, "aref_low", False), (2, 5600, "aref_high", False),
])
def test_reference_judged_from_the_measured_avcc(kind: int, mv: int, code: str,
                                                 passed: bool) -> None:
    # protocol/catalogue.yaml reference_kinds: 1 = AVCC measured against the bandgap
    data = BringupData(identity={"adc_bits": 10, "adc_reference_mv": mv,
                                 "adc_reference_kind": kind},
                       seconds=1.0, rate_hz=4000.0, samples=np.zeros((0, 0)),
                       link={"frames_ok": 10}, board_counters={})
    ref = next(f for f in judge(data) if f.item is Item.REFERENCE)
    assert (ref.code, ref.passed) == (code, passed)
