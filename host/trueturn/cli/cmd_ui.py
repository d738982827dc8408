"""`trueturn ui`: open the app on a board (auto-detected), or on a virtual rig."""

from __future__ import annotations

import argparse


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "ui", help="open the app on a board or a virtual rig",
        description="Open the app: live meter, spectrum and the guided balancing procedure. "
                    "Without --port the first port that looks like a board is used.")
    parser.add_argument("--port", help="serial port (/dev/ttyUSB0, COM3), sim://NAME or "
                                       "emu://NAME")
    parser.add_argument("--job", help="job file: a new name starts a new job there; an "
                                      "open job's file continues that job (a closed one is "
                                      "refused); default: a new job in the workspace")
    parser.add_argument("--machine", help="machine profile name in the workspace")
    parser.add_argument("--workspace", help="folder for machines and jobs")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    from trueturn.ui.launch import launch_port

    return launch_port(args.port, job=args.job, machine=args.machine, workspace=args.workspace)
