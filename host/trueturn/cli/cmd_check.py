"""``trueturn check``: the bring-up check after wiring (and whenever something looks odd).

Listens to the board for a few seconds with the machine running: identity and protocol, the
link's losses, each pickup's level (which axis sees gravity), noise floor, clipping and
whether it is connected at all, the ADC reference, and the tach's speed, edges, jitter,
chatter and duty. The judgement is trueturn.bringup.judge (pure), the words
trueturn.bringup.words; this module only gathers the data. Exit 0 only when every item
passes, 1 when one fails, 2 when the port cannot be used.
"""

from __future__ import annotations

import argparse
import sys
import time
from typing import Any

import numpy as np

from trueturn.bringup.judge import BringupData, Finding, Item, all_passed, judge
from trueturn.bringup.words import finding_text, item_name
from trueturn.cli.common import print_json
from trueturn.dsp.shaft import extend_tick
from trueturn.errors import UserError
from trueturn.link.codec import LinkEvent, Message
from trueturn.link.ports import open_port
from trueturn.link.session import BoardError, BoardProblem, BoardSession

RATE_HZ = 4000
FALLING_S = 1.0  # listening for the falling tach edges after the stream
FALLING_EDGES = 20  # enough falling edges for the duty
RISING_AFTER = 12  # rising edges heard after the falling ones
STALL_S = 3.0
STATUS_COUNTERS = ("samples_dropped", "frames_dropped", "adc_overruns", "rx_bad_frames",
                   "tach_suppressed")


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "check", help="the bring-up check of a wired board: link, pickups, tach",
        description="Run the machine, then listen to the board for a few seconds and judge "
                    "the link, each pickup (level and which axis sees gravity, noise, "
                    "clipping, connected or floating), the ADC reference and the tach "
                    "(speed, missed/extra/knocked edges, jitter, chatter, duty). Exit 0 "
                    "only when everything passes.")
    parser.add_argument("--port", required=True, help="serial port or sim://NAME, emu://NAME")
    parser.add_argument("--seconds", type=float, default=3.0,
                        help="seconds of signal to judge (default 3)")
    parser.add_argument("--channels", type=int, choices=(1, 2), default=2,
                        help="pickups connected (default 2; one-pickup kits: 1)")
    parser.add_argument("--json", action="store_true", help="print the findings as JSON")
    parser.set_defaults(run=run)


class _Edges:
    """Tach edges on one time line (64-bit ticks)."""

    def __init__(self) -> None:
        self.last_tick: int | None = None

    def add(self, msg: Message) -> int:
        tick32 = int(msg.values["tick"])
        tick = tick32 if self.last_tick is None else extend_tick(tick32, self.last_tick)
        self.last_tick = tick
        return tick


def _gather(session: BoardSession, seconds: float, channels: int) -> BringupData:
    identity = session.identity or {}
    samples: list[int] = []
    edges = _Edges()
    rising: list[int] = []
    falling: list[int] = []
    rising_after: list[int] = []
    first_status: dict[str, int] | None = None
    last_status: dict[str, int] = {}

    def take(items: list[Message | LinkEvent], into: list[int] | None) -> None:
        nonlocal first_status, last_status
        for item in items:
            if not isinstance(item, Message):
                continue
            if item.name == "samples" and into is rising:
                samples.extend(item.values["samples"])
            elif item.name == "tach" and into is not None:
                into.append(edges.add(item))
            elif item.name == "status":
                now = {k: int(item.values.get(k, 0)) for k in STATUS_COUNTERS}
                first_status = first_status or now
                last_status = now

    session.configure(RATE_HZ, channels, 1)
    session.start()
    target = int(round(seconds * RATE_HZ)) * channels
    last_data = time.monotonic()
    while len(samples) < target:
        before = len(samples)
        take(session.read(), rising)
        if len(samples) > before:
            last_data = time.monotonic()
        elif time.monotonic() - last_data > STALL_S:
            raise UserError(f"no samples from the board for {STALL_S:g} s: "
                            f"run `trueturn check` again; if it repeats, reflash the board")
    session.stop()
    take(session.read(), rising)
    # The falling edges: the board reports the configured edge, streaming or not. What was
    # held back while configuring may hold edges of either kind: left out.
    session.configure(RATE_HZ, channels, 0)
    take(session.read(), None)
    started = time.monotonic()
    while len(falling) < FALLING_EDGES:
        waited = time.monotonic() - started
        if waited > FALLING_S and (len(falling) >= 3 or not rising or waited > 3 * FALLING_S):
            break
        take(session.read(), falling)
    # Rising edges again after them, so the falling ones sit between two stretches.
    session.configure(RATE_HZ, channels, 1)  # the power-up edge again
    take(session.read(), None)
    started = time.monotonic()
    while len(rising_after) < RISING_AFTER and rising and \
            time.monotonic() - started < 3 * FALLING_S:
        take(session.read(), rising_after)
    n = len(samples) - len(samples) % channels
    arr = np.asarray(samples[:n], dtype=np.int64).reshape(-1, channels).T
    board = {k: last_status.get(k, 0) - (first_status or {}).get(k, 0) for k in STATUS_COUNTERS}
    return BringupData(
        identity=dict(identity), seconds=seconds, rate_hz=float(RATE_HZ), samples=arr,
        link=session.decoder.counters.to_json(), board_counters=board,
        rising_ticks=sorted(rising), falling_ticks=sorted(falling),
        rising_after_ticks=sorted(rising_after),
        **_pickups(session))


def _pickups(session: BoardSession) -> dict[str, Any]:
    """The virtual rigs know their pickups' zero-g level and sensitivity."""
    scenario = getattr(getattr(session.port, "rig", None), "scenario", None)
    if scenario is None:
        return {}
    return {"zero_g_v": [e.zero_g_v for e in scenario.electrical],
            "sensitivity_v_per_g": [e.sensitivity_v_per_g for e in scenario.electrical]}


def _print(findings: list[Finding], as_json: bool, port: str) -> None:
    if as_json:
        rows = []
        for f in findings:
            seen, fix = finding_text(f)
            rows.append({"item": f.item.value, "channel": f.channel, "passed": f.passed,
                         "code": f.code, "values": f.values, "seen": seen, "fix": fix})
        print_json({"port": port, "passed": all_passed(findings), "findings": rows})
        return
    for f in findings:
        seen, fix = finding_text(f)
        print(f"{'pass' if f.passed else 'FAIL'}  {item_name(f):22s} {seen}")
        if fix and not f.passed:
            print(f"      {'':22s} fix: {fix}")
    failed = [f for f in findings if not f.passed]
    print("all passed" if not failed else
          f"{len(failed)} item(s) failed: {', '.join(item_name(f) for f in failed)}")


def run(args: argparse.Namespace) -> int:
    if not 1.0 <= args.seconds <= 60.0:
        raise UserError(f"--seconds must be 1..60, got {args.seconds:g}")
    port = open_port(args.port)
    try:
        session = BoardSession(port)
        try:
            session.greet()
        except BoardProblem as exc:
            finding = Finding(Item.IDENTITY, False, exc.problem.code.value)
            if args.json:
                print_json({"port": args.port, "passed": False, "findings": [
                    {"item": "identity", "channel": None, "passed": False,
                     "code": finding.code, "values": {}, "seen": str(exc), "fix": ""}]})
            else:
                print(f"FAIL  {item_name(finding):22s} {exc}")
            return 1
        try:
            data = _gather(session, args.seconds, args.channels)
        except BoardError as exc:
            raise UserError(f"the board stopped answering during the check: {exc}") from None
    finally:
        port.close()
    findings = judge(data)
    _print(findings, args.json, args.port)
    sys.stdout.flush()
    return 0 if all_passed(findings) else 1
