"""``trueturn analyze CAPTURE [SECOND_START]``: order-tracked 1x amplitude and phase per pickup
from a capture; with a second start of the same machine, whether its 1x repeats."""

from __future__ import annotations

import argparse
import dataclasses
import math
from pathlib import Path
from typing import Any

from trueturn.cli.common import number, open_capture, print_json
from trueturn.dsp.analysis import ALL_REVS, Analysis, analyze_capture, compare_starts
from trueturn.dsp.bump import BumpResult, analyze_bump_capture, running_speed_findings
from trueturn.dsp.findings import Code, Finding, describe
from trueturn.dsp.spectrum import SpectrumPeak
from trueturn.dsp.units import UNITS, PickupProfile, pickup_profile
from trueturn.errors import UserError, one_line
from trueturn.files import atomic_write_text, check_output
from trueturn.jobs.sweep_plot import sweep_svg
from trueturn.link.catalogue import load_catalogue
from trueturn.link.codec import LinkEvent, Message

# Option value -> unit label of trueturn.dsp.units.UNITS
UNIT_CHOICES = {
    "volts": "V pk", "g": "g pk", "mm/s": "mm/s rms", "in/s": "in/s pk",
    "um": "um pk-pk", "mils": "mil pk-pk",
}


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "analyze", help="1x amplitude and phase per pickup, speed and spectrum from a capture",
        description="Read a capture (from `trueturn record`), track the shaft angle from the "
                    "tach and report, per pickup, the 1x vector averaged over whole "
                    "revolutions with its 95 % confidence, whether the reading is steady, "
                    "and the labelled spectrum peaks. Phase is the lag of the 1x positive "
                    "peak after the tach edge, 0-360 degrees.")
    parser.add_argument("capture", help="capture file (or a plain file of frames)")
    parser.add_argument("second", nargs="?", metavar="SECOND_START",
                        help="a capture of a second start of the same machine, as found, "
                             "after a stop: is its 1x the same (within a tenth of the 1x "
                             "beyond both 95 %% circles)? A steady unbalance repeats; a 1x "
                             "that moves points at a part that shifts. Same speed within 3 %%")
    parser.add_argument("--revs", type=int, metavar="N",
                        help="average the last N good revolutions (default: all)")
    parser.add_argument("--json", action="store_true", help="print JSON instead of a table")
    parser.add_argument("--mains-hz", type=float, choices=(50.0, 60.0), default=None,
                        metavar="{50,60}",
                        help="mains frequency where the machine runs (hum at it and twice it "
                             "is removed); default 50, or the capture's own setting")
    parser.add_argument("--sensitivity-v-per-g", metavar="S[,S2]",
                        help="pickup sensitivity in V/g, one value per channel; without it "
                             "readings stay in volts")
    parser.add_argument("--unit", choices=tuple(UNIT_CHOICES), default=None,
                        help="unit of the 1x amplitude (default mm/s RMS when a sensitivity "
                             "is known, volts otherwise)")
    parser.add_argument("--lowpass-hz", metavar="F[,F2]",
                        help="corner of a first-order RC low-pass in front of the ADC, per "
                             "channel; its phase lag at 1x is compensated")
    parser.add_argument("--names", metavar="NAME[,NAME2]", help="pickup names, per channel")
    parser.add_argument("--sweep", action="store_true",
                        help="a coast-down or run-up: the 1x against speed per pickup, the "
                             "support resonances with their damping (half-power bandwidth) "
                             "and the response slope at the balancing speed")
    parser.add_argument("--bump", action="store_true",
                        help="a bump test: a recording of the STOPPED machine (power locked "
                             "out) while its bearing housing is tapped with a soft mallet "
                             "every 2 s or so - never the rotor: the natural frequencies "
                             "and damping per pickup (matrix pencil method); see the README")
    parser.add_argument("--speed-rpm", type=number("speed_rpm"), metavar="N",
                        help="with --bump: the running speed, rpm; warns when it lies within "
                             "15 %% of a natural frequency")
    parser.add_argument("--plot", metavar="FILE.svg",
                        help="with --sweep: write the Bode (amplitude and phase against speed) "
                             "and polar plots of the sweep to this SVG file")
    parser.add_argument("--machine", metavar="NAME",
                        help="take the pickups (names, sensitivity, zero-g output, RC low-pass "
                             "corner) from this machine profile instead of the capture's "
                             "header; the options above win")
    parser.add_argument("--workspace", metavar="DIR",
                        help="with --machine: workspace folder (default: $TRUETURN_WORKSPACE "
                             "or the user data folder)")
    parser.set_defaults(run=run)


def _per_channel(text: str | None, what: str, span: tuple[float, float]) -> list[float]:
    """Comma-separated positive numbers within ``span`` (as the capture header's own)."""
    if not text:
        return []
    try:
        values = [float(v) for v in text.split(",")]
    except ValueError:
        raise UserError(f"{what} must be numbers separated by commas, got {text!r}") from None
    if any(not (v > 0 and math.isfinite(v)) for v in values):
        raise UserError(f"{what} must be positive, got {text!r}")
    if any(not span[0] <= v <= span[1] for v in values):
        raise UserError(f"{what} must be {span[0]:g} to {span[1]:g}, got {text!r}")
    return values


def _machine_pickups(args: argparse.Namespace) -> list[dict[str, Any]] | None:
    """The pickups of the machine profile named by ``--machine`` in the header's terms."""
    if args.machine is None:
        if args.workspace is not None:
            raise UserError("--workspace goes with --machine")
        return None
    from trueturn.jobs.store import Workspace  # only with --machine (as cmd_split)

    machine = Workspace.open(args.workspace).load_machine(args.machine)
    out = []
    for pickup in machine.pickups:
        profile = pickup_profile(pickup.name, pickup)
        out.append({"name": profile.name, "sensitivity_v_per_g": profile.sensitivity_v_per_g,
                    "zero_g_v": profile.zero_g_v,
                    "lowpass_corners_hz": list(profile.lowpass_corners_hz)})
    return out


def _profiles(args: argparse.Namespace, metadata: dict[str, Any]) -> list[PickupProfile]:
    """Pickup profiles from the machine profile (``--machine``) or else the capture
    metadata (``pickups``), overridden by options."""
    pickups = _machine_pickups(args)
    if pickups is None:
        pickups = metadata.get("pickups")
    stored: list[Any] = pickups if isinstance(pickups, list) else []
    sens = _per_channel(args.sensitivity_v_per_g, "--sensitivity-v-per-g", (1e-6, 1e3))
    corners = _per_channel(args.lowpass_hz, "--lowpass-hz", (0.1, 1e6))
    names = args.names.split(",") if args.names else []
    count = max(len(stored), len(sens), len(corners), len(names), 2)
    out = []
    for ch in range(count):
        base = stored[ch] if ch < len(stored) and isinstance(stored[ch], dict) else {}
        try:
            profile = PickupProfile(
                name=str(base.get("name", f"pickup {ch + 1}")),
                sensitivity_v_per_g=base.get("sensitivity_v_per_g"),
                zero_g_v=base.get("zero_g_v"),
                lowpass_corners_hz=tuple(float(f) for f in base.get("lowpass_corners_hz", ())),
                delay_us=float(base.get("delay_us", 0.0)))
        except (TypeError, ValueError):
            raise UserError(f"capture header: pickup {ch + 1} profile is malformed") from None
        if ch < len(names) and names[ch].strip():
            profile = PickupProfile(names[ch].strip(), profile.sensitivity_v_per_g,
                                    profile.zero_g_v, profile.lowpass_corners_hz,
                                    profile.delay_us)
        if ch < len(sens):
            profile = PickupProfile(profile.name, sens[ch], profile.zero_g_v,
                                    profile.lowpass_corners_hz, profile.delay_us)
        if ch < len(corners):
            profile = PickupProfile(profile.name, profile.sensitivity_v_per_g, profile.zero_g_v,
                                    (corners[ch],), profile.delay_us)
        out.append(profile)
    return out


def run(args: argparse.Namespace) -> int:
    if args.bump:
        return run_bump(args)
    if args.speed_rpm is not None:
        raise UserError("--speed-rpm goes with --bump (the running speed to compare with the "
                        "natural frequencies)")
    if args.revs is not None and args.revs < 2:
        raise UserError("--revs must be at least 2")
    if args.revs is not None and args.revs > ALL_REVS:  # the window held in memory
        raise UserError(f"--revs must be at most {ALL_REVS} (the most one analysis averages)")
    plot_path = None
    if args.plot is not None:
        if not args.sweep:
            raise UserError("--plot draws a sweep: give --sweep too")
        plot_path = check_output(args.plot)  # before the work: the one output rule
    result = _analyze_file(args.capture, args)
    if args.second is not None:
        second = _analyze_file(args.second, args)
        try:
            result = compare_starts(result, second)
        except ValueError as exc:
            raise UserError(f"{one_line(args.capture)} and {one_line(args.second)}: "
                            f"{exc}") from None
    if plot_path is not None and result.sweep is not None:
        try:
            atomic_write_text(plot_path, sweep_svg(result.sweep, f"1x against speed, "
                                                   f"{Path(args.capture).name}"))
        except OSError as exc:
            raise UserError(f"cannot write {one_line(plot_path)}: "
                            f"{exc.strerror or exc}") from None
    if args.json:
        print_json(result.to_json())
    else:
        print(format_table(result))
    return 0


def _analyze_file(name: str, args: argparse.Namespace) -> Analysis:
    """One capture analysed with the options given; refused when it gives no 1x reading."""
    with open_capture(name) as reader:
        metadata = reader.metadata
        mains = args.mains_hz
        if mains is None:
            stored = metadata.get("mains_hz")
            mains = float(stored) if stored in (50, 60) else 50.0
        unit = UNIT_CHOICES[args.unit] if args.unit else None
        assert unit is None or unit in UNITS
        stored_identity = metadata.get("identity")
        watch = _Watch(metadata)
        # streamed from the file: memory is bounded by the averaging window, not the file
        result = analyze_capture(reader.chunks(), revs=args.revs, mains_hz=mains,
                                 profiles=_profiles(args, metadata), unit=unit,
                                 identity=stored_identity if isinstance(stored_identity, dict)
                                 else None, observe=watch, sweep=args.sweep,
                                 again=reader.chunks)
    _check_protocol(name, watch.identities)
    short = watch.incomplete(metadata)
    if short:
        result = dataclasses.replace(result, warnings=(describe(short), *result.warnings),
                                     findings=(short, *result.findings))
    if not result.readings:
        why = result.warnings[0] if result.warnings else "no samples and tach edges found"
        raise UserError(f"{one_line(name)}: no 1x reading could be made ({why})")
    return result


class _Watch:
    """What ``analyze`` checks besides the analysis, seen in the same pass over the bytes:
    the identities (header and stream) and the time the last stream's samples span."""

    def __init__(self, metadata: dict[str, Any]) -> None:
        self.identities: list[dict[str, Any]] = []
        header = metadata.get("identity")
        if isinstance(header, dict):
            self.identities.append(header)
        self.tick_hz: Any = header.get("tick_hz") if isinstance(header, dict) else None
        self.start: int | None = None
        self.first: int | None = None
        self.end: int | None = None
        self.period = 0

    def __call__(self, item: Message | LinkEvent) -> None:
        if not isinstance(item, Message):
            return
        if item.name == "samples":
            v = item.values
            if self.first is None or v["start_tick"] != self.start:
                self.start, self.first = int(v["start_tick"]), int(v["first_index"])
                self.period = int(v["period_ticks"])
            self.end = int(v["first_index"]) + len(v["samples"])
        elif item.name == "identity":
            self.tick_hz = item.values["tick_hz"]
            if len(self.identities) < 8:
                self.identities.append(item.values)

    def incomplete(self, metadata: dict[str, Any]) -> Finding | None:
        """A finding when the capture holds less signal than ``record`` was asked for (the
        cable was pulled, the board restarted or the recording was interrupted)."""
        requested = metadata.get("requested")
        wanted_s = requested.get("seconds") if isinstance(requested, dict) else None
        if isinstance(wanted_s, bool) or not isinstance(wanted_s, (int, float)) or wanted_s <= 0:
            return None
        if isinstance(requested, dict) and requested.get("until_stop") is True:
            return None  # record --until-stop: --seconds was the longest, not the length
        # the time the last stream's sample indices span (SPEC 4.4: every block carries its
        # stream's start and period): frames lost on the way do not shorten it, only a
        # stream that stopped early does
        got_s = 0.0
        if (self.first is not None and self.end is not None and isinstance(self.tick_hz, int)
                and self.tick_hz > 0):
            got_s = ((self.end - self.first) & 0xFFFFFFFF) * self.period / self.tick_hz
        if got_s >= 0.98 * wanted_s:
            return None
        return Finding(Code.INCOMPLETE_CAPTURE, details={"recorded_s": round(got_s, 3),
                                                         "requested_s": wanted_s})


def _check_protocol(name: str, identities: list[dict[str, Any]]) -> None:
    """Refuse a capture from a board speaking other definitions, naming both (SPEC.md §5)."""
    catalogue = load_catalogue()
    for identity in identities:
        version, digest = identity.get("protocol_version"), identity.get("definition_hash")
        if not isinstance(version, int) or not isinstance(digest, int):
            continue
        if (version, digest) != (catalogue.protocol_version, catalogue.definition_hash):
            raise UserError(f"{one_line(name)} was recorded from a board speaking protocol "
                            f"{version} (definitions {digest:#010x}); this trueturn reads "
                            f"protocol {catalogue.protocol_version} "
                            f"({catalogue.definition_hash:#010x}): analyze it with the "
                            "trueturn version that recorded it")


def _peak_label(peak: SpectrumPeak) -> str:
    """``line``, ``line + 2x`` (the stronger first), ``line, fitted`` (its level from the
    order fit: the spectrum cannot show it beside a strong neighbour)."""
    label = " + ".join((peak.label, *peak.also))
    return f"{label}, fitted" if peak.fitted else label


def format_table(result: Analysis) -> str:
    """The readable form: speed, one row per pickup, harmonics, peaks, warnings."""
    lines = [f"speed {result.speed_rpm:.1f} rpm ({result.speed_rpm / 60.0:.2f} Hz)", ""]
    head = ("pickup", "1x amplitude", "phase", "95% conf", "revs", "ready")
    rows = [head]
    for r in result.readings:
        conf = "-" if r.confidence_deg >= 180 else f"+/-{r.confidence_deg:.1f} deg"
        rows.append((r.sensor, f"{r.amplitude:.4g} {r.unit}", f"{r.phase_deg:.1f} deg", conf,
                     str(r.revolutions), "yes" if r.steady else "not yet"))
    widths = [max(len(row[i]) for row in rows) for i in range(len(head))]
    lines += ["  ".join(cell.ljust(w) for cell, w in zip(row, widths, strict=True)).rstrip()
              for row in rows]
    lines.append("")
    for r in result.readings:
        orders = ", ".join(f"{h.order}x {h.amplitude:.3g} @ {h.phase_deg:.0f} deg"
                           for h in r.harmonics)
        lines.append(f"{r.sensor}: {orders} ({r.unit})")
    for spec in result.spectra:
        if spec.peaks:
            peaks = ", ".join(f"{p.hz:.1f} Hz {p.amplitude:.3g} [{_peak_label(p)}]"
                              for p in spec.peaks)
            lines.append(f"{spec.sensor} spectrum peaks ({spec.unit}): {peaks}")
    if result.severity:
        lines += ["", "overall severity (ISO 10816-1 Class I zones, boundaries from memory):"]
        lines += [f"  - {describe(v.as_finding())}" for v in result.severity]
    second = result.second_start
    if second is not None:
        lines += ["", f"second start: {second.speed_rpm:.1f} rpm"]
        lines += [f"  {r.sensor}: {r.amplitude:.4g} {r.unit} at {r.phase_deg:.1f} deg"
                  for r in second.readings]
        lines += [f"  {name}: not compared ("
                  + ("no reading in both starts" if why == "no_reading" else
                     "no phase, or the 95% circles are too wide to tell") + ")"
                  for name, why in second.not_compared]
    if result.unbalance:
        lines += ["", f"is it unbalance? {describe(result.unbalance[0])}"]
        lines += [f"  - {describe(f)}" for f in result.unbalance[1:]]
    if result.readings:
        bias = max(r.timing_bias_deg for r in result.readings)
        unresolved = max(1.0 / r.window_s for r in result.readings if r.window_s > 0) \
            if any(r.window_s > 0 for r in result.readings) else math.inf
        lines += ["", f"95% conf: the scatter of the averaged revolutions (noise, hum left "
                      f"over, tach jitter) plus up to {bias:.3f} deg of tach and aperture "
                      "timing; not covered: a vibration within "
                      f"{unresolved:.2g} Hz of 1x, the pickup sensitivity and ADC reference, "
                      "filters beyond the pickup profile, the tach sensor's own delay"]
    if result.sweep is not None:
        lines += ["", *format_sweep(result)]
    if result.warnings:
        lines += ["", "warnings:"] + [f"  - {w}" for w in result.warnings]
    return "\n".join(lines)


#: the most sweep rows the table shows (the JSON has every point)
SWEEP_ROWS = 40


def format_sweep(result: Analysis) -> list[str]:
    """The sweep's readable form: a thinned table of the 1x against speed, the resonances
    and the response slope at the balancing speed."""
    sw = result.sweep
    assert sw is not None
    if not sw.is_sweep:
        return [f"sweep: none (the speed stayed within {sw.low_rpm:.0f}-{sw.high_rpm:.0f} rpm)"]
    step = max(1, -(-len(sw.points) // SWEEP_ROWS))
    names = [v.name for v in sw.points[0].pickups] if sw.points else []
    shown = "" if step == 1 else f", every {step}th shown (--json has all)"
    lines = [f"sweep: 1x ({sw.unit}) at {len(sw.points)} speeds from {sw.low_rpm:.0f} to "
             f"{sw.high_rpm:.0f} rpm{shown}; '?' = not above its noise"]
    rows = [("rpm", *names)]
    for p in sw.points[::step]:
        cells = []
        for name in names:
            v = p.value(name)
            cells.append("-" if v is None else
                         f"{v.amplitude:.3g} @ {v.phase_deg:.0f} deg{'' if v.usable else ' ?'}")
        rows.append((f"{p.speed_rpm:.0f}", *cells))
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    lines += ["  " + "  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)).rstrip()
              for r in rows]
    lines.append("support resonances (peak of the 1x per unit unbalance force; damping by an "
                 "SDOF fit to amplitude and phase):")
    if not sw.resonances:
        lines.append("  none found in the sweep")
    for r in sw.resonances:
        low, high = r.damping_ratio_95 or (math.nan, math.nan)
        damping = ("not one mode alone (others nearby): no damping given"
                   if r.single_mode is False else
                   "damping not resolved (too few revolutions near it, or the fit cannot "
                   "tell it within a factor 1.5)" if r.damping_ratio is None else
                   f"damping {100 * r.damping_ratio:.1f} % (95 %: {100 * low:.1f}-"
                   f"{100 * high:.1f} %, SDOF fit{' with the sweep build-up' if r.swept else ''}"
                   f", natural speed {r.fit_speed_rpm:.0f} rpm)"
                   if r.method == "sdof_fit" and r.fit_speed_rpm is not None else
                   f"damping {100 * r.damping_ratio:.1f} % ({r.method})")
        if r.lower_rpm is not None and r.upper_rpm is not None:
            damping += (f"; half-power {r.lower_rpm:.0f}-{r.upper_rpm:.0f} rpm, "
                        f"{r.points_in_band} points")
        lines.append(f"  - {r.pickup}: {r.speed_rpm:.0f} rpm, {damping}")
    for k in result.speed_slopes:
        lines.append(f"response slope at {k.speed_rpm:.0f} rpm, {k.pickup}: 1x ~ speed^"
                     f"{k.amplitude_exponent:.2f}, phase {k.phase_deg_per_ln_speed:+.1f} deg "
                     "per unit of ln(speed)")
    return lines


#: a bump-test recording with this many tach edges or more was made on a turning rotor
BUMP_TACH_EDGES_REFUSED = 2


def run_bump(args: argparse.Namespace) -> int:
    """``analyze FILE --bump``: the bump test of a recording at standstill (dsp/bump.py)."""
    for flag, given in (("--sweep", args.sweep), ("--plot", args.plot is not None),
                        ("a second capture", args.second is not None),
                        ("--revs", args.revs is not None), ("--unit", args.unit is not None),
                        ("--lowpass-hz", args.lowpass_hz is not None)):
        if given:
            raise UserError(f"--bump reads one recording of taps at standstill; {flag} does "
                            "not go with it")
    name = args.capture
    with open_capture(name) as reader:
        metadata = reader.metadata
        mains = args.mains_hz
        if mains is None:
            stored = metadata.get("mains_hz")
            mains = float(stored) if stored in (50, 60) else None
        identity = metadata.get("identity")
        found = analyze_bump_capture(reader.chunks(), _profiles(args, metadata), mains,
                                     identity if isinstance(identity, dict) else None)
    result = found.result
    if result is None:
        raise UserError(f"{one_line(name)}: no samples in the capture")
    if found.tach_edges >= BUMP_TACH_EDGES_REFUSED:
        raise UserError(f"{one_line(name)}: {found.tach_edges} tach edges: the rotor was "
                        "turning; a bump test is recorded on a stopped machine, power locked "
                        "out")
    steady = next((f for f in result.findings if f.code is Code.STEADY_LINE), None)
    if steady is not None:
        raise UserError(f"{one_line(name)}: {describe(steady)}")
    if not result.taps:
        raise UserError(f"{one_line(name)}: {describe(Finding(Code.NO_TAPS))}")
    findings = list(result.findings)
    if args.speed_rpm is not None:
        findings += running_speed_findings(result, args.speed_rpm)
    if args.json:
        data = result.to_json()
        data["findings"] = [f.to_json() for f in findings]
        data["warnings"] = [describe(f) for f in findings]
        data["sample_rate_hz"] = round(found.rate_hz, 3)
        data["seconds"] = round(found.seconds, 3)
        data["units"] = list(found.units)
        if args.speed_rpm is not None:
            data["speed_rpm"] = args.speed_rpm
        print_json({"bump": data})
        return 0
    print(format_bump(result, findings, found.units, found.rate_hz, found.seconds))
    return 0


def format_bump(result: BumpResult, findings: list[Finding], units: tuple[str, ...],
                rate_hz: float, seconds: float) -> str:
    """The bump test's readable form: the taps, the modes per pickup, the warnings."""
    times = ", ".join(f"{t.time_s:.1f}" for t in result.taps)
    lines = [f"bump test: {len(result.taps)} tap(s) at {times} s "
             f"({seconds:.1f} s at {rate_hz:g} Hz per pickup)", ""]
    if result.modes:
        width = max(len(m.pickup) for m in result.modes)
        lines.append(f"{'pickup':<{width}}  natural frequency        as speed     "
                     "damping ratio        taps")
        for m in result.modes:
            lines.append(f"{m.pickup:<{width}}  {m.frequency_hz:8.2f} ± "
                         f"{m.frequency_se_hz:<6.2g} Hz {m.speed_rpm:7.0f} rpm  "
                         f"{100 * m.damping_ratio:6.2f} ± {100 * m.damping_se:<5.2g} %  "
                         f"{m.taps}")
        lines.append("(± one standard error; damping as a percentage of critical)")
    else:
        lines.append("no mode stood out of the taps' free decays")
    if findings:
        lines += ["", "warnings:", *(f"  - {describe(f)}" for f in findings)]
    lines += ["", "A bump test is a hands-on step: the rotor proven at standstill and the "
                  "power locked out; strike the housing, never the rotor; the "
                  "manufacturer's instructions come first."]
    return "\n".join(lines)
