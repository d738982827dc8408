"""`trueturn demo [SCENARIO]`: open the app on a simulated rig (default: the bench grinder)."""

from __future__ import annotations

import argparse

from trueturn.jobs.store import resolve_workspace


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "demo", help="open the app on a simulated rig",
        description="Open the app on a simulated rig: the weights you confirm go onto the "
                    "simulated rotor, and the virtual motor is started and stopped from the "
                    "app. All numbers of the demo machines are invented.")
    parser.add_argument("scenario", nargs="?", default="bench-grinder",
                        help="scenario name (bench-grinder, shop-fan, lathe-faceplate, "
                             "jointer-head) or a scenario YAML file (default: bench-grinder)")
    parser.add_argument("--workspace", help="folder for machines and jobs (default: the "
                                            "'demo' folder of the normal workspace)")
    parser.add_argument("--pace", type=float, default=1.0,
                        help="run simulated time this many times faster than the clock")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    from trueturn.ui.launch import launch_sim

    workspace = args.workspace or resolve_workspace() / "demo"
    return launch_sim(args.scenario, workspace=workspace, pace=args.pace, demo=True)
