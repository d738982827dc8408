"""The procedure's questions answered by the balancing engine (``trueturn.balance``).

No arithmetic of balancing here and no conversion of nouns: the procedure's runs, readings
and masses are the model's (:mod:`trueturn.model`), which the engine takes as they are.
Methods used: influence coefficients by least squares over all runs, the amplitude-only
(four-run) method, trial masses sized to be seen (from the as-found reading and a predicted sensitivity,
the 10 %-of-rotor-weight rule before any run), splitting onto
positions, ISO 21940-11 permissible unbalance judged at the bearings when they are known.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace

import numpy as np

from trueturn.angles import phasor, wrap_deg
from trueturn.balance.influence import mass_vector, trial_size_factor
from trueturn.balance.iso21940 import per_plane_permissible, permissible_unbalance_gmm
from trueturn.balance.model_first import (
    CIRCLE95,
    CoefficientEstimate,
    Distrust,
    PickupPlacement,
    PredictedInfluence,
    RotorLayout,
    SupportResonance,
    correction_spread,
    free_rotor_prediction,
    predict_influence,
)
from trueturn.balance.parts import PlaneTarget, best_joint_combination
from trueturn.balance.readings import (
    BalanceInput,
    SavedCoefficient,
    Sensor,
    SpeedSlopeEntry,
    Tolerance,
)
from trueturn.balance.sanity import NoInformationError
from trueturn.balance.solve import (
    SolveReport,
    guard_band,
    plane_draws_to_tolerance_planes,
    solve,
)
from trueturn.balance.splitting import negligible_parts, split
from trueturn.balance.support_fit import StandstillMode, SweepCurve
from trueturn.balance.trial_mass import (
    STANDARD_GRAVITY_M_S2,
    TrialMass,
    centrifugal_force_n,
    size_trial_mass,
    suggest_trial,
    trial_after_runaway,
)
from trueturn.dsp.bump import BumpResult
from trueturn.dsp.coast import SweepOutcome
from trueturn.dsp.findings import Code
from trueturn.dsp.sweep import MAX_SLOPE_SE, Sweep, local_slope
from trueturn.dsp.units import UNITS, from_acceleration_factor
from trueturn.errors import UserError
from trueturn.model import Correction, MassKind, PlacedMass, Plane, Run, RunKind, Verdict
from trueturn.model.units import ceil_to_scale_g
from trueturn.procedure.guide import (
    GateRefused,
    KitFit,
    Mode,
    ModelAnswer,
    ModelRefuted,
    OffSpeed,
    ProcedureSetup,
    Solution,
    TapOutcome,
    TooSmallTrial,
    TrialSuggestion,
    planes_for,
)

#: the resolution parts are weighed and listed to, g (a pocket scale: 0.01 g)
PART_RESOLUTION_G = 0.01
#: A plane that takes a mass at any angle, corrected from the person's parts: the parts go
#: at the correction's angle or in steps of this from it (12 places: enough to split a
#: mass between two neighbours, few enough for the exact search). Ours, no source.
ANY_ANGLE_STEP_DEG = 30.0
TRIAL_REDO_MARGIN = 1.5   # a redone trial: 1.5x what the effect check asks (our choice)
#: the method a model-first correction is said to come from
MODEL_METHOD = ("influence coefficients predicted by the rigid rotor on flexible supports, "
                "refined by every run (recursive least squares)")


def resonances_from_sweep(outcome: SweepOutcome | None, sensors: Sequence[str],
                          speed_rpm: float) -> dict[str, list[SupportResonance]] | None:
    """The support resonances a coast-down found below ``speed_rpm``, per pickup, as the
    model takes them; None when there was no sweep (nothing recorded, or the speed did not
    change enough).

    A resonance is taken with its half-power damping (or the one-mode fit's). A peak that
    one mode does not explain (``single_mode`` False: modes close together) or that has no
    damping is left out of the supports' stiffness; a pickup whose every peak is so is
    marked as a sweep that does not fit (the model then does not trust itself). Each
    speed's 95 % band: 5 % (the half-power method's usual reading error; our choice).
    """
    if outcome is None or not outcome.sweep.is_sweep:
        return None
    out: dict[str, list[SupportResonance]] = {s: [] for s in sensors}
    unclear: dict[str, list[float]] = {s: [] for s in sensors}
    for r in outcome.sweep.resonances:
        if r.pickup not in out or r.speed_rpm >= speed_rpm:
            continue
        damping = r.damping_ratio if r.damping_ratio is not None else r.fit_damping_ratio
        if damping is None or r.single_mode is False:
            unclear[r.pickup].append(r.speed_rpm)
        else:
            out[r.pickup].append(SupportResonance(r.speed_rpm, damping))
    for name, speeds in unclear.items():
        if speeds and not out[name]:
            out[name] = [SupportResonance(min(speeds), 0.05, fits=False)]
    return out


@dataclass(frozen=True)
class SweepEvidence:
    """What the as-found run's coast-down tells the model: the support resonances per
    pickup (:func:`resonances_from_sweep`) and the whole curve (None: not usable)."""

    resonances: dict[str, list[SupportResonance]]
    curve: SweepCurve | None


def curve_from_sweep(outcome: SweepOutcome, sensors: Sequence[str]) -> SweepCurve | None:
    """The sweep's every point as the support fit takes it: acceleration (m/s^2) per
    pickup in the order of ``sensors``, each part's 1 sigma from the point's 95 % circle.

    None when a pickup is missing from the sweep, its unit is volts (no acceleration to
    convert to), or the recording clipped (a point's 1x would read low unseen).

    Parameters
    ----------
    outcome : SweepOutcome
    sensors : sequence of str

    Returns
    -------
    SweepCurve or None

    References
    ----------
    .. [1] Sinusoidal kinematics for the units (:func:`trueturn.dsp.units.from_acceleration_factor`);
       the circular Gaussian's 95 % radius, 2.448 sigma (:data:`CIRCLE95`).
    """
    sweep = outcome.sweep
    if outcome.clipped_samples or not sweep.points or sweep.unit not in UNITS:
        return None
    speeds, values, sigmas = [], [], []
    for point in sweep.points:
        factor = from_acceleration_factor(sweep.unit, point.speed_rpm / 60.0) \
            if point.speed_rpm > 0 else None
        found = [point.value(s) for s in sensors]
        if factor is None:
            return None
        if any(v is None for v in found):
            continue
        speeds.append(point.speed_rpm)
        values.append([phasor(v.amplitude, v.phase_deg) / factor for v in found if v])
        sigmas.append([v.confidence_radius / CIRCLE95 / abs(factor) for v in found if v])
    if not speeds:
        return None
    return SweepCurve(np.array(speeds), np.array(values, dtype=complex), np.array(sigmas))


def sweep_evidence(outcome: SweepOutcome | None, sensors: Sequence[str],
                   speed_rpm: float) -> SweepEvidence | None:
    """The resonances below ``speed_rpm`` (:func:`resonances_from_sweep`) and the curve
    (:func:`curve_from_sweep`) of an as-found coast-down; None when there was no sweep.

    Parameters
    ----------
    outcome : SweepOutcome or None
    sensors : sequence of str
    speed_rpm : float

    Returns
    -------
    SweepEvidence or None

    References
    ----------
    .. [1] :mod:`trueturn.balance.support_fit` (the curve's use; ours).
    """
    resonances = resonances_from_sweep(outcome, sensors, speed_rpm)
    if resonances is None or outcome is None:
        return None
    return SweepEvidence(resonances, curve_from_sweep(outcome, sensors))


#: the reasons a model fitted to the coast-down is not trusted for a correction that do not
#: matter to a trial's size (:meth:`BalanceEngine.trial_sensitivity`): a correction that
#: might overshoot or be too small to see is judged to a few percent; a trial only needs
#: its effect within a factor, and the check after the trial run asks for more when short.
#: A mounted mass the profile does not give is what the fit to the curve finds instead
TRIAL_FIT_DESPITE = frozenset({Distrust.TOO_UNCERTAIN, Distrust.UNSEEN_EFFECT,
                               Distrust.NO_MOUNTED_MASS})


def fit_sizes_trials(prediction: PredictedInfluence) -> bool:
    """A prediction fitted to the coast-down's curve may size the trials: it says a phase,
    and nothing speaks against it but what does not matter to a trial's size
    (:data:`TRIAL_FIT_DESPITE`). The app's rule (:meth:`BalanceEngine.trial_sensitivity`)
    and the bench's mirror of it (bench/bench_balance.py) both ask here."""
    return not prediction.magnitude_only and not set(prediction.distrust) - TRIAL_FIT_DESPITE


#: the reasons a stiff mount's model is not trusted that a tap test can answer: the fit to
#: the coast-down's curve cannot tell the supports' stiffness, so its draws say too
#: uncertain or its correction too small to see, or it puts a resonance the coast-down did
#: not show. Not ``stiffness-unknown``: that one means no fit was made (the curve had too
#: few clear points), and the tap's modes only ever hold a fit
TAP_ANSWERS = frozenset({Distrust.UNSEEN_RESONANCE, Distrust.TOO_UNCERTAIN,
                         Distrust.UNSEEN_EFFECT})


def tap_may_help(resonances: Mapping[str, Sequence[SupportResonance]] | None,
                 curve: SweepCurve | None, distrust: Sequence[Distrust],
                 short_of_grade: bool = False) -> bool:
    """A tap (bump) test at standstill may help the model: the coast-down was a sweep that
    found no support resonance below the speed at any pickup (a stiff mount), its curve can
    be fitted (the fit is what the tap's modes hold,
    :func:`trueturn.balance.model_first.predict_influence` ``standstill``), and either
    every reason not to trust the model is the supports' unknown stiffness
    (:data:`TAP_ANSWERS`), or the model is trusted but its correction may fall short of the
    grade (``short_of_grade``, :func:`short_of_grade`): the tap may narrow it.

    Parameters
    ----------
    resonances : mapping of str to sequence of SupportResonance, or None
        Per pickup, what the coast-down found below the speed (None: no sweep).
    curve : SweepCurve or None
        The coast-down's curve (None: not usable).
    distrust : sequence of Distrust
        Why the model is not trusted (empty: trusted).
    short_of_grade : bool
        A trusted model's correction may leave more than the grade permits.

    Returns
    -------
    bool

    References
    ----------
    .. [1] A rigid rotor's support modes lie above the running speed on a stiff mount, so a
       coast-down from it never passes them; struck at standstill it rings at them (bump
       test; common practice, no source).
    """
    stiff = (resonances is not None and curve is not None
             and not any(resonances.values()))
    if not distrust:
        return stiff and short_of_grade
    return stiff and set(distrust) <= TAP_ANSWERS


def short_of_grade(residual_fraction_95: float, corrections: Sequence[Correction],
                   grade_mm_s: float, speed_rpm: float, rotor_mass_kg: float) -> bool:
    """A trusted model's correction may leave more unbalance than the grade permits: the
    fraction of the as-found 1x it may leave (95 % of the model's draws) exceeds the
    permissible residual unbalance (ISO 21940-11, U_per = G m / omega,
    :func:`trueturn.balance.iso21940.permissible_unbalance_gmm`) over the as-found unbalance the
    correction stands for (the sum of its planes' mass x radius). The 1x is taken as
    proportional to the unbalance (linear supports); a check run then a trim may follow.

    Parameters
    ----------
    residual_fraction_95 : float
        What the correction may leave, as a fraction of the as-found 1x (95 %).
    corrections : sequence of Correction
        The model's correction per plane (mass in g at its plane's radius in mm).
    grade_mm_s, speed_rpm, rotor_mass_kg : float
        The balance quality grade, the maximum service speed and the rotor's mass.

    Returns
    -------
    bool
        False when the corrections do not say their radius (nothing to compare).

    References
    ----------
    .. [1] ISO 21940-11:2016, Mechanical vibration -- Rotor balancing -- Part 11: the
       permissible residual unbalance from the balance quality grade; the comparison with
       the model's bound is ours.
    """
    if any(c.radius_mm is None for c in corrections) or not corrections:
        return False
    found_gmm = sum(c.mass_g * float(c.radius_mm or 0.0) for c in corrections)
    if found_gmm <= 0.0:
        return False
    allowed = permissible_unbalance_gmm(grade_mm_s, speed_rpm, rotor_mass_kg) / found_gmm
    return residual_fraction_95 > allowed


def tap_outcome(result: BumpResult | None, tach_edges: int, time_s: float) -> TapOutcome:
    """A tap test's recording as the procedure takes it: the modes per pickup
    (:class:`~trueturn.balance.support_fit.StandstillMode`), the taps found, the tach
    edges, and whether a line that does not decay was found (``steady_line``: a rotor
    turning behind a dark tach).

    Parameters
    ----------
    result : BumpResult or None
        :func:`trueturn.dsp.bump.analyze_bump_capture`'s ``result`` (None: no samples).
    tach_edges : int
        Tach edges in the recording.
    time_s : float
        Board time at the recording's end, s.

    Returns
    -------
    TapOutcome

    References
    ----------
    .. [1] :mod:`trueturn.dsp.bump` (matrix pencil and variable projection; see there).
    """
    if result is None:
        return TapOutcome({}, 0, tach_edges, False, time_s)
    modes: dict[str, list[StandstillMode]] = {}
    for m in result.modes:
        modes.setdefault(m.pickup, []).append(StandstillMode(m.frequency_hz, m.frequency_se_hz))
    steady = any(f.code is Code.STEADY_LINE for f in result.findings)
    return TapOutcome({k: tuple(v) for k, v in modes.items()}, len(result.taps), tach_edges,
                      steady, time_s)


#: how a reading's speed exponent differs from acceleration's (velocity = acceleration /
#: omega, displacement = acceleration / omega^2; volts are an accelerometer's output)
EXPONENT_FROM_ACCELERATION = {"volts": 0.0, "acceleration": 0.0, "velocity": -1.0,
                              "displacement": -2.0}


def speed_slopes_from_sweeps(sweeps: Sequence[Sweep], units: Mapping[str, str],
                             speed_rpm: float, max_exponent_se: float = MAX_SLOPE_SE
                             ) -> tuple[SpeedSlopeEntry, ...]:
    """Each pickup's local slope of the 1x with speed at ``speed_rpm``, from the first of
    ``sweeps`` that measured it well enough at every pickup; empty when none did.

    Parameters
    ----------
    sweeps : sequence of Sweep
        Candidates in order of preference (the job's as-found coast-down first).
    units : mapping of str to str
        Per pickup (every one the solve uses), the unit of its readings: the exponent is
        carried from the sweep's unit to it (velocity's is acceleration's less 1,
        displacement's less 2; the phase slope is the same in every unit).
    speed_rpm : float
        Where the slope is wanted (the speed the runs are compared at), rpm.
    max_exponent_se : float, default dsp.sweep.MAX_SLOPE_SE
        A pickup whose exponent's standard error is larger has no slope from that sweep
        (:func:`trueturn.dsp.sweep.local_slope`: 0.15, under 0.1 % error in a reading
        carried 0.5 % in speed).

    Returns
    -------
    tuple of SpeedSlopeEntry
        One per pickup of ``units`` (all or none, so no run is half normalised).

    References
    ----------
    .. [1] Local power law of the 1x with speed, tangent of ``ln|H|`` against ``ln n`` by
       weighted least squares (:func:`trueturn.dsp.sweep.local_slope`; common practice, no
       source); sinusoidal kinematics for the units (``v = a / omega``, ``x = a / omega^2``).
    """
    for sweep in sweeps:
        if not sweep.points or sweep.unit not in UNITS:
            continue
        base = EXPONENT_FROM_ACCELERATION[UNITS[sweep.unit][0]]
        out = []
        for name, unit in units.items():
            slope = local_slope(sweep.points, name, speed_rpm,
                                max_exponent_se=max_exponent_se)
            if slope is None or unit not in UNITS:
                break
            shift = EXPONENT_FROM_ACCELERATION[UNITS[unit][0]] - base
            out.append(SpeedSlopeEntry(name, slope.amplitude_exponent + shift,
                                       slope.phase_deg_per_ln_speed))
        else:
            if out:
                return tuple(out)
    return ()


def _layout_and_placements(setup: ProcedureSetup, planes: Sequence[Plane] | None = None
                           ) -> tuple[RotorLayout, list[PickupPlacement]]:
    """What the profile says of the rotor and where each pickup sits, as the model takes
    them (a pickup whose bearing the profile does not name: in order, the first on the
    first bearing), for ``planes`` (default: the procedure's, :func:`planes_for`). The
    profile must give both bearings and every plane's position."""
    planes = planes_for(setup) if planes is None else tuple(planes)
    layout = RotorLayout(setup.rotor_mass_kg,
                         (setup.bearings[0].axial_mm, setup.bearings[1].axial_mm),
                         tuple(float(p.axial_mm or 0.0) for p in planes),
                         tuple(p.radius_mm for p in planes), setup.cg_axial_mm,
                         setup.transverse_inertia_kg_m2, setup.polar_inertia_kg_m2,
                         setup.mounted_mass_kg)
    angles = setup.pickup_angles_deg
    on = setup.pickup_bearings
    placements = []
    for i, n in enumerate(setup.sensors):
        said = on[i] if i < len(on) else None
        placements.append(PickupPlacement.from_profile(
            n, said if said is not None else min(i, 1), angles[i] if i < len(angles) else None))
    return layout, placements


def resonances_of_sweeps(sweeps: Sequence[Sweep], sensors: Sequence[str],
                         speed_rpm: float) -> dict[str, list[SupportResonance]] | None:
    """The support resonances below ``speed_rpm`` from the first of ``sweeps`` that is a
    sweep (the job's as-found coast-down first, :func:`trueturn.jobs.sweeps.slope_sweeps`),
    as :func:`resonances_from_sweep` takes them; None when none is.

    Parameters
    ----------
    sweeps : sequence of Sweep
    sensors : sequence of str
    speed_rpm : float

    Returns
    -------
    dict of str to list of SupportResonance, or None

    References
    ----------
    .. [1] :func:`resonances_from_sweep` (ours).
    """
    for sweep in sweeps:
        if sweep.is_sweep:
            return resonances_from_sweep(SweepOutcome("coastdown", sweep, None, ()), sensors,
                                         speed_rpm)
    return None


class BalanceEngine:
    """The :class:`trueturn.procedure.guide.Engine` backed by ``trueturn.balance``."""

    # ---- sizes and forces ---------------------------------------------------------------
    def prediction(self, setup: ProcedureSetup) -> PredictedInfluence:
        """Predicted sensitivities from the profile (no sweep yet: magnitude only, the free
        rigid rotor; :mod:`trueturn.balance.model_first`)."""
        planes = setup.planes
        if len(setup.bearings) == 2 and all(p.axial_mm is not None for p in planes):
            layout, placements = _layout_and_placements(setup, planes)
            return predict_influence(layout, placements, setup.speed_rpm)
        # the free body: what the mounts carry when the profile says it, else the rotor
        return free_rotor_prediction(setup.sensors, setup.mounted_mass_kg or setup.rotor_mass_kg,
                                     [p.radius_mm for p in planes], setup.speed_rpm)

    def trial_fit_wanted(self, setup: ProcedureSetup) -> bool:
        """The trials may be sized from the support model fitted to the as-found run's
        coast-down (:meth:`trial_sensitivity`): a procedure with a trial run per plane that
        reads the 1x with its phase, on a profile that places both bearings and every
        plane (what the rigid rotor on its supports needs)."""
        return (setup.mode in (Mode.ONE_PLANE, Mode.TWO_PLANE) and len(setup.bearings) == 2
                and all(p.axial_mm is not None for p in planes_for(setup)))

    def trial_sensitivity(self, setup: ProcedureSetup,
                          evidence: SweepEvidence | None) -> PredictedInfluence | None:
        """The sensitivity the trials are sized from when the as-found coast-down can be
        fitted: the rigid rotor on supports fitted to the whole curve
        (:func:`trueturn.balance.model_first.predict_influence` with ``curve``; seconds of
        work, so the app calls it off the screen's thread). Only on a soft mount (a
        resonance below the speed at some pickup: a stiff mount's curve cannot tell the
        stiffness, and the force floor of :meth:`_trial_prediction` stands), and only when
        the fit says a phase and nothing speaks against it but what does not matter to a
        trial's size (:data:`TRIAL_FIT_DESPITE`). None otherwise: the trials are sized
        from the resonances alone (:meth:`_trial_prediction`).

        Parameters
        ----------
        setup : ProcedureSetup
        evidence : SweepEvidence or None
            The as-found run's coast-down (:func:`sweep_evidence`; None: none kept).

        Returns
        -------
        PredictedInfluence or None

        References
        ----------
        .. [1] :mod:`trueturn.balance.support_fit` (the fit; ours). Measured with
           bench/bench_balance.py's rotors, paired (each rotor its own random stream, sized
           both ways): on 300 soft mounts (600 trials) the trial runs the runaway alarm
           stopped fell from 7 to 1 and the trials too small to be seen from 17 to 10; 13
           rotors needed fewer runs, 2 more; on stiff mounts nothing changes (no resonance
           below the speed, no fit).
        """
        if (evidence is None or evidence.curve is None or not self.trial_fit_wanted(setup)
                or not any(evidence.resonances.values())):
            return None
        layout, placements = _layout_and_placements(setup)
        pred = predict_influence(layout, placements, setup.speed_rpm, evidence.resonances,
                                 curve=evidence.curve)
        return pred if fit_sizes_trials(pred) else None

    def _trial_prediction(self, setup: ProcedureSetup) -> PredictedInfluence:
        """The sensitivity a trial is sized from: the support model fitted to the as-found
        coast-down's curve when the app has it (``setup.trial_sensitivity``,
        :meth:`trial_sensitivity`); else with the as-found coast-down's support
        resonances (``setup.support_resonances``) the rigid rotor on its supports, kept
        when it says only a magnitude (a stiff mount: no resonance below the speed, the
        force floor applies) or when nothing speaks against it; else (near a resonance, no
        pickup angle for a phase, no sweep) the free rigid rotor of :meth:`prediction`. A
        profile without the mass on the mounts sizes from the rotor alone (its largest
        response, so the smallest trial: the check after the run asks for more)."""
        if isinstance(setup.trial_sensitivity, PredictedInfluence):
            return setup.trial_sensitivity
        res = setup.support_resonances
        planes = planes_for(setup)
        if (isinstance(res, dict) and len(setup.bearings) == 2
                and all(p.axial_mm is not None for p in planes)):
            layout, placements = _layout_and_placements(setup)
            pred = predict_influence(layout, placements, setup.speed_rpm, res)
            if pred.magnitude_only and Distrust.STIFFNESS_UNKNOWN in pred.distrust:
                return pred
            if not pred.magnitude_only and not set(pred.distrust) - {Distrust.NO_MOUNTED_MASS}:
                return pred
        return self.prediction(setup)

    def trial_mass(self, setup: ProcedureSetup, plane: Plane,
                   runs: Sequence[Run] = ()) -> TrialSuggestion:
        """The trial for ``plane``: before any run the 10 % force rule; after the as-found
        run sized to be seen (:func:`trueturn.balance.trial_mass.suggest_trial`) from the
        as-found reading, saved coefficients of the plane or the predicted sensitivity,
        scaled by what an earlier trial of this job showed."""
        t = self._sized_trial(setup, plane, runs)
        mass_g = ceil_to_scale_g(t.mass_g, setup.units.mass)  # a whole step of the scale
        position = 0 if plane.position_angles_deg else None
        angle = plane.position_angles_deg[0] if plane.position_angles_deg else 0.0
        force = self.force_n(mass_g, plane.radius_mm, setup.speed_rpm)
        weight_n = setup.rotor_mass_kg * STANDARD_GRAVITY_M_S2
        return TrialSuggestion(plane.name, mass_g, angle, position, force, force / weight_n)

    def _sized_trial(self, setup: ProcedureSetup, plane: Plane, runs: Sequence[Run]) -> TrialMass:
        as_found = next((r for r in runs if r.kind == RunKind.AS_FOUND), None)
        if (as_found is None or setup.mode is Mode.AMPLITUDE_ONLY
                or any(s not in as_found.readings for s in setup.sensors)):
            # before any run, and for the four-run method (amplitudes only; its three trials
            # at 0/120/240 deg have their own size check), the 10 % force rule as before
            return size_trial_mass(setup.rotor_mass_kg, plane.radius_mm, setup.speed_rpm)
        names = list(setup.sensors)
        planes = list(setup.planes)
        j = planes.index(plane)
        # the prediction is acceleration per gram (m/s^2 pk); the readings are in their own
        # unit (mm/s rms on most profiles): the sizes are compared in the readings' unit
        speed = as_found.speed_rpm or setup.speed_rpm
        factors = [from_acceleration_factor(as_found.readings[n].unit, speed / 60.0)
                   for n in names]
        if any(f is None for f in factors):
            # volts: no sensitivity to predict a change in; the 10 % force rule
            return size_trial_mass(setup.rotor_mass_kg, plane.radius_mm, setup.speed_rpm)
        prediction = self._trial_prediction(setup)
        prediction = replace(prediction, magnitude=prediction.magnitude * np.abs(
            np.array(factors, dtype=complex))[:, None])
        saved = {c.sensor: c.amp_per_g for c in setup.saved_coefficients
                 if isinstance(c, SavedCoefficient) and c.plane == plane.name}
        scale = None
        seen_gmm = None   # that trial's unbalance, g mm
        for run in runs:     # an earlier trial of this job: what it showed against the model
            trials = [m for m in run.masses if m.kind == MassKind.TRIAL]
            if run.kind != RunKind.TRIAL or len(trials) != 1 or trials[0].plane == plane.name:
                continue
            k = next(i for i, p in enumerate(planes) if p.name == trials[0].plane)
            # the smallest ratio over the pickups: the prediction's pattern across planes
            # is rough, so the next trial errs on the large side (bench_balance measured)
            seen = min(abs(run.readings[n].vector - as_found.readings[n].vector)
                       / abs(trials[0].mass_g) / float(prediction.magnitude[i, k])
                       for i, n in enumerate(names) if n in run.readings)
            scale = seen if seen > 0 else scale
            seen_gmm = abs(trials[0].mass_g) * planes[k].radius_mm
        return suggest_trial([as_found.readings[n].amplitude for n in names],
                             [as_found.readings[n].confidence_radius for n in names],
                             prediction, j, setup.rotor_mass_kg, plane.radius_mm,
                             setup.speed_rpm, scale,
                             [saved[n] for n in names] if all(n in saved for n in names) else None,
                             plane.max_mass_g, seen_gmm)

    def trial_effect(self, setup: ProcedureSetup, runs: Sequence[Run]) -> TooSmallTrial | None:
        """Right after a trial run: a trial whose change of the 1x is under 25 % of the
        as-found level on every pickup, or under three of its confidence radii
        (:func:`trueturn.balance.influence.trial_size_factor`), with the mass that would be
        seen (1.5 times what the factor asks: the same sizing margin again)."""
        as_found = next((r for r in runs if r.kind == RunKind.AS_FOUND), None)
        last = runs[-1] if runs else None
        if as_found is None or last is None or last.kind != RunKind.TRIAL:
            return None
        trials = [m for m in last.masses if m.kind == MassKind.TRIAL]
        if len(trials) != 1:
            return None
        before = {n: r.vector for n, r in as_found.readings.items() if n in last.readings}
        after = {n: last.readings[n].vector for n in before}
        confidence = {n: max(last.readings[n].confidence_radius or 0.0,
                             as_found.readings[n].confidence_radius or 0.0) for n in before}
        try:
            factor = trial_size_factor(before, after, confidence)
        except UserError:
            return TooSmallTrial(trials[0].plane, abs(trials[0].mass_g), None)
        if factor <= 1.0:
            return None
        return TooSmallTrial(trials[0].plane, abs(trials[0].mass_g),
                             abs(trials[0].mass_g) * factor * TRIAL_REDO_MARGIN)

    def trial_after_runaway(self, trial_g: float, level_ratio: float) -> float:
        """A trial run stopped by the runaway alarm at ``level_ratio`` times the as-found
        1x: the smaller trial (:func:`trueturn.balance.trial_mass.trial_after_runaway`,
        aimed at the same change as a trial sized to be seen)."""
        return trial_after_runaway(trial_g, level_ratio)

    def force_n(self, mass_g: float, radius_mm: float, speed_rpm: float) -> float:
        """Centrifugal force F = m r omega^2 (newtons)."""
        return centrifugal_force_n(mass_g, radius_mm, speed_rpm)

    # ---- solving ------------------------------------------------------------------------
    def _input(self, setup: ProcedureSetup, runs: Sequence[Run],
               with_tolerance: bool) -> BalanceInput:
        planes = planes_for(setup)
        if setup.mode is Mode.AMPLITUDE_ONLY:
            # the four-run method uses amplitudes only, whatever the meter measured
            runs = [replace(run, readings={name: replace(r, phase_deg=None)
                                           for name, r in run.readings.items()})
                    for run in runs]
        # judged at the bearings when the profile places them and every plane used
        at_bearings = (len(setup.bearings) == 2
                       and all(p.axial_mm is not None for p in planes))
        if not at_bearings:
            planes = tuple(replace(p, axial_mm=None) for p in planes)
        tolerance = None
        if with_tolerance:
            # the grade at the machine's maximum service speed (profile), never the run's
            tolerance = Tolerance(setup.rotor_mass_kg, setup.grade_mm_per_s, setup.speed_rpm,
                                  cg_axial_mm=setup.cg_axial_mm)
        saved = tuple(c for c in setup.saved_coefficients if isinstance(c, SavedCoefficient))
        # the coast-down's measured slopes, every pickup's or none (phase-less four-run
        # method: the amplitude exponent alone is used, the phase slope has nothing to turn)
        slopes = tuple(s for s in setup.speed_slopes if isinstance(s, SpeedSlopeEntry))
        if {s.sensor for s in slopes} != set(setup.sensors):
            slopes = ()
        return BalanceInput(planes, tuple(Sensor(s) for s in setup.sensors), tuple(runs),
                            influence=saved, tolerance=tolerance,
                            bearings=setup.bearings if at_bearings else (),
                            speed_slopes=slopes, mass_unit=setup.units.mass)

    def _report(self, inp: BalanceInput) -> SolveReport:
        """Solve, turning the engine's refusals into gate refusals (with the facts kept)."""
        try:
            return solve(inp)
        except NoInformationError as exc:
            raise GateRefused(str(exc), TooSmallTrial(exc.plane, exc.trial_g,
                                                      exc.suggested_g)) from None
        except UserError as exc:
            raise GateRefused(str(exc)) from None

    def _parts(self, setup: ProcedureSetup, corrections: Sequence[Correction], kind: MassKind,
               removal: bool) -> tuple[PlacedMass, ...]:
        """The parts a person places: each correction split onto the plane's positions;
        removal takes the same mass out opposite (:meth:`PlacedMass.as_addition` undoes it)."""
        parts: list[PlacedMass] = []
        # a split part is left out when it is negligible against the plane's share of the
        # tolerance (balance.splitting.negligible_parts: at most a tenth of it)
        u_per = permissible_unbalance_gmm(setup.grade_mm_per_s, setup.speed_rpm,
                                          setup.rotor_mass_kg)
        allowed = per_plane_permissible(u_per, max(setup.profile_planes, len(setup.planes)))[0]
        for c in corrections:
            if c.mass_g <= 0:
                continue
            plane = next(p for p in setup.planes if p.name == c.plane)
            whole = PlacedMass(c.plane, c.mass_g, c.angle_deg, None, kind)
            if removal:
                whole = replace(whole.as_addition(), removal=True)  # same effect, opposite
            if not plane.position_angles_deg:
                parts.append(replace(whole, mass_g=round(whole.mass_g, 2)))
                continue
            try:
                pieces = split(whole.mass_g, whole.angle_deg, plane.position_angles_deg)
            except UserError as exc:
                raise GateRefused(f"plane {plane.name}: {exc}") from None
            left_out = negligible_parts(pieces, PART_RESOLUTION_G, plane.radius_mm, allowed)
            for piece in pieces:
                if piece not in left_out:
                    parts.append(replace(whole, mass_g=round(piece.mass_g, 2),
                                         angle_deg=piece.angle_deg, position=piece.index))
        return tuple(parts)

    def _kit_parts(self, setup: ProcedureSetup, corrections: Sequence[Correction],
                   kind: MassKind, runs: Sequence[Run]
                   ) -> tuple[tuple[PlacedMass, ...], tuple[KitFit, ...]]:
        """The correction made from the parts the person owns (issue #22): one drawer
        shared by the planes jointly, the least unbalance left on the worse plane
        (:func:`trueturn.balance.parts.best_joint_combination`; a plane that takes any
        angle: the correction's angle and every :data:`ANY_ANGLE_STEP_DEG` from it), not
        the first plane's pick with the second left what remains. Parts already on the
        rotor as corrections are out of the drawer. Each plane says what it is left with
        against its share of the allowance."""
        drawer = list(setup.owned_parts_g)
        for m in runs[-1].masses if runs else ():
            if m.kind in (MassKind.CORRECTION, MassKind.TRIM) and not m.removal:
                same = next((g for g in drawer if abs(g - m.mass_g) < PART_RESOLUTION_G), None)
                if same is not None:
                    drawer.remove(same)
        u_per = permissible_unbalance_gmm(setup.grade_mm_per_s, setup.speed_rpm,
                                          setup.rotor_mass_kg)
        allowed = per_plane_permissible(u_per, max(setup.profile_planes, len(setup.planes)))[0]
        wanted: list[tuple[Correction, Plane]] = []
        targets: list[PlaneTarget] = []
        for c in corrections:
            if c.mass_g <= 0:
                continue
            plane = next(p for p in setup.planes if p.name == c.plane)
            positions = plane.position_angles_deg or tuple(
                wrap_deg(c.angle_deg + ANY_ANGLE_STEP_DEG * k)
                for k in range(round(360 / ANY_ANGLE_STEP_DEG)))
            wanted.append((c, plane))
            targets.append(PlaneTarget(c.mass_g, c.angle_deg, tuple(positions), plane.radius_mm))
        if not drawer:  # nothing left to place: the whole correction is what is left
            return (), tuple(KitFit(c.plane, c.mass_g * plane.radius_mm, allowed, True, 0)
                             for c, plane in wanted)
        if not targets:
            return (), ()
        try:
            shared = best_joint_combination(targets, drawer, setup.owned_stack)
        except UserError as exc:
            raise GateRefused(f"correction parts: {exc}") from None
        parts: list[PlacedMass] = []
        fits: list[KitFit] = []
        for (c, plane), fit in zip(wanted, shared, strict=True):
            for use in fit.uses:
                parts += [PlacedMass(c.plane, grams, use.angle_deg,
                                     use.position if plane.position_angles_deg else None, kind)
                          for grams in use.masses_g]
            fits.append(KitFit(c.plane, fit.residual_gmm(plane.radius_mm), allowed,
                               fit.proven_best, len(drawer)))
        return tuple(parts), tuple(fits)

    def _solution(self, setup: ProcedureSetup, report: SolveReport,
                  corrections: Sequence[Correction], kind: MassKind, removal: bool,
                  runs: Sequence[Run] = ()) -> Solution:
        sol = report.solution
        off: tuple[OffSpeed, ...] = ()
        normalised: tuple[OffSpeed, ...] = ()
        if report.speed is not None:
            off = tuple(OffSpeed(o.index, o.label, o.deviation, report.speed.worst_cut_fraction)
                        for o in report.speed.off_speed)
            if report.speed.normalised_with_slopes:
                # compared at one speed with the measured slope: no estimate, no repeat
                off, normalised = (), off
        if setup.owned_parts_g and not removal:
            parts, kit = self._kit_parts(setup, corrections, kind, runs)
        else:
            parts, kit = self._parts(setup, corrections, kind, removal), ()
        return Solution(tuple(corrections), parts, sol.method, tuple(sol.warnings),
                        sol.influence, off, kit, normalised)

    def solve(self, setup: ProcedureSetup, runs: Sequence[Run], removal: bool) -> Solution:
        report = self._report(self._input(setup, runs, with_tolerance=False))
        return self._solution(setup, report, report.solution.corrections, MassKind.CORRECTION,
                              removal, runs)

    def assess(self, setup: ProcedureSetup, runs: Sequence[Run],
               removal: bool) -> tuple[Verdict, Solution]:
        """Refit over every run so far; verdict on the last run; trim still needed."""
        report = self._report(self._input(setup, runs, with_tolerance=True))
        sol = report.solution
        assert report.verdict is not None
        verdict = replace(report.verdict, grade_mm_s=setup.grade_mm_per_s)
        trim = self._solution(setup, report, sol.corrections_keeping_current, MassKind.TRIM,
                              removal, runs)
        return verdict, trim

    # ---- model-first (issue #20 item 4) ---------------------------------------------------
    def model_first(self, setup: ProcedureSetup, runs: Sequence[Run],
                    resonances: object,
                    standstill: Mapping[str, Sequence[StandstillMode]] | None = None
                    ) -> ModelAnswer:
        """The model's answer after the as-found run (``runs[0]``) and its sweep.

        Influence coefficients predicted from the profile and the sweep's support
        resonances (:func:`trueturn.balance.model_first.predict_influence`: a rigid rotor
        on two flexible supports; Vance 1988, ch. 2, from memory), turned into the
        readings' unit at the as-found run's speed, refined by the as-found run (RLS with
        the prediction as prior, :class:`~trueturn.balance.model_first.CoefficientEstimate`)
        and solved into a correction with its 95 % spread in mass and angle. Not trusted
        (trials follow) for the prediction's own reasons, or when a pickup reads volts.
        A pickup whose bearing the profile does not name is taken in order (the first on
        the first bearing).
        """
        as_found = runs[0]
        names = list(setup.sensors)
        planes = planes_for(setup)
        speed = as_found.speed_rpm or setup.speed_rpm
        factors = [from_acceleration_factor(as_found.readings[n].unit, speed / 60.0)
                   for n in names]
        if any(f is None for f in factors):
            return ModelAnswer(False, (Distrust.UNCALIBRATED.value,))
        if any(as_found.readings[n].clipped for n in names):
            # the model starts from the as-found 1x: one that reads low gives a wrong first
            # correction with a confident spread (the trials' solve leaves it out instead)
            return ModelAnswer(False, (Distrust.CLIPPED.value,))
        if len(setup.bearings) != 2 or any(p.axial_mm is None for p in planes):
            return ModelAnswer(False, (Distrust.NO_BEARINGS.value,))
        factor = np.array(factors, dtype=complex)
        layout, placements = _layout_and_placements(setup)
        sweep: dict[str, list[SupportResonance]] | None = None
        curve: SweepCurve | None = None
        if isinstance(resonances, SweepEvidence):
            curve = resonances.curve
            resonances = resonances.resonances
        if isinstance(resonances, dict):
            sweep = {str(k): [r for r in v if isinstance(r, SupportResonance)]
                     for k, v in resonances.items()}
        accel = {n: as_found.readings[n].vector / factor[i] for i, n in enumerate(names)}
        pred = predict_influence(layout, placements, speed, sweep, accel, curve=curve,
                                 standstill=standstill)
        tapped = standstill is not None
        if not pred.trusted:
            return ModelAnswer(False, tuple(d.value for d in pred.distrust),
                               residual_fraction_95=pred.residual_fraction_95,
                               tap_may_help=not tapped and tap_may_help(sweep, curve,
                                                                        pred.distrust),
                               tapped=tapped)
        prior = replace(pred, matrix=pred.matrix * factor[:, None],
                        magnitude=pred.magnitude * np.abs(factor)[:, None],
                        covariance=tuple(c * abs(factor[i]) ** 2
                                         for i, c in enumerate(pred.covariance)))
        estimate = self._estimate(setup, runs, prior)
        _, mass95, angle95 = correction_spread(estimate)
        solution = self._model_solution(setup, runs, estimate, False)
        # a stiff mount whose correction may fall short of the grade: the tap test is
        # offered first (optional; skipped, this very correction follows)
        short = pred.residual_fraction_95 is not None and short_of_grade(
            pred.residual_fraction_95, solution.corrections, setup.grade_mm_per_s,
            setup.speed_rpm, setup.rotor_mass_kg)
        return ModelAnswer(True, (), tuple(float(m) for m in mass95),
                           tuple(float(a) for a in angle95), pred.residual_fraction_95, prior,
                           solution, tap_may_help=not tapped and tap_may_help(
                               sweep, curve, (), short_of_grade=short),
                           tapped=tapped)

    def model_estimate(self, setup: ProcedureSetup, runs: Sequence[Run],
                       prior: object) -> CoefficientEstimate:
        """The prior refined by ``runs`` by recursive least squares (the estimate every
        model-first correction and verdict comes from; the job keeps its coefficients)."""
        return self._estimate(setup, runs, prior)

    def _estimate(self, setup: ProcedureSetup, runs: Sequence[Run],
                  prior: object) -> CoefficientEstimate:
        """The prior refined by every run (masses relative to the as-found run's)."""
        if not isinstance(prior, PredictedInfluence):
            raise GateRefused("the model's prediction is not known (a resumed job): start a "
                              "new job")
        planes = planes_for(setup)
        estimate = CoefficientEstimate.from_prediction(prior)
        base = mass_vector(runs[0].masses, planes)
        for k, run in enumerate(runs):
            if k and any(run.readings[n].clipped for n in setup.sensors):
                # a clipped reading reads low: never in the coefficients (as the trials'
                # solve), nor can it refute the model; its run gives no verdict either
                continue
            estimate.update(mass_vector(run.masses, planes) - base,
                            {n: run.readings[n].vector for n in setup.sensors},
                            {n: run.readings[n].confidence_radius for n in setup.sensors})
        if estimate.prior_refuted and not estimate.determined_by_runs:
            # a run fell far outside the model's prediction and the runs alone cannot
            # stand: no number from this model is shown (trials follow)
            assert estimate.refuted_by is not None
            sensor, _, surprise = estimate.refuted_by
            raise ModelRefuted(sensor, surprise)
        return estimate

    def _model_solution(self, setup: ProcedureSetup, runs: Sequence[Run],
                        estimate: CoefficientEstimate, removal: bool) -> Solution:
        saved = self._as_saved(setup, runs, estimate)
        sol = self.solve(replace(setup, saved_coefficients=saved), runs, removal)
        return replace(sol, method=MODEL_METHOD)

    def _as_saved(self, setup: ProcedureSetup, runs: Sequence[Run],
                  estimate: CoefficientEstimate) -> tuple[SavedCoefficient, ...]:
        """The estimate's coefficients as a saved set at the as-found run's speed, so the
        correction, the parts and the verdict come from the same code as every mode's."""
        matrix = estimate.matrix
        out = []
        for i, n in enumerate(setup.sensors):
            for j, p in enumerate(planes_for(setup)):
                h = complex(matrix[i, j])
                if not abs(h) > 0:
                    raise GateRefused(f"the model gives {p.name} no effect at {n}: use trial runs")
                out.append(SavedCoefficient(n, p.name, abs(h),
                                            wrap_deg(math.degrees(math.atan2(h.imag, h.real))),
                                            runs[0].speed_rpm))
        return tuple(out)

    def model_solve(self, setup: ProcedureSetup, runs: Sequence[Run], removal: bool,
                    prior: object) -> Solution:
        """The model's correction from the prior refined by ``runs``."""
        return self._model_solution(setup, runs, self._estimate(setup, runs, prior), removal)

    def model_assess(self, setup: ProcedureSetup, runs: Sequence[Run], removal: bool,
                     prior: object) -> tuple[Verdict, Solution]:
        """Verdict on the last run with the coefficients refined by every run (the
        correction run serves as the trial), judged as every mode's (ISO 21940-11 at the
        bearings, the residual's 95 % bound), and the trim still needed."""
        estimate = self._estimate(setup, runs, prior)
        saved = self._as_saved(setup, runs, estimate)
        verdict, trim = self.assess(replace(setup, saved_coefficients=saved), list(runs),
                                    removal)
        # the saved set's guard band holds the last readings' circles only; the
        # coefficients themselves are an estimate (the prediction refined by few runs):
        # their covariance widens the bound, so a model that is confidently wrong can
        # never carry a PASS (ISO 14253-1 decision rule, from memory; JCGM 101:2008)
        last = runs[-1]
        _, drawn_g = estimate.residual_draws_g(
            {n: last.readings[n].vector for n in setup.sensors},
            {n: last.readings[n].confidence_radius for n in setup.sensors})
        planes = planes_for(setup)
        radius_mm = np.array([p.radius_mm for p in planes])
        draws_gmm = plane_draws_to_tolerance_planes(
            verdict, -drawn_g * radius_mm[None, :], [p.axial_mm for p in planes],
            [b.axial_mm for b in setup.bearings])
        verdict = guard_band(verdict, draws_gmm)
        return verdict, replace(trim, method=MODEL_METHOD)
