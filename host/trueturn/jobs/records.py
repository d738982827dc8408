"""Job records: every run of one balancing job, what was done between runs, and the outcome.

A job stores plain numbers. Readings come from the DSP layer, corrections, influence
coefficients and the ISO 21940-11 verdict from the balancing engine; this module only keeps
them, checks they are well formed and answers simple questions (which run is next, which
parts are on the rotor now). Angles follow host/trueturn/angles.py (from the reference mark,
against rotation, 0-360); masses in g, radii in mm.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from typing import Literal

from trueturn.balance.model_first import Distrust
from trueturn.jobs.profiles import MachineProfile
from trueturn.model import Reading, RunKind
from trueturn.model.fields import limits
from trueturn.model.units import VibrationUnit


def now_iso() -> str:
    """The current UTC time as ISO 8601 text with a ``Z`` (seconds resolution)."""
    return dt.datetime.now(dt.timezone.utc).replace(microsecond=0).isoformat().replace(
        "+00:00", "Z")


@dataclass
class SuggestedMass:
    """What the procedure suggested for a part the person fitted otherwise (issue #17)."""

    mass_g: float = field(metadata=limits(above=0))
    angle_deg: float = field(metadata=limits(minimum=0, below=360))
    position: int | None = field(default=None, metadata=limits(minimum=1))
    hole: bool = False


@dataclass
class MassChange:
    """A part attached to or removed from a plane (trial weight, correction part, drilled spot).

    ``mass_g``, ``angle_deg``, ``position`` and ``hole`` are what was fitted; ``hole``:
    material was taken out at ``angle_deg`` (drilled or ground) instead of a weight added;
    ``suggested``: what the procedure asked for, present only when the fitted part differs.
    Both are optional, so version-2 files without them read as before (no migration).
    """

    action: Literal["attach", "remove"]
    plane: str = field(metadata=limits(nonempty=True))
    mass_g: float = field(metadata=limits(above=0))
    angle_deg: float = field(metadata=limits(minimum=0, below=360))
    purpose: Literal["trial", "correction", "trim", "other"] = "correction"
    position: int | None = field(default=None, metadata=limits(minimum=1))
    radius_mm: float | None = field(default=None, metadata=limits(above=0))
    part: str = ""
    time: str | None = None
    hole: bool = False
    suggested: SuggestedMass | None = None


@dataclass
class SplitPart:
    """One share of a correction split onto a fixed position."""

    position: int = field(metadata=limits(minimum=1))
    angle_deg: float = field(metadata=limits(minimum=0, below=360))
    mass_g: float = field(metadata=limits(minimum=0))


@dataclass
class CorrectionEntry:
    """A correction computed after a run: add (or remove) ``mass_g`` at ``angle_deg``."""

    plane: str = field(metadata=limits(nonempty=True))
    mass_g: float = field(metadata=limits(minimum=0))
    angle_deg: float = field(metadata=limits(minimum=0, below=360))
    action: Literal["add", "remove"] = "add"
    radius_mm: float | None = field(default=None, metadata=limits(above=0))
    split: list[SplitPart] = field(default_factory=list)
    #: made from the parts the person owns (issue #22): the unbalance the chosen parts
    #: leave, the plane's share of the allowance (g·mm), and whether the search proved the
    #: combination best; None when any mass could be made
    kit_residual_gmm: float | None = field(default=None, metadata=limits(minimum=0))
    kit_allowed_gmm: float | None = field(default=None, metadata=limits(minimum=0))
    kit_proven_best: bool | None = None


@dataclass
class PickupLevel:
    """What one pickup showed at a confirmation: broadband level, its quiet limit, any line."""

    pickup: str = field(metadata=limits(nonempty=True))
    level_g_rms: float = field(metadata=limits(minimum=0))
    limit_g_rms: float = field(metadata=limits(minimum=0))
    line_hz: float | None = field(default=None, metadata=limits(minimum=0))


@dataclass
class Confirmation:
    """A safety confirmation the operator gave, with the standstill evidence seen then.

    ``standstill_by_tach``: a tach seen working was silent for the hold time (False when the
    standstill rested on the pickups and a longer hold, or was not proven). The evidence
    fields are None in files written before they existed.
    """

    time: str = field(metadata=limits(nonempty=True))  # host time (UTC)
    step: str = field(metadata=limits(nonempty=True))
    standstill_by_tach: bool
    tach_rpm: float | None = field(default=None, metadata=limits(minimum=0))  # last measured
    text: str = ""
    basis: str | None = None  # tach-and-pickups | pickups-long-hold
    board_time_s: float | None = field(default=None, metadata=limits(minimum=0))
    tach_silent_s: float | None = field(default=None, metadata=limits(minimum=0))
    tach_edges_seen: int | None = field(default=None, metadata=limits(minimum=0))
    tach_seen_working: bool | None = None
    last_edge_age_s: float | None = field(default=None, metadata=limits(minimum=0))
    pickups: list[PickupLevel] = field(default_factory=list)


@dataclass
class Event:
    """Something that happened during a run: overspeed, link lost, unsteady speed, ..."""

    time: str = field(metadata=limits(nonempty=True))
    kind: str = field(metadata=limits(nonempty=True))
    detail: str = ""


#: The codes of the unbalance evidence and verdict (dsp/findings.py Code values).
EvidenceCode = Literal["one_x_share", "phase_steadiness", "two_x_ratio", "nonsync_peak",
                       "phase_repeatable"]
VerdictCode = Literal["unbalance_likely", "balancing_may_not_help", "unbalance_undecided"]


@dataclass
class SeverityEntry:
    """A pickup's overall severity in one run (dsp/severity.py): broadband velocity RMS
    over ``band_hz`` (10-1000 Hz, 2-1000 Hz below 600 rpm; None in files written before the
    band was kept: 10-1000 Hz) and its zone (ISO 10816-1 Class I boundaries, from memory);
    both None with ``refused`` when the instrument could not give them."""

    sensor: str = field(metadata=limits(nonempty=True))
    velocity_rms_mm_s: float | None = field(default=None, metadata=limits(minimum=0))
    zone: Literal["A", "B", "C", "D"] | None = None
    refused: Literal["uncalibrated", "band_not_sampled", "speed_too_low"] | None = None
    band_hz: tuple[float, float] | None = None


@dataclass
class EvidenceEntry:
    """One rule of the unbalance judgement at one pickup (dsp/unbalance.py): passed or not,
    with its number (``share`` of 1x in the overall, ``ratio`` to 1x, or the ``difference``
    of two starts' 1x) and, for a non-synchronous peak, its frequency and order; for two
    starts, both phases, the second amplitude over the first and the limit (it depends on
    the readings' 95 % circles)."""

    code: EvidenceCode
    sensor: str = field(metadata=limits(nonempty=True))
    ok: bool = True
    value: float | None = None
    hz: float | None = None
    order: float | None = None
    phases_deg: tuple[float, float] | None = None
    amplitude_ratio: float | None = field(default=None, metadata=limits(minimum=0))
    limit: float | None = field(default=None, metadata=limits(minimum=0))


@dataclass
class UnbalanceEntry:
    """Is it unbalance? The verdict of one run and the evidence behind it."""

    verdict: VerdictCode
    evidence: list[EvidenceEntry] = field(default_factory=list)


@dataclass
class SecondStartEntry:
    """The machine started a second time as found, after a stop (issue #22): is the 1x the
    same? Its readings and overall severity; the verdict over both starts is the as-found
    run's ``unbalance`` (with ``phase_repeatable`` evidence)."""

    time: str = field(metadata=limits(nonempty=True))
    speed_rpm: float = field(metadata=limits(above=0))
    readings: list[Reading] = field(metadata=limits(nonempty=True))
    severity: list[SeverityEntry] = field(default_factory=list)


#: Why a job was stopped before a balance verdict (the person chose to stop there).
StopReason = Literal["balancing_may_not_help"]


@dataclass
class StopEntry:
    """The job was stopped before a verdict, by the person's choice: ``reason``, the failing
    rules ``because`` (the unbalance evidence codes), after which run and when."""

    reason: StopReason
    after_run: int = field(metadata=limits(minimum=1))
    time: str = field(metadata=limits(nonempty=True))
    because: list[EvidenceCode] = field(default_factory=list)


@dataclass
class WentOnEntry:
    """The person was asked whether to go on although balancing may not help (issue #22)
    and went on: after which run, when, and the failing rules ``because`` at the time. A
    job that keeps it does not ask again when it is continued."""

    after_run: int = field(metadata=limits(minimum=1))
    time: str = field(metadata=limits(nonempty=True))
    because: list[EvidenceCode] = field(default_factory=list)


@dataclass
class ModelCoefficientEntry:
    """One influence coefficient of the model (model-first, issue #20 item 4): the 1x of
    ``sensor`` per gram at ``plane``'s radius at angle 0, as amplitude (the job's reading
    unit per gram) and phase, with its 95 % circle radius as a share of the amplitude
    (None: not bounded)."""

    sensor: str = field(metadata=limits(nonempty=True))
    plane: str = field(metadata=limits(nonempty=True))
    amp: float = field(metadata=limits(minimum=0))
    phase_deg: float = field(metadata=limits(minimum=0, below=360))
    spread_rel_95: float | None = field(default=None, metadata=limits(minimum=0))


@dataclass
class ModelCovarianceEntry:
    """The complex covariance of one pickup's predicted coefficients (planes x planes in the
    order of :attr:`ModelEntry.planes`), real and imaginary parts, (unit per gram)^2."""

    sensor: str = field(metadata=limits(nonempty=True))
    real: list[list[float]] = field(metadata=limits(nonempty=True))
    imag: list[list[float]] = field(metadata=limits(nonempty=True))


@dataclass
class ModelRefinementEntry:
    """The model's coefficients after run ``after_run`` refined them (recursive least
    squares over the runs ``runs``, the job's run numbers, the as-found run first), and the
    95 % +/- of the whole correction they give per plane (mass, angle; the planes of
    :attr:`ModelEntry.planes`), to set beside the first correction's."""

    after_run: int = field(metadata=limits(minimum=1))
    runs: list[int] = field(metadata=limits(nonempty=True))
    coefficients: list[ModelCoefficientEntry] = field(metadata=limits(nonempty=True))
    mass_95_g: list[float] = field(default_factory=list)
    angle_95_deg: list[float] = field(default_factory=list)


@dataclass
class TapModeEntry:
    """A natural frequency a tap test found at standstill on ``sensor`` (Hz) and its
    standard error (Hz), as :class:`trueturn.dsp.bump.BumpMode` gives them."""

    sensor: str = field(metadata=limits(nonempty=True))
    frequency_hz: float = field(metadata=limits(above=0))
    frequency_se_hz: float = field(metadata=limits(minimum=0))


@dataclass
class TapEntry:
    """The tap (bump) test at standstill that informed the model (model-first on a stiff
    mount): when, how many taps were found, and the modes per pickup."""

    time: str = field(metadata=limits(nonempty=True))
    taps: int = field(metadata=limits(minimum=1))
    modes: list[TapModeEntry] = field(metadata=limits(nonempty=True))


@dataclass
class ModelEntry:
    """What the model of the rotor answered after the as-found run ``after_run`` and its
    coast-down (model-first, issue #20 item 4), kept so the job can be continued with the
    very same model and reported.

    ``trusted`` False: the reasons ``distrust`` and the job went on with trial runs (no
    coefficients kept). Trusted: the predicted coefficients (``predicted``, the prior of
    every later refinement) with their complex covariance per pickup (``covariance``),
    the first correction's 95 % +/- per plane (``mass_95_g``, ``angle_95_deg``, in the
    order of ``planes``), the share of the as-found 1x it leaves in 95 % of the model's
    draws, after each later run the coefficients refined (``refined``), and the run that
    refuted the model, if one did.
    """

    after_run: int = field(metadata=limits(minimum=1))
    time: str = field(metadata=limits(nonempty=True))
    trusted: bool
    distrust: list[Distrust] = field(default_factory=list)
    residual_fraction_95: float | None = field(default=None, metadata=limits(minimum=0))
    planes: list[str] = field(default_factory=list)
    mass_95_g: list[float] = field(default_factory=list)
    angle_95_deg: list[float] = field(default_factory=list)
    predicted: list[ModelCoefficientEntry] = field(default_factory=list)
    covariance: list[ModelCovarianceEntry] = field(default_factory=list)
    refined: list[ModelRefinementEntry] = field(default_factory=list)
    #: a later run's 1x fell far outside the prediction: that run and the pickup (the job
    #: went on with trials, the model's masses taken off; a continued job finds the same)
    refuted_by_run: int | None = field(default=None, metadata=limits(minimum=1))
    refuted_at: str | None = None
    #: a check run of the model's masses (its correction, or a trim) was stopped by the
    #: runaway alarm at the pickup ``refuted_at`` after this kept run (the stopped run is
    #: not kept): kept once the hands-on step after the alarm took the model's masses off;
    #: the job went on with trials (files without it: None)
    refuted_by_alarm_after_run: int | None = field(default=None, metadata=limits(minimum=1))
    #: the tap test at standstill the model was computed with (optional: files without it
    #: read as before, no migration)
    tap: TapEntry | None = None
    #: the optional tap test was on offer when this answer was kept (not taken nor skipped
    #: yet): a continued job offers it again, asked anew with the as-found run's kept
    #: coast-down (files without it read False: the job goes on as the answer says)
    tap_offered: bool = False

    def _checks(self) -> list[tuple[str, str]]:
        problems: list[tuple[str, str]] = []
        n = len(self.planes)
        if self.trusted and (not n or not self.predicted or not self.covariance):
            problems.append(("predicted", "a trusted model keeps its planes, coefficients "
                             "and covariance"))
        if self.trusted and self.distrust:
            problems.append(("distrust", "a trusted model has no reason not to be trusted"))
        if self.refuted_by_alarm_after_run is not None and (
                not self.trusted or self.refuted_by_run is not None or not self.refuted_at):
            problems.append(("refuted_by_alarm_after_run", "a model refuted by the runaway "
                             "alarm was trusted, names the pickup (refuted_at) and no "
                             "refuting run"))
        for name in ("mass_95_g", "angle_95_deg"):
            if len(getattr(self, name)) not in (0, n):
                problems.append((name, f"needs one value per plane ({n})"))
        for i, cov in enumerate(self.covariance):
            for part in (cov.real, cov.imag):
                if len(part) != n or any(len(row) != n for row in part):
                    problems.append((f"covariance[{i}]", f"must be {n} x {n}"))
                    break
        for i, c in enumerate(self.predicted):
            if c.plane not in self.planes:
                problems.append((f"predicted[{i}].plane", f"{c.plane!r} is not in planes"))
        return problems


@dataclass
class SweepValueEntry:
    """One pickup's 1x at one sweep point: amplitude (the sweep's unit), phase (degrees,
    lag after the tach edge), 95 % circle radius (unit)."""

    pickup: str = field(metadata=limits(nonempty=True))
    amplitude: float = field(metadata=limits(minimum=0))
    phase_deg: float = field(metadata=limits(minimum=0, below=360))
    confidence_radius: float = field(metadata=limits(minimum=0))


@dataclass
class SweepPointEntry:
    """One speed bin of a sweep: its mean speed, the revolutions in it, each pickup's 1x."""

    speed_rpm: float = field(metadata=limits(above=0))
    revolutions: int = field(metadata=limits(minimum=1))
    pickups: list[SweepValueEntry] = field(metadata=limits(nonempty=True))


@dataclass
class ResonanceEntry:
    """A support resonance found at one pickup (dsp/sweep.py): its speed (the fitted mode's
    when resolved, else the half-power peak),
    damping ratio (None when not resolved) by ``method`` with its 95 % interval, the
    half-power band and the measured points in it, how far the peak stands above its
    valleys, and the one-mode curve fit's values."""

    speed_rpm: float = field(metadata=limits(above=0))
    pickup: str = field(metadata=limits(nonempty=True))
    damping_ratio: float | None = field(default=None, metadata=limits(above=0))
    lower_rpm: float | None = field(default=None, metadata=limits(above=0))
    upper_rpm: float | None = field(default=None, metadata=limits(above=0))
    points_in_band: int = field(default=0, metadata=limits(minimum=0))
    peak_ratio: float = field(default=1.0, metadata=limits(minimum=0))
    method: Literal["half_power", "sdof_fit"] = "half_power"
    fit_speed_rpm: float | None = field(default=None, metadata=limits(above=0))
    fit_damping_ratio: float | None = field(default=None, metadata=limits(above=0))
    single_mode: bool | None = None
    #: the damping's 95 % interval (method sdof_fit) and the half-power method's own damping
    damping_ratio_95_low: float | None = field(default=None, metadata=limits(above=0))
    damping_ratio_95_high: float | None = field(default=None, metadata=limits(above=0))
    half_power_damping_ratio: float | None = field(default=None, metadata=limits(above=0))
    #: the fit's model: True the swept response (build-up and lag), False the steady one
    swept: bool | None = None
    #: the observed peak (``speed_rpm`` is the fitted mode's when the fit resolved it) and
    #: the sweep-rate parameter ``|d omega/dt| / (zeta omega_n)^2`` there (Lewis 1932)
    peak_rpm: float | None = field(default=None, metadata=limits(above=0))
    sweep_rate_parameter: float | None = field(default=None, metadata=limits(minimum=0))


@dataclass
class SweepEntry:
    """A coast-down or run-up met after (or before) a run (issue #20): the 1x against speed
    per pickup, in ``unit`` (a dsp unit label), slowest point first, and the resonances
    found; ``balancing_rpm`` the steady speed it started from (coast-down) or reached
    (run-up), None when it held no steady stretch."""

    kind: Literal["coastdown", "runup"]
    time: str = field(metadata=limits(nonempty=True))
    unit: str = field(metadata=limits(nonempty=True))
    low_rpm: float = field(metadata=limits(above=0))
    high_rpm: float = field(metadata=limits(above=0))
    #: the points; in the job file only when ``points_file`` is not given (files before it,
    #: or a job saved while a side file could not be written)
    points: list[SweepPointEntry] = field(default_factory=list)
    resonances: list[ResonanceEntry] = field(default_factory=list)
    balancing_rpm: float | None = field(default=None, metadata=limits(above=0))
    #: the side file beside the job that holds the points (:class:`SweepPointsFile`), written
    #: once when the sweep was kept, so a save of the job does not grow with its sweeps
    points_file: str | None = field(default=None, metadata=limits(nonempty=True))
    #: samples at the ADC's ends while it was recorded (a resonance drove a pickup past its
    #: range: some points' 1x read low, so its curve is not fitted point by point); 0 in
    #: files written before it was kept
    clipped_samples: int = field(default=0, metadata=limits(minimum=0))
    #: why the points could not be read from ``points_file`` (never saved; set on loading)
    points_problem: str | None = field(default=None, init=False, compare=False,
                                       metadata={"transient": True})

    def _checks(self) -> list[tuple[str, str]]:
        problems: list[tuple[str, str]] = []
        if self.points_file is None and not self.points:
            problems.append(("points", "must not be empty (or give points_file)"))
        name = self.points_file
        if name is not None and (name != name.strip() or name.startswith(".")
                                 or any(c in name for c in "/\\:\0")):
            problems.append(("points_file", f"must be a file name beside the job, got {name!r}"))
        return problems


@dataclass
class SweepPointsFile:
    """The points of one kept sweep, in a side file beside its job (``kind: sweep``):
    which job, run and sweep they belong to, and the points as :class:`SweepEntry` has them."""

    job_id: str = field(metadata=limits(nonempty=True))
    run: int = field(metadata=limits(minimum=1))
    sweep: Literal["coastdown", "runup"]
    points: list[SweepPointEntry] = field(metadata=limits(nonempty=True))


@dataclass
class RunEntry:
    """One measurement run, with what was done on the rotor before it and computed after it."""

    index: int = field(metadata=limits(minimum=1))
    kind: RunKind
    time: str = field(metadata=limits(nonempty=True))
    speed_rpm: float = field(metadata=limits(above=0))
    readings: list[Reading] = field(metadata=limits(nonempty=True))
    label: str = ""
    changes: list[MassChange] = field(default_factory=list)
    confirmations: list[Confirmation] = field(default_factory=list)
    corrections: list[CorrectionEntry] = field(default_factory=list)
    events: list[Event] = field(default_factory=list)
    notes: str = ""
    #: overall severity per pickup and the unbalance judgement (issue #22); optional, so
    #: version-2 files without them read as before (no migration)
    severity: list[SeverityEntry] = field(default_factory=list)
    unbalance: UnbalanceEntry | None = None
    #: the as-found run only: a second start compared with it (optional, issue #22)
    second_start: SecondStartEntry | None = None
    #: the index of an earlier run this one measured again (a trial redone larger, a run
    #: off speed, a reading that could not be used): the later one counts (issue #17)
    replaces: int | None = field(default=None, metadata=limits(minimum=1))
    #: the run-up before it and the coast-down after it, when the app saw them (issue #20);
    #: optional, so files without them read as before (no migration)
    sweeps: list[SweepEntry] = field(default_factory=list)

    def reading(self, sensor: str) -> Reading | None:
        """This run's reading of ``sensor``, or None."""
        return next((r for r in self.readings if r.sensor == sensor), None)


@dataclass
class PendingStep:
    """Hands-on work done since the last completed run, not yet measured (kept across crashes)."""

    changes: list[MassChange] = field(default_factory=list)
    confirmations: list[Confirmation] = field(default_factory=list)
    notes: str = ""
    events: list[Event] = field(default_factory=list)  # e.g. a run stopped, not kept
    #: the rotor was set up to measure this earlier run again (issue #17)
    redo_of: int | None = field(default=None, metadata=limits(minimum=1))


@dataclass
class PlaneVerdict:
    """Residual unbalance against the permissible value in one plane (ISO 21940-11)."""

    plane: str = field(metadata=limits(nonempty=True))
    residual_gmm: float = field(metadata=limits(minimum=0))
    permissible_gmm: float = field(metadata=limits(above=0))
    passed: bool


@dataclass
class VerdictEntry:
    """The balance quality verdict computed by the engine after a run."""

    grade: float = field(metadata=limits(above=0))
    speed_rpm: float = field(metadata=limits(above=0))
    after_run: int = field(metadata=limits(minimum=1))
    planes: list[PlaneVerdict] = field(metadata=limits(nonempty=True))
    passed: bool
    standard: str = "ISO 21940-11:2016"
    note: str = ""


@dataclass
class InfluenceEntry:
    """Influence coefficient of ``plane`` on ``sensor``: vibration per gram, as amp/phase."""

    sensor: str = field(metadata=limits(nonempty=True))
    plane: str = field(metadata=limits(nonempty=True))
    amp: float = field(metadata=limits(minimum=0))
    phase_deg: float = field(metadata=limits(minimum=0, below=360))


@dataclass
class CoefficientSet:
    """Saved influence coefficients of one machine at one speed, for later one-run trims.

    ``amp`` is in ``unit`` per gram placed at the plane's radius (see the machine profile).
    """

    speed_rpm: float = field(metadata=limits(above=0))
    unit: VibrationUnit
    entries: list[InfluenceEntry] = field(metadata=limits(nonempty=True))
    job_id: str = ""
    created: str = ""

    def matrix(self, sensors: list[str], planes: list[str]) -> list[list[complex]]:
        """Coefficients as complex numbers, rows ``sensors``, columns ``planes``."""
        from trueturn.angles import phasor

        table = {(e.sensor, e.plane): phasor(e.amp, e.phase_deg) for e in self.entries}
        try:
            return [[table[(s, p)] for p in planes] for s in sensors]
        except KeyError as exc:
            raise KeyError(f"no coefficient for sensor/plane {exc.args[0]}") from None


@dataclass
class JobRecord:
    """One balancing job on one machine: runs in order, pending hands-on work, outcome.

    ``method``: ``single-plane`` / ``two-plane`` influence coefficients, ``four-run``
    (amplitude only, no phase), ``trim`` (one run with saved coefficients), or
    ``model-first`` (a first correction from a model of the rotor, trials when it cannot be
    trusted).
    """

    job_id: str = field(metadata=limits(nonempty=True))
    machine: MachineProfile
    created: str = field(metadata=limits(nonempty=True))
    updated: str = ""
    status: Literal["open", "closed"] = "open"
    method: Literal["single-plane", "two-plane", "four-run", "trim",
                    "model-first"] = "single-plane"
    speed_rpm: float | None = field(default=None, metadata=limits(above=0))
    operator: str = ""
    customer: str = ""
    runs: list[RunEntry] = field(default_factory=list)
    pending: PendingStep | None = None
    influence: CoefficientSet | None = None
    verdict: VerdictEntry | None = None
    notes: str = ""
    #: stopped before a verdict by the person's choice, and why (optional, issue #22)
    stopped: StopEntry | None = None
    #: went on although balancing may not help (optional, issue #22): not asked again
    went_on: WentOnEntry | None = None
    #: model-first: the model's answer and its refinements (optional, issue #20 item 4;
    #: files without it read as before, no migration)
    model: ModelEntry | None = None

    def _checks(self) -> list[tuple[str, str]]:
        problems: list[tuple[str, str]] = []
        sensors = {p.name for p in self.machine.pickups}
        planes = {p.name for p in self.machine.planes}
        for i, run in enumerate(self.runs):
            if run.index != i + 1:
                problems.append((f"runs[{i}]", f"run index {run.index} out of order, expected {i + 1}"))
            if run.replaces is not None and run.replaces >= run.index:
                problems.append((f"runs[{i}].replaces",
                                 f"must name an earlier run, got {run.replaces}"))
            for reading in run.readings:
                if reading.sensor not in sensors:
                    problems.append((f"runs[{i}]", f"sensor {reading.sensor!r} is not a pickup of the machine"))
            plane_refs = [c.plane for c in run.changes] + [c.plane for c in run.corrections]
            for name in plane_refs:
                if name not in planes:
                    problems.append((f"runs[{i}]", f"plane {name!r} is not a plane of the machine"))
        if self.verdict is not None and self.verdict.after_run > len(self.runs):
            problems.append(("verdict", f"refers to run {self.verdict.after_run}, which is not recorded"))
        if self.stopped is not None and self.stopped.after_run > len(self.runs):
            problems.append(("stopped", f"refers to run {self.stopped.after_run}, which is not recorded"))
        if self.went_on is not None and self.went_on.after_run > len(self.runs):
            problems.append(("went_on", f"refers to run {self.went_on.after_run}, which is not "
                             "recorded"))
        if self.model is not None:
            last = max([self.model.after_run, *(r.after_run for r in self.model.refined),
                        self.model.refuted_by_run or 0,
                        self.model.refuted_by_alarm_after_run or 0])
            if last > len(self.runs):
                problems.append(("model", f"refers to run {last}, which is not recorded"))
        return problems

    @property
    def next_run_index(self) -> int:
        """Index the next run will get (a resumed job continues here)."""
        return len(self.runs) + 1

    def parts_on_rotor(self) -> list[MassChange]:
        """Parts attached and not removed since, over all runs and the pending step.

        A removal cancels the latest attached part with the same plane, angle and mass
        (to 0.01 g / 0.5 deg); a removal that matches nothing (drilling) is not listed.
        """
        attached: list[MassChange] = []
        steps = [run.changes for run in self.runs]
        if self.pending is not None:
            steps.append(self.pending.changes)
        for changes in steps:
            for change in changes:
                if change.action == "attach":
                    attached.append(change)
                    continue
                for j in range(len(attached) - 1, -1, -1):
                    part = attached[j]
                    if (part.plane == change.plane and abs(part.mass_g - change.mass_g) < 0.01
                            and abs((part.angle_deg - change.angle_deg + 180) % 360 - 180) < 0.5):
                        del attached[j]
                        break
        return attached
