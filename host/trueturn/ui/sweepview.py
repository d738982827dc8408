"""The bench screen's sweep view: the last coast-down or run-up as a character-cell Bode plot.

Amplitude and phase of the 1x against speed, one letter per pickup (A, B, ... as on the
meter), the resonances found (half-power bandwidth, :mod:`trueturn.dsp.sweep`) marked under
the speed axis and listed with their damping. Everything here is drawing: the sweep, its
resonances and its findings come from :mod:`trueturn.dsp.coast`; the findings' words from
:func:`trueturn.dsp.findings.describe`. Fits 80x24 (21 lines under the status strip and
above the footer).
"""

from __future__ import annotations

from dataclasses import dataclass

from trueturn.dsp.coast import SweepOutcome
from trueturn.dsp.findings import describe
from trueturn.ui.texts import METRIC_SHOWN, Shown
from trueturn.ui.views import STYLES
from trueturn.ui.widgets import MarkupText

#: the plot's columns (left of them: a 9-character scale and the axis line)
PLOT_COLUMNS = 66
AMPLITUDE_ROWS = 7
PHASE_ROWS = 4
#: the most resonances listed (the rest: "and N more")
RESONANCE_LINES = 3
KIND_WORDS = {"coastdown": "coast-down", "runup": "run-up"}


@dataclass(frozen=True)
class ShownSweep:
    """A sweep to show, and the run it belongs to (its label; "" when it followed no kept
    run, e.g. a run stopped)."""

    outcome: SweepOutcome
    run_label: str = ""


def _column(speed_rpm: float, lo: float, hi: float) -> int:
    return min(PLOT_COLUMNS - 1, max(0, round((speed_rpm - lo) / (hi - lo) * (PLOT_COLUMNS - 1))))


def sweep_lines(shown_sweep: ShownSweep | None, sensors: tuple[str, ...],
                shown: Shown = METRIC_SHOWN) -> list[str]:
    """The view's lines (console markup): header, Bode plot, speed axis, resonances."""
    if shown_sweep is None:
        return ["[b]Sweep[/b]: none yet.", "",
                "When the machine coasts down (switched off after a run) or runs up, the",
                "app keeps each revolution's 1x and shows it here against speed: the Bode",
                "plot per pickup, and the support resonances found with their damping."]
    out = shown_sweep.outcome
    sweep = out.sweep
    names = [n for n in sensors if any(p.value(n) is not None for p in sweep.points)] or \
        sorted({v.name for p in sweep.points for v in p.pickups})
    lo, hi = sweep.low_rpm, sweep.high_rpm
    if not hi > lo:
        hi = lo + 1.0
    after = f" after run '{shown_sweep.run_label}'" if shown_sweep.run_label else ""
    label = ""
    # amplitude per pickup and column: the largest usable 1x there (noise-only points not
    # drawn: their phase means nothing and their amplitude is the noise's)
    amp_cells: dict[tuple[int, int], str] = {}
    phase_cells: dict[tuple[int, int], str] = {}
    top = 0.0
    columns: list[dict[int, tuple[float, float]]] = []
    for name in names:
        best: dict[int, tuple[float, float]] = {}
        for p in sweep.points:
            v = p.value(name)
            if v is None or not v.usable:
                continue
            amplitude, label = shown.vibration_value(v.amplitude, sweep.unit)
            col = _column(p.speed_rpm, lo, hi)
            if col not in best or amplitude > best[col][0]:
                best[col] = (amplitude, v.phase_deg)
            top = max(top, amplitude)
        columns.append(best)
    top = top or 1.0
    for i, best in enumerate(columns):
        tag = f"[{STYLES[i % len(STYLES)]}]{chr(ord('A') + i)}[/]"
        for col, (amplitude, phase) in best.items():
            row = AMPLITUDE_ROWS - 1 - min(AMPLITUDE_ROWS - 1,
                                           int(amplitude / top * AMPLITUDE_ROWS))
            amp_cells[(row, col)] = tag if (row, col) not in amp_cells else "*"
            prow = PHASE_ROWS - 1 - min(PHASE_ROWS - 1, int(phase / 360.0 * PHASE_ROWS))
            phase_cells[(prow, col)] = tag if (prow, col) not in phase_cells else "*"
    lines = [f"[b]Sweep[/b]: {KIND_WORDS[out.kind]}{after}, {lo:.0f}-{hi:.0f} rpm, "
             f"{len(sweep.points)} points; 1x {label or sweep.unit}"]
    for row in range(AMPLITUDE_ROWS):
        scale = {0: f"{top:8.3g}", 1: "1x", 2: "amplit."}.get(row, "")
        lines.append(f"{scale:>8} |" + "".join(amp_cells.get((row, c), " ")
                                                for c in range(PLOT_COLUMNS)))
    for row in range(PHASE_ROWS):
        scale = {0: "360 deg", 1: "phase", 2: "lag", PHASE_ROWS - 1: "0 deg"}.get(row, "")
        lines.append(f"{scale:>8} |" + "".join(phase_cells.get((row, c), " ")
                                                for c in range(PLOT_COLUMNS)))
    marks = [" "] * PLOT_COLUMNS
    for r in sweep.resonances:
        marks[_column(r.speed_rpm, lo, hi)] = "^"
    lines.append(f"{'':>8} +" + "".join(marks))
    left, right = f"{lo:.0f} rpm", f"{hi:.0f} rpm"
    lines.append(f"{'':>9}{left}{right:>{PLOT_COLUMNS - len(left)}}")
    legend = "  ".join(f"[{STYLES[i % len(STYLES)]}]{chr(ord('A') + i)}[/] {n}"
                       for i, n in enumerate(names))
    lines.append(f"{legend}   ^ resonance, * both")
    if not sweep.resonances:
        lines.append("No resonance found in the sweep (half-power method).")
    else:
        lines.append("Resonances (half-power bandwidth):")
        for r in sweep.resonances[:RESONANCE_LINES]:
            tag = chr(ord("A") + names.index(r.pickup)) if r.pickup in names else "?"
            damping = ("damping not resolved" if r.damping_ratio is None
                       else f"damping {100 * r.damping_ratio:.1f} %")
            lines.append(f"  {tag} {r.pickup}: {r.speed_rpm:.0f} rpm, {damping}")
        if len(sweep.resonances) > RESONANCE_LINES:
            lines.append(f"  and {len(sweep.resonances) - RESONANCE_LINES} more (in the job "
                         "and the report)")
    lines += [f"[yellow]{describe(f, brief=True)}[/]" for f in out.findings[:1]]
    return lines


class SweepView(MarkupText):
    """The last sweep's Bode plot and resonances (:func:`sweep_lines`)."""

    def show(self, shown_sweep: ShownSweep | None, sensors: tuple[str, ...],
             shown: Shown = METRIC_SHOWN) -> None:
        self.text = "\n".join(sweep_lines(shown_sweep, sensors, shown))
