"""Tach faults end to end (issue: reliability): missing edges, double edges from a dirty mark,
timing jitter and no tach at all, from protocol v1 bytes through `trueturn analyze`.

Each fault must be detected, flagged in the reading, left out of the averages and explained
in a line a person understands. Ground truth is the synthetic signal the frames were built
from (trueturn.dsp.synthetic); invented numbers, used only to make the faults.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from cli_helpers import run_cli
from trueturn.dsp.analysis import analyze_capture
from trueturn.dsp.shaft import TachTracker
from trueturn.dsp.synthetic import OrderComponent, SyntheticRun, synthesize
from trueturn.link.codec import Message, StreamDecoder, encode_frame

VOLTS_PER_COUNT = 5.0 / 1024  # 10-bit ADC, 5 V reference (ATmega328P datasheet transfer)
SLACK = 1.5  # as in test_dsp_meter: 1.5 x the 95 % radius fails 0.1 % of correct estimates
RUN = SyntheticRun(speed_rpm=2700.0, duration_s=4.0, rate_hz=4000, channels=2,
                   orders=((OrderComponent(1, 80.0, 40.0),), (OrderComponent(1, 50.0, 250.0),)),
                   noise_counts=2.0, seed=11)
PERIOD_TICKS = 2_000_000 * 60 / 2700



def _rewrite(raw: bytes, tach) -> bytes:
    """Re-frame a stream with each tach message passed through ``tach(edge_number, values)``
    (returns new values, or None: the sensor never saw that edge). The board's edge counter
    counts only edges it saw, so a sensor miss is not a link loss."""
    out = bytearray()
    seen = 0
    edge = 0
    seq = 0
    for msg in StreamDecoder().feed(raw):
        assert isinstance(msg, Message)
        values = dict(msg.values)
        if msg.name == "tach":
            values = tach(edge, values)
            edge += 1
            if values is None:
                continue
            values["edge_count"] = seen & 0xFFFF
            seen += 1
        out += encode_frame(msg.name, seq & 0xFF, values)
        seq += 1
    return bytes(out)


def _truth(channel: int) -> complex:
    comp = RUN.orders[channel][0]
    return comp.amplitude_counts * VOLTS_PER_COUNT * complex(
        math.cos(math.radians(comp.phase_deg)), math.sin(math.radians(comp.phase_deg)))


def _analyze_file(tmp_path: Path, raw: bytes) -> tuple[dict, str]:
    path = tmp_path / "faulty.frames"
    path.write_bytes(raw)
    code, out, err = run_cli(["analyze", str(path), "--json"])
    assert code == 0, err
    code, table, err = run_cli(["analyze", str(path)])
    assert code == 0, err
    return json.loads(out), table


def _check_truth(raw: bytes) -> None:
    for r in analyze_capture(raw).readings:
        assert abs(r.phasor - _truth(r.channel)) <= SLACK * r.confidence_radius, r


def test_clean_stream_has_no_tach_warning(tmp_path) -> None:
    raw, _ = synthesize(RUN)
    data, _ = _analyze_file(tmp_path, raw)
    assert not [w for w in data["warnings"] if "tach" in w]
    assert all(p["steady"] for p in data["pickups"])


def test_missed_edges_are_flagged_and_their_revolutions_left_out(tmp_path) -> None:
    clean, _ = synthesize(RUN)
    missed = {30, 31, 70}
    raw = _rewrite(clean, lambda k, v: None if k in missed else v)
    data, table = _analyze_file(tmp_path, raw)
    base, _ = _analyze_file(tmp_path, clean)
    assert any("3 tach edge(s) missed; those revolutions were left out" in w
               for w in data["warnings"])
    assert "tach edge(s) missed" in table  # the readable form says it too
    # a run of missed edges hides one long interval: each gap costs the revolutions across it
    lost = base["pickups"][0]["revolutions"] - data["pickups"][0]["revolutions"]
    assert 5 <= lost <= 6
    assert data["link"]["tach_edges_lost"] == 0  # a sensor miss, not a lost frame
    _check_truth(raw)
    for r in analyze_capture(raw).readings:  # flagged in the reading itself
        assert any("missed" in w for w in r.warnings)


def test_double_edges_from_a_dirty_mark_are_ignored(tmp_path) -> None:
    raw, _ = synthesize(SyntheticRun(**{**RUN.__dict__,
                                        "double_edges_after": tuple(range(10, 160, 9))}))
    data, _ = _analyze_file(tmp_path, raw)
    assert any("17 extra tach edge(s) ignored" in w for w in data["warnings"])
    clean, _ = _analyze_file(tmp_path, synthesize(RUN)[0])
    assert data["pickups"][0]["revolutions"] == clean["pickups"][0]["revolutions"]
    _check_truth(raw)


def test_edges_knocked_early_or_late_are_left_out_and_explained(tmp_path) -> None:
    # A smudge on the mark: one edge in ten comes 5-15 degrees early or late.
    rng = np.random.default_rng(5)
    shifts = {k: float(rng.choice([-1, 1]) * rng.uniform(5, 15)) for k in range(8, 170, 10)}

    def smudge(k: int, values: dict) -> dict:
        shift = int(round(shifts.get(k, 0.0) / 360 * PERIOD_TICKS))
        return {**values, "tick": (values["tick"] + shift) % (1 << 32)}

    clean, _ = synthesize(RUN)
    raw = _rewrite(clean, smudge)
    data, table = _analyze_file(tmp_path, raw)
    base, _ = _analyze_file(tmp_path, clean)
    uneven = [w for w in data["warnings"] if "tach timing is uneven" in w]
    assert len(uneven) == 1 and "reflective mark" in uneven[0] and "tach timing" in table
    # both revolutions that share a knocked edge are left out
    left_out = base["pickups"][0]["revolutions"] - data["pickups"][0]["revolutions"]
    assert left_out == int(uneven[0].split(" revolution(s) left out")[0].split(", ")[-1])
    assert 2 * len(shifts) - 2 <= left_out <= 2 * len(shifts) + 2
    _check_truth(raw)


@pytest.mark.parametrize(("sigma_deg", "warned"), [(0.05, False), (2.0, True), (6.0, True)])
def test_white_jitter_is_measured_and_only_real_jitter_warned(tmp_path, sigma_deg: float,
                                                              warned: bool) -> None:
    rng = np.random.default_rng(9)
    sigma_ticks = sigma_deg / 360 * PERIOD_TICKS
    raw = _rewrite(synthesize(RUN)[0], lambda k, v: {
        **v, "tick": int(round(v["tick"] + rng.normal(0, sigma_ticks))) % (1 << 32)})
    data, _ = _analyze_file(tmp_path, raw)
    text = [w for w in data["warnings"] if "tach timing is uneven" in w]
    assert bool(text) == warned
    if warned:
        said = float(text[0].split("scatter by ")[1].split(" deg")[0])
        assert said == pytest.approx(sigma_deg, rel=0.3)  # the estimate names the real scatter
        assert not all(p["steady"] for p in data["pickups"])  # never "ready" on a bad tach


def test_no_tach_at_all_is_one_line_naming_the_tach(tmp_path) -> None:
    raw = _rewrite(synthesize(RUN)[0], lambda k, v: None)
    path = tmp_path / "notach.frames"
    path.write_bytes(raw)
    code, out, err = run_cli(["analyze", str(path)])
    assert code == 2 and out == "" and err.count("\n") == 1
    assert "no 1x reading could be made" in err and "tach sensor" in err


def test_steady_spin_up_and_coast_down_are_not_taken_for_jitter() -> None:
    # 1 % shorter, then 0.5 % longer revolution by revolution: a smooth speed change
    periods = np.concatenate([60_000 * 0.99 ** np.arange(120),
                              60_000 * 0.99 ** 119 * 1.005 ** np.arange(120)])
    edges = np.concatenate([[0], np.cumsum(np.round(periods))]).astype(int).tolist()
    tracker = TachTracker()
    revs = [r for t in edges if (r := tracker.add_edge(t))]
    assert tracker.uneven_revolutions == 0 and not tracker.uneven and len(revs) > 200
    assert tracker.timing_scatter_deg < 0.25  # half the meter's 0.5 deg warning level


def test_live_meter_leaves_out_both_revolutions_around_a_knocked_edge() -> None:
    # Live use asks for readings after every update; the newest revolution waits for the
    # next edge, so the one before a late edge is still left out.
    from trueturn.dsp.meter import LiveAnalyzer

    knocked = {20: 10.0, 45: -12.0, 70: 8.0}
    raw = _rewrite(synthesize(RUN)[0], lambda k, v: {
        **v, "tick": (v["tick"] + int(round(knocked.get(k, 0.0) / 360 * PERIOD_TICKS)))
        % (1 << 32)})
    meter = LiveAnalyzer()
    for msg in StreamDecoder().feed(raw):
        if meter.feed(msg):
            meter.readings()
    assert meter.revs_uneven == 2 * len(knocked)
    reading = meter.readings()[0]
    assert any("tach timing is uneven" in w for w in reading.warnings)
    assert abs(reading.phasor - _truth(0)) <= SLACK * reading.confidence_radius


@pytest.mark.parametrize(("fault", "needle"), [
    ("missing", "tach edge(s) missed"),
    ("double", "extra tach edge(s) ignored"),
    ("knocked", "tach timing is uneven"),
])
def test_sim_tach_faults_end_to_end(tmp_path, fault: str, needle: str) -> None:
    # sim://...&tach=F: the virtual board's tach misbehaves on about one edge in ten; the
    # signals are the same as without the fault (its own random stream), so the 1x must agree
    # with a clean recording of the same seed within the readings' confidence.
    results = {}
    for name in ("none", fault):
        cap = tmp_path / f"{name}.cap"
        code, _, err = run_cli(["record", "--port", f"sim://bench-grinder?realtime=0&tach={name}",
                                "--seconds", "4", "-o", str(cap), "--quiet"])
        assert code == 0, err
        code, out, err = run_cli(["analyze", str(cap), "--json", "--unit", "volts"])
        assert code == 0, err
        results[name] = json.loads(out)
    assert not [w for w in results["none"]["warnings"] if "tach" in w]
    assert any(needle in w for w in results[fault]["warnings"])
    for clean, faulty in zip(results["none"]["pickups"], results[fault]["pickups"], strict=True):
        a = clean["amplitude"] * np.exp(1j * np.radians(clean["phase_deg"]))
        b = faulty["amplitude"] * np.exp(1j * np.radians(faulty["phase_deg"]))
        assert abs(a - b) <= SLACK * (clean["confidence_radius"] + faulty["confidence_radius"])
        if fault != "double":  # extra edges cost nothing; the others cost revolutions
            assert faulty["revolutions"] < clean["revolutions"]


def test_sim_without_tach_is_refused_naming_the_tach(tmp_path) -> None:
    cap = tmp_path / "off.cap"
    assert run_cli(["record", "--port", "sim://shop-fan?realtime=0&tach=off", "--seconds", "2",
                    "-o", str(cap), "--quiet"])[0] == 0
    code, _, err = run_cli(["analyze", str(cap)])
    assert code == 2 and err.count("\n") == 1 and "tach sensor" in err
    code, _, err = run_cli(["record", "--port", "sim://shop-fan?tach=sometimes", "--seconds",
                            "1", "-o", str(tmp_path / "x.cap")])
    assert code == 2 and "tach must be one of" in err


@pytest.mark.parametrize("pattern", [(10.0, 10.0), (12.0, -9.0), (-8.0, -14.0, -6.0)])
def test_runs_of_knocked_edges_are_cleaned_and_the_average_stays_in_its_circle(
        pattern: tuple[float, ...]) -> None:
    # Issue #14 item 11: a knocked mark may knock two or three edges in a row (same way or
    # either way). Every revolution that starts or ends at a knocked edge is left out (a run
    # of m knocked edges touches m + 1 revolutions), the kept speeds agree (no "speed
    # varies"), and the 50-revolution average lands inside its own 95 % circle around the
    # truth (SLACK as everywhere: 1.5 x the radius fails 0.1 % of correct estimates).
    starts = (60, 75, 90, 105, 120, 135)  # within the last 50 revolutions and before them
    shifts = {s + i: deg for s in starts for i, deg in enumerate(pattern)}
    raw = _rewrite(synthesize(RUN)[0], lambda k, v: {
        **v, "tick": (v["tick"] + int(round(shifts.get(k, 0.0) / 360 * PERIOD_TICKS)))
        % (1 << 32)})
    tracker = TachTracker()
    for msg in StreamDecoder().feed(raw):
        if isinstance(msg, Message) and msg.name == "tach":
            tracker.add_edge(msg["tick"])
    tracker.close_run()
    assert tracker.uneven_revolutions == len(starts) * (len(pattern) + 1)
    result = analyze_capture(raw, revs=50)
    assert not [f for f in result.findings if f.code.value == "speed_varies"]
    uneven = next(f for f in result.findings if f.code.value == "tach_uneven")
    assert uneven.count == len(starts) * (len(pattern) + 1)
    for r in result.readings:
        assert r.revolutions == 50 and r.steady, r.warnings
        assert abs(r.phasor - _truth(r.channel)) <= SLACK * r.confidence_radius, r


def test_chatter_the_board_ignored_is_said_and_the_reading_kept(tmp_path: Path) -> None:
    """A tach that chatters is cleaned by the board's hold-off (status.tach_suppressed,
    SPEC): analyze keeps the reading and says so, with the count, so the person can fix the
    sensor; a clean tach says nothing of it."""
    found = {}
    for name, extra in (("clean", ""), ("chatter", "&tach=chatter")):
        cap = tmp_path / f"{name}.cap"
        code, _, err = run_cli(["record", "--port", f"sim://bench-grinder?realtime=0{extra}",
                                "--seconds", "4", "-o", str(cap), "--quiet"])
        assert code == 0, err
        code, text, err = run_cli(["analyze", "--json", str(cap)])
        assert code == 0, err
        found[name] = json.loads(text)
    chatter = [f for f in found["chatter"]["findings"]
               if f["code"] == "tach_chatter_suppressed"]
    assert len(chatter) == 1 and chatter[0]["count"] > 0
    assert not any(f["code"].startswith("tach_c") for f in found["clean"]["findings"])
    for a, b in zip(found["clean"]["pickups"], found["chatter"]["pickups"], strict=True):
        assert b["steady"] == a["steady"] and abs(b["phase_deg"] - a["phase_deg"]) < 1.0
