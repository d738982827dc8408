"""The app's link to the board: open, check identity, stream, and keep a live snapshot.

All blocking I/O lives here and runs in a Textual thread worker (``LiveApp``); the screen
only reads :meth:`LinkSession.snapshot`, a copy taken under a lock. Decoding is the link
layer's (``StreamDecoder``), the measurement is the DSP layer's (through
:mod:`trueturn.ui.meter`); this module only moves messages between them and keeps the
board's clock for the tach standstill watch.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any, Protocol

import serial

from trueturn.dsp.coast import SweepRecorder
from trueturn.dsp.motion import MotionMonitor
from trueturn.errors import UserError
from trueturn.jobs.profiles import MachineProfile
from trueturn.link.catalogue import load_catalogue
from trueturn.link.codec import LinkEvent, Message, StreamDecoder
from trueturn.link.ports import open_port
from trueturn.link.session import BoardError, BoardSession, GreetPhase, mismatch_message
from trueturn.procedure.standstill import StandstillEvidence, StandstillWatch
from trueturn.ui.meter import MeterAdapter, MeterView

#: The catalogue's board_ids in words (emu:// runs the board's own firmware: it says atmega328p)
BOARD_WORDS = {"atmega328p": "ATmega328P board", "simulated": "simulated board"}
MOTION_JUDGE_S = 0.2  # board seconds between two judgements of the pickups' motion
#: A streaming board sends samples every few milliseconds; nothing at all for this long (host
#: clock) with the port still open is a lost link (a hung board, a stalled USB hub or
#: adapter): the same bound as ``trueturn record`` (cmd_record.STALL_TIMEOUT_S). Standstill
#: evidence goes stale long before (procedure.standstill: 1 s).
LINK_SILENCE_S = 3.0

#: a monotonic host clock in seconds (the freshness of the board's data is judged on it)
Clock = Callable[[], float]


#: the messages a tap test's recording keeps (dsp.bump.analyze_bump_messages reads them)
TAP_MESSAGES = frozenset({"stream_config", "samples", "tach"})
#: at most this many sample blocks in a tap test's recording (a few minutes at 2 kHz: a
#: recording left running does not grow without bound; our choice)
TAP_MAX_MESSAGES = 20000


@dataclass(frozen=True)
class TapRecording:
    """A tap test's recording (decoded messages) with what its analysis needs: the
    pickups' profiles, the mains frequency, the board's identity, and the board time at
    its end."""

    messages: tuple[Message, ...]
    profiles: tuple[Any, ...]
    mains_hz: float
    identity: dict[str, Any] | None
    time_s: float


class LinkProblem(Exception):
    """The port cannot be used (cannot open, no identity, wrong firmware); one line."""


@dataclass(frozen=True)
class BoardIdentity:
    """The board's identity message, with what this host expects beside it."""

    protocol_version: int
    definition_hash: int
    firmware: str
    board: str
    tick_hz: int
    max_channels: int
    host_protocol_version: int
    host_definition_hash: int

    @property
    def matches(self) -> bool:
        return (self.protocol_version == self.host_protocol_version
                and self.definition_hash == self.host_definition_hash)

    def mismatch_text(self) -> str:
        """The one mismatch message of the link layer (both sides named)."""
        theirs = {"protocol_version": self.protocol_version,
                  "definition_hash": self.definition_hash}
        return mismatch_message(theirs, load_catalogue()) or ""


@dataclass
class Snapshot:
    """Everything the screens show, copied out of the reader thread."""

    meter: MeterView
    standstill: bool = False
    evidence: StandstillEvidence | None = None
    quiet_s: float = 0.0
    board_time_s: float = 0.0
    counters: dict[str, int] = field(default_factory=dict)
    board_samples_dropped: int = 0
    board_frames_dropped: int = 0
    events: list[str] = field(default_factory=list)
    streaming: bool = False
    restarts: int = 0  # board restarts seen and recovered from (stream started again)


class SessionFactory(Protocol):
    """Makes the app's message source (:meth:`LinkSession.for_machine` and its kin)."""

    def __call__(self, url: str, profile: MachineProfile, *, rate_hz: int,
                 standstill_s: float, clock: Clock) -> LinkSession: ...


class LinkSession:
    """One open port: identity check, configure, start, then :meth:`pump` in a worker.

    The app's message source: it gets one through a :class:`SessionFactory`
    (:meth:`for_machine` by default), so a test can hand it a subclass that holds the
    board's messages back or answers with another identity.
    """

    def __init__(self, url: str, channels: int = 2, rate_hz: int = 2000,
                 standstill_s: float = 3.0, sensor_names: tuple[str, ...] = ("A", "B"),
                 mains_hz: float = 60.0, pickups: Sequence[Any] = (),
                 clock: Clock = time.monotonic) -> None:
        self.url = url
        self.channels = channels
        self.rate_hz = rate_hz
        self.catalogue = load_catalogue()
        self.decoder = StreamDecoder(self.catalogue)
        self.meter = MeterAdapter(sensor_names[:channels], mains_hz=mains_hz,
                                  pickups=list(pickups)[:channels])
        self.watch = StandstillWatch(standstill_s, clock=clock)
        self.mains_hz = mains_hz
        self.motion: MotionMonitor | None = None  # the pickups' evidence, from stream_config
        self._motion_judged_s = -1e9
        self._motion_next_index: int | None = None
        self.identity: BoardIdentity | None = None
        self.port: Any = None
        self.board: BoardSession | None = None
        self._lock = threading.Lock()  # the port (reader thread and rig calls)
        self._state = threading.Lock()  # meter, watch and counters
        self._tick_hz = self.catalogue.limit("board_tick_hz").min
        self._stream_reference_mv = 0
        self._start_tick = 0
        self._period_ticks = 1
        self._tick_base = 0  # unwrapping the 32-bit tick counter
        self._last_tick32: int | None = None
        self._events: list[str] = []
        self._status: dict[str, int] = {}
        self._streaming = False
        self._heard_s: float | None = None  # host time of the last message (while streaming)
        self._clock = clock
        self.restarts = 0
        #: a tap test's recording: the decoded messages since it began (None: not recording)
        self._tap: list[Message] | None = None
        self._stream_config: Message | None = None  # the stream's, as the board sent it

    @classmethod
    def for_machine(cls, url: str, profile: MachineProfile, *, rate_hz: int = 2000,
                    standstill_s: float = 3.0, clock: Clock = time.monotonic) -> LinkSession:
        """A session on ``url`` measuring the pickups of the machine ``profile``."""
        return cls(url, channels=len(profile.pickups), rate_hz=rate_hz,
                   standstill_s=standstill_s, sensor_names=tuple(p.name for p in profile.pickups),
                   mains_hz=profile.mains_hz, pickups=profile.pickups, clock=clock)

    # ---- opening ------------------------------------------------------------------------
    def open(self, timeout_s: float = 3.0,
             on_phase: Callable[[GreetPhase], object] | None = None) -> BoardIdentity:
        """Open the port, wait for the board to start (a Uno or Nano resets when its port
        opens: :meth:`BoardSession.greet`), check its identity; raise :class:`LinkProblem`.

        ``on_phase`` hears when the wait for the board starts, so a screen can say so.
        A mismatched firmware does not raise: the identity comes back with ``matches``
        False so the screen can show both sides before refusing.
        """
        try:
            self.port = open_port(self.url)
        except (serial.SerialException, ValueError, OSError, UserError) as exc:
            raise LinkProblem(str(exc)) from None
        self.board = BoardSession(self.port, self.catalogue)
        self.decoder = self.board.decoder
        try:
            self.board.greet(answer_s=timeout_s, on_phase=on_phase)
        except BoardError as exc:
            if self.board.identity is None:
                self.close()
                raise LinkProblem(str(exc)) from None
        v = self.board.identity
        assert v is not None
        self._tick_hz = int(v["tick_hz"])
        self.identity = BoardIdentity(
            protocol_version=v["protocol_version"], definition_hash=v["definition_hash"],
            firmware=f"{v['firmware_major']}.{v['firmware_minor']}.{v['firmware_patch']}",
            board=BOARD_WORDS.get(self.catalogue.board_ids.get(v["board_id"], ""),
                                  f"board id {v['board_id']}"),
            tick_hz=self._tick_hz, max_channels=v["max_channels"],
            host_protocol_version=self.catalogue.protocol_version,
            host_definition_hash=self.catalogue.definition_hash)
        self.meter.identity(v)
        return self.identity

    def start(self) -> None:
        """Configure and start streaming (only after a matching identity)."""
        if self.identity is None or not self.identity.matches or self.board is None:
            raise LinkProblem("refusing to stream: the board's firmware does not match")
        try:
            config = self._configure_and_start()
        except UserError as exc:
            raise LinkProblem(str(exc)) from None
        with self._state:
            self._use_config(config)
        self._heard_s = self._clock()
        self._streaming = True

    def silence(self) -> str | None:
        """Why the link counts as lost although the port is open: nothing heard from the
        streaming board for :data:`LINK_SILENCE_S` of host time; None while it talks."""
        if not self._streaming or self._heard_s is None:
            return None
        quiet_s = self._clock() - self._heard_s
        if quiet_s <= LINK_SILENCE_S:
            return None
        return (f"nothing from the board on {self.url} for {quiet_s:.0f} s with the port "
                "open (a hung board, a stalled USB hub or adapter)")

    def _configure_and_start(self) -> dict[str, Any]:
        assert self.identity is not None and self.board is not None
        channels = max(1, min(self.channels, self.identity.max_channels))
        with self._lock:
            self.board.configure(self.rate_hz, channels)
            return self.board.start()

    def _use_config(self, config: dict[str, Any]) -> None:
        """A fresh stream: its tick origin, and a meter that starts averaging from zero."""
        self._handle_config(config)
        self.meter.stream_config(config)
        self.meter.reset()

    def _forget_clock(self) -> None:
        """The board's clock may have restarted: unwrap it afresh, prove standstill afresh."""
        self._tick_base = 0
        self._last_tick32 = None
        self.watch.reset()
        if self.motion is not None:
            self.motion.clear()
        self._motion_next_index = None
        self._motion_judged_s = -1e9

    def reconnect(self, timeout_s: float = 3.0,
                  on_phase: Callable[[GreetPhase], object] | None = None) -> BoardIdentity:
        """Open the same port again after a lost link and check who answers (like
        :meth:`open`: a mismatched firmware comes back with ``matches`` False)."""
        self.close()
        self.identity = None
        with self._state:
            self._forget_clock()
            self._events.clear()
            self._status = {}
        return self.open(timeout_s, on_phase)

    def _restart_after_reset(self) -> None:
        """The board restarted (power dip, loose cable, watchdog) and is idle: configure and
        start it again; the partial average is discarded and standstill proven afresh."""
        assert self.board is not None
        ident = self.board.identity
        problem = mismatch_message(ident, self.catalogue) if ident is not None else None
        if problem:
            raise LinkProblem(f"the board restarted and now {problem}")
        try:
            config = self._configure_and_start()
        except UserError as exc:
            self._streaming = False
            raise LinkProblem(f"the board restarted and did not start again: {exc}") from None
        with self._state:
            self._forget_clock()
            self._use_config(config)
            self.restarts += 1
        self._streaming = True

    # ---- streaming ----------------------------------------------------------------------
    def _board_time_s(self, tick32: int) -> float:
        """Board seconds from a 32-bit tick, unwrapping the counter (wraps every ~36 min)."""
        if self._last_tick32 is None:
            self._last_tick32 = tick32
        diff = tick32 - self._last_tick32
        base = self._tick_base
        if diff < -0x80000000:
            self._tick_base += 1 << 32
            base = self._tick_base
            self._last_tick32 = tick32
        elif diff > 0x80000000:
            base -= 1 << 32  # a late tick from before the wrap
        elif diff > 0:
            self._last_tick32 = tick32
        return (base + tick32) / self._tick_hz

    def pump(self) -> int:
        """Read what the port has, feed the meter and the watch; return messages handled."""
        assert self.board is not None
        try:
            with self._lock:
                items = self.board.read()
        except (serial.SerialException, OSError, UserError) as exc:
            self._streaming = False
            raise LinkProblem(f"the link to {self.url} was lost: {exc}") from None
        with self._state:
            handled, restarted = self._handle_items(items)
        if items:
            self._heard_s = self._clock()
        if restarted:
            self._restart_after_reset()
        return handled

    def _handle_items(self, items: list[Message | LinkEvent]) -> tuple[int, bool]:
        """Feed the messages on; return how many, and whether the board restarted."""
        handled = 0
        restarted = False
        for item in items:
            if isinstance(item, LinkEvent):
                if item.kind == "board_reset":
                    restarted = True
                    self._streaming = False
                    self._forget_clock()
                    self.meter.reset()  # nothing of a partial average survives a restart
                self._events.append(f"{item.kind}: {item.detail}")
                del self._events[:-20]
                continue
            handled += 1
            self._handle(item)
        return handled, restarted

    def _handle(self, msg: Message) -> None:
        v = msg.values
        if self._tap is not None and msg.name in TAP_MESSAGES:
            if msg.name != "samples" or len(self._tap) < TAP_MAX_MESSAGES:
                self._tap.append(msg)
        if msg.name == "stream_config":
            self._stream_config = msg
            self._handle_config(v)
        elif msg.name == "samples":
            last_index = v["first_index"] + len(v["samples"]) - 1
            tick = (self._start_tick + last_index * self._period_ticks) & 0xFFFFFFFF
            now_s = self._board_time_s(tick)
            self.watch.data(now_s)
            self._feed_motion(v, now_s)
        elif msg.name == "tach":
            self.watch.edge(self._board_time_s(int(v["tick"])))
        elif msg.name == "status":
            self._status = {"samples_dropped": int(v["samples_dropped"]),
                            "frames_dropped": int(v["frames_dropped"])}
        self.meter.feed(msg)

    def _handle_config(self, v: dict[str, Any]) -> None:
        self._start_tick = int(v["start_tick"])
        self._period_ticks = int(v["period_ticks"])
        self._stream_reference_mv = int(v.get("adc_reference_mv") or 0)
        self._new_motion(float(v["rate_hz"]))

    def _new_motion(self, rate_hz: float) -> None:
        """The pickups' motion monitor for this stream (counts -> g from the identity's ADC
        reference and each pickup's sensitivity)."""
        ident = self.board.identity if self.board is not None else None
        if ident is None or rate_hz <= 0:
            self.motion = None
            return
        # SPEC 4.10: the reference measured at this stream's start, else the identity's
        reference_mv = self._stream_reference_mv or ident["adc_reference_mv"]
        volts_per_count = reference_mv / 1000.0 / (1 << int(ident["adc_bits"]))
        scales, units = [], []
        for profile in self.meter.profiles:
            sensitivity = profile.sensitivity_v_per_g
            calibrated = sensitivity is not None and sensitivity > 0
            scales.append(volts_per_count / sensitivity if sensitivity is not None and calibrated
                          else volts_per_count)
            units.append("g" if calibrated else "V")
        running = self.motion.running_g_rms if self.motion is not None else None
        self.motion = MotionMonitor(self.meter.sensors, tuple(scales), rate_hz, self.mains_hz,
                                    tuple(units),
                                    adc_max_count=(1 << int(ident["adc_bits"])) - 1)
        if running is not None and len(running) == len(self.meter.sensors):
            self.motion.running_g_rms = running
        self._motion_next_index = None

    def _feed_motion(self, v: dict[str, Any], now_s: float) -> None:
        """Feed the pickups' monitor; judge twice a second of board time."""
        if self.motion is None:
            return
        first = int(v["first_index"])
        if self._motion_next_index is not None and first != self._motion_next_index:
            self.motion.clear()  # a gap: the window starts afresh
        self._motion_next_index = first + len(v["samples"])
        self.motion.feed(v["samples"], int(v["channels"]))
        if now_s - self._motion_judged_s >= MOTION_JUDGE_S:
            self._motion_judged_s = now_s
            self.watch.motion(now_s, self.motion.judge())

    def remember_running_level(self) -> None:
        """The pickups' present level is the running machine's (after a kept run)."""
        with self._state:
            if self.motion is not None:
                self.motion.remember_running_level()

    def use_machine(self, sensor_names: Sequence[str], mains_hz: float,
                    pickups: Sequence[Any]) -> None:
        """Measure for another machine profile with the same number of pickups."""
        with self._state:
            self.meter = self.meter.for_machine(list(sensor_names)[: self.channels], mains_hz,
                                                list(pickups)[: self.channels])
            self.mains_hz = mains_hz
            if self.motion is not None:
                rate_hz = self.motion.rate_hz
                self.motion = None
                self._new_motion(rate_hz)

    def use_tachless(self, band_hz: tuple[float, float] | None,
                     reference_rpm: float | None = None) -> None:
        """Measure without a tach (speed and 1x from the spectrum in ``band_hz``: the
        amplitude-only procedure), or with the tach again (None); ``reference_rpm``: the
        job's as-found speed (:meth:`MeterAdapter.use_tachless`)."""
        with self._state:
            self.meter.use_tachless(band_hz, reference_rpm)

    def machine_condition(self) -> tuple[tuple[Any, ...], tuple[Any, ...]]:
        """The machine's overall severity per pickup and the unbalance verdict from the run
        just averaged (call before :meth:`reset_meter`)."""
        with self._state:
            return self.meter.condition()

    def set_meter_window(self, max_revs: int) -> int:
        """Average the last ``max_revs`` revolutions from now on, keeping those already
        averaged (:meth:`MeterAdapter.set_window`); the window now averaged."""
        with self._state:
            return self.meter.set_window(max_revs)

    def reset_meter(self, max_revs: int | None = None) -> None:
        """Start averaging afresh (a new run); ``max_revs``: the meter's window from now on
        (None: as it was)."""
        with self._state:
            self.meter.reset(max_revs)

    def start_sweep_recording(self) -> SweepRecorder | None:
        """Keep each revolution's 1x from now on for a sweep (:meth:`MeterAdapter.start_sweep`);
        returns the recording this one replaces, unfinished (its fits take most of a second:
        the app finishes it off the screen's refresh, :meth:`SweepRecorder.finish`), or None."""
        with self._state:
            return self.meter.start_sweep()

    def stop_sweep_recording(self) -> SweepRecorder | None:
        """Stop recording; the recording since :meth:`start_sweep_recording`, unfinished, or
        None."""
        with self._state:
            return self.meter.stop_sweep()

    def start_tap_recording(self) -> None:
        """Keep the board's samples and tach edges from now on (a tap test at standstill);
        the stream's configuration goes first, so the recording reads on its own."""
        with self._state:
            self._tap = [self._stream_config] if self._stream_config is not None else []
            self.watch.tap_test(True)  # the ringing is expected, a steady line is not

    def stop_tap_recording(self) -> TapRecording | None:
        """Stop recording; what was kept, with what its analysis needs (None: not
        recording)."""
        with self._state:
            kept, self._tap = self._tap, None
            self.watch.tap_test(False)
        if kept is None:
            return None
        ident = self.board.identity if self.board is not None else None
        return TapRecording(tuple(kept), tuple(self.meter.profiles), self.mains_hz,
                            dict(ident) if ident else None, self.watch.now_s or 0.0)

    @property
    def tap_recording_s(self) -> float | None:
        """Seconds of samples the tap test's recording holds (None: not recording)."""
        kept = self._tap
        if kept is None:
            return None
        samples = sum(len(m.values["samples"]) for m in kept if m.name == "samples")
        return samples / max(1, self.channels) / max(1, self.rate_hz)

    @property
    def sweeping(self) -> bool:
        """A sweep is being recorded."""
        return self.meter.sweep is not None

    def snapshot(self) -> Snapshot:
        """A copy of the live state for the screens."""
        with self._state:
            events = list(self._events)
            status = dict(self._status)
            view = self.meter.view()
        c = self.decoder.counters
        with self._state:
            evidence = self.watch.evidence()
        return Snapshot(
            meter=view, standstill=evidence.proven, evidence=evidence,
            quiet_s=evidence.tach_silent_s, board_time_s=self.watch.now_s or 0.0,
            counters={"frames_bad": c.frames_bad, "frames_lost": c.frames_lost,
                      "samples_lost": c.samples_lost, "tach_edges_lost": c.tach_edges_lost,
                      "board_resets": c.board_resets},
            board_samples_dropped=status.get("samples_dropped", 0),
            board_frames_dropped=status.get("frames_dropped", 0),
            events=events, streaming=self._streaming, restarts=self.restarts)

    # ---- the simulated rig (demo mode) --------------------------------------------------
    @property
    def rig(self) -> Any:
        """The virtual rig behind a ``sim://`` port, or None on a real board."""
        return getattr(self.port, "rig", None)

    def rig_call(self, method: str, *args: Any) -> Any:
        """Call a rig method under the port lock (the reader thread is using the port)."""
        rig = self.rig
        if rig is None:
            raise LinkProblem("this port has no simulated rig")
        with self._lock:
            return getattr(rig, method)(*args)

    def close(self) -> None:
        if self.port is None:
            return
        try:
            if self._streaming and self.board is not None:
                with self._lock:
                    self.board.send("stop")
        except (serial.SerialException, OSError, UserError):
            pass
        self._streaming = False
        try:
            with self._lock:
                self.port.close()
        except (serial.SerialException, OSError):
            pass
