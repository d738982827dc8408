"""The guided balancing procedure as a pure state machine with its safety gates.

No Textual, no I/O: the app feeds it board time, tach edges, readings and the person's
confirmations; it answers with the current step, what to show, and refuses any confirmation
a gate does not allow (:class:`GateRefused`). The balancing arithmetic itself comes from the
engine passed in (:mod:`trueturn.procedure.engine`, backed by ``trueturn.balance``).

Sequence (influence-coefficient method with a tach; four-run method without one):

    set-up (mount pickups) -> as-found run -> attach trial mass -> trial run(s)
    -> correction (split onto positions, add or remove) -> attach correction -> check run
    -> verdict against the grade -> trim (hands-on + check run) until pass or trims run out

Is it unbalance? (issue #22) After the as-found run, before the first trial mass goes on, a
second start as found may be measured (offered, never required: :meth:`Procedure.start_again`
after a stop; the app compares the two starts' 1x). When the app's judgement says balancing
may not help (:meth:`Procedure.as_found_judged`), the procedure asks first
(:class:`ShowDoubt`): stop the job here (:meth:`Procedure.stop_here`, the reason kept) or go
on anyway (:meth:`Procedure.go_on`).

Safety gates (ARCHITECTURE.md, "Safety"):

* every hands-on step opens with a lock-out gate and closes with a done gate; both need
  standstill confirmed by the tach (no edge for ``standstill_s`` of board time, with data
  still arriving) and the pickups (:mod:`trueturn.procedure.standstill`) plus every item of
  the gate's checklist ticked; the amplitude-only procedure runs without a tach, and its
  standstill rests on every pickup live and quiet for the long hold (the watch is told,
  ``StandstillWatch.set_tach_absent``);
* every run needs the person to confirm the centrifugal force of the masses on the rotor at
  the planned speed;
* while the rotor turns, overspeed (profile max) and runaway vibration (``runaway_factor``
  times the as-found 1x, or ``RUNAWAY_NOISE_RADII`` of its 95 % radius when the 1x is lost
  in the noise; judged within ``RUNAWAY_SPEED_BAND`` of the as-found speed: a run-up's
  critical speeds are not compared with the level at speed) raise a stop warning that is
  recorded with the run; a trial run so stopped gets a smaller trial (``ShrunkTrial``).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from enum import Enum
from typing import Any, ClassVar, Literal, Protocol

from trueturn.angles import angle_difference_deg, wrap_deg
from trueturn.balance.model_first import Distrust
from trueturn.balance.support_fit import StandstillMode
from trueturn.balance.trial_mass import redo_below_stopped
from trueturn.dsp.averaging import subtended_deg
from trueturn.model import (
    Bearing,
    Correction,
    MassKind,
    PlacedMass,
    Plane,
    Reading,
    Run,
    RunKind,
    SafetyEvent,
    Verdict,
    VerdictFlag,
)
from trueturn.model.units import METRIC, UnitChoice, ceil_to_scale_g
from trueturn.procedure.standstill import (
    StandstillEvidence,
    StandstillState,
    StandstillWatch,
)


class Mode(str, Enum):
    """Which procedure: by correction planes, or amplitude only (no tach phase)."""

    ONE_PLANE = "one-plane"
    TWO_PLANE = "two-plane"
    AMPLITUDE_ONLY = "amplitude-only"
    SAVED_TRIM = "saved-trim"  # one run, with influence coefficients saved by an earlier job
    #: the as-found run and its coast-down, then a first correction predicted by a model of
    #: the rotor (no trial run) when the model can be trusted, else trial runs as by planes
    MODEL_FIRST = "model-first"


# Gate checklists. Wording is ours; the items are the usual shop cautions.
LOCKOUT_CHECKLIST: tuple[str, ...] = (
    "Power is off and locked out (plug pulled or switch locked)",
    "I can see the rotor standing still",
)
DONE_CHECKLIST: tuple[str, ...] = (
    "Every weight is fastened (screw tight, clip closed)",
    "Tools, rags and loose parts are off the machine",
    "Guards and covers are back on",
    "Everyone is clear of the plane of rotation",
)

#: the tap test's gate (model-first on a stiff mount): the lock-out's items and where to
#: strike (common practice, no source: a soft mallet on the housing, never the rotor)
TAP_CHECKLIST: tuple[str, ...] = (
    *LOCKOUT_CHECKLIST,
    "I strike the bearing housing or the frame, never the rotor, a weight or a pickup",
    "Guards stay on and I keep my hands clear of the wheel",
)

#: the first step of a resumed job whose next step is a run
RESUME_CHECK_TITLE = "Resumed job: check the rotor"
#: a resumed model-first job whose as-found run's coast-down was not kept (the app was
#: closed before it ended): the model needs it, so the as-found run is measured again
MODEL_SWEEP_LOST = ("the model needs the as-found run's coast-down, which was not recorded "
                    "before the app closed: run the machine as found once more and let it "
                    "coast down")
#: the lock-out gate of a trial waiting for its size from the as-found run's coast-down
#: (:meth:`Procedure.await_trial_sizing`): the size shown before it would not be the one used
TRIAL_SIZING_WAIT = ("the trial is being sized from the as-found run's coast-down: a few "
                     "seconds once the machine has stopped")
#: a check run with a clipped reading (a pickup reached an ADC rail: its 1x reads low) can
#: neither be judged nor trimmed from: it is measured again once the cause is fixed
CLIPPED_CHECK_RUN = ("a pickup's signal reached the end of the ADC's range in this run, so "
                     "its 1x reads low and neither a verdict nor a trim can come from it: "
                     "reduce that pickup's gain (or find what rattles) and measure again")

DEFAULT_STANDSTILL_S = 3.0
DEFAULT_RUNAWAY_FACTOR = 3.0
#: the runaway check compares like with like: only while the speed is within this fraction
#: of the as-found run's speed. A run-up passes the supports' critical speeds, where the 1x
#: is many times its level at speed on a soft mount (the demo shop fan: 19 times at 1000
#: rpm for a run at 1754, sim truth), which is no runaway; every start of such a machine
#: read as STOP (CI, 2026-12-03). Overspeed is judged at every speed, and the runaway too
#: when the speed is not known (a silent tach). Our choice, no source.
RUNAWAY_SPEED_BAND = 0.10
#: a check run's readings average this many times ``revolutions_per_run``: the verdict's
#: 95 % bound (balance.solve.guard_band) holds the check run's circles, whose radius falls
#: as one over the square root of the revolutions averaged, so a residual within the grade
#: is proven where 30 revolutions left it "not proven" and asked for one trim after another
#: (our choice, measured by bench/bench_balance.py's [default] rows on 200 rotors: 30 -> 120
#: revolutions took the rotors within G 6.3 in 5 runs from 87 % to 93 %; 240 changed no
#: rotor further). The amplitude-only method keeps its own (spectrum) readings as they are.
CHECK_REVOLUTIONS_FACTOR = 4
#: the runaway alarm's reference is the as-found 1x, but never less than this many of its
#: 95 % radii: an as-found 1x lost in its pickup's noise says only that the level is below
#: about that much, and a trial must move the 1x by three radii to be seen
#: (trueturn.balance.influence.MIN_TRIAL_CONFIDENCES), so three times a noise-level 1x
#: would stop every trial that can be seen (bench/bench_balance.py: a stiff rotor whose
#: as-found 1x, 0.095 m/s^2, lay inside its 0.14 circle went from trials too small to
#: trials stopped and back, never reaching a correction). Our choice.
RUNAWAY_NOISE_RADII = 3.0
#: A run whose readings are steady over the meter's whole window but whose phase is not yet
#: within the limit averages longer, the window doubling up to this many times what the run
#: wants (the circle shrinks as one over the square root of the revolutions: 8 times as many,
#: 0.35 of the circle); there its reading is kept as the pickup's noise leaves it, its circle
#: weighed downstream (the trial's effect against three radii, the solution's spread, the
#: verdict's guard band). The meter's window slides, so a limit it cannot reach held the run
#: for ever (bench/bench_balance.py, [default]: 6 of 159 runs not settled at 60 revolutions
#: on the first 40 rotors). Our choice.
WIDEN_FACTOR_MAX = 8
#: A widened window is full once its readings average this share of it (a revolution the fit
#: leaves out must not hold the run). Our choice.
WIDENED_FULL_FRACTION = 0.9


class Widened(str, Enum):
    """Why the current run averages longer than it wanted (:meth:`Procedure.widen_to`)."""

    #: steady over the whole window, its phase not yet within the limit
    PHASE_WIDE = "phase_wide"
    #: a check run's verdict undecided (within on the estimate, its bound past the allowance)
    VERDICT_UNDECIDED = "verdict_undecided"


DEFAULT_PHASE_LIMIT_DEG = 5.0  # the DSP's default phase confidence for a steady reading
SMALL_VECTOR_FRACTION = 0.05  # below 5 % of the as-found 1x, a tight circle is enough


def runaway_reference(amplitude: float, confidence_radius: float | None) -> float:
    """What the runaway alarm multiplies (``runaway_factor``) for one pickup: its as-found
    1x ``amplitude``, or :data:`RUNAWAY_NOISE_RADII` of its 95 % radius when that is
    more."""
    return max(amplitude, RUNAWAY_NOISE_RADII * (confidence_radius or 0.0))


@dataclass(frozen=True)
class TooSmallTrial:
    """A trial whose effect the readings could not resolve (no information, no answer):
    ``plane``, the ``trial_g`` used and a ``suggested_g`` that would be resolved (None when
    the trial showed no change at all: is it on the rotor?)."""

    plane: str
    trial_g: float
    suggested_g: float | None


@dataclass(frozen=True)
class ShrunkTrial:
    """A trial run stopped by the runaway alarm: the trial on ``plane`` (``trial_g``) moved
    the 1x to ``level_ratio`` times its as-found level, so the hands-on step after the
    alarm puts ``smaller_g`` in its place (the engine's :meth:`Engine.trial_after_runaway`)
    before the same trial run again."""

    plane: str
    trial_g: float
    level_ratio: float
    smaller_g: float


@dataclass(frozen=True)
class ModelShook:
    """Model-first: the check run of the model's correction (or of a trim from its refined
    coefficients) was stopped by the runaway alarm, the 1x at ``sensor`` at
    ``level_ratio`` times its as-found level. The masses made the machine worse than the
    model allowed (its 95 % bound leaves at most ``MAX_RESIDUAL_FRACTION_95`` of the 1x,
    half the alarm's factor): the model is refuted, the hands-on step after the alarm takes
    its masses off and puts the first trial on, and a trial run per plane follows (the
    as-found run kept)."""

    sensor: str
    level_ratio: float
    #: the number of the last run kept before the stopped one (the job's numbering)
    after_run: int


@dataclass(frozen=True)
class OffSpeed:
    """A run of the coefficient set taken off its group's speed (``index`` into the runs):
    ``deviation`` is signed (-0.02 = 2 % slow); ``worst_cut`` is the 1x cut the correction
    would still give if the worst speed response (1x ~ speed**2...4) were the truth."""

    index: int
    label: str
    deviation: float
    worst_cut: float


class GateRefused(Exception):
    """A confirmation the safety gates do not allow yet; the message says why in one line.

    ``too_small_trial``: set when the refusal is a trial that carried no information, so
    the procedure can offer to redo that trial with a larger mass.
    """

    def __init__(self, message: str, too_small_trial: TooSmallTrial | None = None) -> None:
        super().__init__(message)
        self.too_small_trial = too_small_trial


@dataclass(frozen=True)
class ProcedureSetup:
    """What the procedure needs to know about the machine (from the machine profile)."""

    machine: str
    mode: Mode
    planes: tuple[Plane, ...]
    sensors: tuple[str, ...]
    rotor_mass_kg: float
    speed_rpm: float
    max_speed_rpm: float
    grade_mm_per_s: float = 6.3
    revolutions_per_run: int = 30
    max_trims: int = 3
    standstill_s: float = DEFAULT_STANDSTILL_S
    runaway_factor: float = DEFAULT_RUNAWAY_FACTOR
    phase_limit_deg: float = DEFAULT_PHASE_LIMIT_DEG
    saved_planes: tuple[str, ...] = ()  # saved-trim: the planes the coefficients cover
    profile_planes: int = 0  # correction planes the machine has (0: as many as ``planes``)
    saved_coefficients: tuple[object, ...] = ()  # saved-trim: opaque to the procedure
    #: the two bearings: the ISO 21940-11 verdict is judged there
    bearings: tuple[Bearing, ...] = ()
    cg_axial_mm: float | None = None  # the rotor's centre of mass (None: midway)
    #: the correction parts the person owns, one entry per piece, g (empty: any mass), and
    #: the most of them one position takes (machine profile, ``correction_parts``)
    owned_parts_g: tuple[float, ...] = ()
    owned_stack: int = 1
    #: per pickup, its angle from the tach counted against rotation (machine profile,
    #: ``Pickup.angle_from_tach_deg``; None: not measured); model-first needs it
    pickup_angles_deg: tuple[float | None, ...] = ()
    #: per pickup, the bearing it sits on, 0 or 1 (machine profile ``on_bearing`` - 1;
    #: None: not said, taken in order)
    pickup_bearings: tuple[int | None, ...] = ()
    #: the rotor's transverse moment of inertia, kg m^2 (machine profile; None: not known)
    transverse_inertia_kg_m2: float | None = None
    #: the rotor's polar moment of inertia, kg m^2 (machine profile; None: guessed)
    polar_inertia_kg_m2: float | None = None
    #: everything that shakes with the rotor on its mounts, kg (machine profile; None: not
    #: known, so the model cannot say how much a gram moves the 1x)
    mounted_mass_kg: float | None = None
    #: the units the person sees (machine profile): the procedure's own sentences (refusals,
    #: the redo, the forces confirmed) name masses and forces in them; the facts stay g, N
    units: UnitChoice = METRIC
    #: per pickup, the local slope of the 1x with speed measured on the job's coast-down
    #: (the engine's type, opaque here; :func:`trueturn.procedure.engine.
    #: speed_slopes_from_sweeps`): runs a fraction of a percent apart in speed are then
    #: compared at one speed; empty: not measured well enough (the speed error estimate)
    speed_slopes: tuple[object, ...] = ()
    #: the support resonances the as-found coast-down found, per pickup (the engine's
    #: type, opaque here; :func:`trueturn.procedure.engine.resonances_of_sweeps`): the
    #: trials are sized with them; None: no sweep kept
    support_resonances: object = None
    #: the sensitivity fitted to the as-found coast-down's whole curve (the engine's type,
    #: opaque here; :meth:`trueturn.procedure.engine.BalanceEngine.trial_sensitivity`):
    #: the trials are sized from it before the resonances; None: not fitted
    trial_sensitivity: object = None


@dataclass(frozen=True)
class MassChange:
    """One hands-on action: attach a mass or take one off (``detach``); ``check``: see that
    a mass the job lists is still on the rotor (a resumed job).

    ``suggested``: what the procedure asked for, kept when the person entered a different
    fitted mass (:meth:`Procedure.fit`); ``mass`` is then what was fitted.
    """

    action: Literal["attach", "detach", "mount-pickups", "check"]
    mass: PlacedMass | None = None
    suggested: PlacedMass | None = None



@dataclass(frozen=True)
class KitFit:
    """A plane's correction made from the parts the person owns (issue #22): the unbalance
    it leaves (g·mm) against the plane's share of the allowance (ISO 21940-11), and whether
    the search proved the combination the best there is."""

    plane: str
    residual_gmm: float
    allowed_gmm: float
    proven_best: bool
    parts_in_drawer: int = 1  # parts of the kit left to choose from (0: none placed)


@dataclass(frozen=True)
class Solution:
    """Engine output: corrections, the parts to place, and the engine's notes."""

    corrections: tuple[Correction, ...]
    parts: tuple[PlacedMass, ...]
    method: str
    warnings: tuple[str, ...] = ()
    coefficients: object = None  # opaque to the procedure; kept for trims and the verdict
    off_speed: tuple[OffSpeed, ...] = ()  # coefficient runs taken off their group's speed
    #: the parts came from the person's kit (machine profile): what each plane is left with
    kit: tuple[KitFit, ...] = ()
    #: coefficient runs off their group's speed that were carried to it with the measured
    #: slope (``ProcedureSetup.speed_slopes``): compared at one speed, nothing to repeat
    speed_normalised: tuple[OffSpeed, ...] = ()


class ModelRefuted(GateRefused):
    """Model-first: a run's 1x fell far outside what the model predicted, and the runs so
    far cannot pin the coefficients down without it. ``sensor``: the pickup;
    ``surprise``: its normalised innovation ``|e|^2 / var`` (exponentially distributed when
    the model holds; :data:`trueturn.balance.model_first.REFUTE_TAIL_PROBABILITY`)."""

    def __init__(self, sensor: str, surprise: float) -> None:
        super().__init__(f"the 1x at {sensor} is far outside the model's prediction "
                         f"(normalised innovation {surprise:.0f}): the model is dropped")
        self.sensor = sensor
        self.surprise = surprise


@dataclass(frozen=True)
class ModelAnswer:
    """What the model of the rotor says after the as-found run and its coast-down
    (model-first, issue #20 item 4).

    ``trusted``: a first correction may be placed with no trial run; else ``distrust``
    gives why not (the codes of ``trueturn.balance.model_first.Distrust``) and the job goes
    on with trial runs. ``mass_95_g`` / ``angle_95_deg``: per plane, the 95 % +/- of the
    model's correction; ``residual_fraction_95``: the share of the as-found 1x the
    correction leaves in 95 % of the model's draws (None: not estimated); ``prior``: the
    prediction every later run refines (opaque to the procedure); ``solution``: the
    correction (None when not trusted)."""

    trusted: bool
    distrust: tuple[str, ...] = ()
    mass_95_g: tuple[float, ...] = ()
    angle_95_deg: tuple[float, ...] = ()
    residual_fraction_95: float | None = None
    prior: object = None
    solution: Solution | None = None
    #: the pickup whose reading refuted the model after its correction went on (then
    #: ``trusted`` is False, ``distrust`` ends with "refuted" - "refuted-by-alarm" when
    #: the runaway alarm stopped that run -, trials follow)
    refuted_at: str | None = None
    #: a stiff mount (the coast-down found no support resonance below the speed, yet its
    #: curve could be fitted) whose model is not trusted for the supports' stiffness, or is
    #: trusted with a correction that may fall short of the grade: a tap test at
    #: standstill may pin the stiffness (:class:`TapTest`; engine.tap_may_help)
    tap_may_help: bool = False
    #: the answer was computed with a tap test's standstill modes
    tapped: bool = False

    @property
    def refuted_by_alarm(self) -> bool:
        """The refuting run was a check run of the model's masses that the runaway alarm
        stopped (not kept: :class:`ModelShook`)."""
        return Distrust.REFUTED_BY_ALARM.value in self.distrust


class TapRefusal(str, Enum):
    """Why a tap test's recording cannot inform the model (the person redoes or skips)."""

    TURNING = "turning"      # the tach saw edges or a line did not decay: the rotor turned
    NO_TAPS = "no-taps"      # no tap was found in the recording
    NO_MODES = "no-modes"    # taps, but no ringing the taps agree on at any pickup


@dataclass(frozen=True)
class TapOutcome:
    """What a tap (bump) test's recording gave (the app's analysis by
    :func:`trueturn.dsp.bump.analyze_bump_capture`, turned into this by
    :func:`trueturn.procedure.engine.tap_outcome`): per pickup the natural frequencies the
    taps agree on, the taps found, the tach edges in the recording and whether a line that
    does not decay was seen (a rotor turning behind a dark tach); ``time_s``: board time
    at the recording's end."""

    modes: dict[str, tuple[StandstillMode, ...]]
    taps: int
    tach_edges: int = 0
    steady_line: bool = False
    time_s: float = 0.0

    @property
    def refusal(self) -> TapRefusal | None:
        """Why the recording cannot be used (None: it can)."""
        if self.tach_edges or self.steady_line:
            return TapRefusal.TURNING
        if not self.taps:
            return TapRefusal.NO_TAPS
        if not any(self.modes.values()):
            return TapRefusal.NO_MODES
        return None


@dataclass(frozen=True)
class KeptRun:
    """A run as a job kept it, to rebuild a procedure from (:meth:`Procedure.restore`).

    ``number``: the job's run number (1, 2, ...); ``replaces``: the number of an earlier
    run this one measured again (None: a new run); ``removal``: the correction parts placed
    before it were taken out as material (None: no correction part was placed before it).
    """

    run: Run
    number: int
    replaces: int | None = None
    removal: bool | None = None


@dataclass(frozen=True)
class TrialSuggestion:
    """A trial mass for one plane and its centrifugal force at the planned speed."""

    plane: str
    mass_g: float
    angle_deg: float
    position: int | None
    force_n: float
    force_ratio: float  # force / rotor weight


class Engine(Protocol):
    """What the procedure asks the balancing layer (:mod:`trueturn.procedure.engine`)."""

    def trial_mass(self, setup: ProcedureSetup, plane: Plane,
                   runs: Sequence[Run] = ()) -> TrialSuggestion:
        """The trial for ``plane``, sized from the runs so far (the as-found one)."""
        ...

    def trial_effect(self, setup: ProcedureSetup, runs: Sequence[Run]) -> TooSmallTrial | None:
        """Right after a trial run: the trial if it changed the 1x too little to be seen."""
        ...

    def trial_after_runaway(self, trial_g: float, level_ratio: float) -> float:
        """A trial run stopped with its 1x at ``level_ratio`` times the as-found level: the
        smaller trial, g, to put in its place."""
        ...

    def force_n(self, mass_g: float, radius_mm: float, speed_rpm: float) -> float: ...

    def solve(self, setup: ProcedureSetup, runs: list[Run], removal: bool) -> Solution: ...

    def assess(self, setup: ProcedureSetup, runs: list[Run],
               removal: bool) -> tuple[Verdict, Solution]:
        """Verdict on the last run, and the trim that would still be needed."""
        ...

    def model_first(self, setup: ProcedureSetup, runs: Sequence[Run],
                    resonances: object,
                    standstill: Mapping[str, Sequence[StandstillMode]] | None = None
                    ) -> ModelAnswer:
        """Model-first: the model's answer after the as-found run (``runs[0]``) and the
        sweep's support resonances per pickup (None: no sweep); ``standstill``: a tap
        test's modes per pickup."""
        ...

    def model_solve(self, setup: ProcedureSetup, runs: Sequence[Run], removal: bool,
                    prior: object) -> Solution:
        """Model-first: the correction from the prior refined by ``runs``."""
        ...

    def model_assess(self, setup: ProcedureSetup, runs: Sequence[Run], removal: bool,
                     prior: object) -> tuple[Verdict, Solution]:
        """Model-first: verdict on the last run with the coefficients refined by every run,
        and the trim still needed."""
        ...

    def model_estimate(self, setup: ProcedureSetup, runs: Sequence[Run],
                       prior: object) -> object:
        """Model-first: the prior refined by ``runs`` (the engine's type; the job keeps
        its coefficients)."""
        ...

    def trial_fit_wanted(self, setup: ProcedureSetup) -> bool:
        """The trials may be sized from a fit to the as-found run's coast-down (the app
        then asks :meth:`trial_sensitivity` off its screen's thread)."""
        ...

    def trial_sensitivity(self, setup: ProcedureSetup, evidence: Any) -> object:
        """The sensitivity fitted to the as-found coast-down (``evidence``: the engine's
        sweep evidence, None: no coast-down kept) the trials are sized from; None: the
        fit cannot be had or trusted (the trials are sized as before)."""
        ...


class HandsOnPhase(str, Enum):
    """A hands-on step opens with the lock-out gate and closes with the done gate."""

    LOCKOUT = "lockout"
    WORKING = "working"


class RunPhase(str, Enum):
    """A run: waiting for the force confirmation, measuring, cut off by a lost link (starts
    over on reconnect), or stopped by an alarm (held until acknowledged)."""

    ARMING = "arming"
    RUNNING = "running"
    INTERRUPTED = "interrupted"
    STOPPED = "stopped"


@dataclass(frozen=True)
class HandsOn:
    """The person works on the rotor: ``changes`` to make, between two gates."""

    kind: ClassVar[Literal["hands-on"]] = "hands-on"
    title: str
    changes: tuple[MassChange, ...] = ()
    phase: HandsOnPhase = HandsOnPhase.LOCKOUT


@dataclass(frozen=True)
class Measure:
    """A run: the machine spins while the pickups are averaged."""

    kind: ClassVar[Literal["run"]] = "run"
    title: str
    run_label: str
    run_kind: RunKind
    phase: RunPhase = RunPhase.ARMING


@dataclass(frozen=True)
class ShowCorrection:
    """The correction (or the reason there is none) is shown."""

    kind: ClassVar[Literal["correction"]] = "correction"
    title: str


@dataclass(frozen=True)
class ShowVerdict:
    """The verdict is shown; the job closes."""

    kind: ClassVar[Literal["verdict"]] = "verdict"
    title: str


@dataclass(frozen=True)
class ShowDoubt:
    """After the as-found run the machine does not look like plain unbalance: the person
    chooses to stop the job here or to go on anyway. ``because``: the failing rules (the
    evidence codes of :mod:`trueturn.dsp.unbalance`)."""

    kind: ClassVar[Literal["doubt"]] = "doubt"
    title: str
    because: tuple[str, ...] = ()


class TapPhase(str, Enum):
    """The optional tap test: offered (start it behind the lock-out gate, or skip it),
    tapping (the recording runs; the person strikes, then says done), or refused (the
    recording gave nothing usable: redo it behind the gate, or skip)."""

    OFFERED = "offered"
    TAPPING = "tapping"
    REFUSED = "refused"


@dataclass(frozen=True)
class TapTest:
    """Model-first on a stiff mount: the model is not trusted from the coast-down alone; a
    tap (bump) test at standstill may pin the supports' stiffness. Optional: skipping it
    goes on with trial runs. ``refused``: why the last recording was not used."""

    kind: ClassVar[Literal["tap"]] = "tap"
    title: str
    phase: TapPhase = TapPhase.OFFERED
    refused: TapRefusal | None = None


@dataclass(frozen=True)
class Stopped:
    """The job was stopped before a verdict, by the person's choice (see
    :attr:`Procedure.stopped`)."""

    kind: ClassVar[Literal["stopped"]] = "stopped"
    title: str


@dataclass(frozen=True)
class EarlyStop:
    """Why and when the person stopped the job before a verdict: ``reason`` (a code),
    ``because`` (the failing rules' codes), after how many runs, at which board time."""

    reason: Literal["balancing_may_not_help"]
    because: tuple[str, ...]
    after_run: int
    time_s: float


#: the label of a second start of the machine as found (it is kept beside the runs)
SECOND_START_LABEL = "as found, second start"

#: one screenful of the procedure: a tagged union of frozen steps
Step = HandsOn | Measure | ShowCorrection | ShowVerdict | ShowDoubt | TapTest | Stopped


def planes_for(setup: ProcedureSetup) -> tuple[Plane, ...]:
    """The correction planes a procedure works in."""
    if setup.mode is Mode.SAVED_TRIM:
        return tuple(p for p in setup.planes if p.name in setup.saved_planes)
    if setup.mode is Mode.MODEL_FIRST:
        return setup.planes[:2]
    return setup.planes[:2] if setup.mode is Mode.TWO_PLANE else setup.planes[:1]


def standstill_refusal(ev: StandstillEvidence) -> str:
    """Why a hands-on step must wait, in one line (the evidence in words)."""
    state = ev.state
    if state is StandstillState.NO_DATA:
        return ("no fresh data from the board: standstill cannot be proven; check the cable "
                "and the board")
    if state is StandstillState.TURNING:
        return "the tach sees the rotor turning: stop the machine and wait"
    if state is StandstillState.TACH_FAULT:
        return tach_fault_words(ev) + ": nothing hands-on until the tach and the pickups agree"
    if state is StandstillState.TAP_RINGING:
        return ("the tap test's ringing: the pickups see the supports ring after each strike "
                "(expected); standstill is proven again once it has died out")
    if ev.tach_fault_latched and not ev.tach_absent:
        return (f"the tach went silent while the pickups saw the machine run: standstill "
                f"needs {ev.tach_hold_needed_s:.0f} s of quiet pickups and tach "
                f"({ev.wait_s:.0f} s to go); then fix the tach")
    dead = [p for p in ev.pickups if not p.live]
    if dead:
        p = dead[0]
        return (f"pickup {p.name} reads at the ADC limit ({100 * (p.at_rail_fraction or 0):.0f} % "
                "of its samples: stuck, clipped or unwired), so it cannot vouch for standstill; "
                "check its wiring and supply")
    if ev.moving_pickups:
        p = ev.moving_pickups[0]
        return (f"the pickups are not quiet ({p.name}: {p.level_g_rms:.3f} {p.unit} rms, "
                f"limit {p.limit_g_rms:.3f}): wait for the machine to settle")
    if not ev.pickups:
        return "the pickups' signal is not judged yet: wait a moment"
    if ev.tach_absent:
        tach = ("no tach on this machine" if not ev.tach_edges_seen else
                "this method does not rely on the tach")
        return (f"checking standstill: {ev.wait_s:.1f} s to go ({tach}: the "
                f"pickups must stay quiet and live {ev.tach_hold_needed_s:.0f} s, quiet "
                f"{ev.pickups_quiet_s:.1f} s so far)")
    return (f"checking standstill: {ev.wait_s:.1f} s to go (tach silent "
            f"{ev.tach_silent_s:.1f} s, pickups quiet {ev.pickups_quiet_s:.1f} s, "
            f"{ev.tach_hold_needed_s:.0f} s needed)")


def tach_fault_words(ev: StandstillEvidence) -> str:
    """The disagreement in plain words: what the pickups see while the tach is silent."""
    hz = ev.seen_hz
    seen = (f"{hz:.0f} Hz, about {60 * hz:.0f} rpm if it is the 1x" if hz is not None
            else "vibration")
    return (f"TACH FAULT: no tach edge for {ev.tach_silent_s:.0f} s but the pickups see a "
            f"machine running ({seen}); check the tach, its mark and its cable")


def standstill_basis_words(ev: StandstillEvidence) -> str:
    """What proved standstill, for the screen (e.g. tach silent 3 s, seen working ...)."""
    levels = ", ".join(f"{p.name} {p.level_g_rms:.3f} {p.unit} rms" for p in ev.pickups)
    if ev.tach_absent:
        # the amplitude-only procedure rests on the pickups, whether a tach was fitted or not
        tach = ("no tach on this machine" if not ev.tach_edges_seen else
                "a tach is fitted but this method does not rely on it")
        return f"{tach}: every pickup live and quiet {ev.pickups_quiet_s:.0f} s: {levels}"
    if ev.tach_trusted:
        seen = (f", last edge {ev.last_edge_age_s:.0f} s ago at "
                f"{ev.last_speed_rpm:.0f} rpm" if ev.last_speed_rpm else "")
        tach = f"tach silent {ev.tach_silent_s:.0f} s (seen working{seen})"
    else:
        tach = (f"tach silent {ev.tach_silent_s:.0f} s but not seen working since the link "
                f"started, so the pickups had to stay quiet {ev.tach_hold_needed_s:.0f} s")
    return f"{tach}; pickups quiet: {levels}"


class Procedure:
    """The guided procedure; call the methods named after what the person does."""

    def __init__(self, setup: ProcedureSetup, engine: Engine,
                 watch: StandstillWatch | None = None) -> None:
        if setup.mode is Mode.SAVED_TRIM and not setup.saved_coefficients:
            raise ValueError("no saved influence coefficients for this machine at this speed")
        if setup.mode is Mode.TWO_PLANE and len(setup.planes) < 2:
            raise ValueError("two-plane balancing needs two correction planes in the profile")
        if not setup.planes:
            raise ValueError("the profile has no correction plane")
        self.setup = setup
        self.engine = engine
        self.watch = watch or StandstillWatch(setup.standstill_s)
        # the amplitude-only procedure is the one for machines without a tach
        self.watch.set_tach_absent(setup.mode is Mode.AMPLITUDE_ONLY)
        self.runs: list[Run] = []
        self.on_rotor: list[PlacedMass] = []
        self.removal = False
        self.solution: Solution | None = None
        self.verdict: Verdict | None = None
        self.trims_done = 0
        self.events: list[SafetyEvent] = []
        self.confirmations: list[tuple[float, str]] = []
        self._pending_run_events: list[SafetyEvent] = []
        self._alarmed: set[str] = set()
        self._force_text: tuple[str, ...] = ()
        self.problem = ""  # why no correction could be computed (then: repeat the run)
        self.too_small_trial: TooSmallTrial | None = None  # the problem is a trial too small
        #: a trial run the runaway alarm stopped, and the smaller trial put in its place
        self.shrunk_trial: ShrunkTrial | None = None
        self._runaway_ratio = 0.0  # the alarm's 1x over the as-found level (largest pickup)
        #: the window the current run asked the meter for (:meth:`widen_to`; 0: none), and
        #: the most the meter holds (0: not told)
        self._window_revs = 0
        self._window_most = 0
        self.widened: Widened | None = None   # why the run averages longer (None: it does not)
        self._runaway_sensor: str | None = None  # the pickup of that largest ratio
        self.model_shook: ModelShook | None = None
        #: per plane, the smallest trial the runaway alarm stopped (g): a later redo of a
        #: trial too small stays under it
        self._stopped_trial_g: dict[str, float] = {}
        self._redo_index: int | None = None  # a recorded run being measured again
        self.ticked: set[int] = set()  # checklist items ticked at the open gate
        self.alarm: SafetyEvent | None = None  # held until acknowledged
        self.last_speed_rpm = 0.0  # the highest speed measured during the last run
        self.evidence_log: list[StandstillEvidence] = []  # parallel to confirmations
        self.step: Step = HandsOn("Set up: mount the pickups (no tach needed)"
                                  if setup.mode is Mode.AMPLITUDE_ONLY else
                                  "Set up: mount the pickups and the tach",
                                  (MassChange("mount-pickups"),))
        self.finished = False
        #: is it unbalance? (issue #22): a second start as found, the rules that failed (as
        #: the app judged them), and the person's choice to stop before a verdict
        self.second_start: Run | None = None
        self.doubt: tuple[str, ...] = ()
        self.stopped: EarlyStop | None = None
        self._before_trials: Step | None = None  # the first trial's hands-on step
        #: the last trial hands-on step as built, and whether its size waits for the fit to
        #: the as-found run's coast-down (:meth:`await_trial_sizing`)
        self._trial_step: Step | None = None
        self._trial_sizing_awaited = False
        self._return_step: Step | None = None  # where a second start goes back to
        #: the number of each kept run (1, 2, ... in the order measured; parallel to runs)
        self.run_numbers: list[int] = []
        #: the number of the run the last kept run measured again (None: a new run)
        self.last_replaced: int | None = None
        self._measured = 0  # runs kept so far, including those measured again since
        self._repeat_of: int | None = None  # repeat_run: the number of the run dropped
        #: fitted-mass entries at the open hands-on step: (item, before, after), for undo
        self._fits: list[tuple[int, MassChange, MassChange]] = []
        #: the masses the hands-on step just done put on: still enterable as fitted until
        #: the run they are for starts
        self._placed: list[MassChange] = []
        self.resumed = False  # rebuilt from a job's runs (:meth:`restore`)
        #: model-first: the model's answer (None: not yet), and whether the job went on
        #: with trial runs because the model could not be trusted
        self.model: ModelAnswer | None = None
        self.fallback = False
        #: a resumed model-first job lacks its as-found run's coast-down: the problem shown
        #: asks to measure the as-found run again (:meth:`repeat_run`)
        self.sweep_lost = False
        self._after_check: Step | None = None  # a resumed job: the step after the check
        #: model-first on a stiff mount: the coast-down's evidence (the engine's type,
        #: opaque) the model is recomputed from with a tap test's modes, the tap test
        #: that informed the model (None: none), and the board time its recording began
        self._sweep: object = None
        self.tap: TapOutcome | None = None
        self._tap_started_s: float | None = None

    @classmethod
    def restore(cls, setup: ProcedureSetup, engine: Engine, runs: Sequence[KeptRun],
                on_rotor: Sequence[PlacedMass], rotor_set: bool, redo_of: int | None = None,
                watch: StandstillWatch | None = None, model: ModelAnswer | None = None,
                doubt: tuple[str, ...] = (), went_on: bool = False,
                tap: TapOutcome | None = None, sweep: object = None,
                shaken: tuple[int, str] | None = None) -> Procedure:
        """Rebuild the procedure of an open job from the runs it kept (readings and the
        masses on the rotor in each), without the person: the engine solves them again as
        it did live, so the trims counted, the correction and the verdict come out as
        they were.

        ``on_rotor``: what the job says is on the rotor now; ``rotor_set``: the hands-on
        work after the last run was confirmed (the job holds it as pending), so a run comes
        next; ``redo_of``: that work set the rotor up to measure run ``redo_of`` again.

        No standstill is carried over: ``watch`` is fresh and proves it again before any
        hands-on step. A resumed job whose next step is a run first asks, at a gated
        hands-on step, to check that the rotor carries what the job lists (anyone may have
        touched it while the app was closed). Raises ValueError when the runs contradict
        each other.

        Model-first: ``model`` is the model's answer the job kept (its prior, or why it was
        not trusted: then the trials it fell back to); without it, after the as-found run,
        the model still needs that run's coast-down, so the as-found run is measured again
        (its coast-down is the sweep). ``tap``: the tap test that informed the model, kept
        with it (the model's answer already holds its effect). ``sweep``: a job kept at the
        tap test's offer, the as-found run's coast-down evidence rebuilt from the job: the
        tap test is offered again with the kept answer, and the model is asked again with
        that evidence and the taps (the engine is deterministic: as it would have live);
        without it the job goes on as the kept answer says (trusted: its correction; else
        trials). ``shaken``: (run number, pickup) when the runaway alarm stopped a check
        run of the model's masses after that kept run and its step was confirmed
        (:meth:`refute_after_alarm` is replayed there). ``doubt``: the
        rules the as-found run failed (is it
        unbalance? issue #22); unless the person ``went_on`` already, or hands-on work was
        done since, the question comes again before any mass goes on.
        """
        proc = cls(setup, engine, watch)
        proc.resumed = True
        if setup.mode is Mode.MODEL_FIRST and model is not None:
            proc.model = model
            proc.fallback = not model.trusted
            proc.tap = tap
        for kept in runs:
            if kept.removal is not None:
                proc.removal = kept.removal and proc.removal_allowed
            proc.on_rotor = list(kept.run.masses)
            if kept.replaces is not None:
                if kept.replaces not in proc.run_numbers:
                    raise ValueError(f"run {kept.number} measures run {kept.replaces} "
                                     "again, which the job does not hold")
                k = proc.run_numbers.index(kept.replaces)
                if k == len(proc.runs) - 1:  # the last run measured again (repeat_run)
                    proc.runs.pop()
                    proc._repeat_of = proc.run_numbers.pop()
                else:  # a run of the coefficient set measured again (_redo)
                    proc._redo_index = k
            proc._keep(kept.run, kept.number)
            if shaken is not None and kept.number == shaken[0] and not proc.fallback:
                proc.refute_after_alarm(shaken[1])
        proc.on_rotor = list(on_rotor)
        proc.doubt = tuple(doubt)
        if (sweep is not None and tap is None and model is not None and len(proc.runs) == 1
                and setup.mode is Mode.MODEL_FIRST and not rotor_set):
            # kept at the tap test's offer: the kept answer offers it again; the kept
            # coast-down is what the model is asked again with once the taps are in (the
            # support fit takes seconds: not at start-up, on the screen's thread)
            proc._sweep = sweep
            proc.fallback = False
            proc._take_answer(replace(model, tap_may_help=True), offer_tap=True)
        elif len(proc.runs) == 1 and setup.mode is Mode.MODEL_FIRST:
            if proc.awaiting_sweep:  # the coast-down that the model needs was not kept
                proc.problem, proc.sweep_lost = MODEL_SWEEP_LOST, True
            elif not proc.fallback and not proc.problem:
                proc._before_trials = proc.step  # the model's correction: nothing on yet
        if (not rotor_set and proc.doubt and not went_on and len(proc.runs) == 1
                and proc._before_trials is not None and proc.step == proc._before_trials):
            proc.step = ShowDoubt("Balancing may not help", proc.doubt)
        if not proc.runs or not rotor_set or isinstance(proc.step, ShowVerdict):
            return proc  # the step after the last run (the set-up when none was kept)
        if redo_of is not None and redo_of in proc.run_numbers:
            proc._redo_index = proc.run_numbers.index(redo_of)
            redo = proc.runs[proc._redo_index]
            proc.problem, proc.too_small_trial = "", None
            proc.step = Measure(f"Run again: {redo.label}", redo.label,
                                redo.kind or RunKind.CHECK)
        elif isinstance(proc.step, ShowCorrection) and proc.problem:
            proc.repeat_run()
        else:
            proc._advance_after_hands_on()
        proc._after_check = proc.step
        proc.step = HandsOn(RESUME_CHECK_TITLE,
                            tuple(MassChange("check", m) for m in proc.on_rotor))
        return proc

    # ---- what to show -------------------------------------------------------------------
    @property
    def checking_resumed_rotor(self) -> bool:
        """The step is the check of a resumed job's rotor (its ``check`` items)."""
        return self._after_check is not None and isinstance(self.step, HandsOn)

    @property
    def planes_used(self) -> tuple[Plane, ...]:
        return planes_for(self.setup)

    def plane(self, name: str) -> Plane:
        for p in self.setup.planes:
            if p.name == name:
                return p
        raise KeyError(name)

    def checklist(self) -> tuple[str, ...]:
        """The checklist of the current gate (empty when no checklist gate is open)."""
        if isinstance(self.step, TapTest):
            return () if self.step.phase is TapPhase.TAPPING else TAP_CHECKLIST
        if self.step.kind != "hands-on":
            return ()
        return LOCKOUT_CHECKLIST if self.step.phase == "lockout" else DONE_CHECKLIST

    @property
    def run_label(self) -> str | None:
        """The label of the run the procedure is at; None at a step that is no run."""
        return self.step.run_label if isinstance(self.step, Measure) else None

    @property
    def force_speed_rpm(self) -> float:
        """The speed forces are shown at: the higher of the planned and the last measured."""
        return max(self.setup.speed_rpm, self.last_speed_rpm)

    def forces(self) -> list[tuple[PlacedMass, float]]:
        """Each mass on the rotor with its centrifugal force (N) at :attr:`force_speed_rpm`."""
        out = []
        speed = self.force_speed_rpm
        for m in self.on_rotor:
            radius = self.plane(m.plane).radius_mm
            out.append((m, self.engine.force_n(abs(m.mass_g), radius, speed)))
        return out

    @property
    def removal_allowed(self) -> bool:
        """Every plane this procedure corrects allows removing material (machine profile)."""
        return all(p.removal_allowed for p in self.planes_used)

    @property
    def partial_planes(self) -> bool:
        """Fewer planes corrected than the machine has (one plane on a two-plane rotor)."""
        return (self.setup.mode is Mode.ONE_PLANE
                and max(self.setup.profile_planes, len(self.setup.planes)) > 1)

    def as_found(self) -> Run | None:
        return self.runs[0] if self.runs else None

    # ---- hands-on gates -----------------------------------------------------------------
    def _require_standstill(self) -> StandstillEvidence:
        """Standstill proven by evidence that agrees (:mod:`trueturn.procedure.standstill`);
        returns the evidence, or refuses saying what is missing."""
        ev = self.watch.evidence()
        if not ev.proven:
            raise GateRefused(standstill_refusal(ev))
        return ev

    def _require_ticks(self, items: tuple[str, ...]) -> None:
        missing = [i for i in range(len(items)) if i not in self.ticked]
        if missing:
            raise GateRefused(f"tick every item first; still open: {items[missing[0]]}")

    def tick_next(self) -> int:
        """Tick the next open item of the gate's checklist (only at proven standstill);
        returns its index."""
        items = self.checklist()
        if not items:
            raise GateRefused("no checklist is open")
        self._require_standstill()
        open_items = [i for i in range(len(items)) if i not in self.ticked]
        if not open_items:
            raise GateRefused("every item is ticked: press Enter to confirm")
        self.ticked.add(open_items[0])
        return open_items[0]

    def untick_last(self) -> None:
        """Take back the last tick."""
        if self.ticked:
            self.ticked.discard(max(self.ticked))

    def check_ticks(self) -> bool:
        """Drop every tick when standstill is no longer proven; True if ticks were dropped."""
        if self.ticked and not self.watch.evidence().proven:
            self.ticked = set()
            return True
        return False

    def _confirm(self, now_s: float, text: str, evidence: StandstillEvidence) -> None:
        self.confirmations.append((now_s, text))
        self.evidence_log.append(evidence)

    def lock_out(self, now_s: float) -> None:
        """The person says power is off and locked out; allowed only at proven standstill,
        and not while the trial to attach waits for its size (:attr:`sizing_trial`)."""
        if self.step.kind != "hands-on" or self.step.phase != "lockout":
            raise GateRefused("no hands-on step is waiting for lock-out")
        ev = self._require_standstill()   # a turning rotor is said first
        if self.sizing_trial:
            raise GateRefused(TRIAL_SIZING_WAIT)
        self._require_ticks(LOCKOUT_CHECKLIST)
        self._confirm(now_s, f"lock-out before: {self.step.title}", ev)
        self.ticked = set()
        self.step = replace(self.step, phase=HandsOnPhase.WORKING)

    def hands_on_done(self, now_s: float) -> tuple[MassChange, ...]:
        """The person says the work is done and the machine is safe to run; apply the changes.

        Returns the changes so the app can mirror them on a simulated rig.
        """
        if self.step.kind != "hands-on" or self.step.phase != "working":
            raise GateRefused("lock out first: the hands-on step has not been opened")
        ev = self._require_standstill()
        self._require_ticks(DONE_CHECKLIST)
        changes = self.step.changes
        for change in changes:
            if change.action == "attach" and change.mass is not None:
                self.on_rotor.append(change.mass)
            elif change.action == "detach" and change.mass is not None:
                self.on_rotor.remove(change.mass)
        self._confirm(now_s, f"done, safe to run: {self.step.title}", ev)
        self.ticked = set()
        self._fits = []
        self._placed = [c for c in changes if c.action == "attach" and c.mass is not None]
        if self._after_check is not None:  # a resumed job: the rotor was checked
            self.step, self._after_check = self._after_check, None
            return changes
        self._advance_after_hands_on()
        return changes

    # ---- what was actually fitted ---------------------------------------------------------
    def fittable(self) -> tuple[int, ...]:
        """The items :meth:`fit` edits: at a hands-on step, its changes that put a mass on
        the rotor (indexes into its changes); at a run not started yet, the masses the
        hands-on step before it put on (indexes into :meth:`fit_target`'s list)."""
        if isinstance(self.step, HandsOn):
            if self.sizing_trial:   # no size shown yet: nothing to have fitted instead
                return ()
            return tuple(k for k, c in enumerate(self.step.changes)
                         if c.action == "attach" and c.mass is not None)
        if isinstance(self.step, Measure) and self.step.phase is RunPhase.ARMING:
            return tuple(range(len(self._placed)))
        return ()

    def fit_target(self, item: int) -> MassChange:
        """The change item ``item`` of :meth:`fittable` stands for, as it is now."""
        if isinstance(self.step, HandsOn):
            return self.step.changes[item]
        return self._placed[item]

    def _put(self, item: int, change: MassChange) -> None:
        """Item ``item`` is now ``change``: in the hands-on step, or on the rotor."""
        step = self.step
        if isinstance(step, HandsOn):
            changes = list(step.changes)
            changes[item] = change
            self.step = replace(step, changes=tuple(changes))
            return
        old = self._placed[item].mass
        assert old is not None and change.mass is not None
        self.on_rotor[self.on_rotor.index(old)] = change.mass
        self._placed[item] = change

    def fit(self, item: int, *, mass_g: float | None = None, position: int | None = None,
            angle_deg: float | None = None, removal: bool | None = None) -> MassChange:
        """Enter what was actually fitted for item ``item`` of the open hands-on step
        (before the run): its mass, its position (index into the plane's positions) or,
        on a plane without positions, its angle, and a weight or a hole (``removal``,
        where the profile allows it). The run and every calculation after it use the
        fitted mass; the suggestion is kept beside it. Refused with one line when the
        entry is not possible; :meth:`undo_fit` takes the last entry back."""
        if self.sizing_trial:
            raise GateRefused(TRIAL_SIZING_WAIT)
        items = self.fittable()
        if not items:
            raise GateRefused("a fitted mass is entered at the hands-on step that places it, "
                              "or before its run starts")
        if item not in items:
            raise GateRefused("that item puts no mass on the rotor")
        change = self.fit_target(item)
        old = change.mass
        assert old is not None
        plane = self.plane(old.plane)
        new = old
        if mass_g is not None:
            if not (math.isfinite(mass_g) and mass_g > 0):
                raise GateRefused(f"the fitted mass must be more than 0 {self.setup.units.mass}")
            if plane.max_mass_g is not None and mass_g > plane.max_mass_g:
                raise GateRefused(f"{self.setup.units.mass_words(mass_g)} is more than {plane.name} "
                                  f"takes ({self.setup.units.mass_words(plane.max_mass_g)}, machine "
                                  "profile)")
            new = replace(new, mass_g=mass_g)
        angles = plane.position_angles_deg
        if position is not None:
            if not angles:
                raise GateRefused(f"{plane.name} has no numbered positions: give the angle")
            if not 0 <= position < len(angles):
                raise GateRefused(f"{plane.name} has positions 1 to {len(angles)}")
            new = replace(new, position=position, angle_deg=angles[position])
        if angle_deg is not None:
            if angles:
                raise GateRefused(f"{plane.name} takes masses at its numbered positions only: "
                                  "give the position")
            if not math.isfinite(angle_deg):
                raise GateRefused("the angle must be a number of degrees")
            new = replace(new, angle_deg=wrap_deg(angle_deg), position=None)
        if removal is not None:
            if removal and old.kind is MassKind.TRIAL:
                raise GateRefused("a trial mass comes off again after its run: fit it as a "
                                  "weight, not a hole")
            if removal and not plane.removal_allowed:
                raise GateRefused(f"removing material is not allowed on {plane.name} "
                                  "(machine profile)")
            new = replace(new, removal=removal)
        suggested = change.suggested or old
        fitted = MassChange("attach", new, None if new == suggested else suggested)
        self._put(item, fitted)
        self._fits.append((item, change, fitted))
        return fitted

    @property
    def last_fit(self) -> MassChange | None:
        """What the last fitted-mass entry made of its item (:meth:`undo_fit` takes it
        back); None when there is nothing to undo."""
        return self._fits[-1][2] if self._fits else None

    def undo_fit(self) -> MassChange:
        """Take back the last fitted-mass entry of the open hands-on step; returns the item
        as it is again."""
        if not self._fits:
            raise GateRefused("no fitted mass entered at this step: nothing to undo")
        item, before, after = self._fits[-1]
        if item not in self.fittable() or self.fit_target(item) is not after:
            self._fits = []
            raise GateRefused("no fitted mass entered at this step: nothing to undo")
        self._fits.pop()
        self._put(item, before)
        return before

    # ---- runs ---------------------------------------------------------------------------
    def arm_run(self, force_acknowledged: bool, now_s: float) -> None:
        """The person has seen the forces at the planned speed and confirms the run."""
        if self.step.kind != "run" or self.step.phase != "arming":
            raise GateRefused("no run is waiting to be started")
        if not force_acknowledged:
            raise GateRefused("confirm the centrifugal force of the masses first")
        text = tuple(f"{self.setup.units.mass_words(m.mass_g)} on {m.plane}: "
                     f"{self.setup.units.force_words(f)} at "
                     f"{self.force_speed_rpm:.0f} rpm" for m, f in self.forces())
        self._force_text = text
        self._fits, self._placed = [], []  # the run starts with the masses as entered
        self._confirm(now_s, f"force confirmed before: {self.step.run_label}",
                      self.watch.evidence())
        self.step = replace(self.step, phase=RunPhase.RUNNING)
        self._pending_run_events = []
        self._alarmed = set()
        self.alarm = None
        self._runaway_ratio = 0.0
        self._runaway_sensor = None
        self._window_revs = self._window_most = 0
        self.widened = None
        self.shrunk_trial = None
        self.model_shook = None
        self.last_speed_rpm = 0.0

    def observe(self, readings: dict[str, Reading], speed_rpm: float,
                now_s: float) -> list[SafetyEvent]:
        """Check a live reading during a run; return new stop warnings (also recorded)."""
        if self.step.kind != "run" or self.step.phase != "running":
            return []
        new: list[SafetyEvent] = []
        if speed_rpm > self.setup.max_speed_rpm and "overspeed" not in self._alarmed:
            new.append(SafetyEvent(
                "overspeed", f"speed {speed_rpm:.0f} rpm is over the machine's maximum "
                f"{self.setup.max_speed_rpm:.0f} rpm: STOP THE MACHINE", now_s))
        base = self.as_found()
        # judged unless the speed is known and away from the as-found speed: with no speed
        # (a silent tach, no tachless estimate) the alarm is judged as before
        known = math.isfinite(speed_rpm) and speed_rpm > 0
        away = (base is not None and known and bool(base.speed_rpm)
                and abs(speed_rpm / float(base.speed_rpm or 1.0) - 1.0) > RUNAWAY_SPEED_BAND)
        if base is not None and not away:
            for name, r in readings.items():
                ref = base.readings.get(name)
                level = (runaway_reference(ref.amplitude, ref.confidence_radius)
                         if ref is not None else 0.0)
                key = f"runaway:{name}"
                if (level > 0 and key not in self._alarmed
                        and r.amplitude > self.setup.runaway_factor * level):
                    if r.amplitude / level > self._runaway_ratio:
                        self._runaway_ratio, self._runaway_sensor = r.amplitude / level, name
                    new.append(SafetyEvent(
                        "runaway", f"{name}: 1x {r.amplitude:.3g} {r.unit} is over "
                        f"{self.setup.runaway_factor:g} x the as-found {level:.3g}: "
                        "STOP THE MACHINE", now_s))
        if math.isfinite(speed_rpm) and speed_rpm > self.last_speed_rpm:
            self.last_speed_rpm = speed_rpm
        self.events += new
        if new:
            # The run stops here: nothing of it is kept; the alarm is held until the person
            # acknowledges it, then a gated hands-on step waits for standstill.
            self.alarm = new[0]
            self.step = replace(self.step, phase=RunPhase.STOPPED)
        return new

    @property
    def revolutions_wanted(self) -> int:
        """The revolutions the current run's readings average before it is kept: a check
        run's :data:`CHECK_REVOLUTIONS_FACTOR` times ``revolutions_per_run`` (its verdict's
        bound shrinks with them), every other run's ``revolutions_per_run``. The app's meter
        must hold at least this many (``ui.session.LinkSession.reset_meter``)."""
        step = self.step
        if (isinstance(step, Measure) and step.run_kind == RunKind.CHECK
                and self.setup.mode is not Mode.AMPLITUDE_ONLY):
            return self.setup.revolutions_per_run * CHECK_REVOLUTIONS_FACTOR
        return self.setup.revolutions_per_run

    @property
    def revolutions_most(self) -> int:
        """The longest window the current run's readings may average
        (:data:`WIDEN_FACTOR_MAX` times :attr:`revolutions_wanted`, at most what the meter
        holds when :meth:`widen_to` was told): a reading steady over it is kept whatever its
        phase's width (:meth:`settled`)."""
        most = self.revolutions_wanted * WIDEN_FACTOR_MAX
        return min(most, self._window_most) if self._window_most else most

    def _window_full(self, r: Reading, window_revs: int) -> bool:
        return r.revolutions >= WIDENED_FULL_FRACTION * window_revs

    def widen_to(self, readings: dict[str, Reading], window_revs: int,
                 revolutions_seen: int, window_most: int = 0) -> int | None:
        """The window (revolutions) the meter should average next, or None to leave it.

        Twice ``window_revs`` (at most :attr:`revolutions_most`) while a run is measuring
        and every pickup's reading is steady, with a phase, over the whole window, when

        - a check run's verdict from these readings would be undecided (within on the
          estimate, its 95 % bound past the allowance: :attr:`Verdict.undecided`): a trim
          then would correct noise, a longer average may prove it, or
        - any other run is not ready and the window has slid a whole window's length since
          it filled (``revolutions_seen`` at least twice ``window_revs``): a reading still
          held by its phase then will not settle by waiting, averaging more tightens it.
          Before that, the revolutions of the speed settling slide out and the reading may
          settle as the run goes on.

        None while a reading is short of the window or not steady (more time helps, or
        nothing does), when a wider window cannot be had, and otherwise. Once widened, the
        run's readings are kept only when they fill the new window (:meth:`settled`).

        Parameters
        ----------
        readings : dict of str to Reading
            The meter's readings by pickup.
        window_revs : int
            The revolutions the meter averages at most now.
        revolutions_seen : int
            Every revolution the meter has taken since the run started.
        window_most : int, default 0
            The most the meter can hold (0: no limit but :data:`WIDEN_FACTOR_MAX`).
        """
        step = self.step
        if not isinstance(step, Measure) or step.phase != RunPhase.RUNNING:
            return None
        if window_most > 0:
            self._window_most = window_most
        if self.setup.mode is Mode.AMPLITUDE_ONLY:
            return None
        most = self.revolutions_most
        if window_revs >= most:
            return None
        if not all(name in readings and readings[name].steady
                   and readings[name].phase_deg is not None
                   and self._window_full(readings[name], window_revs)
                   for name in self.setup.sensors):
            return None
        if step.run_kind == RunKind.CHECK:
            if not self.ready(readings) or not self._check_undecided(
                    readings, math.sqrt(window_revs / most)):
                return None
            self.widened = Widened.VERDICT_UNDECIDED
        elif self.ready(readings) or revolutions_seen < 2 * window_revs:
            return None
        else:
            self.widened = Widened.PHASE_WIDE
        self._window_revs = min(2 * window_revs, most)
        return self._window_revs

    @property
    def revolutions_target(self) -> int:
        """The revolutions the current run's readings average before they are kept: what
        it wants, or the wider window it asked for (:meth:`widen_to`)."""
        return max(self.revolutions_wanted, self._window_revs)

    def _check_undecided(self, readings: dict[str, Reading], shrink: float) -> bool:
        """The verdict a check run kept with these readings now would give is undecided
        (:attr:`Verdict.undecided`), and the longest average would decide it: with every
        circle ``shrink`` times as wide (one over the square root of the revolutions, the
        standard error of a mean) the verdict passes. Often the coefficients' own spread
        holds the bound past the allowance and a longer average would not change it: the
        run is kept at once. False too when no verdict would come (the run refutes the
        model, the engine refuses it: the run is kept and says so)."""
        step = self.step
        assert isinstance(step, Measure)
        speeds = [r.speed_rpm for r in readings.values()
                  if r.speed_rpm is not None and r.speed_rpm > 0]
        run = Run(step.run_label, tuple(self.on_rotor),
                  {s: readings[s] for s in self.setup.sensors},
                  sum(speeds) / len(speeds) if speeds else None, step.run_kind)
        try:
            verdict, _ = self._assess([*self.runs, run])
            if not self._whole_machine(verdict, run).undecided:
                return False
            tighter = replace(run, readings={
                n: replace(r, confidence_radius=r.confidence_radius * shrink,
                           confidence_deg=subtended_deg(r.confidence_radius * shrink,
                                                        r.amplitude))
                if r.confidence_radius is not None else r for n, r in run.readings.items()})
            verdict, _ = self._assess([*self.runs, tighter])
        except (ModelRefuted, GateRefused):
            return False
        return self._whole_machine(verdict, tighter).passed

    def settled(self, r: Reading) -> bool:
        """One pickup's reading is good enough to keep.

        Steady (revolutions, speed, drift) and either the phase known within the limit, or
        - for a vector that became small after a correction - a 95 % circle no wider than
        5 % of the as-found 1x at that pickup (then its phase does not matter). A check
        run's reading needs a phase, not its limit: its verdict and trim weigh its circle as
        it is (balance.solve's guard band), as the DSP keeps a small 1x ready after
        ``SteadinessLimits.settled_revolutions`` (dsp.averaging). The meter's window
        slides, so waiting would not shrink the circle: a phase limit there held the check
        run of a rotor balanced close to its pickups' noise for ever (bench/bench_balance.py,
        [default]: 7 of 51 check runs on the first 40 rotors). Any other run's reading
        steady over :attr:`revolutions_most` is kept too (:data:`WIDEN_FACTOR_MAX`; the app
        widens the meter's window up to it, :meth:`widen_to`).
        """
        if not r.steady or r.revolutions < self.revolutions_wanted:
            return False
        if self._window_revs and not self._window_full(r, self._window_revs):
            return False    # widened (widen_to): its readings fill the new window first
        if r.no_tach and self.setup.mode is not Mode.AMPLITUDE_ONLY:
            return False  # the amplitude-only method needs no phase, the others do
        if self.setup.mode is Mode.AMPLITUDE_ONLY:
            base = self.as_found()
            if base is None or r.confidence_radius is None:
                if r.no_tach and r.confidence_radius is not None:  # the spectrum's reading
                    return r.confidence_radius <= SMALL_VECTOR_FRACTION * r.amplitude
                return r.confidence_deg <= self.setup.phase_limit_deg
            ref = base.readings.get(r.sensor)
            limit = SMALL_VECTOR_FRACTION * (ref.amplitude if ref else r.amplitude)
            return r.confidence_radius <= max(limit, SMALL_VECTOR_FRACTION * r.amplitude)
        if r.phase_deg is None:
            return False
        if r.confidence_deg <= self.setup.phase_limit_deg:
            return True
        step = self.step
        if isinstance(step, Measure) and step.run_kind == RunKind.CHECK:
            return True
        if self._window_full(r, self.revolutions_most):
            return True     # averaged as long as a run may: its circle says the rest
        base = self.as_found()
        ref = base.readings.get(r.sensor) if base is not None else None
        return (ref is not None and r.confidence_radius is not None
                and r.confidence_radius <= SMALL_VECTOR_FRACTION * ref.amplitude)

    def ready(self, readings: dict[str, Reading], tach_live: bool = True) -> bool:
        """True when every pickup has a settled reading over enough revolutions.

        Never while the tach is silent (``tach_live`` False: no edge lately while data
        arrive) or a reading says there is no tach: without the once-per-rev reference a 1x
        phase means nothing. The amplitude-only procedure needs no tach: its readings come
        from the spectrum (:mod:`trueturn.dsp.tachless`).
        """
        if self.step.kind != "run" or self.step.phase != "running":
            return False
        if not tach_live and self.setup.mode is not Mode.AMPLITUDE_ONLY:
            return False
        return all(name in readings and self.settled(readings[name])
                   for name in self.setup.sensors)

    def progress(self, readings: dict[str, Reading]) -> float:
        """Fraction 0..1 of the revolutions averaged for the current run."""
        if not readings:
            return 0.0
        revs = min((readings[s].revolutions if s in readings else 0) for s in self.setup.sensors)
        return max(0.0, min(1.0, revs / self.revolutions_target))

    def record(self, readings: dict[str, Reading], speed_rpm: float,
               now_s: float, tach_live: bool = True) -> Run:
        """Keep the run's readings (only when :meth:`ready`) and move on."""
        if self.step.kind == "run" and self.step.phase == "interrupted":
            raise GateRefused("the run was interrupted: reconnect first; it starts over")
        if self.step.kind == "run" and self.step.phase == "stopped":
            raise GateRefused("the run was stopped by an alarm: nothing of it is kept")
        if not self.ready(readings, tach_live):
            raise GateRefused("the reading is not steady yet (or the tach is silent): "
                              "keep the machine running")
        step = self.step
        assert isinstance(step, Measure)
        run = Run(step.run_label, tuple(self.on_rotor),
                  {s: readings[s] for s in self.setup.sensors}, speed_rpm, step.run_kind,
                  now_s, self._force_text, tuple(self._pending_run_events))
        if self._return_step is not None:
            # the second start as found: kept beside the runs; back to where it was offered
            self.second_start = run
            self.step, self._return_step = self._return_step, None
            self.ticked = set()
            return run
        self._keep(run, self._measured + 1)
        return run

    def _keep(self, run: Run, number: int) -> None:
        """Keep run ``number`` (a new one, or one measured again) and move on."""
        self._measured = max(self._measured, number)
        if self._redo_index is not None:
            # a run of the coefficient set measured again: it replaces the first one
            index = self._redo_index
            self.last_replaced = self.run_numbers[index]
            self.runs[index] = run
            self.run_numbers[index] = number
            self._redo_index = None
            if run.kind == RunKind.TRIAL and index == len(self.runs) - 1:
                self._advance_after_run(run)     # the latest trial: check it again, go on
            else:
                self._to_correction()
            return
        self.last_replaced, self._repeat_of = self._repeat_of, None
        self.runs.append(run)
        self.run_numbers.append(number)
        self._advance_after_run(run)

    @property
    def redo_of(self) -> int | None:
        """The number of the run the rotor is being set up to measure again (None: none)."""
        return None if self._redo_index is None else self.run_numbers[self._redo_index]

    def interrupt_run(self, kind: Literal["link-lost", "board-restart"], detail: str,
                      now_s: float) -> bool:
        """The run in progress lost its data (link lost, board restarted); return True if a
        run was in progress.

        Nothing of its partial average is kept (the app discards it): a lost link leaves the
        run ``interrupted`` until :meth:`resume_run`; a board restart keeps it running from
        zero. The interruption is kept as an event of the run when it completes.
        """
        if self.step.kind != "run" or self.step.phase not in ("running", "interrupted"):
            return False
        event = SafetyEvent(kind, detail, now_s)
        self._pending_run_events.append(event)
        self.events.append(event)
        if kind == "link-lost":
            self.step = replace(self.step, phase=RunPhase.INTERRUPTED)
        return True

    def resume_run(self) -> None:
        """The link is back: the interrupted run starts over (same masses, same confirmation)."""
        if self.step.kind != "run" or self.step.phase != "interrupted":
            raise GateRefused("no interrupted run to resume")
        self.step = replace(self.step, phase=RunPhase.RUNNING)
        self._alarmed = set()

    def abort_run(self, now_s: float, reason: str = "stopped by the person") -> SafetyEvent:
        """Stop the run at any moment: nothing of it is kept, the job file is not written;
        a gated hands-on step (inspect the rotor) comes next, then the same run again."""
        if self.step.kind != "run":
            raise GateRefused("no run to stop")
        event = SafetyEvent("aborted", f"{self.step.run_label}: {reason}", now_s)
        self.events.append(event)
        self._inspect_step(f"Run stopped ({self.step.run_label}): inspect the rotor")
        return event

    def acknowledge_alarm(self) -> SafetyEvent:
        """The person has seen the alarm that stopped the run; go to the inspection step."""
        if self.alarm is None or self.step.kind != "run" or self.step.phase != "stopped":
            raise GateRefused("no alarm is waiting")
        alarm = self.alarm
        self.alarm = None
        what = {"overspeed": "overspeed", "runaway": "vibration too high"}.get(alarm.kind,
                                                                             alarm.kind)
        stopped = self.step
        self._inspect_step(f"Stopped ({what}): inspect the rotor")
        if alarm.kind == "runaway" and isinstance(stopped, Measure):
            if self._model_check_shook(stopped):
                self._refute_by_alarm()
            else:
                self._shrink_trial(stopped)
        return alarm

    def _model_check_shook(self, stopped: Measure) -> bool:
        """Model-first: the runaway alarm stopped a check run of the model's correction or
        of a trim from its refined coefficients (a trusted model, no fallback yet)."""
        return (self.setup.mode is Mode.MODEL_FIRST and not self.fallback
                and self.model is not None and self.model.trusted
                and stopped.run_kind == RunKind.CHECK and bool(self.run_numbers)
                and self._runaway_sensor is not None and isinstance(self.step, HandsOn))

    def _refute_by_alarm(self) -> None:
        """The model's masses shook the machine over the alarm's limit: the model is
        refuted as a kept run would refute it (:meth:`_drop_model`); the hands-on step after
        the alarm takes its masses off and puts the first trial on (:class:`ModelShook`)."""
        assert self._runaway_sensor is not None and self.model is not None
        self.model_shook = ModelShook(self._runaway_sensor, self._runaway_ratio,
                                      self.run_numbers[-1])
        self.refute_after_alarm(self._runaway_sensor)

    def refute_after_alarm(self, sensor: str) -> None:
        """The model refuted by a check run the runaway alarm stopped at ``sensor``: its
        masses come off and the first trial goes on (also how a continued job replays it,
        after the run the job says the alarm came after)."""
        self._drop_model(sensor, by_alarm=True)
        if isinstance(self.step, HandsOn):
            self.step = replace(self.step, title=(
                "Stopped (vibration too high): the model's correction comes off, "
                "a trial goes on"))

    def _shrink_trial(self, stopped: Measure) -> None:
        """After a runaway alarm on a trial run (a trial per plane): the trial moved the 1x
        by more than the alarm's factor, so the same run would stop again. The inspection
        step takes the trial off and puts a smaller one in its place (same plane and
        position), sized from the level the alarm read; ``shrunk_trial`` says so. Nothing
        changes when the scale cannot weigh a smaller one."""
        self.shrunk_trial = None
        trials = [m for m in self.on_rotor if m.kind == MassKind.TRIAL]
        if (stopped.run_kind != RunKind.TRIAL or not self._by_trials or len(trials) != 1
                or not self._runaway_ratio > 1.0 or not isinstance(self.step, HandsOn)):
            return
        old = trials[0]
        smaller_g = ceil_to_scale_g(self.engine.trial_after_runaway(abs(old.mass_g),
                                                                    self._runaway_ratio),
                                    self.setup.units.mass)
        if not smaller_g < abs(old.mass_g):
            return
        smaller = replace(old, mass_g=math.copysign(smaller_g, old.mass_g))
        self._stopped_trial_g[old.plane] = min(abs(old.mass_g),
                                               self._stopped_trial_g.get(old.plane, math.inf))
        self.shrunk_trial = ShrunkTrial(old.plane, abs(old.mass_g), self._runaway_ratio,
                                        smaller_g)
        self.step = replace(self.step, title=(
            f"Stopped (vibration too high): a smaller trial on {old.plane}, "
            f"{self.setup.units.mass_words(smaller_g)}"),
            changes=(MassChange("detach", old), MassChange("attach", smaller)))

    def _inspect_step(self, title: str) -> None:
        self.ticked = set()
        self._pending_run_events = []
        if self._return_step is not None:
            # a second start stopped: it was optional, so it is dropped; the step it was
            # offered at comes back (the trial's hands-on step opens with the lock-out gate)
            self.step, self._return_step = self._return_step, None
            return
        self.step = HandsOn(title)

    # ---- correction step ----------------------------------------------------------------
    def set_removal(self, removal: bool) -> None:
        """Choose removing material instead of adding mass; re-splits the correction."""
        if self.step.kind != "correction" or self.problem:
            raise GateRefused("removal can only be chosen while a correction is shown")
        if removal and not self.removal_allowed:
            barred = ", ".join(p.name for p in self.planes_used if not p.removal_allowed)
            raise GateRefused(f"removing material is not allowed on {barred} (machine "
                              "profile): add mass instead")
        self.removal = removal
        self.solution = self._solve()

    def set_speed_slopes(self, slopes: Sequence[object]) -> None:
        """Take each pickup's measured speed slope (a sweep was kept; empty: none measured
        well enough): every later solve and verdict compares the runs at one speed with
        it (the engine's type, opaque here)."""
        self.setup = replace(self.setup, speed_slopes=tuple(slopes))

    def set_support_resonances(self, resonances: object) -> None:
        """Take the support resonances the job's sweeps found (the engine's type; None:
        none kept): later trials are sized with them."""
        self.setup = replace(self.setup, support_resonances=resonances)

    def repeat_run(self) -> None:
        """Drop the last run and measure it again (after a problem with its readings)."""
        if self.step.kind != "correction" or not self.problem or not self.runs:
            raise GateRefused("there is no run to repeat")
        last = self.runs.pop()
        self._repeat_of = self.run_numbers.pop()
        self.problem, self.sweep_lost = "", False
        self.step = Measure(f"Repeat: {last.label}", last.label, last.kind or RunKind.CHECK)

    def _redo(self, index: int, masses: tuple[PlacedMass, ...], title: str) -> None:
        """Measure run ``index`` of the coefficient set again with ``masses`` on the rotor:
        a gated hands-on step sets the rotor up when it differs, then the run, then the
        correction is solved again with the new run in place of the old one."""
        changes = [MassChange("detach", m) for m in self.on_rotor if m not in masses]
        changes += [MassChange("attach", m) for m in masses if m not in self.on_rotor]
        self._redo_index = index
        self.problem = ""
        self.too_small_trial = None
        label = self.runs[index].label
        kind = self.runs[index].kind or RunKind.CHECK
        if changes:
            self.step = HandsOn(title, tuple(changes))
        else:
            self.step = Measure(f"Run again: {label}", label, kind)

    def redo_trial_larger(self) -> PlacedMass:
        """Redo the trial that carried no information with the suggested larger mass (same
        plane and position); returns the new trial mass. The other runs are kept."""
        t = self.too_small_trial
        if self.step.kind != "correction" or t is None or t.suggested_g is None:
            raise GateRefused("there is no trial to redo with a larger mass")
        if not self._by_trials:
            raise GateRefused("redo the trials with a larger mass from a new job")
        found = [(k, m) for k, r in enumerate(self.runs) for m in r.masses
                 if m.kind == "trial" and m.plane == t.plane]
        if not found:
            raise GateRefused(f"no trial run on {t.plane} to redo")
        index, old = found[-1]
        mass_g = ceil_to_scale_g(t.suggested_g, self.setup.units.mass)  # what a scale weighs
        limit = self.plane(t.plane).max_mass_g
        if limit is not None and mass_g > limit:
            raise GateRefused(f"the trial on {t.plane} would need "
                              f"{self.setup.units.mass_words(mass_g)}, more than the plane takes "
                              f"({self.setup.units.mass_words(limit)}, machine profile)")
        larger = replace(old, mass_g=mass_g)
        masses = tuple(larger if m == old else m for m in self.runs[index].masses)
        self._redo(index, masses,
                   f"Redo {self.runs[index].label} with {self.setup.units.mass_words(mass_g)}")
        return larger

    def repeat_off_speed_run(self) -> OffSpeed:
        """Measure the coefficient run furthest off its group's speed again (same masses);
        offered while the first correction is shown."""
        sol = self.solution
        if (self.step.kind != "correction" or self.problem or sol is None
                or not sol.off_speed or self.trims_done):
            raise GateRefused("no run of this correction was off speed")
        worst = max(sol.off_speed, key=lambda o: abs(o.deviation))
        run = self.runs[worst.index]
        self._redo(worst.index, run.masses, f"Set up {run.label} again: it ran off speed")
        return worst

    def accept_correction(self) -> None:
        """Go on to the hands-on step that places the correction parts."""
        if self.step.kind == "correction" and self.problem:
            raise GateRefused(f"no correction: {self.problem}")
        if self.awaiting_sweep:
            raise GateRefused("the model waits for the coast-down: let the machine run down "
                              "to a stop")
        if self.step.kind != "correction" or self.solution is None:
            raise GateRefused("no correction is waiting")
        changes = [MassChange("detach", m) for m in self.on_rotor if m.kind == "trial"]
        changes += [MassChange("attach", p) for p in self.solution.parts]
        word = "Trim" if self.trims_done else "Correction"
        self.step = HandsOn(f"{word}: place the parts", tuple(changes))

    # ---- model-first (issue #20 item 4) --------------------------------------------------
    @property
    def awaiting_sweep(self) -> bool:
        """Model-first, after the as-found run: the model waits for the coast-down's
        support resonances (:meth:`sweep_analysed`)."""
        return (self.setup.mode is Mode.MODEL_FIRST and self.model is None
                and len(self.runs) == 1 and not self.fallback
                and isinstance(self.step, ShowCorrection) and not self.problem)

    def sweep_analysed(self, resonances: object,
                       answer: ModelAnswer | None = None) -> ModelAnswer:
        """The as-found run's sweep is analysed: ``resonances`` per pickup (the engine's
        type; None: no sweep could be had). The model either gives the first correction
        (no trial run) or says why it cannot be trusted, and the job goes on with a trial
        run per plane; the as-found run is kept either way. ``answer``: the engine's
        answer to the same sweep and as-found run, computed beforehand (off the screen's
        thread; the engine is pure), else computed here."""
        if not self.awaiting_sweep:
            raise GateRefused("the model's answer is given once, after the as-found run")
        if answer is None:
            answer = self.engine.model_first(self.setup, self.runs[:1], resonances)
        self._sweep = resonances
        self._take_answer(answer, offer_tap=True)
        # is it unbalance? (issue #22): the app's judgement of the as-found run came before
        # the model's answer; when a rule failed, ask before the first mass goes on
        if self.doubt:
            self.step = ShowDoubt("Balancing may not help", self.doubt)
        return answer

    def _take_answer(self, answer: ModelAnswer, offer_tap: bool) -> None:
        """The model's answer decides the next step: the optional tap test when it may help
        (a stiff mount, ``offer_tap``: the model not trusted for the supports' stiffness, or
        trusted with a correction that may fall short of the grade); else its correction
        when trusted; else trials."""
        self.model = answer
        if offer_tap and answer.tap_may_help:
            self.solution = None
            self.step = TapTest("Tap test at standstill (optional)")
        elif answer.trusted and answer.solution is not None:
            self.solution = answer.solution
            self.step = ShowCorrection("Correction from the model")
        elif answer.trusted:  # an answer a job kept (its prior only): solved from the prior
            self._to_correction()
        else:
            self.fallback = True
            self.solution = None
            self._advance_after_run(self.runs[0])
        self._before_trials = self.step

    # ---- the tap test (model-first on a stiff mount) -------------------------------------
    def begin_tap(self, now_s: float) -> None:
        """The person starts the tap test (or a redo): a hands-on step at the machine, so
        only at proven standstill with every item of :data:`TAP_CHECKLIST` ticked; the
        confirmation is kept with its evidence. The app records from now on."""
        step = self.step
        if not isinstance(step, TapTest) or step.phase is TapPhase.TAPPING:
            raise GateRefused("no tap test is waiting to be started")
        ev = self._require_standstill()
        self._require_ticks(TAP_CHECKLIST)
        self._confirm(now_s, f"lock-out before: {step.title}", ev)
        self.ticked = set()
        self._tap_started_s = now_s
        self.step = replace(step, phase=TapPhase.TAPPING, refused=None)

    def tap_answer(self, outcome: TapOutcome) -> ModelAnswer:
        """The model's answer with the tap test's modes (pure: the app computes it off the
        screen's thread, the support fit takes seconds; :meth:`tap_recorded` takes it)."""
        return self.engine.model_first(self.setup, self.runs[:1], self._sweep,
                                       standstill=outcome.modes)

    def tap_recorded(self, outcome: TapOutcome,
                     answer: ModelAnswer | None = None) -> TapRefusal | None:
        """The tap test's recording is analysed. Refused (returned, the step says why; redo
        or skip) when the rotor turned - a tach edge since :meth:`begin_tap`, or a line
        that does not decay - or no tap or no mode was found. Else the model is computed
        again held to the tapped modes (``answer``: computed beforehand by
        :meth:`tap_answer`): trusted, its correction; not, trials."""
        step = self.step
        if not isinstance(step, TapTest) or step.phase is not TapPhase.TAPPING:
            raise GateRefused("no tap test is being recorded")
        edge = self.watch.last_edge_s
        # a tach edge since it began, or a line that kept its level behind the silent tach
        # while it was recorded (the watch's tap test, trueturn.procedure.standstill)
        turned = (edge is not None and edge > (self._tap_started_s or 0.0)
                  or self.watch.tap_turned)
        refusal = TapRefusal.TURNING if turned else outcome.refusal
        if refusal is not None:
            self.step = replace(step, phase=TapPhase.REFUSED, refused=refusal)
            return refusal
        if answer is None:
            answer = self.tap_answer(outcome)
        self.tap = outcome
        self._take_answer(answer, offer_tap=False)
        return None

    def skip_tap(self) -> None:
        """The person skips the tap test (at any moment of it): the model's correction
        follows when it was trusted without the tap, else trial runs."""
        if not isinstance(self.step, TapTest):
            raise GateRefused("no tap test is offered")
        self.ticked = set()
        assert self.model is not None
        self._take_answer(replace(self.model, tap_may_help=False), offer_tap=False)

    def _assess(self, runs: list[Run] | None = None) -> tuple[Verdict, Solution]:
        """Verdict on the last of ``runs`` (None: the runs kept) and the trim still needed."""
        runs = self.runs if runs is None else runs
        if self.setup.mode is Mode.MODEL_FIRST and not self.fallback and self.model is not None:
            return self.engine.model_assess(self.setup, runs, self.removal, self.model.prior)
        return self.engine.assess(self.setup, runs, self.removal)

    # ---- trials sized from the coast-down (issue #20 item 3) ------------------------------
    def await_trial_sizing(self) -> None:
        """The app will size the trials from the as-found run's coast-down (it records the
        coast-down, or a continued job kept one): until :meth:`trial_sizing_in`, the trial's
        hands-on step is not opened (:attr:`sizing_trial`), so the size a person weighs out
        is the one used. Nothing to wait for when no trial is still to come, the fit is
        already in, or the engine cannot size from a fit (:meth:`Engine.trial_fit_wanted`)."""
        if (self.runs and len(self.runs) <= len(self._runs_needed())
                and self.setup.trial_sensitivity is None
                and self.engine.trial_fit_wanted(self.setup)):
            self._trial_sizing_awaited = True

    @property
    def trial_sizing_awaited(self) -> bool:
        """The app owes the trials their size (:meth:`trial_sizing_in`)."""
        return self._trial_sizing_awaited

    @property
    def sizing_trial(self) -> bool:
        """The step shown attaches a trial whose size is still awaited."""
        return (self._trial_sizing_awaited and self._trial_step is not None
                and self.step == self._trial_step)

    def trial_sizing_in(self, sensitivity: object) -> None:
        """The fit to the as-found coast-down is done (``sensitivity``: the engine's
        :meth:`Engine.trial_sensitivity`; None: no fit, the trials keep their size). A
        trial's hands-on step not yet opened (nor its mass entered as fitted) is sized
        again with it, wherever it waits (shown, behind a doubt or a second start)."""
        self._trial_sizing_awaited = False
        if sensitivity is None:
            return
        self.setup = replace(self.setup, trial_sensitivity=sensitivity)
        old = self._trial_step
        if not isinstance(old, HandsOn) or old.phase is not HandsOnPhase.LOCKOUT:
            return
        changes = tuple(
            MassChange("attach", self._trial_mass(self.plane(c.mass.plane), 0.0))
            if c.action == "attach" and c.mass is not None and c.mass.kind == MassKind.TRIAL
            and c.suggested is None else c for c in old.changes)
        new = replace(old, changes=changes)
        self._trial_step = new
        if self.step == old:
            self.step = new
        if self._before_trials == old:
            self._before_trials = new
        if self._return_step == old:
            self._return_step = new

    # ---- is it unbalance? (issue #22) --------------------------------------------------
    @property
    def offers_second_start(self) -> bool:
        """A second start as found may be measured now (optional): after the as-found run of
        a procedure by correction planes, before the first trial mass goes on."""
        return (self.second_start is None and len(self.runs) == 1 and not self.finished
                and self._return_step is None
                and self.setup.mode in (Mode.ONE_PLANE, Mode.TWO_PLANE)
                and (isinstance(self.step, ShowDoubt) or self.step == self._before_trials))

    def start_again(self) -> None:
        """Measure a second start of the machine as found (the app compares its 1x with the
        first start's). Only from standstill: the point is a stop and a restart."""
        if not self.offers_second_start:
            raise GateRefused("a second start as found is offered after the as-found run, "
                              "before the first trial mass goes on")
        ev = self.watch.evidence()
        if not ev.proven:
            raise GateRefused("the second start is compared after a stop: "
                              + standstill_refusal(ev))
        self._return_step = self.step
        self.ticked = set()
        self.step = Measure("Second start, as found", SECOND_START_LABEL, RunKind.AS_FOUND)

    def as_found_judged(self, because: tuple[str, ...]) -> None:
        """The app's judgement of the as-found run (or of both starts): the codes of the
        rules that failed (empty: none failed or nothing could be judged). When any failed,
        the person is asked before the first trial mass goes on (:class:`ShowDoubt`)."""
        self.doubt = tuple(because)
        if self.finished or len(self.runs) != 1 or self._before_trials is None:
            return
        if because and (self.step == self._before_trials or isinstance(self.step, ShowDoubt)):
            self.step = ShowDoubt("Balancing may not help", self.doubt)
        elif not because and isinstance(self.step, ShowDoubt):
            self.step = self._before_trials

    def go_on(self) -> None:
        """The person goes on with the balancing although it may not help."""
        if not isinstance(self.step, ShowDoubt) or self._before_trials is None:
            raise GateRefused("nothing to go on from")
        self.step = self._before_trials

    def stop_here(self, now_s: float) -> EarlyStop:
        """The person stops the job here because balancing may not help; the job closes
        without a verdict, with the reason kept."""
        if not isinstance(self.step, ShowDoubt):
            raise GateRefused("the job can be stopped here only when balancing may not help "
                              "(after the as-found run)")
        self.stopped = EarlyStop("balancing_may_not_help", self.step.because, len(self.runs),
                                 now_s)
        self.step = Stopped("Job stopped: balancing may not help")
        self.finished = True
        return self.stopped

    def finish(self) -> None:
        """Close the procedure after the verdict."""
        if self.step.kind != "verdict":
            raise GateRefused("there is no verdict yet")
        self.finished = True

    # ---- sequencing ---------------------------------------------------------------------
    def _runs_needed(self) -> list[tuple[str, Plane, float]]:
        """Trial runs: (label, plane, angle offset from the suggestion)."""
        mode = self.setup.mode
        if mode is Mode.SAVED_TRIM:
            return []
        if mode is Mode.AMPLITUDE_ONLY:
            p = self.setup.planes[0]
            return [(f"trial {p.name} at {a:.0f} deg", p, a) for a in (0.0, 120.0, 240.0)]
        if mode is Mode.MODEL_FIRST and not self.fallback:
            return []  # the correction run serves as the trial
        return [(f"trial {p.name}", p, 0.0) for p in self.planes_used]

    def _trial_mass(self, plane: Plane, offset_deg: float) -> PlacedMass:
        s = self.engine.trial_mass(self.setup, plane, self.runs)
        angle = wrap_deg(s.angle_deg + offset_deg)
        position = s.position
        if plane.position_angles_deg and offset_deg:
            position = min(range(len(plane.position_angles_deg)), key=lambda k: abs(
                angle_difference_deg(plane.position_angles_deg[k], angle)))
            angle = plane.position_angles_deg[position]
        return PlacedMass(plane.name, s.mass_g, angle, position, kind=MassKind.TRIAL)

    def _advance_after_hands_on(self) -> None:
        if self._redo_index is not None:
            redo = self.runs[self._redo_index]
            self.step = Measure(f"Run again: {redo.label}", redo.label,
                                redo.kind or RunKind.CHECK)
            return
        n_runs = len(self.runs)
        trials = self._runs_needed()
        if n_runs == 0:
            self.step = Measure("As-found run", "as found", RunKind.AS_FOUND)
        elif n_runs <= len(trials):
            label = trials[n_runs - 1][0]
            self.step = Measure(f"Trial run: {label}", label, RunKind.TRIAL)
        else:
            label = "check" if not self.trims_done else f"check after trim {self.trims_done}"
            self.step = Measure(f"Check run: {label}", label, RunKind.CHECK)

    def _trial_too_small(self) -> bool:
        """Right after a trial run (tach procedures): check its effect against the as-found
        reading and its uncertainty; when it is too small to be seen, stop at a redo offer
        (:meth:`redo_trial_larger`) before moving on. Returns True when it stopped."""
        if not self._by_trials:
            return False
        last = self.runs[-1] if self.runs else None
        if last is None or last.kind != RunKind.TRIAL:
            return False
        small = self.engine.trial_effect(self.setup, self.runs)
        if small is None:
            return False
        self.step = ShowCorrection("Trial too small to be seen")
        self.too_small_trial = self._bracketed(small)
        self.problem = self._too_small_words(self.too_small_trial)
        return True

    def _too_small_words(self, small: TooSmallTrial) -> str:
        words = self.setup.units.mass_words
        redo = (f": redo it with {words(ceil_to_scale_g(small.suggested_g, self.setup.units.mass))}"
                if small.suggested_g is not None else
                ": no change at all - is the trial mass on the rotor?")
        return (f"the trial on {small.plane} ({words(small.trial_g)}) "
                f"changed the 1x too little to be seen{redo}")

    def _bracketed(self, small: TooSmallTrial) -> TooSmallTrial:
        """A trial too small on a plane where a larger one stopped the run (the runaway
        alarm): the redo stays under the stopped one
        (:func:`trueturn.balance.trial_mass.redo_below_stopped`)."""
        if small.suggested_g is None:
            return small
        return replace(small, suggested_g=redo_below_stopped(
            small.trial_g, small.suggested_g, self._stopped_trial_g.get(small.plane)))

    @property
    def _by_trials(self) -> bool:
        """The job measures a trial run per plane (by planes, or model-first fallen back)."""
        return (self.setup.mode in (Mode.ONE_PLANE, Mode.TWO_PLANE)
                or (self.setup.mode is Mode.MODEL_FIRST and self.fallback))

    def _advance_after_run(self, run: Run) -> None:
        trials = self._runs_needed()
        n_runs = len(self.runs)
        if (self.setup.mode is Mode.MODEL_FIRST and n_runs == 1 and self.model is None
                and not self.fallback):
            # the coast-down after this run gives the supports' resonances: wait for it
            self.problem = ""
            self.solution = None
            self.step = ShowCorrection("Correction from the model")
            return
        if n_runs <= len(trials) + 1 and self._trial_too_small():
            return
        self.problem = ""
        self.too_small_trial = None
        if n_runs <= len(trials):
            # Next: move the trial mass (off the previous plane/angle, onto the next one).
            changes = [MassChange("detach", m) for m in self.on_rotor if m.kind == "trial"]
            label, plane, offset = trials[n_runs - 1]
            changes.append(MassChange("attach", self._trial_mass(plane, offset)))
            self.step = HandsOn(f"Attach the trial mass for: {label}", tuple(changes))
            self._trial_step = self.step
            if n_runs == 1:
                self._before_trials = self.step
            return
        if n_runs == len(trials) + 1:
            self._to_correction()
            return
        # A check run: verdict, and the trim still needed.
        try:
            verdict, trim = self._assess()
            if VerdictFlag.CLIPPED in verdict.flags:
                # a trim from a reading that reads low would be wrong too: measure again
                self.step = ShowCorrection("Check run not usable")
                self.problem = CLIPPED_CHECK_RUN
                return
            self.verdict = self._whole_machine(verdict, run)
        except ModelRefuted as exc:
            self._model_refuted(exc)
            return
        except GateRefused as exc:
            self.step = ShowCorrection("Check run not usable")
            self.problem = str(exc)
            return
        if self.verdict.passed or self.trims_done >= self.setup.max_trims:
            self.step = ShowVerdict("Verdict")
        else:
            self.trims_done += 1
            self.solution = trim
            self.step = ShowCorrection(f"Trim {self.trims_done}")

    def _model_refuted(self, exc: ModelRefuted) -> None:
        """Model-first: the run just kept refutes the model and the runs cannot stand without
        it (:meth:`_drop_model`)."""
        self._drop_model(exc.sensor)

    def _drop_model(self, sensor: str, by_alarm: bool = False) -> None:
        """Model-first: a run refuted the model (kept, or stopped by the runaway alarm:
        ``by_alarm``). The model's masses come off, the job goes on with a trial run per
        plane (the as-found run kept); a refuting run that was kept stays in the record
        (the job has it) but no longer in the coefficient set, so the trials' numbering is
        the fallback's own."""
        assert self.model is not None
        refuted = Distrust.REFUTED_BY_ALARM if by_alarm else Distrust.REFUTED
        self.model = replace(self.model, trusted=False, refuted_at=sensor,
                             distrust=(*self.model.distrust, refuted.value))
        self.fallback = True
        self.solution = None
        self.verdict = None
        self.trims_done = 0
        del self.runs[1:]
        del self.run_numbers[1:]
        self._advance_after_run(self.runs[0])
        off = tuple(MassChange("detach", m) for m in self.on_rotor
                    if m.kind in (MassKind.CORRECTION, MassKind.TRIM))
        if isinstance(self.step, HandsOn):
            self.step = replace(self.step, changes=(*off, *self.step.changes))
        self._before_trials = self.step

    def _to_correction(self) -> None:
        """The coefficient runs are complete: solve, or say why no correction can be given."""
        by_model = (self.setup.mode is Mode.MODEL_FIRST and not self.fallback
                    and not self.trims_done)
        self.step = ShowCorrection("Correction from the model" if by_model else "Correction")
        self.problem = ""
        self.too_small_trial = None
        try:
            self.solution = self._solve()
        except GateRefused as exc:
            self.problem = str(exc)
            self.too_small_trial = exc.too_small_trial
            if exc.too_small_trial is not None:
                bracketed = self._bracketed(exc.too_small_trial)
                if bracketed != exc.too_small_trial:   # the engine's words name another mass
                    self.too_small_trial = bracketed
                    self.problem = self._too_small_words(bracketed)

    def _whole_machine(self, verdict: Verdict, run: Run) -> Verdict:
        """The verdict looks at every pickup and the whole rotor, not only the planes solved.

        A pickup whose 1x grew from the as-found run by more than both readings' 95 %
        circles got worse; with fewer planes corrected than the machine has, the residual in
        the other plane is not measured, so the whole rotor's allowance cannot be shown met.
        Either one withholds the pass.
        """
        base = self.as_found()
        worse = []
        if base is not None:
            for name, r in run.readings.items():
                ref = base.readings.get(name)
                if ref is None:
                    continue
                margin = (r.confidence_radius or 0.0) + (ref.confidence_radius or 0.0)
                if r.amplitude - ref.amplitude > margin:
                    worse.append(name)
        flags = []
        if worse:
            flags.append(VerdictFlag.WORSE_THAN_AS_FOUND)
        if self.partial_planes:
            flags.append(VerdictFlag.PARTIAL_PLANES)
        return replace(verdict.with_flags(*flags), worse_pickups=tuple(worse))

    def _solve(self) -> Solution:
        if self.trims_done == 0:
            if (self.setup.mode is Mode.MODEL_FIRST and not self.fallback
                    and self.model is not None):
                return self.engine.model_solve(self.setup, self.runs[:1], self.removal,
                                               self.model.prior)
            return self.engine.solve(self.setup, self.runs[: len(self._runs_needed()) + 1],
                                     self.removal)
        return self._assess()[1]
