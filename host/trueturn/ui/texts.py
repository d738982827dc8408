"""Words the app shows: cautions, key list, step instructions. Our own wording."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

from trueturn.balance.model_first import DISTRUST_WORDS
from trueturn.dsp.findings import Code, Finding, describe
from trueturn.dsp.severity import Severity
from trueturn.model import Reading, Verdict, VerdictFlag
from trueturn.model.units import (
    METRIC,
    NBSP,
    UnitChoice,
    convert_vibration,
    length_text,
    rotor_mass_text,
    unbalance_text,
    vibration_text,
)
from trueturn.positions import number_of, position_text
from trueturn.procedure.guide import (
    Mode,
    ModelShook,
    ShrunkTrial,
    TapOutcome,
    TapRefusal,
    Widened,
)

if TYPE_CHECKING:
    from trueturn.procedure.guide import MassChange
    from trueturn.ui.resume import OpenJob


@dataclass(frozen=True)
class Shown:
    """Numbers as the app shows them: in the machine's units (its profile's ``units``,
    converted by :mod:`trueturn.model.units`), each number kept with its unit by a no-break
    space (:class:`trueturn.ui.widgets.UnitsKept` never breaks a line there)."""

    units: UnitChoice = METRIC
    sep: str = NBSP  # between a number and its unit (a plain space for text kept in files)

    def mass(self, mass_g: float) -> str:
        return self.units.mass_words(mass_g, self.sep)

    def length(self, length_mm: float) -> str:
        return length_text(length_mm, self.units.length, self.sep)

    def rotor_mass(self, mass_kg: float) -> str:
        return rotor_mass_text(mass_kg, self.units.rotor_mass, self.sep)

    def force(self, force_n: float) -> str:
        return self.units.force_words(force_n, self.sep)

    def unbalance(self, unbalance_gmm: float) -> str:
        return unbalance_text(unbalance_gmm, self.units.mass, self.units.length, self.sep)

    def speed(self, speed_rpm: float) -> str:
        return f"{speed_rpm:.0f}{self.sep}rpm"

    def vibration(self, amplitude: float, unit: str, width: int = 0) -> str:
        """A reading's amplitude in the machine's vibration unit, detector kept."""
        return vibration_text(amplitude, unit, self.units, self.sep, width)

    def vibration_value(self, amplitude: float, unit: str) -> tuple[float, str]:
        """(amplitude, unit) in the machine's vibration unit, for a plot's scale."""
        return convert_vibration(amplitude, unit, self.units.vibration, self.units.length)

CAUTIONS = "\n".join([
    "[b]Cautions — read before every job[/b]", "",
    "• A rotor can throw a weight, clip or chip hard enough to injure or kill: stay out of "
    "the plane of rotation whenever the machine can turn.",
    "• Before touching the rotor: switch off, pull the plug or lock the isolator, wait until "
    "the screen says standstill is proven (tach and pickups agree), and look for yourself.",
    "• Fasten weights only as the machine's maker allows (screws with thread lock, clips "
    "made for it). Putty and tape: trials at reduced speed only, if at all.",
    "• Removing mass weakens parts. Never drill a grinding wheel, a saw blade, a cast fan "
    "hub, fan blades or a cutterhead body; follow the maker's instructions. The app offers "
    "removal only where the machine profile allows it (default: not allowed).",
    "• Never run above the machine's or the wheel's marked maximum speed.",
    "• Guards and covers back on before every run; wear eye and ear protection.",
    "• Stop at once if vibration rises, a noise changes or anything comes loose.", "",
    "This tool does not replace the manufacturer's instructions, local codes and "
    "regulations, or the judgement of a licensed professional: where they say otherwise, "
    "they win.", "",
    "[dim]Press Escape to go back.[/dim]",
])

#: The procedures as the set-up lists them: key n chooses the n-th, in this order.
MODE_WORDS: dict[Mode, str] = {
    Mode.ONE_PLANE: "one plane (narrow rotor: fan, pulley, single wheel)",
    Mode.TWO_PLANE: "two planes (long rotor or two wheels)",
    Mode.AMPLITUDE_ONLY: "amplitude only: four-run method, no phase needed",
    Mode.SAVED_TRIM: "one-run trim with the coefficients of an earlier job",
    Mode.MODEL_FIRST: "model first: a correction from the coast-down, no trial",
}
#: key -> procedure, derived from the list above (the keys the set-up and the messages name)
MODE_KEYS: dict[str, Mode] = {str(n): mode for n, mode in enumerate(MODE_WORDS, start=1)}


def key_list(keys: Sequence[str]) -> str:
    """``'1, 2, 3 or 4'``."""
    return keys[0] if len(keys) == 1 else f"{', '.join(keys[:-1])} or {keys[-1]}"


KEYS: list[tuple[str, str]] = [
    ("m", "Meter: live 1x amplitude, phase, speed, polar plot"),
    ("s", "Spectrum with labelled peaks"),
    ("v", "Sweep: the last coast-down or run-up, 1x against speed, resonances"),
    ("g", "Guide: the balancing procedure"),
    (" ".join(MODE_KEYS), "Set-up: one plane / two planes / amplitude only / trim / model"),
    ("Enter", "Set-up: continue the open job offered (1-5 start a new one)"),
    ("p", "Set-up: pick a saved machine or create a new one"),
    ("Space", "Guide: tick the next checklist item (only at proven standstill)"),
    ("Backspace", "Guide: take back the last tick"),
    ("a", "Guide: stop the run now (nothing of it is kept; inspect the rotor next)"),
    ("Enter", "Guide: confirm the step shown (gates refuse while unsafe); acknowledge an alarm"),
    ("f", "Guide: enter what you actually fitted (mass, position, weight or hole)"),
    ("u", "Guide: undo the last fitted-mass entry"),
    ("r", "Guide: remove material instead of adding mass (correction step)"),
    ("e", "Guide: run again the run that was off speed, before placing the correction"),
    ("n", "Guide: start once more as found, after a stop (does the 1x repeat? optional)"),
    ("k", "Guide: stop the job here when balancing may not help (the reason is kept)"),
    ("t", "Guide: skip the tap test (model first, stiff mounts) and use trial runs"),
    ("o / x", "Demo rig: switch the virtual motor on / off"),
    ("l", "Link lost: reconnect to the same port (the run starts over)"),
    ("w", "Job not saved (disk full, workspace not writable): save it in another folder"),
    ("h", "Guide: rings to print for this rotor, their faces, carrying the 0° mark"),
    ("PgDn PgUp ↓ ↑", "Guide: scroll a step longer than the screen"),
    ("r", "Connect: try the port again when it could not be opened"),
    ("c", "Cautions (safety notes)"),
    ("? / F1", "This list of keys"),
    ("Escape", "Close this screen / go back"),
    ("q", "Quit (the job is saved after every run; during a run, press q twice)"),
]


#: beside a live reading whose pickup hit an ADC rail in its window (it reads low)
CLIPPED_MARK = " [b red]CLIPPED[/]"

#: the verdict's flags in the app's words (the machine profile is where the person fixes
#: what is missing)
VERDICT_FLAG_WORDS: dict[VerdictFlag, str] = {
    VerdictFlag.NOT_AT_BEARINGS: "judged in the correction planes: give the machine profile "
                                 "its two bearings and each plane's axial position to judge "
                                 "at the bearings",
    VerdictFlag.WORST_CASE_PHASING: "residual angles unknown: the bearing loads are the worst "
                                    "case",
    VerdictFlag.CG_OUTSIDE_BEARINGS: "the centre of mass lies outside the bearings: shares "
                                     "limited to 0.3/0.7 of U_per; check the standard's rules "
                                     "for such rotors",
    VerdictFlag.CG_ASSUMED_MIDWAY: "the centre of mass is not in the profile: taken midway "
                                   "between the bearings",
    VerdictFlag.SPEED_FROM_LAST_RUN: "no maximum service speed: judged at the last run's speed",
    VerdictFlag.AMBIGUOUS: "the answer is ambiguous: no pass can be given",
    VerdictFlag.INCONSISTENT: "the amplitudes do not fit one answer: no pass can be given",
    VerdictFlag.CLIPPED: "the last run has a clipped reading (it reads low): no pass can be "
                         "given",
    VerdictFlag.WORSE_THAN_AS_FOUND: "a pickup reads worse than as found (beyond both "
                                     "readings' 95 % circles): not passed",
    VerdictFlag.NOT_PROVEN: "within on the estimate, but its 95 % upper bound reaches past "
                            "the allowance: not proven; a trim (or a longer check run) gives "
                            "the margin",
    VerdictFlag.PARTIAL_PLANES: "one plane of a multi-plane rotor was corrected: the other "
                                "plane's residual is not measured, so the whole rotor cannot "
                                "be shown within the grade; balance both planes (2)",
}


#: numbers in metric units with their units (the default), and the same with plain spaces
#: for text kept in files
METRIC_SHOWN = Shown()
PLAIN_SHOWN = Shown(sep=" ")


def verdict_note(v: Verdict, service_speed_rpm: float, shown: Shown = PLAIN_SHOWN) -> str:
    """Where and at which speed the grade was judged, with the formula used (plain spaces
    unless ``shown`` says otherwise: the job file keeps this note)."""
    where = "at the bearings" if v.at_bearings else "in the correction planes"
    u_per = f"U_per {shown.unbalance(v.u_per_gmm)} " if v.u_per_gmm is not None else ""
    return (f"permissible {u_per}at {shown.speed(v.speed_rpm or service_speed_rpm)}, shared "
            f"{where} (ISO 21940-11: e_per = G/omega, U_per = e_per * m)")


def as_found_line(readings: Mapping[str, Reading], sensors: Sequence[str],
                  shown: Shown) -> str:
    """The as-found 1x of every pickup on one line, for the guide after the as-found run."""
    parts = []
    for name in sensors:
        r = readings.get(name)
        if r is None:
            continue
        phase = f" at {r.phase_deg:.0f}°" if r.phase_deg is not None else ""
        parts.append(f"{name} {shown.vibration(r.amplitude, r.unit)}{phase}")
    return f"[dim]As found:[/dim] {'; '.join(parts)}" if parts else ""


def keys_markup() -> str:
    lines = ["[b]Keys[/b]", ""]
    lines += [f"  [b]{k:<8}[/b] {what}" for k, what in KEYS]
    lines += ["", "The mouse works too: click a key in the bar at the bottom.",
              "[dim]Press Escape to go back.[/dim]"]
    return "\n".join(lines)


# ---- the guide's fixed lines (trueturn.ui.steps; numbers are filled in there) ----------
SETUP_TITLE = "[b]Choose the procedure[/b]"
SETUP_NO_TRIM = " [dim](none saved yet)[/dim]"


def setup_choices(saved_trim: bool) -> list[str]:
    """The set-up's list of procedures, one line per key (the trim says when none is saved)."""
    lines = [SETUP_TITLE]
    for key, mode in MODE_KEYS.items():
        note = SETUP_NO_TRIM if mode is Mode.SAVED_TRIM and not saved_trim else ""
        lines.append(f"  [b]{key}[/b]  {MODE_WORDS[mode]}{note}")
    return lines

SETUP_FOOTER = (
    "  [b]p[/b]  pick another saved machine, or create one", "",
    # one line (the set-up with an open job offered fits 80x24 with five procedures)
    "Hands-on steps wait for proven standstill and your checklist. [b]c[/b]: cautions.",
)

LOOK_OVER = "  Look the rotor over: weights, fasteners, pickups, tach mark."
STOP_DEMO = "press [b]x[/b] (demo motor off)"
STOP_MACHINE = "switch the machine off"
TICK_BEFORE = "Before you reach in, tick each item ([b]Space[/b]):"
TICK_AFTER = "Do the work now. When it is done, tick each item ([b]Space[/b]):"
MAKER_NOTE = "[dim]c: cautions. Fasten and remove only as the machine's maker instructs.[/dim]"
ENTER_LOCKED_OUT = "[b]Enter[/b]: locked out, I will work on the rotor"
ENTER_DONE = "[b]Enter[/b]: done, safe to run"

RUN_NOTHING_KEPT = "Nothing of this run is kept."
RUN_SWITCH_OFF_DEMO = "Switch the machine off (the demo motor is off)."
RUN_SWITCH_OFF = "Switch the machine off now."
ENTER_ALARM_SEEN = "[b]Enter[/b]: I have seen the alarm; inspect the rotor next"
NO_MASS_ADDED = "  none added"
GUARDS_ON = "Guards on, everyone out of the plane of rotation."
ENTER_FORCES = "[b]Enter[/b]: I confirm these forces; start the run"
ENTER_FORCES_DEMO = " (starts the virtual motor)"
A_NOT_NOW = "[b]a[/b]: not now, go back and inspect the rotor"
NOT_READY_WHY = "waiting for enough steady revolutions"
#: why a run averages longer than it wanted (procedure.guide.Widened)
WIDENED_WHY = {
    Widened.PHASE_WIDE: "longer: the phase is not yet known to its limit",
    Widened.VERDICT_UNDECIDED: "longer: the residual is within on the estimate, "
                               "not yet proven within",
}
A_STOP_RUN = ("Stop at once on a warning below. [b]a[/b]: stop this run now (nothing of it is "
              "kept)")

# ---- model-first (issue #20 item 4) --------------------------------------------------------
MODEL_WAITING = ("The model needs this run's coast-down: switch the machine off and let it "
                 "run down to a stop by itself (no brake). Nothing hands-on until it stands "
                 "still.")


# ---- trials sized from the coast-down (issue #20 item 3) ------------------------------------
TRIAL_SIZING = ("The trial is sized from this run's coast-down: let the machine run down to a "
                "stop by itself (no brake). Its size shows here a few seconds after it stands "
                "still.")
TRIAL_FIT_FAILED = ("The coast-down's curve could not be fitted: the trial keeps the size its "
                    "resonances gave.")


def model_refused(codes: Sequence[str]) -> str:
    """One line: why the model gives no correction, and what happens instead."""
    why = "; ".join(DISTRUST_WORDS.get(c, c) for c in codes) or "no reason given"
    return f"Model not trusted ({why}): a trial run per plane follows; the as-found run is kept."


#: the tap test's screen (model-first on a stiff mount): what to do, and its keys
_TAP_HOW = ("with the machine stopped and locked out, strike the bearing housing or the frame "
            "(not the rotor, a weight or a pickup) with a soft mallet, about every 2 s, a few "
            "times at each pickup; the pickups record how it rings.")
TAP_OFFER = (
    "The coast-down found no resonance of the supports below the speed: the mounts are "
    "stiff, and the coast-down alone cannot tell how stiff, so the model is not trusted yet.",
    "A tap test may settle it: " + _TAP_HOW,
    "Optional: t skips it and goes on with a trial run per plane.",
)
#: the same offer when the model is trusted but its correction may fall short of the grade
#: (engine.short_of_grade): ``{left}`` is what it may leave, percent of the as-found 1x
TAP_OFFER_TRUSTED = (
    "The coast-down found no resonance of the supports below the speed: the mounts are "
    "stiff. The model has a correction, but it may leave up to {left:.0f} % of the 1x "
    "(95 %), more than the grade permits, so a trim run may follow.",
    "A tap test may narrow it: " + _TAP_HOW,
    "Optional: t skips it and goes on with the model's correction as it is.",
)
TAP_TICK = "Before you start, at proven standstill (Space ticks, Backspace takes back):"
#: the skip key's words: to trial runs, or to the model's correction (trusted untapped)
TAP_SKIP_TO = {False: "[b]t[/b]: skip, use trial runs",
               True: "[b]t[/b]: skip, use the model's correction"}
ENTER_TAP = "[b]Enter[/b]: locked out, start recording   "
ENTER_TAP_AGAIN = "[b]Enter[/b]: tap again (record anew)   "
TAP_TAPPING = ("Recording: tap the bearing housing or the frame with a soft mallet, about "
               "every 2 s, five taps or more, then press Enter. Keep clear of the wheel.")
ENTER_TAP_DONE = "[b]Enter[/b]: taps done, analyse   "
TAP_DEMO = "Demo: the virtual mallet taps the housings every 2 s while recording."
TAP_ANALYSING = "Analysing the taps (the support fit takes a few seconds)…"
#: why a tap test's recording was not used (procedure.guide.TapRefusal)
TAP_REFUSED: dict[TapRefusal, str] = {
    TapRefusal.TURNING: "the rotor turned during the recording (tach edges, or a line that "
                        "does not die out): stop the machine, lock it out and tap again",
    TapRefusal.NO_TAPS: "no tap was found in the recording: strike firmer (a soft mallet, on "
                        "the housing), about every 2 s",
    TapRefusal.NO_MODES: "the taps did not ring at a frequency they agree on: tap the housing "
                         "at each pickup, a few times each, and let it ring out between taps",
}
TAP_SKIPPED = {False: "Tap test skipped: a trial run per plane follows.",
               True: "Tap test skipped: the model's correction follows."}


def tap_lines(tap: TapOutcome | None, trusted: bool | None) -> tuple[str, ...]:
    """The tap test's modes per pickup (Hz, ± one standard error) and whether the model
    is trusted with them (None: not asked yet)."""
    if tap is None:
        return ()
    found = "; ".join(
        f"{name} " + ", ".join(f"{m.frequency_hz:.1f} ± {m.frequency_se_hz:.1f} Hz"
                               for m in modes)
        for name, modes in tap.modes.items() if modes) or "no mode"
    lines = [f"Tap test ({tap.taps} taps): {found}."]
    if trusted is not None:
        lines.append("With it the model is trusted: its correction needs no trial run."
                     if trusted else "Even with it the model is not trusted.")
    return tuple(lines)


#: the message line once the taps are analysed (the modes themselves are on the step's
#: screen, tap_lines): with them the model is trusted, or not (trials follow)
TAP_ANALYSED = {True: "Tap test analysed: the model is trusted with its modes.",
                False: "Tap test analysed: the model is still not trusted; a trial run per "
                       "plane follows."}


MODEL_TRUSTED = ("From the model, no trial run: the coast-down fits, the pickups' angles are "
                 "known, the speed is off the resonances' peaks. The check run refines it.")
#: ... when a tap test's modes informed it (model first on a stiff mount)
MODEL_TRUSTED_TAPPED = ("From the model, no trial run: the tap test's modes pinned the "
                        "supports' stiffness and the coast-down fits them, the pickups' angles "
                        "are known, the speed is off the resonances' peaks. The check run "
                        "refines it.")
#: after the model's 95 % share when it may exceed the as-found 1x (model_first's bound)
MODEL_MAY_RAISE = ("  It may not lower the 1x: the check run then measures the coefficients, "
                   "as a trial run would, and the next correction comes from the runs.")


CHECK_THE_RIG = ("Check that the pickups and the tach did not move, that the trial mass is on "
                 "the rotor, and that the machine ran at its usual speed.")
ENTER_MEASURE_AGAIN = "[b]Enter[/b]: measure the last run again"
PARTS_TO_PLACE = "Parts to place:"
E_RUN_AGAIN = "[b]e[/b]: run it again at the usual speed first"
R_ADD_INSTEAD = "[b]r[/b]: add mass instead"
R_REMOVE_INSTEAD = "[b]r[/b]: remove material instead (drill/grind)"
ENTER_PLACE = "   [b]Enter[/b]: go and place the parts"
ENTER_PLACE_NO_REMOVAL = ("[b]Enter[/b]: go and place the parts (removing material is not "
                          "allowed on this rotor)")

N_SECOND_START = "[b]n[/b]: optional: start it again as found after a stop: does the 1x repeat?"
DOUBT_BODY = (
    "Weights cure unbalance only. Find and fix the cause below first (mounting",
    "bolts, alignment, belts, bearings, a loose part); then balance in a new job.",
    "[b]k[/b]: stop the job here (the reason is kept in the job and its report)",
    "[b]Enter[/b]: go on with the balancing anyway",
)
STOPPED_NEXT = "Find and fix that cause, then balance in a new job. Press q to quit."

SWITCH_OFF_VERDICT = "[b]Switch the machine off[/b]"
ENTER_CLOSE_JOB = "[b]Enter[/b]: close the job and write the report"

CONNECT_RETRY = ("Check the cable, the port's name and that no other program holds the port; "
                 "press r to try again, or q to quit.")
CONNECT_TRYING = "Trying again…"
LINK_CHECK = ("Check the USB cable and the board, then press [b]l[/b] to reconnect (the same "
              "port).")


# ---- the app's messages (the line under the guide) -------------------------------------
LINK_LOST_SAY = "LINK LOST: check the USB cable and the board, then press l to reconnect."
LINK_UP = "The link is up: nothing to reconnect."
STILL_NO_LINK = "Still no link: press l to try again, or q to quit (the job is saved)."
QUIT_MID_RUN = ("A run is in progress: press q again to quit (nothing of this run is kept; the "
                "job is saved up to the last complete run), or a to stop the run.")
DEMO_ONE_MACHINE = "The demo rig is the simulated machine; other machines are for a real board."
MACHINE_FIXED = "The machine is fixed once a job has started (quit to change it)."
NO_RUN_TO_STOP = "No run to stop."
RUN_STOPPED_DEMO = "Run stopped: the virtual motor is off. Wait for standstill."
RUN_STOPPED = "Run stopped: switch the machine off and wait for standstill."
CHOOSE_FIRST = f"Choose the procedure first: {key_list(list(MODE_KEYS))}."
LOCKED_OUT = "Locked out. Do the work now, then tick the list."
MOTOR_STARTING_DEMO = "Demo: the virtual motor is starting."
SWITCH_ON = "Switch the machine on now and stand clear."
RUN_INTERRUPTED = "The run was interrupted: press l to reconnect; it starts over."
MEASURING = "Measuring: wait for the bar to fill (the reading must be steady)."
RUN_AGAIN = "Run again: confirm the forces to start."
JOB_CLOSED = "Job closed and saved (report beside it). Press q to quit."
JOB_STOPPED = "Job stopped and saved with the reason (report beside it). Press q to quit."
GOING_ON = "Going on with the balancing: it may not cure all of the vibration."
SECOND_START = ("Second start as found: confirm the forces, then start the machine; its 1x is "
                "compared with the first start's.")
JOB_FINISHED = "The job is finished. Press q to quit."
AS_REMOVAL = "Correction as material to remove."
AS_ADDITION = "Correction as mass to add."
REAL_MACHINE_SWITCH = "This is a real machine: use its own switch."
MOTOR_FROM_RUN = "Refused: start the motor from a run step (confirm the forces)."
TICKS_CLEARED = "Ticks cleared: standstill is no longer proven."


# ---- storage faults (issue #18: the job is kept in memory until it can be saved) ---------
def plain(text: str) -> str:
    """Words from outside (an error, a path, a URL) made safe to put into console markup:
    every ``[`` escaped, so ``[Errno 2]`` or ``sim://NAME[?...]`` show as written (Textual's
    own escape leaves ``[?`` alone, and its parser then fails)."""
    return text.replace("[", "\\[")


def not_saved(why: str) -> str:
    """The message while the job file is behind the job in memory."""
    return (f"NOT SAVED: {why}. Every step is kept in memory: press w to save the job in "
            "another folder.")


QUIT_UNSAVED = ("The job is not saved: press w to save it in another folder, or q again to "
                "quit without saving it.")
NOTHING_TO_SAVE = "The job is saved: nothing to move."


MAY_NOT_HELP_HEAD = "[b yellow]Not only unbalance: balancing may not help. Find and fix first:[/]"
#: after a check run, still rough (zone C/D), and what is left is not mostly unbalance
LEFT_NOT_UNBALANCE_HEAD = "[b yellow]What is left is not mostly unbalance:[/]"


def second_start_off_speed(first_rpm: float, second_rpm: float) -> str:
    """The message when the two starts ran at different speeds (then not compared)."""
    return (f"The second start ran at {second_rpm:.0f} rpm, the first at {first_rpm:.0f}: "
            "not compared (the 1x changes with speed).")


def condition_lines(severity: Sequence[Severity], unbalance: Sequence[Finding],
                    as_found: bool) -> tuple[str, ...]:
    """The machine's condition for the guide: each pickup's overall level and zone, then
    whether it looks like unbalance with the evidence that failed (as found), or plainly
    that the machine is still rough after a check run (zones C and D)."""
    when = "as found" if as_found else "at the last check"
    band = next((s.band_hz for s in severity if s.band_hz and s.zone is not None), None)
    over = f"; overall = velocity {band[0]:g}-{band[1]:g} Hz" if band else ""
    lines = [f"[b]Machine condition ({when}{over}):[/b]"]
    # the brief words name the pickup and fit one line (a refusal keeps its reason)
    lines += [f"  {describe(s.as_finding(), brief=True)}" for s in severity]
    rough = [s.pickup for s in severity if s.zone is not None and s.zone.value in ("C", "D")]
    if unbalance and (as_found or rough):
        # after a check run in zone A/B what is left is rightly not unbalance (the 1x is
        # gone): the rules speak only while the machine is still rough
        verdict = unbalance[0]
        failing = [f for f in unbalance[1:] if not f.details.get("ok", True)]
        if verdict.code is Code.BALANCING_MAY_NOT_HELP and not as_found:
            lines.append(LEFT_NOT_UNBALANCE_HEAD)
            lines += [f"[yellow]  {describe(f)}[/]" for f in failing]
        elif verdict.code is Code.BALANCING_MAY_NOT_HELP:
            # one line (the failing rules below say what): the guide is 80x24
            lines.append(MAY_NOT_HELP_HEAD if failing else f"[b yellow]{describe(verdict)}[/]")
            lines += [f"[yellow]  {describe(f)}[/]" for f in failing]
        elif as_found:
            lines.append(f"  {describe(verdict, brief=True)}")
            # a second start that repeated: said briefly (a moved 1x is in the failing lines)
            lines += [f"  {describe(f, brief=True)}" for f in unbalance[1:]
                      if f.code is Code.PHASE_REPEATABLE and f.details.get("ok")]
    if rough and not as_found:
        lines.append(f"[yellow]Still zone C/D at {', '.join(rough)}: the rotor may be within "
                     "its grade while the machine is not; look at mounting, alignment, "
                     "bearings and belts.[/]")
    return tuple(lines)


def no_tach_measuring(speed_rpm: float, speed_order: int = 1) -> str:
    """The run line of the amplitude-only procedure: there is no tach (dsp.tachless);
    ``speed_order`` above 1: the 1x is lost in the noise and the speed comes from that
    harmonic (finding ``speed_from_order``)."""
    speed = f"about {speed_rpm:.0f} rpm" if speed_rpm > 0 else "the speed not found yet"
    if speed_order > 1:
        return (f"No tach: speed from the {speed_order}x line ({speed}), the 1x being lost "
                "in the noise; the 1x is read at that speed, no phase.")
    return f"No tach: speed from the spectrum ({speed}), 1x from its peak, no phase."


def tach_reads_amplitude_only(speed_rpm: float) -> str:
    """The run line of the amplitude-only procedure when a tach is seen after all (finding
    ``tach_reads_1x``): the 1x is read locked to it, and the method uses its amplitude."""
    return (f"Tach seen: speed {speed_rpm:.0f} rpm from it, the 1x read locked to it; this "
            "method uses the amplitude only.")


# ---- resuming a job and what was fitted (issue #17) --------------------------------------
NOTHING_TO_FIT = ("Nothing to enter: what was fitted is entered at the hands-on step that "
                  "places a mass, or before its run starts.")
FIT_KEYS = "   [b]f[/b]: what you fitted  [b]u[/b]: undo"
RESUMED_CHECK = "[yellow]The rotor may have been touched meanwhile: check it carries this:[/]"


def open_job_lines(offer: OpenJob | None) -> tuple[str, ...]:
    """The set-up's offer of an open job: its runs, what is on the rotor, the key."""
    if offer is None:
        return ()
    job = offer.job
    head = (f"[b]Open job[/b] {plain(job.job_id)}: {runs_words(len(job.runs))} kept"
            f"{', the work after it confirmed' if job.pending is not None else ''}")
    if offer.refusal:
        return (head, f"  [yellow]{plain(offer.refusal)}[/]")
    return (head, *(f"  on the rotor: {plain(line)}" for line in offer.lines),
            "  [b]Enter[/b]  continue it (1-5 start a new job; it stays open)")


def runs_words(runs: int) -> str:
    return f"{runs} run" + ("" if runs == 1 else "s")


def shrunk_trial_line(shrunk: ShrunkTrial, shown: Shown | None = None) -> str:
    """The hands-on step after a runaway alarm on a trial run: why a smaller trial goes on
    in place of the one that was on (the same run would stop again)."""
    u = shown or Shown()
    return (f"[b]The trial on {shrunk.plane} ({u.mass(shrunk.trial_g)}) moved the 1x to "
            f"{shrunk.level_ratio:.1f} times its as-found level:[/b] the same run would stop "
            f"again. Take it off and fit {u.mass(shrunk.smaller_g)} at the same place; the "
            "trial run follows.")


def model_shook_line(shook: ModelShook) -> str:
    """The hands-on step after a runaway alarm on the check run of the model's correction:
    the model is refuted, its masses come off and trials follow."""
    return (f"[b]The model's correction moved the 1x at {shook.sensor} to "
            f"{shook.level_ratio:.1f} times its as-found level:[/b] the model is not trusted "
            "for this machine any more. Take its masses off and fit the trial shown; a trial "
            "run per plane follows.")


def resumed(job_id: str, runs: int, rotor: Sequence[str]) -> str:
    """The message after an open job was taken up again."""
    return (f"Resumed job {job_id} after {runs_words(runs)}. On the rotor: "
            f"{'; '.join(rotor)}. Standstill is proven afresh before any hands-on step.")


def fitted_words(change: MassChange, undone: bool = False, shown: Shown | None = None) -> str:
    """The message after a fitted-mass entry (or its undo): what is fitted, and what was
    suggested, in the machine's units."""
    u = shown or Shown()
    m, s = change.mass, change.suggested
    assert m is not None
    where = (position_text(number_of(m.position)) if m.position is not None
             else f"{m.angle_deg:.0f}°")
    what = "hole" if m.removal else m.kind.value
    text = (f"{'Undone, back to' if undone else 'Fitted'}: {what} {u.mass(abs(m.mass_g))} on "
            f"{m.plane} at {where}")
    if s is None:
        return text + " (as suggested)."
    at = (position_text(number_of(s.position)) if s.position is not None
          else f"{s.angle_deg:.0f}°")
    return text + f" (suggested {u.mass(abs(s.mass_g))} at {at}); the runs use what is fitted."
