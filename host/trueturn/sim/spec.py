"""A scenario's exact steady 1x in board units, and the steady signal spec for the emulator.

``signal_spec`` is the contract with the emulator harness (firmware/emu/): the harness makes
each ADC input voltage from these numbers instead of running the Python physics per sample.
Shaft angle ``theta(t) = 2*pi*(speed_rpm/60)*(t - first_edge_s)``, a rising tach edge at
every multiple of 2*pi, and per channel
``v(t) = offset_v + sum(A cos(order*theta - phase)) + sum(A cos(2*pi*hz*t - phase)) + noise``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from trueturn.angles import amplitude_phase
from trueturn.errors import UserError
from trueturn.link.catalogue import load_catalogue
from trueturn.sim.board import run_times
from trueturn.sim.rotor import STANDARD_GRAVITY_M_S2, Mass
from trueturn.sim.scenario import (
    ADC_COUNTS_PER_REFERENCE,
    ADC_REFERENCE_V,
    Scenario,
    load_scenario,
)

TICK_HZ = load_catalogue().limit("board_tick_hz").min
UNCONNECTED_OFFSET_V = ADC_REFERENCE_V / 2
UNCONNECTED_NOISE_V = 0.002
CHANNEL_PHASE_STEP_RAD = 0.7  # harmonics differ from pickup to pickup by this much (invented)
HUM_PHASE_STEP_RAD = 0.3


@dataclass(frozen=True)
class Exact1x:
    """The model's steady 1x at one pickup, in physical and board units."""

    pickup: str
    channel: int
    speed_rpm: float
    amplitude_m_s2: float
    amplitude_g: float
    amplitude_v: float
    amplitude_counts: float
    phase_deg: float

    def to_json(self) -> dict[str, Any]:
        return {k: (round(v, 6) if isinstance(v, float) else v) for k, v in self.__dict__.items()}


def exact_1x(scenario: Scenario, speed_rpm: float | None = None,
             masses: list[Mass] | None = None) -> list[Exact1x]:
    """Exact steady 1x per pickup at ``speed_rpm`` (default nominal) for ``masses``
    (default the as-found unbalance); phase in the project convention (rising tach edge)."""
    speed = scenario.speed_rpm if speed_rpm is None else speed_rpm
    resp = scenario.rotor.response_1x(speed, scenario.as_found if masses is None else masses)
    out = []
    for ch, p in enumerate(scenario.rotor.pickups):
        amp, phase = amplitude_phase(resp[p.name])
        volts = abs(scenario.pickup_volts(amp, ch))
        out.append(Exact1x(p.name, ch, speed, amp, amp / STANDARD_GRAVITY_M_S2, volts,
                           volts / ADC_REFERENCE_V * ADC_COUNTS_PER_REFERENCE, phase))
    return out


_OVERRIDES = {"speed_rpm", "seed", "masses", "noise_scale", "first_edge_s"}


def signal_spec(scenario_name: str | Scenario, channels: int = 2, **overrides: Any) -> dict[str, Any]:
    """The steady signal spec (JSON-ready dict) of a scenario for the emulator harness.

    Overrides: ``speed_rpm``, ``seed``, ``masses`` (list of :class:`Mass`, replaces the
    as-found unbalance), ``noise_scale`` (multiplies noise, hum, harmonics, tones and tach
    jitter; 0 = clean), ``first_edge_s``.
    """
    unknown = set(overrides) - _OVERRIDES
    if unknown:
        raise UserError(f"unknown signal spec option(s): {', '.join(sorted(unknown))}")
    limit = load_catalogue().limit("channels")
    if channels not in limit:
        raise UserError(f"channels must be {limit.span()}")
    sc = scenario_name if isinstance(scenario_name, Scenario) else load_scenario(scenario_name)
    speed = float(overrides.get("speed_rpm") or sc.speed_rpm)
    scale = float(overrides.get("noise_scale", 1.0))
    masses = overrides.get("masses")
    resp = sc.rotor.response_1x(speed, sc.as_found if masses is None else list(masses))
    sig = sc.signals
    speed_ratio_sq = (speed / sc.speed_rpm) ** 2
    shaft_hz = speed / 60.0
    chans = []
    for ch in range(channels):
        if ch >= len(sc.rotor.pickups):
            chans.append({"offset_v": UNCONNECTED_OFFSET_V, "noise_rms_v": UNCONNECTED_NOISE_V * scale,
                          "orders": [], "tones": []})
            continue
        el = sc.electrical[ch]
        amp, phase = amplitude_phase(sc.pickup_volts(resp[sc.rotor.pickups[ch].name], ch))
        orders = [{"order": 1, "amplitude_v": amp, "phase_deg": phase}]
        tones = []
        for h in sig.harmonics + sig.tones:
            amp_v = h.amplitude_g * el.sensitivity_v_per_g * scale
            ph = (h.phase_deg + math.degrees(CHANNEL_PHASE_STEP_RAD * ch)) % 360.0
            if h.hz is not None:
                tones.append({"hz": h.hz, "amplitude_v": amp_v, "phase_deg": ph})
                continue
            assert h.order is not None  # Tone: exactly one of order and hz (the validator)
            if float(h.order).is_integer():
                orders.append({"order": int(h.order), "amplitude_v": amp_v * speed_ratio_sq,
                               "phase_deg": ph})
            else:  # a non-synchronous component at steady speed is a fixed frequency
                tones.append({"hz": h.order * shaft_hz, "amplitude_v": amp_v * speed_ratio_sq,
                              "phase_deg": ph})
        line = sc.motor.mains_hz
        for hz, amp_v, step in ((line, sig.hum_line_v, HUM_PHASE_STEP_RAD),
                                (2 * line, sig.hum_double_v, 1.0)):
            if amp_v:
                tones.append({"hz": hz, "amplitude_v": amp_v * scale,
                              "phase_deg": (-math.degrees(step * ch)) % 360.0})
        chans.append({"offset_v": el.zero_g_v,
                      "noise_rms_v": sig.noise_rms_g * el.sensitivity_v_per_g * scale,
                      "orders": orders, "tones": tones})
    return {"tick_hz": TICK_HZ, "speed_rpm": speed, "adc_reference_v": ADC_REFERENCE_V,
            "seed": int(overrides.get("seed", 1)), "scenario": sc.name, "channels": chans,
            "tach": {"first_edge_s": float(overrides.get("first_edge_s", 0.001)),
                     "jitter_rms_s": sig.tach_jitter_us * 1e-6 * scale}}


def describe(scenario: Scenario, speed_rpm: float | None = None) -> dict[str, Any]:
    """Everything ``trueturn sim describe`` shows, JSON-ready."""
    sc = scenario
    r = sc.rotor
    m = sc.motor
    return {
        "name": sc.name,
        "title": sc.title,
        "description": sc.description,
        "invented": True,
        "source": sc.source,
        "speed_rpm": round(speed_rpm or sc.speed_rpm, 3),
        "motor": {"kind": m.kind, "mains_hz": m.mains_hz, "poles": m.poles, "slip": m.slip,
                  "pulley_ratio": m.pulley_ratio, "speed_range_rpm": m.speed_range_rpm,
                  "spin_up_s": m.spin_up_s, "coast_down_s": m.coast_down_s},
        "rotor": {"mass_kg": r.mass_kg, "transverse_inertia_kg_m2": r.transverse_inertia_kg_m2,
                  "polar_inertia_kg_m2": r.polar_inertia_kg_m2,
                  "centre_of_mass_axial_mm": r.centre_of_mass_axial_mm,
                  "nonlinearity": r.nonlinearity, "tach_direction_deg": r.tach_direction_deg,
                  "housing_mass_kg": r.housing_mass_kg,
                  "housing_transverse_inertia_kg_m2": r.housing_transverse_inertia_kg_m2,
                  "rigid_body_modes_hz": [round(f, 2) for f in r.natural_frequencies_hz()]},
        # the support resonances a 1x sweep meets (synchronous critical speeds, gyroscopic
        # coupling included; RigidRotor.critical_speeds_rpm)
        "resonances_rpm": [round(f, 1) for f in r.critical_speeds_rpm()],
        # sim://NAME?run=coastdown|runup|bump: when the motor switches, how long to record
        "runs": {run: run_times(sc, run) for run in ("coastdown", "runup", "bump")},
        # the damped modes at standstill, what a bump test (run=bump) rings
        # (RigidRotor.modes_at_rest: eigenvalues of the state matrix at zero speed)
        "standstill_modes": [{"natural_frequency_hz": round(m.natural_frequency_hz, 4),
                              "damping_ratio": round(m.damping_ratio, 5)}
                             for m in r.modes_at_rest()],
        "bearings": [b.__dict__ for b in r.bearings],
        "planes": [{**p.__dict__,
                    "positions_deg": list(sc.balancing_planes[p.name].position_angles_deg),
                    "note": sc.plane_notes.get(p.name, "")} for p in r.planes],
        "pickups": [{**p.__dict__, "channel": i, **sc.electrical[i].__dict__,
                     "angle_from_tach_deg": r.angle_from_tach_deg(p)}
                    for i, p in enumerate(r.pickups)],
        "as_found": [m.__dict__ for m in sc.as_found],
        "board": {"tick_hz": TICK_HZ, "adc_bits": 10, "adc_reference_v": ADC_REFERENCE_V,
                  "tach_edge": "rising"},
        "exact_1x": [e.to_json() for e in exact_1x(sc, speed_rpm)],
        "influence_1x": influence_v_per_g(sc, speed_rpm),
    }


def influence_v_per_g(scenario: Scenario, speed_rpm: float | None = None) -> list[dict[str, Any]]:
    """The linear model's influence coefficients in board units: volts at each pickup per
    gram at each plane's radius at angle 0 (phase in the project convention)."""
    sc = scenario
    h = sc.rotor.influence_matrix(speed_rpm or sc.speed_rpm)
    out = []
    for i, p in enumerate(sc.rotor.pickups):
        for j, plane in enumerate(sc.rotor.planes):
            amp, phase = amplitude_phase(sc.pickup_volts(complex(h[i, j]), i))
            out.append({"pickup": p.name, "plane": plane.name,
                        "amplitude_v_per_g": round(amp, 9), "phase_deg": round(phase, 4)})
    return out
