"""Scenario files, the emulator signal spec, and the `sim` / `record` commands."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
import yaml

from trueturn.cli.main import main
from trueturn.dsp.analysis import analyze_capture
from trueturn.errors import UserError
from trueturn.link.capture import read_capture
from trueturn.sim import exact_1x, list_scenarios, load_scenario, signal_spec
from trueturn.sim.scenario import scenario_dir

REQUIRED = ["bench-grinder", "jointer-head", "lathe-faceplate", "shop-fan"]


def test_required_scenarios_exist_and_say_they_are_invented() -> None:
    assert set(REQUIRED) <= set(list_scenarios())
    for name in list_scenarios():
        text = (scenario_dir() / f"{name}.yaml").read_text(encoding="utf-8")
        assert "INVENTED" in text
        sc = load_scenario(name)
        assert sc.name == name
        assert len(sc.rotor.pickups) == len(sc.electrical) >= 1
        # Sensor stays inside a +/-3 g part's range with margin at the as-found unbalance.
        for e in exact_1x(sc):
            assert 0.05 < e.amplitude_g < 2.5, (name, e)


def test_scenarios_have_the_features_the_issue_asks_for() -> None:
    grinder = load_scenario("bench-grinder")
    assert len(grinder.rotor.planes) == 2 and grinder.motor.mains_hz == 60
    assert grinder.motor.poles == 2 and grinder.motor.kind == "induction"
    # Induction motor: below synchronous speed by the slip (3600 rpm for 2 poles at 60 Hz).
    assert 3400 < grinder.speed_rpm < 3600
    fan = load_scenario("shop-fan")
    assert len(fan.rotor.planes) == 1 and fan.balancing_planes["blades"].layout.positions == 6
    assert fan.balancing_planes["blades"].position_angles_deg == (0, 60, 120, 180, 240, 300)
    lathe = load_scenario("lathe-faceplate")
    assert lathe.motor.kind == "variable" and lathe.motor.speed_range_rpm == (600, 1500)
    assert lathe.motor.mains_hz == 50
    jointer = load_scenario("jointer-head")
    assert jointer.motor.pulley_ratio != 1 and len(jointer.rotor.planes) == 2
    assert all(p.layout.positions == 4 for p in jointer.balancing_planes.values())
    assert any(t.order is not None and not float(t.order).is_integer()
               for t in jointer.signals.tones)  # the belt: a non-synchronous component


def test_a_copied_and_edited_scenario_loads_by_path(tmp_path: Path) -> None:
    raw = yaml.safe_load((scenario_dir() / "shop-fan.yaml").read_text(encoding="utf-8"))
    raw["as_found"] = [{"plane": "blades", "mass_g": 4.0, "angle_deg": 10.0}]
    path = tmp_path / "my-fan.yaml"
    path.write_text(yaml.safe_dump(raw), encoding="utf-8")
    mine = load_scenario(str(path))
    stock = load_scenario("shop-fan")
    ratio = exact_1x(mine)[0].amplitude_v / exact_1x(stock)[0].amplitude_v
    assert ratio == pytest.approx(2.0, rel=0.05)  # twice the unbalance (nonlinearity aside)


@pytest.mark.parametrize(("text", "needle"), [
    ("rotor: [unclosed", "bad.yaml:2: not valid YAML"),
    ("- just a list", "bad.yaml:1: (top): must be a mapping of fields"),
    ("name: x\nrotor: {mass_kg: 1}\n", "bad.yaml:2: rotor.transverse_inertia_kg_m2: missing field"),
    ("rotor: {mass_kg: 1, transverse_inertia_kg_m2: 0.1}\nbearings: []\nplanes: []\n"
     "pickups: []\nmotor: {mains_hz: 60}\n", "bad.yaml:2: bearings: expected a non-empty list"),
    ("rotor: {mass_kg: 1, transverse_inertia_kg_m2: 0.1, mass_g: 3}\n",
     "bad.yaml:1: rotor.mass_g: unknown field"),
])
def test_bad_scenario_files_give_one_line(tmp_path: Path, text: str, needle: str) -> None:
    path = tmp_path / "bad.yaml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(UserError) as info:
        load_scenario(str(path))
    assert needle in str(info.value) and "\n" not in str(info.value)


def test_bad_values_in_a_copied_scenario(tmp_path: Path) -> None:
    raw = yaml.safe_load((scenario_dir() / "bench-grinder.yaml").read_text(encoding="utf-8"))
    raw["motor"]["mains_hz"] = 55
    path = tmp_path / "odd.yaml"
    path.write_text(yaml.safe_dump(raw), encoding="utf-8")
    text = path.read_text(encoding="utf-8")
    line = 1 + text.splitlines().index("  mains_hz: 55")
    with pytest.raises(UserError, match=rf"odd.yaml:{line}: motor.mains_hz: must be 50 or 60"):
        load_scenario(str(path))
    raw["motor"]["mains_hz"] = 60
    raw["as_found"][0]["plane"] = "middle"
    path.write_text(yaml.safe_dump(raw), encoding="utf-8")
    with pytest.raises(UserError, match=r"as_found\[0\].plane: plane 'middle' is not one of"):
        load_scenario(str(path))
    raw["as_found"][0]["plane"] = "left-wheel"
    raw["pickups"][1]["bearing"] = 2
    path.write_text(yaml.safe_dump(raw), encoding="utf-8")
    with pytest.raises(UserError, match=r"pickups\[1\].bearing: names bearing 2, the rotor has 2"):
        load_scenario(str(path))
    raw["pickups"][1]["bearing"] = 1
    raw["bearings"][0]["stiffness_h_n_per_m"] = 2e12
    path.write_text(yaml.safe_dump(raw), encoding="utf-8")
    with pytest.raises(UserError, match=r"bearings\[0\].stiffness_h_n_per_m: must be at most"):
        load_scenario(str(path))
    raw["bearings"][0]["stiffness_h_n_per_m"] = 55000
    raw["as_found"][0]["mass_g"] = -3.2
    path.write_text(yaml.safe_dump(raw), encoding="utf-8")
    with pytest.raises(UserError, match=r"as_found\[0\].mass_g: must not be negative"):
        load_scenario(str(path))


def test_signal_spec_follows_the_contract() -> None:
    spec = signal_spec("bench-grinder", channels=2)
    assert spec["tick_hz"] == 2_000_000 and spec["adc_reference_v"] == 5.0
    assert len(spec["channels"]) == 2
    sc = load_scenario("bench-grinder")
    for ch, e in zip(spec["channels"], exact_1x(sc), strict=True):
        one = [o for o in ch["orders"] if o["order"] == 1][0]
        assert one["amplitude_v"] == pytest.approx(e.amplitude_v, rel=1e-12)
        assert one["phase_deg"] == pytest.approx(e.phase_deg, abs=1e-9)
        assert ch["offset_v"] == 1.65
        assert {t["hz"] for t in ch["tones"]} >= {60.0, 120.0}  # mains hum, twice line
        assert all(float(o["order"]).is_integer() for o in ch["orders"])
    json.dumps(spec)  # JSON-ready
    clean = signal_spec("bench-grinder", channels=1, noise_scale=0)
    assert len(clean["channels"]) == 1 and clean["channels"][0]["noise_rms_v"] == 0
    assert clean["tach"]["jitter_rms_s"] == 0
    with pytest.raises(UserError):
        signal_spec("bench-grinder", bogus=1)


def test_signal_spec_voltage_formula_matches_the_physics() -> None:
    # Synthesise v(t) from the spec as the emulator does, then fit the 1x the plain way.
    spec = signal_spec("jointer-head", noise_scale=0)
    ch = spec["channels"][0]
    f_hz = spec["speed_rpm"] / 60
    t = (spec["tach"]["first_edge_s"] + ((1 + 0.37) / f_hz)
         + 1 / 8000 * __import__("numpy").arange(20000))
    np = __import__("numpy")
    theta = 2 * math.pi * f_hz * (t - spec["tach"]["first_edge_s"])
    v = ch["offset_v"] + sum(o["amplitude_v"] * np.cos(o["order"] * theta - math.radians(o["phase_deg"]))
                             for o in ch["orders"])
    v = v + sum(x["amplitude_v"] * np.cos(2 * math.pi * x["hz"] * t - math.radians(x["phase_deg"]))
                for x in ch["tones"])
    design = np.column_stack([np.ones_like(theta), np.cos(theta), np.sin(theta)])
    (_, re, im), *_ = np.linalg.lstsq(design, v, rcond=None)
    e = exact_1x(load_scenario("jointer-head"))[0]
    assert math.hypot(re, im) == pytest.approx(e.amplitude_v, rel=0.01)
    assert math.degrees(math.atan2(im, re)) % 360 == pytest.approx(e.phase_deg, abs=0.5)


def test_sim_list_and_describe_json(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["sim", "list", "--json"]) == 0
    listed = json.loads(capsys.readouterr().out)
    assert {r["name"] for r in listed} >= set(REQUIRED)
    assert main(["sim", "describe", "lathe-faceplate", "--rpm", "1400", "--json"]) == 0
    desc = json.loads(capsys.readouterr().out)
    assert desc["invented"] is True and desc["speed_rpm"] == 1400
    for row in desc["exact_1x"]:
        # counts = volts * 1024 / 5 V (ATmega328P datasheet, ADC conversion result)
        assert row["amplitude_counts"] == pytest.approx(row["amplitude_v"] * 1024 / 5, rel=1e-5)
        assert 0 <= row["phase_deg"] < 360
    lathe = load_scenario("lathe-faceplate")
    h = lathe.rotor.influence_matrix(1400.0)
    assert len(desc["influence_1x"]) == h.size
    for row in desc["influence_1x"]:
        i = [p.name for p in lathe.rotor.pickups].index(row["pickup"])
        # volts per gram = (m/s^2 per gram) / 9.80665 m/s^2 per g * V/g
        want = abs(h[i, 0]) / 9.80665 * lathe.electrical[i].sensitivity_v_per_g
        assert row["amplitude_v_per_g"] == pytest.approx(want, rel=1e-6)
    assert main(["sim", "describe", "lathe-faceplate", "--rpm", "3000"]) == 2
    assert "outside" in capsys.readouterr().err
    assert main(["sim", "describe", "no-such"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "bench-grinder" in err


def test_record_then_analyze_agrees_with_describe(tmp_path: Path,
                                                  capsys: pytest.CaptureFixture[str]) -> None:
    # The issue's "done when": record from sim://, analyze it, compare with describe --json.
    out = tmp_path / "a.cap"
    assert main(["record", "--port", "sim://bench-grinder?realtime=0", "--seconds", "5",
                 "-o", str(out), "--quiet", "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    assert summary["seconds"] == pytest.approx(5.0, abs=0.06)  # within one 50 ms step
    link = summary["link"]
    assert (link["frames_lost"], link["samples_lost"], link["frames_bad"],
            link["board_resets"]) == (0, 0, 0, 0)
    metadata, raw = read_capture(out)
    assert metadata["identity"]["board_id"] == 2 and metadata["mains_hz"] == 60
    analysis = analyze_capture(raw, mains_hz=60.0)
    assert main(["sim", "describe", "bench-grinder", "--json"]) == 0
    want = json.loads(capsys.readouterr().out)["exact_1x"]
    for reading, w in zip(analysis.readings, want, strict=True):
        assert reading.unit.startswith("V")
        exact = w["amplitude_v"] * complex(math.cos(math.radians(w["phase_deg"])),
                                           math.sin(math.radians(w["phase_deg"])))
        # 3 x the 95 % confidence radius from the scatter, plus the slow speed wander's
        # effect on the response (the grinder runs far above its support modes: < 0.5 %).
        assert abs(reading.phasor - exact) < 3 * reading.confidence_radius \
            + 0.005 * w["amplitude_v"]


def test_record_user_mistakes_are_one_line(tmp_path: Path,
                                           capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["record", "--port", "sim://nope", "--seconds", "1",
                 "-o", str(tmp_path / "x.cap")]) == 2
    assert "cannot open sim://nope" in capsys.readouterr().err
    assert main(["record", "--port", "sim://shop-fan", "--seconds", "-1",
                 "-o", str(tmp_path / "x.cap")]) == 2
    assert main(["record", "--port", "sim://shop-fan", "--seconds", "1",
                 "-o", str(tmp_path / "no" / "x.cap")]) == 2
    assert "does not exist" in capsys.readouterr().err


def test_record_stops_cleanly_when_the_cable_is_pulled(tmp_path: Path,
                                                       monkeypatch: pytest.MonkeyPatch,
                                                       capsys: pytest.CaptureFixture[str]) -> None:
    import trueturn.cli.cmd_record as rec

    real_open = rec.open_port

    def open_and_schedule_unplug(url: str):
        port = real_open(url)
        real_read = port.read

        def read(size: int = 1) -> bytes:
            if port.rig.time_s > 2.0:
                port.rig.unplug()
            return real_read(size)

        port.read = read
        return port

    monkeypatch.setattr(rec, "open_port", open_and_schedule_unplug)
    out = tmp_path / "cut.cap"
    assert main(["record", "--port", "sim://shop-fan?realtime=0", "--seconds", "30",
                 "-o", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "lost the board" in err
    metadata, raw = read_capture(out)  # what came before the pull is a valid capture
    assert metadata["identity"]["board_id"] == 2 and len(raw) > 1000


def test_record_ctrl_c_keeps_a_complete_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                             capsys: pytest.CaptureFixture[str]) -> None:
    from trueturn.link.session import BoardSession

    real_read = BoardSession.read
    calls = {"n": 0}

    def read_then_interrupt(self: BoardSession) -> list:
        calls["n"] += 1
        if calls["n"] == 40:
            raise KeyboardInterrupt
        return real_read(self)

    monkeypatch.setattr(BoardSession, "read", read_then_interrupt)
    out = tmp_path / "cut.cap"
    assert main(["record", "--port", "sim://jointer-head?realtime=0", "--seconds", "60",
                 "-o", str(out), "--quiet"]) == 130
    assert "interrupted, kept" in capsys.readouterr().err
    _, raw = read_capture(out)
    analysis = analyze_capture(raw, mains_hz=60.0)
    assert analysis.readings and analysis.readings[0].revolutions > 10
    assert analysis.link["frames_bad"] == 0  # every frame in the file is whole
