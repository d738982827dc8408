"""Standstill proven by independent evidence that agrees: the board, the tach, the pickups.

Pure (an injected wall clock, board time and evidence in; a judgement out). The rule, in the
order it is checked:

1. **Fresh data**: samples from the board arrived within ``stale_s`` of wall-clock time. A
   silent or dead link proves nothing (state ``NO_DATA``).
2. **The tach is silent** for the hold time of board time: at least ``hold_s``, and at
   least three of the last revolution periods it measured (a rotor coasting slower than one
   edge per ``hold_s`` is not taken for a still one: it must stay silent for three of its
   own last turns).
3. **The pickups are quiet** (:mod:`trueturn.dsp.motion`): no spectral line other than hum,
   and the broadband level near their own floor, judged on fresh signal, continuously for
   ``hold_s``.
4. **The tach is trusted**: it was seen working (``TACH_PROVEN_EDGES`` edges) since the link
   started, no tach fault happened since, and its edges did not stop abruptly (at an even
   pace above ``ABRUPT_STOP_RPM``: a rotor slows down before it stops, a tach losing its
   mark does not). An untrusted tach (never seen working, or
   silent while the pickups saw the machine run) does not count as evidence: then the
   pickups must stay quiet, and the tach silent, for ``untrusted_hold_s`` (longer, so a rotor
   coasting below what the pickups can see has stopped).

**No tach at all** (``tach_absent``: the amplitude-only procedure, made for machines without
one): the tach's silence is no evidence and no fault. Standstill then rests on the pickups
alone: every pickup live (not stuck at or clipped against an ADC limit) and quiet, without a
break, for ``untrusted_hold_s`` (the long hold: a rotor coasting below what the pickups can
see has stopped by then), plus the person's confirmation at every gate (basis
``PICKUPS_NO_TACH``). Edges, should any come, are still believed when they say the rotor
turns.

Disagreement is a fault, not a standstill: a silent tach while the pickups show a running
machine is ``TACH_FAULT`` (latched until the tach is seen working again). A line the pickups
judge a ring-down (``PickupMotion.ringing``: free vibration at a steady frequency, its
envelope dying out exponentially, as a machine's supports ring after its rotor stopped) is
no running machine: no fault, but no standstill either while it lasts (the pickups are not
quiet), so a stop is proven on the tach and the pickups once the ringing has died out. Edges from the tach
are believed when they say the rotor turns (``TURNING``), whatever the pickups say: a refusal
is always safe.

**A tap test** (:meth:`StandstillWatch.tap_test`: someone strikes the housings at
standstill while it is recorded) rings the supports on purpose, again and again: lines that
lull between strikes (``PickupMotion.lulls``) are then that ringing, expected, not a fault
(``TAP_RINGING``, not a standstill either), as long as the pickups' window holds any of the
tap test. A line that keeps its level is still a running machine behind a silent tach
(``TACH_FAULT``, latched), and edges still say ``TURNING``; either marks the tap test as
turned (:attr:`StandstillWatch.tap_turned`), and its recording is refused.

The result carries its evidence (:class:`StandstillEvidence`) so the screen can say what
proved standstill or why not, and the job record can keep what was seen at each
confirmation. Words are the UI's.
"""

from __future__ import annotations

import math
import time
from collections import deque
from collections.abc import Callable
from dataclasses import dataclass
from enum import Enum

from trueturn.dsp.motion import PickupMotion

DEFAULT_HOLD_S = 3.0
UNTRUSTED_TACH_HOLD_S = 20.0
TACH_PROVEN_EDGES = 10  # edges seen before the tach's silence counts as evidence
TURNING_WINDOW_S = 1.0  # an edge within this much board time: the tach sees the rotor turn
PERIODS_HELD = 3.0  # silent for three of the last measured revolutions
MOTION_STALE_S = 2.0  # pickup judgements older than this (board time) are not evidence
# A coast-down ends with edges ever farther apart; edges that stop at an even pace faster
# than one turn a second are a tach that lost its mark (common practice, no source): its
# silence then proves nothing and the long hold applies.
ABRUPT_STOP_RPM = 60.0
STEADY_RATIO = 1.05
#: a line within this of a ring-down the pickups saw since the tach's last edge, and no
#: stronger than it was, is that ring fading on: near the pickups' floor there is too little
#: of it to fit again (the Welch resolution of trueturn.dsp.motion)
RING_SAME_HZ = 0.5
RINGS_KEPT = 64


class StandstillState(str, Enum):
    """What the evidence says about the rotor."""

    PROVEN = "proven"  # standstill: every piece of evidence agrees
    CHECKING = "checking"  # nothing says it turns, but not yet long enough or not enough data
    TURNING = "turning"  # the tach sees the rotor turn
    TACH_FAULT = "tach-fault"  # the tach is silent but the pickups see a running machine
    TAP_RINGING = "tap-ringing"  # a tap test: the pickups see its ringing (no steady line)
    NO_DATA = "no-data"  # no fresh data from the board: nothing can be proven


class Basis(str, Enum):
    """On what a proven standstill rests."""

    TACH_AND_PICKUPS = "tach-and-pickups"  # trusted tach silent + pickups quiet
    PICKUPS_LONG_HOLD = "pickups-long-hold"  # tach not trusted: longer quiet on both
    PICKUPS_NO_TACH = "pickups-no-tach"  # no tach on the machine: live pickups quiet, long hold


@dataclass(frozen=True)
class StandstillEvidence:
    """The judgement and everything it rests on (board seconds unless named otherwise)."""

    state: StandstillState
    basis: Basis | None  # set when PROVEN
    board_time_s: float
    tach_silent_s: float  # board time since the last edge (or since data began)
    tach_hold_needed_s: float  # silence needed now (hold, periods, untrusted tach)
    tach_edges_seen: int
    tach_trusted: bool  # seen working since the link started, and no fault since
    tach_fault_latched: bool
    last_speed_rpm: float | None  # from the last two edges, None if never measured
    last_edge_age_s: float | None
    pickups_quiet_s: float  # board time the pickups have been quiet without a break
    pickups: tuple[PickupMotion, ...]  # the latest judgement of each pickup
    data_fresh: bool
    tach_absent: bool = False  # no tach on this machine: the pickups are the evidence

    @property
    def proven(self) -> bool:
        return self.state is StandstillState.PROVEN

    @property
    def moving_pickups(self) -> tuple[PickupMotion, ...]:
        return tuple(p for p in self.pickups if not p.quiet)

    @property
    def seen_hz(self) -> float | None:
        """The strongest line the pickups see (the machine's 1x or another order), if any."""
        lines = [(p.periodic_g or 0.0, p.periodic_hz) for p in self.pickups
                 if p.periodic_hz is not None]
        return max(lines)[1] if lines else None

    @property
    def wait_s(self) -> float:
        """Board seconds still to wait when CHECKING (0 when nothing is counting down)."""
        if self.state is not StandstillState.CHECKING:
            return 0.0
        need = self.tach_hold_needed_s
        return max(0.0, need - self.tach_silent_s, need - self.pickups_quiet_s)


class StandstillWatch:
    """Collects the evidence as it arrives and judges it (:meth:`evidence`).

    ``data``/``edge`` take board time (seconds, unwrapped) of the newest sample and of each
    tach edge; ``motion`` the pickups' judgement at a board time; ``clock`` is a monotonic
    wall clock for the freshness of the data.
    """

    def __init__(self, hold_s: float = DEFAULT_HOLD_S,
                 clock: Callable[[], float] = time.monotonic, stale_s: float = 1.0,
                 untrusted_hold_s: float = UNTRUSTED_TACH_HOLD_S) -> None:
        self.hold_s = hold_s
        self.clock = clock
        self.stale_s = stale_s
        self.untrusted_hold_s = max(untrusted_hold_s, hold_s)
        #: the machine has no tach (amplitude-only procedure): kept across :meth:`reset`
        self.tach_absent = False
        #: a tap test: board time it began, and ended (None: still recorded); kept across
        #: :meth:`reset` while it is recorded
        self.tap_from_s: float | None = None
        self.tap_until_s: float | None = None
        #: since the tap test began the tach saw an edge or the pickups a line that keeps
        #: its level behind the silent tach: the rotor turned, the recording is refused
        self.tap_turned = False
        self.reset()

    def set_tach_absent(self, absent: bool) -> None:
        """Judge without a tach (``absent``), or with one again; a fault latched by a
        silent tach means nothing on a machine that has none."""
        self.tach_absent = absent
        if absent:
            self.fault_latched = False

    def tap_test(self, on: bool) -> None:
        """A tap test is being recorded from now (``on``: strikes on the housings at
        standstill, their ringing expected), or its recording ended (its ringing is still
        expected while the pickups' window holds some of it)."""
        if on:
            self.tap_from_s, self.tap_until_s = self.now_s or 0.0, None
            self.tap_turned = False
        elif self.tap_from_s is not None and self.tap_until_s is None:
            self.tap_until_s = self.now_s or 0.0

    @property
    def tapping(self) -> bool:
        """A tap test is being recorded."""
        return self.tap_from_s is not None and self.tap_until_s is None

    def _in_tap(self) -> bool:
        """The pickups' last window holds some of a tap test."""
        return self.tapping or (self.tap_until_s is not None
                                and self._window_start_s < self.tap_until_s)

    def reset(self) -> None:
        """Forget everything (new stream, board reset, link lost); a tap test still recorded
        goes on from the new stream's start, one that ended is forgotten."""
        if not self.tapping:
            self.tap_from_s = self.tap_until_s = None
        elif self.now_s is not None:
            self.tap_from_s = -math.inf  # board time starts afresh
        self.first_s: float | None = None
        self.now_s: float | None = None
        self.last_edge_s: float | None = None
        self.last_period_s: float | None = None
        self.prev_period_s: float | None = None
        self.last_data_wall_s: float | None = None
        self.edges_seen = 0
        self.fault_latched = False
        self._edges_since_fault = 0
        self.pickups: tuple[PickupMotion, ...] = ()
        self.pickups_at_s: float | None = None
        #: (Hz, g) of the lines seen ringing down since the tach's last edge (the latest)
        self._rings: deque[tuple[float, float]] = deque(maxlen=RINGS_KEPT)
        self.quiet_since_s: float | None = None
        self._moving_at_s = -math.inf
        self._window_start_s = -math.inf

    # ---- evidence in ---------------------------------------------------------------------
    def data(self, board_time_s: float) -> None:
        """Board time of the newest sample received."""
        if self.first_s is None:
            self.first_s = board_time_s
        self.now_s = board_time_s if self.now_s is None else max(self.now_s, board_time_s)
        self.last_data_wall_s = self.clock()

    def edge(self, board_time_s: float) -> None:
        """A tach edge at this board time."""
        self.data(board_time_s)
        if self.last_edge_s is not None and board_time_s > self.last_edge_s:
            self.prev_period_s = self.last_period_s
            self.last_period_s = board_time_s - self.last_edge_s
        self.last_edge_s = board_time_s
        self._rings.clear()  # the rotor turns: what rang before this edge is past
        self.edges_seen += 1
        if self.tapping:
            self.tap_turned = True
        if self.fault_latched:
            self._edges_since_fault += 1
            if self._edges_since_fault >= TACH_PROVEN_EDGES:
                self.fault_latched = False  # the tach works again

    def motion(self, board_time_s: float, pickups: tuple[PickupMotion, ...]) -> None:
        """The pickups' judgement over the window ending at this board time."""
        self.data(board_time_s)
        self._rings.extend((p.periodic_hz, p.periodic_g or 0.0) for p in pickups
                           if p.ringing and p.periodic_hz is not None)
        quiet = bool(pickups) and all(p.quiet for p in pickups)
        if not quiet:
            self.quiet_since_s = None
            self._moving_at_s = board_time_s
        elif self.quiet_since_s is None:
            # quiet over the whole window just judged, but never from before a judgement
            # that saw motion
            window = min((p.seconds for p in pickups), default=0.0)
            self.quiet_since_s = max(board_time_s - window, self._moving_at_s)
        self.pickups = pickups
        self.pickups_at_s = board_time_s
        self._window_start_s = board_time_s - min((p.seconds for p in pickups), default=0.0)
        if not quiet and not self.tach_absent and self._line_after_silence():
            self.fault_latched = True
            self._edges_since_fault = 0
            if self.tap_from_s is not None and self._in_tap():
                self.tap_turned = True

    def _line_after_silence(self) -> bool:
        """The pickups see a line in a window that began after the tach fell silent (so the
        line is not the tail of a coast-down the tach already saw) and the silence is longer
        than the hold: the two disagree. A line ringing down (free vibration of a stopped
        machine's supports) does not count: a turning rotor cannot make one."""
        if not self._running_line() or self.tach_silent_s() < self.hold_s:
            return False
        silent_since = self.last_edge_s if self.last_edge_s is not None else self.first_s
        return silent_since is None or self._window_start_s >= silent_since

    def _running_line(self) -> bool:
        """The pickups see a line that may be a turning rotor's: any line but a ring-down,
        or the fainter tail of a ring-down seen since the tach's last edge, or (while the
        window holds a tap test) a line that lulls between the strikes."""
        tap = self._in_tap()
        return any(p.periodic_hz is not None and not p.ringing and not self._fading_ring(p)
                   and not (tap and p.lulls) for p in self.pickups)

    def _fading_ring(self, pickup: PickupMotion) -> bool:
        hz, g = pickup.periodic_hz, pickup.periodic_g or 0.0
        return hz is not None and any(abs(hz - ring_hz) <= RING_SAME_HZ and g <= ring_g
                                      for ring_hz, ring_g in self._rings)

    # ---- judgement -----------------------------------------------------------------------
    def tach_silent_s(self) -> float:
        """Board seconds with data and without a tach edge."""
        if self.now_s is None or self.first_s is None:
            return 0.0
        since = self.first_s if self.last_edge_s is None else self.last_edge_s
        return max(0.0, self.now_s - since)


    @property
    def fresh(self) -> bool:
        """Data arrived within ``stale_s`` (wall clock)."""
        return (self.last_data_wall_s is not None
                and self.clock() - self.last_data_wall_s <= self.stale_s)

    @property
    def stopped_abruptly(self) -> bool:
        """The edges stopped at a steady speed above ``ABRUPT_STOP_RPM``: the last two
        periods within ``STEADY_RATIO`` of each other. A coasting rotor's last turns come
        ever slower (each period clearly longer than the one before); a tach that lost its
        mark at speed stops with periods as even as ever."""
        if not self.last_period_s or not self.prev_period_s:
            return False
        speed = 60.0 / self.last_period_s
        return (speed > ABRUPT_STOP_RPM and self.last_period_s < STEADY_RATIO * self.prev_period_s
                and self.tach_silent_s() >= TURNING_WINDOW_S)

    @property
    def tach_trusted(self) -> bool:
        return (self.edges_seen >= TACH_PROVEN_EDGES and not self.fault_latched
                and not self.stopped_abruptly)

    def evidence(self) -> StandstillEvidence:
        now = self.now_s or 0.0
        silent = self.tach_silent_s()
        trusted = self.tach_trusted
        need = self.hold_s
        if self.last_period_s is not None and self.last_edge_s is not None:
            need = max(need, PERIODS_HELD * self.last_period_s)
        if not trusted or self.tach_absent:
            need = max(need, self.untrusted_hold_s)
        motion_fresh = (self.pickups_at_s is not None and bool(self.pickups)
                        and now - self.pickups_at_s <= MOTION_STALE_S)
        quiet_for = (now - self.quiet_since_s
                     if motion_fresh and self.quiet_since_s is not None else 0.0)
        pickups_moving = motion_fresh and not all(p.quiet for p in self.pickups)
        fresh = self.fresh
        if not fresh:
            state = StandstillState.NO_DATA
        elif self.last_edge_s is not None and silent < TURNING_WINDOW_S:
            state = StandstillState.TURNING
        elif pickups_moving and not self.tach_absent and self._line_after_silence():
            state = StandstillState.TACH_FAULT
        elif pickups_moving and self._in_tap():
            state = StandstillState.TAP_RINGING
        elif (silent >= need and quiet_for >= need and not pickups_moving
              and all(p.live for p in self.pickups)):
            state = StandstillState.PROVEN
        else:
            state = StandstillState.CHECKING
        basis = None
        if state is StandstillState.PROVEN:
            basis = (Basis.PICKUPS_NO_TACH if self.tach_absent else
                     Basis.TACH_AND_PICKUPS if trusted else Basis.PICKUPS_LONG_HOLD)
        speed = 60.0 / self.last_period_s if self.last_period_s else None
        return StandstillEvidence(
            state=state, basis=basis, board_time_s=now, tach_silent_s=silent,
            tach_hold_needed_s=need, tach_edges_seen=self.edges_seen, tach_trusted=trusted,
            tach_fault_latched=self.fault_latched, last_speed_rpm=speed,
            last_edge_age_s=None if self.last_edge_s is None else max(0.0,
                                                                      now - self.last_edge_s),
            pickups_quiet_s=quiet_for, pickups=self.pickups if motion_fresh else (),
            data_fresh=fresh, tach_absent=self.tach_absent)

    @property
    def standstill(self) -> bool:
        return self.evidence().proven


def rpm_of_hz(hz: float | None) -> float | None:
    """The speed a line would mean if it were the 1x (for words like "about 3540 rpm")."""
    return None if hz is None or not math.isfinite(hz) else 60.0 * hz
