"""The bench screen's other views: the status strip, the live meter and the spectrum.

Like the guide's panels (:mod:`trueturn.ui.steps`), each takes what it shows from the
latest snapshot (``show(...)``) into reactive attributes or text, and repaints only when
that changed.
"""

from __future__ import annotations

import dataclasses

from textual.app import ComposeResult
from textual.containers import Container, Vertical
from textual.widgets import Sparkline

from trueturn.angles import Rotation
from trueturn.dsp.findings import Code, describe
from trueturn.model import Run
from trueturn.procedure.standstill import StandstillState
from trueturn.ui.session import BoardIdentity, Snapshot
from trueturn.ui.texts import CLIPPED_MARK, METRIC_SHOWN, Shown
from trueturn.ui.widgets import MarkupText, PolarPlot, PolarPoint

STYLES = ("cyan", "magenta", "yellow", "green")  # pickup A, B, ... on the meter and the plot


class StatusStrip(MarkupText):
    """Two lines always on top: machine and board; motion (standstill, turning, tach fault,
    a tap test's ringing, no data, lost link) and what the link lost."""

    def show(self, snap: Snapshot, *, machine: str, demo: bool,
             identity: BoardIdentity | None, link_error: str, reconnecting: bool) -> None:
        board = (f"{identity.board} fw {identity.firmware} · protocol "
                 f"v{identity.protocol_version}" if identity else "no board")
        speed = snap.meter.speed_rpm
        ev = snap.evidence
        state = ev.state if ev is not None else StandstillState.NO_DATA
        if link_error:
            motion = "[b red]LINK LOST[/] · l: reconnect" if not reconnecting else \
                "[b yellow]reconnecting…[/]"
        elif ev is None or state is StandstillState.NO_DATA:
            motion = "[b red]NO DATA[/]: standstill cannot be proven"
        elif state is StandstillState.PROVEN and ev.tach_absent:
            # the amplitude-only procedure: the pickups alone, a tach fitted or not
            tach = "no tach" if not ev.tach_edges_seen else "tach not relied on"
            motion = f"[green]STANDSTILL[/] ({tach}; pickups quiet {ev.pickups_quiet_s:.0f} s)"
        elif state is StandstillState.PROVEN:
            motion = (f"[green]STANDSTILL[/] (tach silent {ev.tach_silent_s:.0f} s, "
                      "pickups quiet)")
        elif state is StandstillState.TURNING:   # tach edges: believed, whatever the method
            motion = f"[b red]TURNING {speed or 0:.0f} rpm[/]"
        elif ev.tach_absent and ev.moving_pickups:
            motion = (f"[b red]TURNING ~{speed:.0f} rpm[/] (pickups, no tach)" if speed else
                      "[b red]MOVING[/] (the pickups see vibration; no tach)")
        elif state is StandstillState.TACH_FAULT:
            hz = ev.seen_hz
            motion = "[b red]TACH FAULT[/]: pickups see " + (
                f"{hz:.0f} Hz (~{60 * hz:.0f} rpm)" if hz is not None else "vibration")
        elif state is StandstillState.TAP_RINGING:
            hz = ev.seen_hz
            motion = "[b yellow]TAP TEST[/]: ringing expected" + (
                f" ({hz:.0f} Hz)" if hz is not None else "") + ", no steady line"
        else:
            motion = f"[yellow]checking standstill… {ev.wait_s:.0f} s to go[/]"
        c = snap.counters
        lost = (f"lost: {c.get('samples_lost', 0) + snap.board_samples_dropped} samples, "
                f"{c.get('frames_lost', 0) + c.get('frames_bad', 0) + snap.board_frames_dropped}"
                f" frames")
        if c.get("board_resets", 0):
            lost += f", board restarts: {c['board_resets']}"
        self.text = f"{machine}{' [b]DEMO[/b]' if demo else ''} · {board}\n{motion} · {lost}"


class MeterView(Container):
    """Live 1x per pickup (amplitude, phase, confidence, revolutions) beside the polar plot
    of the live vectors (letters) and this job's earlier runs (digits)."""

    def compose(self) -> ComposeResult:
        yield MarkupText(id="meter-table")
        yield PolarPlot(id="polar")

    def show(self, snap: Snapshot, runs: list[Run], rotation: Rotation,
             shown: Shown = METRIC_SHOWN) -> None:
        """Draw the live 1x and the job's runs; numbers in the machine's units (``shown``)."""
        meter = snap.meter
        lines = [f"[b]Live 1x[/b]   speed {shown.speed(meter.speed_rpm or 0)}", ""]
        points: list[PolarPoint] = []
        for i, name in enumerate(meter.sensors):
            r = meter.readings.get(name)
            style = STYLES[i % len(STYLES)]
            tag = chr(ord("A") + i)
            if r is None:
                lines += [f"[{style}]{tag} {name}[/]", "  waiting for whole revolutions…", ""]
                continue
            ready = "[green]READY[/]" if r.steady else "[yellow]settling[/]"
            # its circle cannot hold the hum line next to its 1x: no ± shown
            on_hum = not r.steady and any(f.code is Code.ORDER_ON_MAINS and f.blocking
                                          and f.pickup == name for f in meter.findings)
            if on_hum:
                ready = "[yellow]hum not separated[/]"
            if r.clipped:  # reads low: the engine leaves it out and gives no pass on it
                ready += CLIPPED_MARK
            phase = f"{r.phase_deg:5.0f}°" if r.phase_deg is not None else "  —  "
            lines += [f"[{style}]{tag} {name}[/]  {ready}",
                      f"  {shown.vibration(r.amplitude, r.unit, width=8)}  phase {phase} "
                      + ("" if on_hum else f"±{r.confidence_deg:.0f}°"),
                      f"  {r.revolutions} rev averaged", ""]
            if r.phase_deg is not None:
                amplitude, _ = shown.vibration_value(r.amplitude, r.unit)
                points.append(PolarPoint(amplitude, r.phase_deg, tag, style))
        for k, run in enumerate(runs):
            for i, name in enumerate(meter.sensors):
                r = run.readings.get(name)
                if r is not None and r.phase_deg is not None:
                    # one digit per run: run 10 shows 0
                    amplitude, _ = shown.vibration_value(r.amplitude, r.unit)
                    points.append(PolarPoint(amplitude, r.phase_deg, str((k + 1) % 10),
                                             STYLES[i % len(STYLES)], current=False))
        c = snap.counters
        lines += [f"link: {c.get('frames_bad', 0)} bad frames, {c.get('frames_lost', 0)} lost,",
                  f"{c.get('samples_lost', 0)} samples lost, board dropped "
                  f"{snap.board_samples_dropped}"]
        # a 1x the hum line next to it hides says so first (what the reading waits for)
        hum = next((f for f in meter.findings
                    if f.code is Code.ORDER_ON_MAINS and f.blocking), None)
        if meter.tach_faults:
            lines += [f"[yellow]Tach: {f}[/]" for f in meter.tach_faults[:2]]
        elif hum is not None:
            lines.append(f"[yellow]{describe(dataclasses.replace(hum, pickup=None), brief=True)}[/]")
        elif meter.warnings:
            lines.append(f"[yellow]{meter.warnings[-1]}[/]")
        self.query_one("#meter-table", MarkupText).text = "\n".join(lines)
        self.query_one("#polar", PolarPlot).show(
            points, shown.vibration_value(1.0, meter.unit)[1] if meter.unit else "", rotation)


class SpectrumView(Vertical):
    """A strip of the recent spectrum and its labelled peaks."""

    def compose(self) -> ComposeResult:
        yield Sparkline([0.0], id="spark")
        yield MarkupText(id="peaks")

    def show(self, snap: Snapshot) -> None:
        meter = snap.meter
        spark = self.query_one("#spark", Sparkline)
        data = list(meter.spectrum_amplitude) or [0.0]
        if list(spark.data or []) != data:
            spark.data = data
        lines = [f"[b]Spectrum[/b] 0 … {meter.spectrum_max_hz:.0f} Hz (left to right)", "",
                 "  freq Hz   amplitude      label"]
        for hz, amp, label in meter.peaks[:8]:
            lines.append(f"  {hz:7.1f}   {amp:10.4f}   {label}")
        if not meter.peaks:
            lines.append("  (collecting…)")
        self.query_one("#peaks", MarkupText).text = "\n".join(lines)
