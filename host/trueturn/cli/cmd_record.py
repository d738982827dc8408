"""`trueturn record`: record the board's stream to a capture file (protocol/SPEC.md section 7).

Works the same with a real port (``/dev/ttyUSB0``, ``COM3``), ``sim://NAME`` and
``emu://NAME``. The length is counted in stream time (samples received), not wall time, so a
fast simulation (``sim://NAME?realtime=0``) records S seconds of signal in less.
"""

from __future__ import annotations

import argparse
import contextlib
import datetime as dt
import sys
import time
from pathlib import Path
from typing import Any

import serial

from trueturn import __version__
from trueturn.cli.common import print_json
from trueturn.errors import UserError, one_line
from trueturn.files import check_output
from trueturn.link.capture import CaptureWriteError, CaptureWriter
from trueturn.link.catalogue import load_catalogue
from trueturn.link.codec import LinkEvent, Message, decode_frame
from trueturn.link.ports import open_port
from trueturn.link.session import BoardSession, LinkLost
from trueturn.sim.scenario import load_scenario

STALL_TIMEOUT_S = 3.0  # no samples for this long: the stream is gone
#: --until-stop: the rotor counts as stopped for the recording after this much signal with
#: no tach edge once edges were seen (3 s: a turn at 20 rpm; the end of a coast-down, not
#: the proven standstill a hands-on step needs, trueturn.procedure.standstill)
UNTIL_STOP_QUIET_S = 3.0
PROGRESS_EVERY_S = 0.25


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "record", help="record the board's stream to a capture file",
        description="Configure the board, stream for S seconds of signal and save every "
                    "received byte in a capture file (replay it with analyze or dump).")
    parser.add_argument("--port", required=True,
                        help="serial port or URL: /dev/ttyUSB0, COM3, sim://bench-grinder, "
                             "emu://bench-grinder")
    parser.add_argument("--seconds", type=float, required=True, help="seconds of signal to record")
    parser.add_argument("-o", "--output", required=True, help="capture file to write")
    parser.add_argument("--rate-hz", type=int, default=4000,
                        help="samples per second per channel (default 4000)")
    parser.add_argument("--channels", type=int, default=None,
                        help="pickup channels, as many as are connected (default: the "
                             "simulated machine's pickups, else 2); give 1 with one pickup, so "
                             "no open input is recorded as a channel")
    parser.add_argument("--tach-edge", choices=("rising", "falling"), default="rising",
                        help="tach edge that marks the reference (default rising)")
    parser.add_argument("--until-stop", action="store_true",
                        help="for a coast-down: end the recording once the rotor has stopped "
                             f"(tach edges seen, then none for {UNTIL_STOP_QUIET_S:g} s of "
                             "signal); --seconds is then the longest it records. Not a safety "
                             "standstill: never reach in on it")
    parser.add_argument("--json", action="store_true", help="print a JSON summary on stdout")
    parser.add_argument("--quiet", action="store_true", help="no progress line")
    parser.set_defaults(run=run)


def _progress(text: str, quiet: bool) -> None:
    if not quiet:
        sys.stderr.write(f"\r{text}\x1b[K" if sys.stderr.isatty() else f"{text}\n")
        sys.stderr.flush()


def from_identity(early: bytes) -> bytes:
    """The bytes heard while greeting the board, from its identity frame on.

    A capture starts with the identity, so that replaying it (``analyze``, ``dump``) never
    takes an identity after other frames for a board restart: frames before it are the
    status of a board that did not reset on open (or leftovers from before the reset)."""
    start = 0
    for end in range(len(early)):
        if early[end] != 0:
            continue
        body = early[start:end]
        if body:
            try:
                if decode_frame(body).name == "identity":
                    return early[start:]
            except ValueError:
                pass
        start = end + 1
    return early


def _virtual_rig_metadata(port: serial.SerialBase) -> dict[str, Any]:
    """For sim:// and emu:// the scenario is known: store its mains and pickups, so
    ``trueturn analyze`` fits out the right hum and can convert volts to g."""
    rig = getattr(port, "rig", None)
    scenario = getattr(rig, "scenario", None)
    spec = getattr(port, "spec", None)  # emu:// keeps the signal spec it runs
    if scenario is None and isinstance(spec, dict) and isinstance(spec.get("scenario"), str):
        try:
            scenario = load_scenario(spec["scenario"])
        except UserError:
            return {}
    if scenario is None or not hasattr(scenario, "electrical"):
        return {}
    return {
        "scenario": scenario.name,
        "mains_hz": scenario.motor.mains_hz,
        "pickups": [{"name": p.name, "sensitivity_v_per_g": e.sensitivity_v_per_g,
                     "zero_g_v": e.zero_g_v}
                    for p, e in zip(scenario.rotor.pickups, scenario.electrical, strict=True)],
    }


def run(args: argparse.Namespace) -> int:
    if not args.seconds > 0 or args.seconds > 24 * 3600:
        raise UserError(f"--seconds must be between 0 and 86400, got {args.seconds:g}")
    limits = load_catalogue().limits
    if args.rate_hz not in limits["rate_hz"]:
        raise UserError(f"--rate-hz must be {limits['rate_hz'].span()}, got {args.rate_hz}")
    if args.channels is not None and args.channels not in limits["channels"]:
        raise UserError(f"--channels must be {limits['channels'].span()}, got {args.channels}")
    out_path = check_output(args.output)  # before the port opens: the one output rule
    try:
        port = open_port(args.port)
    except (serial.SerialException, OSError, ValueError) as exc:
        raise UserError(f"cannot open {args.port}: {exc}") from None
    try:
        return _record(port, args, out_path)
    finally:
        port.close()


def _kept(samples: int, target: int, seconds: float, out_path: Path) -> str:
    """What is in the capture file when a recording stops early (it stays a valid capture)."""
    return (f"kept an incomplete capture ({min(samples, target) / target * seconds:.2f} of "
            f"{seconds:g} s) in {out_path}")


def _record(port: serial.Serial, args: argparse.Namespace, out_path: Path) -> int:
    early: list[bytes] = []
    writer: CaptureWriter | None = None

    def sink(data: bytes) -> None:
        if writer is None:
            early.append(data)
        else:
            writer.write(data)

    session = BoardSession(port, on_bytes=sink)
    identity = session.greet()
    rig = _virtual_rig_metadata(port)
    if args.channels is None:  # the pickups a simulated machine has connected: no ghost
        spec = getattr(port, "spec", None)  # emu:// (channels=1|2 of the URL)
        connected = len(spec["channels"]) if isinstance(spec, dict) else len(rig.get("pickups", ()))
        args.channels = min(connected or 2, int(identity["max_channels"]))
    metadata: dict[str, Any] = {
        "port": args.port, "started_utc": dt.datetime.now(dt.timezone.utc).isoformat(),
        "trueturn_version": __version__, "identity": identity,
        "requested": {"seconds": args.seconds, "rate_hz": args.rate_hz,
                      "channels": args.channels, "tach_edge": args.tach_edge,
                      **({"until_stop": True} if args.until_stop else {})},
    }
    metadata.update(rig)
    try:
        writer = CaptureWriter(out_path, metadata)
        writer.write(from_identity(b"".join(early)))
    except OSError as exc:
        raise UserError(f"cannot write {one_line(out_path)}: {exc.strerror or exc}") from None
    edge = 1 if args.tach_edge == "rising" else 0
    samples = 0
    tach_edges = 0
    interrupted = False
    stopped = False  # --until-stop: the rotor stopped before --seconds
    last_edge_samples: int | None = None  # samples received when the last tach edge came
    target = max(1, int(round(args.seconds * args.rate_hz)) * args.channels)  # until started
    try:
        session.configure(args.rate_hz, args.channels, edge)
        config = session.start()
        target = int(round(args.seconds * config["rate_hz"])) * config["channels"]
        last_data = time.monotonic()
        last_progress = 0.0
        quiet_samples = int(UNTIL_STOP_QUIET_S * config["rate_hz"]) * config["channels"]
        while samples < target and not stopped:
            try:
                items = session.read()
            except LinkLost as exc:
                raise UserError(f"{exc}; {_kept(samples, target, args.seconds, out_path)}; "
                                "plug the board back in and record again") from None
            for item in items:
                if isinstance(item, Message):
                    if item.name == "samples":
                        samples += len(item.values["samples"])
                        last_data = time.monotonic()
                    elif item.name == "tach":
                        tach_edges += 1
                        last_edge_samples = samples
                elif isinstance(item, LinkEvent) and item.kind == "board_reset":
                    # The board restarted (brown-out, loose cable, watchdog): its stream has
                    # stopped and its clock restarted, so this recording cannot go on.
                    raise UserError(f"{item.detail}; {_kept(samples, target, args.seconds, out_path)}"
                                    "; check the USB cable and the board's power, then record "
                                    "again")
            if args.until_stop and last_edge_samples is not None and \
                    samples - last_edge_samples >= quiet_samples:
                stopped = True
            now = time.monotonic()
            if now - last_data > STALL_TIMEOUT_S:
                raise UserError(f"no samples from {args.port} for {STALL_TIMEOUT_S:g} s; "
                                f"{_kept(samples, target, args.seconds, out_path)}")
            if now - last_progress >= PROGRESS_EVERY_S:
                last_progress = now
                c = session.decoder.counters
                _progress(f"recording {min(samples, target) / target * args.seconds:6.2f} / "
                          f"{args.seconds:g} s  frames {c.frames_ok}  lost {c.frames_lost} "
                          f"frames, {c.samples_lost} samples", args.quiet)
        session.stop()
    except CaptureWriteError as exc:  # a full disk: the file so far is a valid capture
        with contextlib.suppress(UserError, OSError, serial.SerialException):
            session.send("stop")
        raise UserError(f"cannot write {one_line(out_path)} ({exc.reason}); "
                        f"{_kept(samples, target, args.seconds, out_path)}; free some space "
                        "and record again") from None
    except KeyboardInterrupt:
        interrupted = True
        try:
            session.send("stop")
        except UserError:
            pass
    finally:
        writer.close()
    c = session.decoder.counters
    seconds = samples / (args.rate_hz * args.channels)
    summary = {"file": str(out_path), "seconds": round(seconds, 3),
               "rate_hz": args.rate_hz, "channels": args.channels, "samples": samples,
               "tach_edges": tach_edges, "interrupted": interrupted,
               "stopped_at_standstill": stopped, "link": c.to_json()}
    if not args.quiet:
        sys.stderr.write("\n" if sys.stderr.isatty() else "")
    if stopped:
        print(f"the rotor stopped (no tach edge for {UNTIL_STOP_QUIET_S:g} s): recording ended",
              file=sys.stderr)
    print(f"{'interrupted, kept' if interrupted else 'wrote'} {out_path}: {seconds:.2f} s, "
          f"{args.channels} ch x {args.rate_hz} Hz, {tach_edges} tach edges; link: "
          f"{c.frames_ok} frames, {c.frames_bad} bad, {c.frames_lost} lost, "
          f"{c.samples_lost} samples lost, {c.tach_edges_lost} tach edges lost",
          file=sys.stderr)
    if args.json:
        print_json(summary)
    return 130 if interrupted else 0
