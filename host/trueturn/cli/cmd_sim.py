"""`trueturn sim`: list and describe the simulated machines, print an emulator signal spec."""

from __future__ import annotations

import argparse
from typing import Any

from trueturn.cli.common import print_json
from trueturn.errors import UserError
from trueturn.sim.board import run_times
from trueturn.sim.scenario import Scenario, list_scenarios, load_scenario
from trueturn.sim.spec import describe, exact_1x, signal_spec


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "sim", help="list and describe the simulated machines",
        description="The invented machines behind sim:// and emu:// (all numbers invented). "
                    "A scenario is a packaged name or the path of a copied, edited YAML file.")
    actions = parser.add_subparsers(dest="sim_action", metavar="ACTION")
    actions.required = True

    p_list = actions.add_parser("list", help="the packaged scenarios")
    p_list.add_argument("--json", action="store_true", help="machine-readable output")
    p_list.set_defaults(run=run_list)

    p_desc = actions.add_parser(
        "describe", help="a scenario's parameters and its exact steady 1x per pickup",
        description="Parameters of a scenario and the model's exact steady-state 1x at each "
                    "pickup (as-found unbalance) in board units: ADC counts, volts, g, and "
                    "phase as the lag of the 1x peak after the rising tach edge.")
    p_desc.add_argument("scenario", help="scenario name (see `trueturn sim list`) or YAML path")
    p_desc.add_argument("--rpm", type=float, help="speed to evaluate at (default: nominal)")
    p_desc.add_argument("--json", action="store_true", help="machine-readable output")
    p_desc.set_defaults(run=run_describe)

    p_spec = actions.add_parser(
        "spec", help="the steady signal spec the emulator harness synthesises (JSON)")
    p_spec.add_argument("scenario", help="scenario name or YAML path")
    p_spec.add_argument("--channels", type=int, default=2, choices=(1, 2))
    p_spec.add_argument("--seed", type=int, default=1)
    p_spec.add_argument("--rpm", type=float, help="speed (default: nominal)")
    p_spec.add_argument("--noise", type=float, default=1.0,
                        help="scale of noise, hum, harmonics, tones and jitter (0 = clean)")
    p_spec.set_defaults(run=run_spec)


def run_list(args: argparse.Namespace) -> int:
    rows: list[dict[str, Any]] = []
    for name in list_scenarios():
        sc = load_scenario(name)
        rows.append({"name": name, "title": sc.title, "speed_rpm": round(sc.speed_rpm, 1),
                     "planes": len(sc.rotor.planes), "pickups": len(sc.rotor.pickups),
                     "mains_hz": sc.motor.mains_hz})
    if args.json:
        print_json(rows)
        return 0
    width = max(len(r["name"]) for r in rows)
    for r in rows:
        print(f"{r['name']:<{width}}  {r['title']}")
    print("All numbers are invented for the demo. Try: trueturn sim describe bench-grinder")
    return 0


def _check_rpm(sc: Scenario, rpm: float | None) -> None:
    if rpm is None:
        return
    rng = sc.motor.speed_range_rpm
    if not 1 <= rpm <= 200_000:  # cli.common.SPANS["speed_rpm"]; nan and inf refused too
        raise UserError(f"--rpm must be 1 to 200000 rpm, got {rpm:g}")
    if rng is not None and not rng[0] <= rpm <= rng[1]:
        raise UserError(f"--rpm {rpm:g} is outside {sc.name}'s range {rng[0]:g}-{rng[1]:g} rpm")


def run_describe(args: argparse.Namespace) -> int:
    sc = load_scenario(args.scenario)
    _check_rpm(sc, args.rpm)
    if args.json:
        print_json(describe(sc, args.rpm))
        return 0
    print(f"{sc.name}: {sc.title}")
    print("(all numbers invented for the demo)")
    if sc.description:
        print(sc.description)
    m = sc.motor
    print(f"speed {args.rpm or sc.speed_rpm:.1f} rpm, {m.kind} drive, mains {m.mains_hz:g} Hz")
    for p in sc.rotor.planes:
        lay = sc.balancing_planes[p.name].layout
        where = (f"{lay.positions} fixed positions from {lay.offset_deg:g} deg"
                 if lay.positions else "any angle")
        print(f"plane {p.name}: at {p.axial_mm:g} mm, radius {p.radius_mm:g} mm, {where}")
    print("support resonances (synchronous critical speeds): "
          + ", ".join(f"{f:.0f}" for f in sc.rotor.critical_speeds_rpm()) + " rpm")
    times = run_times(sc, "coastdown")
    print(f"coast-down: record {times['record_s']:g} s from \"sim://{sc.name}?run=coastdown\" "
          f"(motor off after {times['switch_s']:g} s)")
    bump = run_times(sc, "bump")
    print("natural frequencies at standstill (damping): "
          + ", ".join(f"{m.natural_frequency_hz:.1f} Hz ({100 * m.damping_ratio:.1f} %)"
                      for m in sc.rotor.modes_at_rest()))
    print(f"bump test: record {bump['record_s']:g} s from \"sim://{sc.name}?run=bump\" "
          f"(a tap every {bump['tap_period_s']:g} s from {bump['first_tap_s']:g} s)")
    print("exact steady 1x (as-found unbalance, rising tach edge):")
    for e in exact_1x(sc, args.rpm):
        print(f"  ch{e.channel} {e.pickup}: {e.amplitude_counts:.2f} counts = {e.amplitude_v:.4f} V "
              f"= {e.amplitude_g:.3f} g, phase {e.phase_deg:.1f} deg")
    return 0


def run_spec(args: argparse.Namespace) -> int:
    sc = load_scenario(args.scenario)
    _check_rpm(sc, args.rpm)
    print_json(signal_spec(sc, channels=args.channels, seed=args.seed, speed_rpm=args.rpm,
                           noise_scale=args.noise))
    return 0
