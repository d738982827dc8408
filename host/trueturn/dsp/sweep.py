"""Coast-down and run-up sweeps: the 1x against speed, support resonances and their damping.

A capture whose speed changes (the motor switched off and the rotor coasting down, or a
run-up) holds the machine's 1x response at every speed it passed. Each revolution's 1x
phasor comes from the same tach-synchronous least-squares fit as a steady reading
(:mod:`trueturn.dsp.order`); this module takes those per-revolution phasors and speeds and

* bins them on a logarithmic speed grid (:data:`BIN_FRACTION` wide: 0.5 %) and averages the
  phasors in each bin: the sweep's points (amplitude and phase per pickup, with a 95 %
  circle from the fit's own noise);
* finds the support resonances (critical speeds) per pickup as the peaks of the response
  per unit unbalance force (**half-power bandwidth** method), and their damping ratio with a
  95 % interval by a **least-squares fit of one SDOF mode** (with residual terms) to the
  complex 1x, amplitude and phase, of the revolutions near each peak (method ``sdof_fit``);
* gives the local slope of the response with speed (amplitude exponent
  ``d ln|H| / d ln n`` and phase slope ``d phi / d ln n``) for normalising runs taken a
  little apart in speed (:mod:`trueturn.balance.speed`).

Unbalance forcing grows with speed squared (``F = m e omega^2``), so the measured 1x is
divided by ``n^2`` before the half-power method; an accelerometer adds ``omega^2`` more
(acceleration = ``omega^2`` x displacement) and a velocity reading ``omega``: the response is
divided by ``n^4`` (acceleration, and volts of an accelerometer), ``n^3`` (velocity) or
``n^2`` (displacement). What is left is the support's receptance (displacement per unit
force) times a constant, to which the single-degree-of-freedom half-power rule applies:
``zeta = (n2^2 - n1^2) / (4 nr^2)`` with ``n1``, ``n2`` the speeds where the normalised
amplitude is ``1/sqrt(2)`` of its peak at ``nr`` (about ``(n2 - n1) / (2 nr)`` for light
damping).

The half-power damping needs at least :data:`MIN_POINTS_IN_BAND` measured points inside
the band, which a fast coast-down does not give (one revolution can span the whole band of
a lightly damped mode, and its 1x is the mean across it, which widens the peak); it is kept
as a cross-check. The fit uses every revolution near the peak, amplitude and phase, models
each revolution's mean across its speed change, and gives the damping's 95 % interval from
its covariance (widened when the misfit runs smoothly along the points, a neighbouring
mode's skirt) and the one-mode model's own error (:data:`DAMPING_MODEL_FACTOR`, in
quadrature); the damping is null ("not resolved") when that interval is wider than
:data:`MAX_DAMPING_FACTOR_95` either side, and when one mode does not explain the peak.

A fast sweep through a lightly damped resonance lags and lowers its peak and leaves the
mode ringing after it (Lewis 1932). Its measure is the sweep-rate parameter
``Lambda = |d omega/dt| / (zeta omega_n)^2``, the half-power half-widths the speed moves in
one build-up time (the grinder's rubber-feet mode coasting at 284 rpm/s: about 4; its peak
comes 13 % below the mode). So the fit is also made with the swept response
(:func:`swept_mode_response`), on a window re-centred on its own fitted mode (not the
peak), and is taken whenever ``Lambda >= 1`` unless the same revolutions show plainly that
the response followed the speed; the resonance's speed is then the fitted mode's. Peaks
that the swept model of a mode explains (its ringing beating against the 1x) are not
reported. Both methods assume well separated, lightly damped modes.

References
----------
.. [1] D. J. Ewins, *Modal Testing: Theory, Practice and Application*, 2nd ed., Research
   Studies Press, 2000, sec. 4.2 (SDOF modal analysis: the peak-amplitude / half-power
   method) (from memory).
.. [2] S. S. Rao, *Mechanical Vibrations*, sec. "Response of a damped system under
   rotating unbalance" and "quality factor and bandwidth" (from memory).
.. [3] Ewins 2000, sec. 4.3-4.4 (SDOF circle fit and curve fit, residual terms; from memory).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace

import numpy as np
from scipy import signal, stats
from scipy.optimize import least_squares
from scipy.signal import find_peaks

from trueturn.dsp.units import UNITS

#: width of one speed bin, as a fraction of the speed (log-spaced bins): fine enough that a
#: resonance with 5 % damping (half-power band 10 % wide) spans about 20 bins
BIN_FRACTION = 0.005
#: a capture is a sweep when its fastest good revolution is at least this much faster than
#: its slowest (a steady run wanders by well under 1 %; common practice, no source)
MIN_SWEEP_RATIO = 1.3
#: and when it gives at least this many points (the issue's ">= 20 points" on a coast-down)
MIN_SWEEP_POINTS = 10
#: a point's 1x is used for resonances and slopes only when its amplitude is at least this
#: many times its 95 % circle (phase then known within +/-30 degrees): below that the
#: normalised response (divided by up to n^4) is noise
MIN_SIGNAL_TO_CIRCLE = 2.0
#: half-power: a peak must stand at least sqrt(2) above the valleys on both sides
HALF_POWER_LOG = 0.5 * math.log(2.0)
#: the damping is given only when the half-power band holds this many measured points
MIN_POINTS_IN_BAND = 3
#: a single-degree-of-freedom resonance turns the phase by 90 degrees between its half-power
#: points (180 through the whole resonance); a peak whose phase turns by less than half that
#: across its band is two modes' responses adding up, not a resonance, and is not reported
MIN_PHASE_TURN_DEG = 45.0
#: 95 % radius of a circular normal scatter, in standard deviations per component:
#: sqrt(-2 ln 0.05) (Rayleigh quantile)
CIRCLE_95_PER_SIGMA = math.sqrt(-2.0 * math.log(0.05))
#: local slope: points within this fraction below/above the speed are fitted, and the
#: exponent is refused when its standard error is above MAX_SLOPE_SE (0.15: at 0.5 % speed
#: apart that leaves under 0.1 % error in the normalised amplitude)
SLOPE_WINDOW_FRACTION = 0.08
MIN_SLOPE_POINTS = 3
MAX_SLOPE_SE = 0.15

#: what the normalisation divides by, per quantity of the reading's unit: force ~ n^2 times
#: the pickup's own omega^k (volts: an accelerometer's output, as acceleration)
NORMALISING_POWER = {"volts": 4, "acceleration": 4, "velocity": 3, "displacement": 2}


@dataclass(frozen=True)
class SweepValue:
    """One pickup's 1x at one sweep point: amplitude (the sweep's unit), phase (degrees,
    lag after the tach edge, :mod:`trueturn.angles`), 95 % circle radius (unit)."""

    name: str
    amplitude: float
    phase_deg: float
    confidence_radius: float

    @property
    def usable(self) -> bool:
        """Whether the 1x stands clear of its circle (:data:`MIN_SIGNAL_TO_CIRCLE`)."""
        return self.amplitude >= MIN_SIGNAL_TO_CIRCLE * self.confidence_radius


@dataclass(frozen=True)
class SweepPoint:
    """The mean speed (rpm) of one speed bin, the revolutions in it and each pickup's 1x."""

    speed_rpm: float
    revolutions: int
    pickups: tuple[SweepValue, ...]

    def value(self, name: str) -> SweepValue | None:
        """One pickup's 1x at this point.

        Parameters
        ----------
        name : str
            The pickup's name.

        Returns
        -------
        SweepValue or None
            Its value, or None when the point has no such pickup.

        References
        ----------
        .. [1] Lookup only; common practice, no source.
        """
        return next((v for v in self.pickups if v.name == name), None)


@dataclass(frozen=True)
class Resonance:
    """A support resonance found at one pickup.

    ``speed_rpm`` the peak of the normalised response (half-power method), replaced by
    the fit's natural speed when :func:`analyse_sweep` resolves the mode (``peak_rpm``
    keeps the peak); the band
    ``lower_rpm``..``upper_rpm`` where it falls to ``1/sqrt(2)`` (None when fewer than
    :data:`MIN_POINTS_IN_BAND` points lie in it or an edge is outside the sweep);
    ``points_in_band`` the measured points inside; ``peak_ratio`` how far the peak stands
    above the lower of its two valleys (amplitude ratio). ``damping_ratio`` and ``method``:
    from :func:`half_power_resonances` alone the half-power damping (``"half_power"``);
    from :func:`analyse_sweep` the SDOF fit's (``"sdof_fit"``, :func:`fit_sdof_response`)
    with its 95 % interval ``damping_ratio_95``, None ("not resolved") when the fit cannot
    tell it within :data:`MAX_DAMPING_FACTOR_95`.
    """

    speed_rpm: float
    pickup: str
    damping_ratio: float | None
    lower_rpm: float | None
    upper_rpm: float | None
    points_in_band: int
    peak_ratio: float
    method: str = "half_power"
    #: the single-degree-of-freedom fit (:func:`fit_sdof_response`): natural speed (rpm)
    #: and damping, None when it failed or did not resolve the damping
    fit_speed_rpm: float | None = None
    fit_damping_ratio: float | None = None
    #: True: one mode explains the peak (the fit agrees); False: it does not (two or more
    #: modes close together), so no damping is given; None: too few points to tell
    single_mode: bool | None = None
    #: the damping's 95 % interval (low, high), given with every damping of the fit
    damping_ratio_95: tuple[float, float] | None = None
    #: the half-power method's own damping (the cross-check; None: fewer than
    #: :data:`MIN_POINTS_IN_BAND` points in its band, or an edge outside the sweep)
    half_power_damping_ratio: float | None = None
    #: the fit's model: True the swept response (build-up and lag of a fast sweep,
    #: :func:`swept_mode_response`), False the steady one; None without a damping
    swept: bool | None = None
    #: the observed peak of the normalised response, rpm (``speed_rpm`` is the fitted
    #: natural speed when a fit resolved the mode; a swept peak lies after the mode)
    peak_rpm: float | None = None
    #: the sweep-rate parameter ``|d omega/dt| / (zeta omega_n)^2`` of the swept fit
    #: (Lewis 1932), when that fit was taken
    sweep_rate_parameter: float | None = None


@dataclass(frozen=True)
class SpeedSlope:
    """The local response slope at ``speed_rpm`` at one pickup: ``amplitude_exponent``
    ``p = d ln|H| / d ln n`` (1x ~ n^p nearby) and ``phase_deg_per_ln_speed``
    ``q = d phi / d ln n`` (phase lag in degrees; the phase at ``n2`` is about
    ``phi(n1) + q ln(n2/n1)``), each with its standard error, from ``points`` sweep points."""

    pickup: str
    speed_rpm: float
    amplitude_exponent: float
    phase_deg_per_ln_speed: float
    points: int
    amplitude_exponent_se: float = 0.0
    phase_deg_per_ln_speed_se: float = 0.0


@dataclass(frozen=True)
class Sweep:
    """A sweep: its unit, points (slowest first), resonances, and whether it is one.

    ``is_sweep`` False: the capture's speed did not change enough (``low_rpm``/``high_rpm``
    say how much it did); the points are still given, no resonance is looked for.
    """

    unit: str
    points: tuple[SweepPoint, ...]
    resonances: tuple[Resonance, ...]
    low_rpm: float
    high_rpm: float
    is_sweep: bool


def bin_revolutions(speeds_rpm: np.ndarray, phasors: Mapping[str, np.ndarray],
                    sigmas: Mapping[str, np.ndarray], unit: str = "V pk",
                    bin_fraction: float = BIN_FRACTION) -> tuple[SweepPoint, ...]:
    """Average per-revolution 1x phasors on a logarithmic speed grid.

    Parameters
    ----------
    speeds_rpm : numpy.ndarray
        Each revolution's mean speed, rpm, shape (R,).
    phasors : mapping of str to numpy.ndarray
        Per pickup name, each revolution's 1x phasor (complex, shape (R,)), in ``unit``.
    sigmas : mapping of str to numpy.ndarray
        Per pickup name, each revolution's standard error per component (unit), shape (R,).
    unit : str, default "V pk"
        The unit of the phasors (a key of :data:`trueturn.dsp.units.UNITS`).
    bin_fraction : float, default 0.005
        Width of a speed bin as a fraction of the speed.

    Returns
    -------
    tuple of SweepPoint
        One per non-empty bin, slowest first: mean speed, revolutions, and per pickup the
        mean phasor's amplitude, phase and 95 % circle (``2.45 sqrt(sum sigma^2) / n``).

    Raises
    ------
    ValueError
        When the arrays' lengths differ, ``bin_fraction`` is not positive, a speed is not
        positive and finite, or ``unit`` is unknown.

    References
    ----------
    .. [1] Tach-synchronous (order-tracked) 1x per revolution averaged over a speed bin:
       common practice of run-up/coast-down (Bode) measurement, no source.
    .. [2] 95 % radius of a circular normal scatter, ``sigma sqrt(-2 ln 0.05)`` (Rayleigh
       distribution quantile; from memory).
    """
    speeds = np.asarray(speeds_rpm, dtype=float)
    if not bin_fraction > 0:
        raise ValueError(f"bin_fraction must be positive, got {bin_fraction!r}")
    if unit not in UNITS:
        raise ValueError(f"unknown unit {unit!r}")
    if speeds.size and not (np.isfinite(speeds).all() and (speeds > 0).all()):
        raise ValueError("speeds_rpm must be positive and finite")
    for name in phasors:
        if len(phasors[name]) != speeds.size or len(sigmas[name]) != speeds.size:
            raise ValueError(f"pickup {name!r}: phasors and sigmas need one value per speed")
    if not speeds.size:
        return ()
    index = np.floor(np.log(speeds) / math.log1p(bin_fraction)).astype(np.int64)
    points = []
    for b in np.unique(index):
        sel = index == b
        n = int(sel.sum())
        values = []
        for name in phasors:
            mean = complex(np.asarray(phasors[name])[sel].mean())
            sigma = math.sqrt(float(np.sum(np.asarray(sigmas[name])[sel] ** 2))) / n
            values.append(SweepValue(name, abs(mean),
                                     math.degrees(math.atan2(mean.imag, mean.real)) % 360.0,
                                     CIRCLE_95_PER_SIGMA * sigma))
        points.append(SweepPoint(float(speeds[sel].mean()), n, tuple(values)))
    return tuple(points)


def normalised_response(speeds_rpm: np.ndarray, amplitudes: np.ndarray,
                        unit: str) -> np.ndarray:
    """The 1x per unit unbalance force, up to a constant: ``|R| / n^k``.

    ``k`` is 2 for the force (``m e omega^2``) plus the pickup's own power of omega:
    4 for acceleration (and volts, taken as an accelerometer's output), 3 for velocity,
    2 for displacement (:data:`NORMALISING_POWER`).

    Parameters
    ----------
    speeds_rpm : numpy.ndarray
        Speeds, rpm.
    amplitudes : numpy.ndarray
        1x amplitudes in ``unit``.
    unit : str
        A key of :data:`trueturn.dsp.units.UNITS`.

    Returns
    -------
    numpy.ndarray
        ``amplitudes / (speeds_rpm / 1000) ** k`` (the 1000 keeps the numbers readable).

    References
    ----------
    .. [1] S. S. Rao, *Mechanical Vibrations*, rotating unbalance: ``X = m e omega^2 /
       sqrt((k - M omega^2)^2 + (c omega)^2)`` (from memory).
    """
    if unit not in UNITS:
        raise ValueError(f"unknown unit {unit!r}")
    power = NORMALISING_POWER[UNITS[unit][0]]
    return np.asarray(amplitudes, dtype=float) / (np.asarray(speeds_rpm, dtype=float)
                                                  / 1000.0) ** power


def half_power_resonances(speeds_rpm: np.ndarray, response: np.ndarray,
                          pickup: str = "", phases_deg: np.ndarray | None = None
                          ) -> list[Resonance]:
    """Resonances of a normalised response by the half-power bandwidth method.

    A peak counts when it stands at least ``sqrt(2)`` above the lowest point between it
    and a higher peak (or the end of the data) on both sides (its prominence, found with
    :func:`scipy.signal.find_peaks` on ``ln response``). Its speed is the vertex of the
    parabola through the peak point and its two neighbours (``ln response`` against
    ``ln n``); the half-power speeds ``n1``, ``n2`` are where ``ln response`` falls
    ``ln sqrt(2)`` below that vertex, linearly interpolated between the measured points;
    ``zeta = (n2^2 - n1^2) / (4 nr^2)``.

    Parameters
    ----------
    speeds_rpm : numpy.ndarray
        Speeds of the usable points, rpm, increasing.
    response : numpy.ndarray
        The normalised response there (:func:`normalised_response`), positive.
    pickup : str, default ""
        The pickup's name, carried into each :class:`Resonance`.
    phases_deg : numpy.ndarray or None, default None
        The 1x phase at each point, degrees. When given, a peak whose phase turns by less
        than :data:`MIN_PHASE_TURN_DEG` between its half-power points (or, when the band is
        not resolved, between the points either side of the peak) is left out.

    Returns
    -------
    list of Resonance
        Slowest first; damping None when the band holds fewer than
        :data:`MIN_POINTS_IN_BAND` points.

    Raises
    ------
    ValueError
        When the speeds do not increase or the response is not positive and finite.

    References
    ----------
    .. [1] D. J. Ewins, *Modal Testing: Theory, Practice and Application*, 2nd ed., 2000,
       sec. 4.2, peak-amplitude (half-power) method: ``eta_r = (omega_b^2 - omega_a^2) /
       (2 omega_r^2)``, ``zeta = eta / 2`` (from memory).
    .. [2] S. S. Rao, *Mechanical Vibrations*, quality factor and bandwidth:
       ``Q = 1 / (2 zeta) ~ omega_n / (omega_2 - omega_1)`` (from memory).
    """
    n = np.asarray(speeds_rpm, dtype=float)
    r = np.asarray(response, dtype=float)
    if n.size != r.size:
        raise ValueError("speeds_rpm and response need the same length")
    if n.size < 3:
        return []
    if not (np.all(np.diff(n) > 0) and np.isfinite(r).all() and (r > 0).all()):
        raise ValueError("speeds must increase and the response must be positive and finite")
    log_r = np.log(r)
    log_n = np.log(n)
    peaks, props = find_peaks(log_r, prominence=HALF_POWER_LOG)
    out = []
    for k, i in enumerate(peaks):
        top_log_n, top = _vertex(log_n[i - 1:i + 2], log_r[i - 1:i + 2])
        level = top - HALF_POWER_LOG
        lower = _crossing(log_n, log_r, i, level, -1)
        upper = _crossing(log_n, log_r, i, level, +1)
        speed = math.exp(top_log_n)
        inside = 0
        zeta = None
        if lower is not None and upper is not None:
            inside = int(np.count_nonzero((log_n >= lower) & (log_n <= upper)))
            if inside >= MIN_POINTS_IN_BAND:
                zeta = (math.exp(2 * upper) - math.exp(2 * lower)) / (4.0 * speed * speed)
        if phases_deg is not None:
            unwrapped = np.degrees(np.unwrap(np.radians(np.asarray(phases_deg, dtype=float))))
            if zeta is not None and lower is not None and upper is not None:
                turn = float(np.interp(upper, log_n, unwrapped) - np.interp(lower, log_n,
                                                                             unwrapped))
            else:
                turn = float(unwrapped[min(i + 1, len(n) - 1)] - unwrapped[i - 1])
            if abs(turn) < MIN_PHASE_TURN_DEG:
                continue
        out.append(Resonance(
            speed_rpm=speed, pickup=pickup, damping_ratio=zeta,
            lower_rpm=math.exp(lower) if zeta is not None and lower is not None else None,
            upper_rpm=math.exp(upper) if zeta is not None and upper is not None else None,
            points_in_band=inside, peak_ratio=math.exp(float(props["prominences"][k]))))
    return out


#: the SDOF fit uses the revolutions within this factor of the resonance speed
FIT_SPAN = 1.1
MIN_FIT_POINTS = 5
#: and is kept when its RMS misfit is at most this fraction of the largest response fitted:
#: a lone mode of the virtual grinder misses by 3-4 % (its neighbours within 20 % and its
#: mild nonlinearity), two equal Rao modes 10 % apart by 8 % (measured here; our choice)
MAX_FIT_RESIDUAL = 0.05
#: the fit's natural speed must lie within this fraction of the half-power peak; otherwise
#: the peak is two or more modes together and no damping is given for it
MAX_FIT_PEAK_GAP = 0.05
#: and its misfit at most this many times the points' own noise (the square root of the
#: reduced chi-square): a lone mode of the virtual grinder and shop fan misses by 2-5 times
#: (its neighbours, its nonlinearity), two equal Rao modes 10 % apart with little noise by
#: thousands of times (measured here; our choice)
MAX_NOISE_SCALE = 10.0
#: the damping is given (resolved) only when its 95 % interval lies within this factor of
#: the estimate on both sides (0.67x ... 1.5x); a wider interval is "not resolved" (our
#: choice: a damping known only within a factor of 1.5 moves a model's response near the
#: resonance by as much, more than the model's other uncertainties)
MAX_DAMPING_FACTOR_95 = 1.5
#: the model's own error in the damping, a factor either side of the estimate, added in
#: quadrature to the noise's (never hidden by a small noise): one mode with steady residual
#: terms is a model of a rotor, whose natural frequency moves with speed (gyroscopic terms;
#: the damping its unbalance response shows differs from the modal ``-Re(s)/|s|`` by
#: ``1/(1 - d omega_n / d Omega)``), on mountings whose stiffness depends a little on the
#: amplitude, read through per-revolution 1x values that average a fast-changing response.
#: Measured here on the virtual grinder's stiff variant (3000 rpm, 0.83 %): the SDOF fit of
#: the model's exact steady response reads 0.8 % low when linear, 4.9 % low with the
#: scenario's amplitude-dependent gain; coast-downs of the linear, hum-free variant read
#: 2.5-3.7 % low (the per-revolution 1x at 645 rpm/s); so up to about 8 % (our choice)
DAMPING_MODEL_FACTOR = 1.08
#: the lag-one correlation of the fit's residuals taken at most this (the interval then
#: 6.2x wider than the noise alone would make it)
MAX_RESIDUAL_CORRELATION = 0.95
#: Gauss-Legendre nodes for the mean of the response across one revolution's speed change
REVOLUTION_NODES = 16
#: the method's name in results and JSON
SDOF_FIT_METHOD = "sdof_fit"
#: time steps per revolution when the swept (transient) response is computed
SWEPT_SAMPLES_PER_REV = 64
#: the swept model's history starts where the speed came within this factor of the mode
#: (the build-up before it; not further, where the next mode's own build-up, which the
#: steady residual terms do not model, begins to show: 1.3 reached into it on the grinder)
LEAD_SPAN = 1.2
#: and runs on until the speed left this factor of it (the lagged peak, about
#: ``Lambda zeta`` after the mode, and the ringing, which holds the decay ``zeta omega_n``)
TRAIL_SPAN = 1.5
#: the fit's natural speed may lie this far from the half-power peak (a fast sweep's peak
#: lags the mode by several percent)
FIT_SPEED_RANGE = 1.2
#: the steady and the swept model are told apart when the misfit of one (over the points'
#: noise, :attr:`SdofFit.noise_scale`, at least 1) is at least this many times the
#: other's (our choice; on the simulator's steady coast-downs the swept model misses by
#: far more, on a real fast sweep the steady one does)
MODEL_CHOICE_RATIO = 1.5
#: the swept model's window is re-centred on its fitted mode at most this many times, and
#: stops when the mode moves less than this fraction
SWEPT_ITERATIONS = 4
SWEPT_CENTRE_TOLERANCE = 0.005
#: a sweep is fast when the speed moves at least this many half-power half-widths
#: ``zeta omega_n`` in one build-up time ``1 / (zeta omega_n)`` (the sweep-rate parameter
#: ``|d omega/dt| / (zeta omega_n)^2``; Lewis 1932, from memory): then the peak lags the
#: mode by about that many half-widths and a steady model misreads it (our threshold:
#: at 1 the lag is a whole half-width)
FAST_SWEEP_PARAMETER = 1.0
#: two fits whose natural speeds agree within this fraction found the same mode
SAME_MODE_FRACTION = 0.02


@dataclass(frozen=True)
class SdofFit:
    """A single-degree-of-freedom fit to a complex response (:func:`fit_sdof_response`).

    ``speed_rpm`` the natural speed and ``damping_ratio`` zeta, each with its 95 % interval
    (``*_95``, low and high); ``points`` fitted; ``misfit`` the RMS misfit over the largest
    response fitted; ``noise_scale`` the square root of the reduced chi-square (how much
    larger than the points' own noise the misfit is; the intervals are widened by it when
    above 1); ``chi2`` and ``dof`` the chi-square and its degrees of freedom.
    """

    speed_rpm: float
    damping_ratio: float
    speed_rpm_95: tuple[float, float]
    damping_ratio_95: tuple[float, float]
    points: int
    misfit: float
    noise_scale: float
    chi2: float = 0.0
    dof: int = 1

    @property
    def damping_resolved(self) -> bool:
        """Whether the damping's 95 % interval lies within :data:`MAX_DAMPING_FACTOR_95` of
        the estimate on both sides."""
        low, high = self.damping_ratio_95
        return (low * MAX_DAMPING_FACTOR_95 >= self.damping_ratio
                and high <= MAX_DAMPING_FACTOR_95 * self.damping_ratio)


def swept_mode_response(natural_rpm: float, zeta: float, history_rpm: np.ndarray,
                        power: int = 0, samples_per_rev: int = SWEPT_SAMPLES_PER_REV,
                        sensed_power: int | None = None) -> np.ndarray:
    """One SDOF mode's per-revolution 1x through a sweep, build-up and lag included.

    The modal equation ``x'' + 2 zeta wn x' + wn^2 x = wn^2 (w / wn)^2 e^{i theta(t)}``
    (a rotating unbalance force on an isotropic support) is driven along the speed history:
    consecutive revolutions of mean speeds ``history_rpm`` (oldest first, each lasting
    ``60 / n`` s), the speed linear between the revolutions' middles. It is solved on a
    uniform time grid by the bilinear transform prewarped at ``wn`` (:func:`scipy.signal.
    lfilter`, its coefficients in closed form by :func:`bilinear_sdof`; the grid and
    ``e^{i theta}`` computed once per history), starting from the steady response at the
    first revolution's speed. Each
    revolution's 1x is the mean of what the pickup senses (``x``, ``x'`` or ``x''``, the
    ringing at the mode's own frequency included) times ``e^{-i theta}`` over the
    revolution, brought back to a displacement as a steady reading is (divided by
    ``(i w_i)^k``, as the meter converts units at the revolution's speed), divided by
    ``(w_i / wn)^2``: for a slow sweep it tends to the steady
    ``nn^2 / (nn^2 - n^2 + 2 i zeta nn n)``.

    Parameters
    ----------
    natural_rpm : float
        The mode's natural speed, rpm.
    zeta : float
        Its damping ratio.
    history_rpm : numpy.ndarray
        Consecutive revolutions' mean speeds, rpm, oldest first.
    power : int, default 0
        The normalisation's power of speed (:data:`NORMALISING_POWER`).
    samples_per_rev : int, default 64
        Time steps per (fastest) revolution.
    sensed_power : int or None, default None
        What the pickup senses, as a power of :data:`NORMALISING_POWER` (4: an
        accelerometer, whatever unit its readings were converted to); None: the unit's own
        quantity (``power``).

    Returns
    -------
    numpy.ndarray
        Complex, one per revolution of ``history_rpm``.

    References
    ----------
    .. [1] F. M. Lewis, "Vibration during acceleration through a critical speed", Trans.
       ASME 54, 1932 (the lag and lowered peak of a swept resonance; from memory).
    .. [2] A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal Processing*, bilinear
       transformation with frequency prewarping (from memory).
    """
    grid = _swept_grid(np.asarray(history_rpm, dtype=float), samples_per_rev)
    dt, w, turn = grid.dt_s, grid.speed_rad_s, grid.turn
    wn = natural_rpm * math.pi / 30.0
    b, a = bilinear_sdof(wn, zeta, dt)
    force = (w / wn) ** 2 * turn
    # steady state of the transposed direct form before the first sample (input z0^k)
    z0 = complex(np.exp(1j * w[0] * dt))
    gain = complex(np.polyval(b[::-1], 1 / z0) / np.polyval(a[::-1], 1 / z0))
    u1, u2 = force[0] / z0, force[0] / (z0 * z0)
    s2 = b[2] * u1 - a[2] * gain * u1
    s1 = b[1] * u1 - a[1] * gain * u1 + b[2] * u2 - a[2] * gain * u2
    x = signal.lfilter(b, a, force, zi=np.array([s1, s2]))[0]
    # what the pickup reads: displacement, velocity or acceleration of the motion itself
    # (ringing at the mode's own frequency included), scaled as a steady reading's
    # ``(i w_rev)^k x`` so that it tends to the displacement's 1x when steady
    own = max((power if sensed_power is None else sensed_power) - 2, 0)
    reading = x
    if own >= 1:
        velocity = np.gradient(x, dt)
        reading = velocity / (1j * grid.rev_speed_rad_s)
        if own >= 2:
            accel = wn * wn * force - 2.0 * zeta * wn * velocity - wn * wn * x
            reading = accel / (-(grid.rev_speed_rad_s ** 2))
    demod = reading * grid.unturn
    revs = grid.w_rev.size
    mean = (np.bincount(grid.rev, demod.real, revs) + 1j * np.bincount(grid.rev, demod.imag,
                                                                        revs)) / grid.count
    return mean / (grid.w_rev / wn) ** 2


def bilinear_sdof(natural_rad_s: float, zeta: float, dt_s: float
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Digital filter of ``wn^2 / (s^2 + 2 zeta wn s + wn^2)`` by the bilinear transform
    prewarped at ``wn``, in closed form.

    With ``c = 2 / dt`` and the prewarped ``W = c tan(wn dt / 2)`` (the digital resonance
    then lies at ``wn`` exactly), substituting ``s = c (1 - z^-1) / (1 + z^-1)`` into
    ``wn^2 / (s^2 + 2 zeta W s + W^2)`` gives
    ``b = wn^2 [1, 2, 1]``, ``a = [c^2 + 2 zeta W c + W^2, 2 (W^2 - c^2),
    c^2 - 2 zeta W c + W^2]``, both divided by ``a[0]``: the coefficients
    :func:`scipy.signal.bilinear` computes with polynomial algebra, here with a few
    multiplications.

    Parameters
    ----------
    natural_rad_s : float
        The mode's natural frequency ``wn``, rad/s.
    zeta : float
        Its damping ratio.
    dt_s : float
        The time step, s.

    Returns
    -------
    tuple of numpy.ndarray
        ``(b, a)`` for :func:`scipy.signal.lfilter`, ``a[0] = 1``.

    References
    ----------
    .. [1] A. V. Oppenheim, R. W. Schafer, *Discrete-Time Signal Processing*, the bilinear
       transformation and frequency prewarping (from memory).
    """
    c = 2.0 / dt_s
    warped = c * math.tan(natural_rad_s * dt_s / 2.0)
    damp = 2.0 * zeta * warped * c
    a0 = c * c + damp + warped * warped
    b = np.array([1.0, 2.0, 1.0]) * (natural_rad_s * natural_rad_s / a0)
    a = np.array([1.0, 2.0 * (warped * warped - c * c) / a0,
                  (c * c - damp + warped * warped) / a0])
    return b, a


@dataclass(frozen=True)
class _SweptGrid:
    """The uniform time grid of a speed history (:func:`swept_mode_response`): step, the
    shaft's speed and ``e^{i theta}`` / ``e^{-i theta}`` at each step, its revolution, the
    steps per revolution, the revolutions' speeds (rad/s) and that speed at each step."""

    dt_s: float
    speed_rad_s: np.ndarray
    turn: np.ndarray
    unturn: np.ndarray
    rev: np.ndarray
    count: np.ndarray
    w_rev: np.ndarray
    rev_speed_rad_s: np.ndarray


#: the last few speed histories' grids: one fit asks for the same history hundreds of times
_GRID_CACHE: dict[tuple[bytes, int], _SweptGrid] = {}
_GRID_CACHE_SIZE = 4


def _swept_grid(n: np.ndarray, samples_per_rev: int) -> _SweptGrid:
    """The time grid of consecutive revolutions of mean speeds ``n`` (rpm), each lasting
    ``60 / n`` s, the speed linear between the revolutions' middles (cached)."""
    key = (n.tobytes(), int(samples_per_rev))
    cached = _GRID_CACHE.get(key)
    if cached is not None:
        return cached
    w_rev = n * (math.pi / 30.0)
    durations = 60.0 / n
    ends = np.cumsum(durations)
    mids = ends - 0.5 * durations
    dt = float(durations.min()) / samples_per_rev
    t = np.arange(0.0, float(ends[-1]), dt)
    w = np.interp(t, mids, w_rev)
    theta = np.concatenate([[0.0], np.cumsum(0.5 * (w[1:] + w[:-1]) * dt)])
    rev = np.minimum(np.searchsorted(ends, t, side="right"), n.size - 1)
    turn = np.exp(1j * theta)
    grid = _SweptGrid(dt, w, turn, np.conj(turn), rev,
                      np.maximum(np.bincount(rev, minlength=n.size), 1), w_rev, w_rev[rev])
    if len(_GRID_CACHE) >= _GRID_CACHE_SIZE:
        _GRID_CACHE.pop(next(iter(_GRID_CACHE)))
    _GRID_CACHE[key] = grid
    return grid


def fit_sdof_response(speeds_rpm: np.ndarray, response: np.ndarray, sigmas: np.ndarray,
                      guess_rpm: float, guess_zeta: float = 0.05,
                      spans_rpm: np.ndarray | None = None, power: int = 0,
                      history_rpm: np.ndarray | None = None,
                      history_index: np.ndarray | None = None,
                      screen: bool = True,
                      sensed_power: int | None = None) -> SdofFit | None:
    """Least-squares fit of one SDOF mode with residual terms to a complex response.

    Model (receptance of one mode plus the other modes' residual terms, in rpm):
    ``z(n) = A nn^2 / (nn^2 - n^2 + 2 i zeta nn n) + B + C (nn / n)^2 + D (n / nn)^2`` with
    complex ``A`` (the mode), ``B + D (n / nn)^2`` (stiffness-like residual of the modes
    above, to second order in speed) and ``C`` (mass-like residual of the modes below)
    [1]_. Amplitude *and* phase are fitted, so a resonance
    passed in a few points is still resolved. For given ``nn`` and ``zeta`` the complex
    constants are linear and solved exactly (variable projection [2]_); ``nn`` and
    ``ln zeta`` by :func:`scipy.optimize.least_squares`, each point weighted by
    ``1 / sigma``.

    A point that is one revolution of a sweep is the mean of the response across the
    revolution's speed change (``spans_rpm``; the per-revolution 1x fit averages it): the
    model is averaged alike (Gauss-Legendre, :data:`REVOLUTION_NODES` nodes), the raw reading
    being ``n^power`` times the normalised response. On a fast coast-down one revolution
    can span the whole half-power band of a lightly damped mode; the half-power method then
    reads the band too wide.

    The uncertainty: the covariance of ``(nn, ln zeta)`` from the fit's Jacobian,
    ``s^2 (J^T J)^-1``, with ``s^2`` the reduced chi-square when above 1 (a misfit larger
    than the noise widens the interval), times ``(1 + rho) / (1 - rho)`` when consecutive
    residuals correlate (``rho`` at lag one: a misfit that runs smoothly along the points,
    e.g. a neighbouring mode's skirt, is the model's error and tells less than noise would
    [4]_), and Student's t with the fit's degrees of freedom [3]_; the 95 % interval of
    ``zeta`` is ``exp(ln zeta +/- h)`` with ``h = hypot(t se, ln DAMPING_MODEL_FACTOR)``
    (the model's own error, :data:`DAMPING_MODEL_FACTOR`, added in quadrature).

    Parameters
    ----------
    speeds_rpm : numpy.ndarray
        Speeds of the points, rpm (each revolution's mean speed).
    response : numpy.ndarray
        The complex response per unit unbalance force there (standard ``e^{i omega t}``
        convention: the conjugate of a project phasor, divided by the speed's power).
    sigmas : numpy.ndarray
        Each point's standard error per component, same unit.
    guess_rpm : float
        Start for ``nn`` (the half-power peak), rpm; ``nn`` stays within 20 % of it.
    guess_zeta : float, default 0.05
        Start for ``zeta`` (kept within 0.001...0.5).
    spans_rpm : numpy.ndarray or None, default None
        Each point's speed change across its revolution, rpm; None or 0: a point sample
        (a steady reading at that speed).
    power : int, default 0
        The normalisation's power of speed (:data:`NORMALISING_POWER`): the reading is
        ``n^power`` times the response, which weighs the mean across a revolution.
    history_rpm, history_index : numpy.ndarray or None, default None
        When given, the mode's term is the swept response (build-up and lag,
        :func:`swept_mode_response`) along ``history_rpm`` (consecutive revolutions, oldest
        first), the points being its revolutions ``history_index``; the residual terms stay
        steady.
    screen : bool, default True
        Refuse a fit that misfits (above :data:`MAX_FIT_RESIDUAL` or
        :data:`MAX_NOISE_SCALE`); False keeps it (a step towards where to fit, not a result).
    sensed_power : int or None, default None
        What the pickup senses (:func:`swept_mode_response`); None: the unit's quantity.

    Returns
    -------
    SdofFit or None
        None with fewer than :data:`MIN_FIT_POINTS` points or too few for the parameters,
        no convergence, an RMS misfit above :data:`MAX_FIT_RESIDUAL` (5 %) of the largest
        response or above :data:`MAX_NOISE_SCALE` times the points' noise (not one mode).

    References
    ----------
    .. [1] D. J. Ewins, *Modal Testing: Theory, Practice and Application*, 2nd ed., 2000,
       sec. 4.3-4.4 (SDOF modal analysis: circle fit and curve fit; residual terms, the
       mass-like ``-1 / (omega^2 M_R)`` and stiffness-like ``1 / K_R``) (from memory).
    .. [2] G. H. Golub, V. Pereyra, "The differentiation of pseudo-inverses and nonlinear
       least squares problems whose variables separate", SIAM J. Numer. Anal. 10(2), 1973
       (variable projection; from memory).
    .. [3] W. H. Press et al., *Numerical Recipes*, 3rd ed., 2007, sec. 15.5-15.6 (the
       covariance of a nonlinear least-squares fit; confidence limits) (from memory).
    .. [4] D. S. Wilks, *Statistical Methods in the Atmospheric Sciences*, the effective
       sample size of an AR(1) series, ``n (1 - rho) / (1 + rho)`` (from memory).
    """
    n = np.asarray(speeds_rpm, dtype=float)
    z = np.asarray(response, dtype=complex)
    if n.size < MIN_FIT_POINTS or not guess_rpm > 0 or z.size != n.size:
        return None
    sig = np.maximum(np.asarray(sigmas, dtype=float),
                     1e-12 * float(np.abs(z).max(initial=1.0)))
    w = 1.0 / sig
    spans = np.zeros(n.size) if spans_rpm is None else np.abs(np.asarray(spans_rpm, float))
    nodes, weights = np.polynomial.legendre.leggauss(REVOLUTION_NODES)
    # each point's speeds across its revolution (rows) and the reading's weight there
    at = n[:, None] + 0.5 * spans[:, None] * nodes[None, :]
    at = np.maximum(at, 1e-3 * n[:, None])
    lift = (at / n[:, None]) ** power * (0.5 * weights[None, :])
    scale = guess_rpm
    linear = 4  # complex A, B, C, D
    dof = 2 * n.size - 2 - 2 * linear
    if dof < 1:
        return None

    def design(params: np.ndarray) -> np.ndarray:
        nn, zeta = params[0] * scale, math.exp(params[1])
        if history_rpm is None or history_index is None:
            mode = np.sum(lift * (nn * nn / (nn * nn - at * at + 2j * zeta * nn * at)), axis=1)
        else:
            mode = swept_mode_response(nn, zeta, history_rpm, power,
                                       sensed_power=sensed_power)[history_index]
        return np.stack([mode, np.sum(lift, axis=1).astype(complex),
                         np.sum(lift * (nn / at) ** 2, axis=1).astype(complex),
                         np.sum(lift * (at / nn) ** 2, axis=1).astype(complex)], axis=1)

    def misfit(params: np.ndarray) -> np.ndarray:
        m = design(params) * w[:, None]
        coef = np.linalg.lstsq(m, z * w, rcond=None)[0]
        r = m @ coef - z * w
        return np.concatenate([r.real, r.imag])

    low_zeta, high_zeta = math.log(0.001), math.log(0.5)
    start = np.array([1.0, min(max(math.log(max(guess_zeta, 1e-6)), low_zeta + 0.5),
                               high_zeta - 0.5)])
    try:
        fit = least_squares(misfit, start, bounds=([1 / FIT_SPEED_RANGE, low_zeta],
                                                   [FIT_SPEED_RANGE, high_zeta]),
                            x_scale=[0.01, 0.3])
    except (ValueError, np.linalg.LinAlgError):
        return None
    if not fit.success:
        return None
    coef = np.linalg.lstsq(design(fit.x) * w[:, None], z * w, rcond=None)[0]
    rms = float(np.sqrt(np.mean(np.abs(design(fit.x) @ coef - z) ** 2)))
    if screen and rms > MAX_FIT_RESIDUAL * float(np.abs(z).max()):
        return None
    chi2 = float(2.0 * fit.cost) / dof
    if screen and chi2 > MAX_NOISE_SCALE ** 2:
        return None
    jac = np.asarray(fit.jac, dtype=float)
    # a misfit that runs smoothly from point to point is the model's error, not noise: the
    # points tell less than their number says (effective number n (1 - rho) / (1 + rho))
    inflation = max(chi2, 1.0) * _correlation_inflation(fit.fun[:n.size]
                                                         + 1j * fit.fun[n.size:])
    try:
        cov = np.linalg.inv(jac.T @ jac) * inflation
    except np.linalg.LinAlgError:
        return None
    if not (np.isfinite(cov).all() and cov[0, 0] >= 0 and cov[1, 1] >= 0):
        return None
    t95 = float(stats.t.ppf(0.975, dof))
    nn = float(fit.x[0] * scale)
    nn_half = t95 * math.sqrt(float(cov[0, 0])) * scale
    zeta = math.exp(float(fit.x[1]))
    # plus what one mode can tell of a rotor (DAMPING_MODEL_FACTOR), added in quadrature:
    # the model's error does not shrink with the noise, nor does the noise's with it
    zeta_factor = math.exp(math.hypot(t95 * math.sqrt(float(cov[1, 1])),
                                      math.log(DAMPING_MODEL_FACTOR)))
    return SdofFit(nn, zeta, (nn - nn_half, nn + nn_half), (zeta / zeta_factor,
                                                            zeta * zeta_factor),
                   int(n.size), rms / float(np.abs(z).max()), math.sqrt(chi2),
                   float(2.0 * fit.cost), dof)


def _correlation_inflation(residuals: np.ndarray) -> float:
    """How much a fit's covariance understates its error when its residuals run smoothly
    from point to point: ``(1 + rho) / (1 - rho)`` of the lag-one correlation ``rho`` of
    consecutive complex residuals (the points' effective number is ``n (1 - rho) / (1 +
    rho)``; D. S. Wilks, *Statistical Methods in the Atmospheric Sciences*, variance
    inflation of an AR(1) series, from memory); 1 when ``rho`` is not positive, ``rho``
    taken at most :data:`MAX_RESIDUAL_CORRELATION`."""
    r = np.asarray(residuals, dtype=complex)
    power = float(np.sum(np.abs(r) ** 2))
    if r.size < 3 or not power > 0:
        return 1.0
    rho = float(np.sum((r[1:] * np.conj(r[:-1])).real)) / power
    rho = min(rho, MAX_RESIDUAL_CORRELATION)
    return (1.0 + rho) / (1.0 - rho) if rho > 0 else 1.0


def sdof_fit(speeds_rpm: np.ndarray, response: np.ndarray, sigmas: np.ndarray,
             guess_rpm: float, guess_zeta: float = 0.05) -> tuple[float, float] | None:
    """Natural speed and damping ratio of point samples, by :func:`fit_sdof_response`.

    Parameters
    ----------
    speeds_rpm : numpy.ndarray
        Speeds of the points, rpm.
    response : numpy.ndarray
        The complex response per unit unbalance force (standard convention).
    sigmas : numpy.ndarray
        Each point's standard error, same unit.
    guess_rpm : float
        Start for the natural speed, rpm.
    guess_zeta : float, default 0.05
        Start for zeta.

    Returns
    -------
    tuple or None
        ``(nn_rpm, zeta)``, or None when :func:`fit_sdof_response` gives none.

    References
    ----------
    .. [1] See :func:`fit_sdof_response` (Ewins 2000, sec. 4.3-4.4).
    """
    fit = fit_sdof_response(speeds_rpm, response, sigmas, guess_rpm, guess_zeta)
    return None if fit is None else (fit.speed_rpm, fit.damping_ratio)


def _vertex(x: np.ndarray, y: np.ndarray) -> tuple[float, float]:
    """Vertex (x, y) of the parabola through three points (the middle one the highest)."""
    coef = np.polyfit(x, y, 2)
    if coef[0] >= 0:  # not a maximum (cannot happen for a strict local peak): the point
        return float(x[1]), float(y[1])
    xv = -coef[1] / (2.0 * coef[0])
    xv = min(max(xv, float(x[0])), float(x[2]))  # stays between the neighbours
    return float(xv), float(np.polyval(coef, xv))


def _crossing(x: np.ndarray, y: np.ndarray, start: int, level: float, step: int) -> float | None:
    """Where ``y`` first falls below ``level`` walking from ``start`` by ``step``, linearly
    interpolated in ``x``; None when it never does within the data."""
    a = start
    while 0 <= a + step < len(y):
        b = a + step
        if y[b] < level:
            if y[a] < level:  # the start itself is below (a vertex far above a sparse peak)
                return float(x[a])
            t = (y[a] - level) / (y[a] - y[b])
            return float(x[a] + t * (x[b] - x[a]))
        a = b
    return None


def _with_fit(res: Resonance, speeds_rpm: np.ndarray, phasors: np.ndarray,
              sigmas: np.ndarray, spans_rpm: np.ndarray | None, unit: str,
              sensed_power: int | None = None) -> Resonance:
    """The resonance with its damping from the SDOF fit (:func:`fit_sdof_response`).

    Two models are fitted. The steady one (each revolution's mean across its speed change)
    to the revolutions within :data:`FIT_SPAN` of the peak; its natural speed must lie
    within :data:`MAX_FIT_PEAK_GAP` of the peak. With revolutions (``spans_rpm`` given) the
    swept one as well (:func:`swept_mode_response`: the build-up, lag and ringing of a fast
    sweep), on a window centred on its own fitted mode, not on the peak (a swept peak lies
    after the mode in the sweep's direction): peak -> fit -> window around the fitted mode
    -> refit, up to :data:`SWEPT_ITERATIONS` times, with the history from :data:`LEAD_SPAN`
    before the window.

    The model is chosen by the physics first: when the **sweep-rate parameter**
    ``Lambda = |d omega / dt| / (zeta omega_n)^2`` of the swept fit (how many half-power
    half-widths the speed moves in one build-up time ``1 / (zeta omega_n)``; Lewis 1932)
    is at least :data:`FAST_SWEEP_PARAMETER`, a steady reading cannot hold and the swept
    model is taken, unless the steady one misfits at least :data:`MODEL_CHOICE_RATIO`
    times less (the response was steady after all). Otherwise the one with the smaller
    misfit over the noise; when the other's is less than :data:`MODEL_CHOICE_RATIO` times
    larger and their damping intervals do not overlap, the damping is not resolved.

    The resonance's ``speed_rpm`` becomes the chosen fit's natural speed (``peak_rpm``
    keeps the observed peak). The half-power damping moves to ``half_power_damping_ratio``
    (the cross-check). When no model fits, the peak is not one mode (``single_mode``
    False) and no damping is given; when the chosen fit's 95 % interval is wider than
    :data:`MAX_DAMPING_FACTOR_95` allows, or too few revolutions lie near the peak, the
    damping is not resolved (None, ``single_mode`` None: the data cannot tell)."""
    n_all = np.asarray(speeds_rpm, dtype=float)
    values = np.asarray(phasors, dtype=complex)
    sig = np.asarray(sigmas, dtype=float)
    good = np.isfinite(values) & np.isfinite(sig) & (sig > 0)
    near = (n_all >= res.speed_rpm / FIT_SPAN) & (n_all <= res.speed_rpm * FIT_SPAN) & good
    unresolved = replace(res, damping_ratio=None, method=SDOF_FIT_METHOD,
                         half_power_damping_ratio=res.damping_ratio, peak_rpm=res.speed_rpm)
    if int(near.sum()) < MIN_FIT_POINTS:
        return unresolved
    power = NORMALISING_POWER[UNITS[unit][0]]
    guess = res.damping_ratio or 0.03

    def fit_on(index: np.ndarray, swept: bool, centre_rpm: float,
               screen: bool = True) -> SdofFit | None:
        n = n_all[index]
        divide = (n / 1000.0) ** power
        # standard convention: the conjugate of the project phasor (phase = lag)
        z = np.conj(values[index]) / divide
        spans = None if spans_rpm is None else np.asarray(spans_rpm, dtype=float)[index]
        return fit_sdof_response(n, z, sig[index] / divide, centre_rpm, guess, spans, power,
                                 n if swept else None, np.arange(n.size) if swept else None,
                                 screen, sensed_power)

    steady = fit_on(np.flatnonzero(near), False, res.speed_rpm)
    if steady is not None and abs(steady.speed_rpm / res.speed_rpm - 1) > MAX_FIT_PEAK_GAP:
        steady = None
    swept = None
    rate_parameter = None
    looks_steady = False
    if spans_rpm is not None:
        # the window follows the fitted mode (its steps are not judged; the last fit is)
        centre = res.speed_rpm
        for _ in range(SWEPT_ITERATIONS):
            window = _swept_window(n_all, good, centre)
            step = None if window is None else fit_on(window, True, centre, screen=False)
            if step is None:
                break
            moved = abs(step.speed_rpm / centre - 1)
            centre = step.speed_rpm
            if moved < SWEPT_CENTRE_TOLERANCE:
                break
        window = _swept_window(n_all, good, centre)
        if window is not None:
            swept = fit_on(window, True, centre)
            loose = swept or fit_on(window, True, centre, screen=False)
            if loose is not None:
                rate_parameter = _sweep_rate_parameter(n_all, window, loose)
                # both models on the same revolutions: did the response follow the speed?
                flat = fit_on(window, False, centre, screen=False)
                looks_steady = (flat is not None and flat.noise_scale * MODEL_CHOICE_RATIO
                                < loose.noise_scale)
    if rate_parameter is None and steady is not None and spans_rpm is not None:
        window = _swept_window(n_all, good, steady.speed_rpm)
        if window is not None:
            rate_parameter = _sweep_rate_parameter(n_all, window, steady)
    fits = [f for f in (steady, swept) if f is not None]
    if not fits:
        # not one mode: the peak stays (the response is high there), no damping is given
        return replace(unresolved, single_mode=False)
    fit = min(fits, key=lambda f: f.noise_scale)
    if rate_parameter is not None and rate_parameter >= FAST_SWEEP_PARAMETER:
        # a fast sweep: a steady reading does not hold, unless the same revolutions show
        # plainly that the response followed the speed (the steady model misfits them far
        # less than the swept one)
        if looks_steady and steady is not None:
            fit = steady
        elif swept is not None:
            fit = swept
        else:
            return unresolved  # fast, and the swept model does not fit: cannot tell
    elif len(fits) == 2:
        other = max(fits, key=lambda f: f.noise_scale)
        apart = (other.damping_ratio_95[1] < fit.damping_ratio_95[0]
                 or fit.damping_ratio_95[1] < other.damping_ratio_95[0])
        if other.noise_scale < MODEL_CHOICE_RATIO * max(fit.noise_scale, 1.0) and apart:
            return unresolved  # steady or swept: the data cannot tell, and it matters
    if not fit.damping_resolved:
        return unresolved
    return replace(unresolved, speed_rpm=fit.speed_rpm, damping_ratio=fit.damping_ratio,
                   damping_ratio_95=fit.damping_ratio_95, fit_speed_rpm=fit.speed_rpm,
                   fit_damping_ratio=fit.damping_ratio, single_mode=True,
                   swept=fit is swept, sweep_rate_parameter=rate_parameter)


def _swept_window(n_all: np.ndarray, good: np.ndarray, centre_rpm: float) -> np.ndarray | None:
    """The revolutions the swept model is fitted to around ``centre_rpm``: the longest
    stretch of consecutive good revolutions within :data:`FIT_SPAN` of it, extended back in
    time while the speed stays within :data:`LEAD_SPAN` of it (the build-up) and on in time
    while it stays within :data:`TRAIL_SPAN` (the lagged peak and the ringing after the
    mode); None when it holds fewer than :data:`MIN_FIT_POINTS`."""
    near = good & (n_all >= centre_rpm / FIT_SPAN) & (n_all <= centre_rpm * FIT_SPAN)
    index = np.flatnonzero(near)
    if index.size < MIN_FIT_POINTS:
        return None
    runs = np.split(index, np.flatnonzero(np.diff(index) != 1) + 1)
    run = max(runs, key=len)
    first, last = int(run[0]), int(run[-1])
    while (first > 0 and good[first - 1]
           and centre_rpm / LEAD_SPAN <= n_all[first - 1] <= centre_rpm * LEAD_SPAN):
        first -= 1
    while (last + 1 < n_all.size and good[last + 1]
           and centre_rpm / TRAIL_SPAN <= n_all[last + 1] <= centre_rpm * TRAIL_SPAN):
        last += 1
    return np.arange(first, last + 1)


def _sweep_rate_parameter(n_all: np.ndarray, window: np.ndarray, fit: SdofFit) -> float | None:
    """``|d omega / dt| / (zeta omega_n)^2`` at the fitted mode (the revolutions' own times,
    each lasting ``60 / n``; the rate from a straight line through the window's speeds
    within :data:`FIT_SPAN` of the mode). None when fewer than three revolutions lie there."""
    n = n_all[window]
    times = np.cumsum(60.0 / n)
    near = (n >= fit.speed_rpm / FIT_SPAN) & (n <= fit.speed_rpm * FIT_SPAN)
    if int(near.sum()) < 3:
        return None
    rate_rpm_s = abs(float(np.polyfit(times[near], n[near], 1)[0]))
    wn = fit.speed_rpm * math.pi / 30.0
    return rate_rpm_s * math.pi / 30.0 / (fit.damping_ratio * wn) ** 2


def _one_per_mode(peaks: Sequence[Resonance], speeds_rpm: np.ndarray, phasors: np.ndarray,
                  sigmas: np.ndarray, spans_rpm: np.ndarray | None,
                  unit: str, sensed_power: int | None = None) -> list[Resonance]:
    """One pickup's peaks fitted (:func:`_with_fit`), those that are no mode of their own
    left out.

    A fast sweep leaves the mode's free vibration ringing after it; against the falling
    (or rising) 1x it beats, and the normalised response shows further peaks after the
    mode in the sweep's direction, with a phase that keeps turning. Such a peak is not a
    resonance. The peaks are taken most prominent first; a peak is left out when the swept
    model of a mode already resolved, fitted on from its build-up through the revolutions
    near the peak, explains them (:func:`_explained_by`), or when its own fit lands on a
    mode already found (within :data:`SAME_MODE_FRACTION`). A peak whose own fit resolves a
    mode elsewhere, or none, is kept (the latter with no damping, as before).

    References
    ----------
    .. [1] F. M. Lewis, "Vibration during acceleration through a critical speed", Trans.
       ASME 54, 1932 (the beats of the free vibration after a fast passage; from memory).
    """
    modes: list[Resonance] = []
    others: list[Resonance] = []
    for peak in sorted(peaks, key=lambda r: -r.peak_ratio):
        if any(m.swept and _explained_by(m, peak.speed_rpm, speeds_rpm, phasors, sigmas,
                                         spans_rpm, unit, sensed_power) for m in modes):
            continue
        res = _with_fit(peak, speeds_rpm, phasors, sigmas, spans_rpm, unit, sensed_power)
        if res.single_mode and res.fit_speed_rpm is not None:
            if not any(abs(res.speed_rpm / m.speed_rpm - 1) <= SAME_MODE_FRACTION
                       for m in modes):
                modes.append(res)
        else:
            others.append(res)
    # a peak met before the mode that explains it (less prominent than it, fitted first)
    kept = [r for r in others if not any(
        m.swept and _explained_by(m, r.peak_rpm or r.speed_rpm, speeds_rpm, phasors, sigmas,
                                  spans_rpm, unit, sensed_power) for m in modes)]
    return modes + kept


def _explained_by(mode: Resonance, peak_rpm: float, speeds_rpm: np.ndarray,
                  phasors: np.ndarray, sigmas: np.ndarray, spans_rpm: np.ndarray | None,
                  unit: str, sensed_power: int | None = None) -> bool:
    """Whether the swept model of ``mode``, fitted from its build-up on in time through the
    revolutions within :data:`FIT_SPAN` of ``peak_rpm`` (after the mode), fits them (the
    fit's own screening) and finds the same mode (within :data:`SAME_MODE_FRACTION`)."""
    if spans_rpm is None or mode.fit_speed_rpm is None:
        return False
    n_all = np.asarray(speeds_rpm, dtype=float)
    values = np.asarray(phasors, dtype=complex)
    sig = np.asarray(sigmas, dtype=float)
    good = np.isfinite(values) & np.isfinite(sig) & (sig > 0)
    window = _swept_window(n_all, good, mode.fit_speed_rpm)
    if window is None:
        return False
    near = np.flatnonzero(good & (n_all >= peak_rpm / FIT_SPAN) & (n_all <= peak_rpm * FIT_SPAN))
    after = near[near > window[-1]]
    if not near.size or (after.size == 0 and not np.isin(near, window).any()):
        return False
    index = np.arange(int(window[0]), max(int(window[-1]), int(after.max(initial=-1))) + 1)
    if not good[index].all():
        return False
    n = n_all[index]
    power = NORMALISING_POWER[UNITS[unit][0]]
    divide = (n / 1000.0) ** power
    fit = fit_sdof_response(n, np.conj(values[index]) / divide, sig[index] / divide,
                            mode.fit_speed_rpm, mode.damping_ratio or 0.03,
                            np.asarray(spans_rpm, dtype=float)[index], power, n,
                            np.arange(n.size), sensed_power=sensed_power)
    return fit is not None and abs(fit.speed_rpm / mode.fit_speed_rpm - 1) <= SAME_MODE_FRACTION


def revolution_spans_rpm(speeds_rpm: np.ndarray) -> np.ndarray:
    """Each revolution's speed change across itself, from its neighbours' mean speeds.

    The speed at a revolution's start is about the mean of its own and the previous
    revolution's mean speeds, at its end the mean with the next one's: the change is half
    the central difference, ``(n[i+1] - n[i-1]) / 2`` (one-sided at the ends).

    Parameters
    ----------
    speeds_rpm : numpy.ndarray
        Consecutive revolutions' mean speeds, rpm, oldest first.

    Returns
    -------
    numpy.ndarray
        The absolute speed change across each revolution, rpm (zeros for fewer than two).

    References
    ----------
    .. [1] Central differences (:func:`numpy.gradient`); common practice, no source.
    """
    n = np.asarray(speeds_rpm, dtype=float)
    if n.size < 2:
        return np.zeros(n.size)
    return np.abs(np.gradient(n))


def local_slope(points: Sequence[SweepPoint], pickup: str, speed_rpm: float,
                window_fraction: float = SLOPE_WINDOW_FRACTION,
                max_exponent_se: float = MAX_SLOPE_SE) -> SpeedSlope | None:
    """The response's local slope with speed at one pickup, from the sweep points nearby.

    A weighted least-squares line of ``ln|R|`` and of the unwrapped phase against ``ln n``
    through the usable points within ``window_fraction`` of ``speed_rpm`` (either side),
    each point weighted by its inverse variance (its 95 % circle over the amplitude gives
    the standard error of both ``ln|R|`` and the phase in radians).

    Parameters
    ----------
    points : sequence of SweepPoint
        The sweep, slowest first.
    pickup : str
        The pickup's name.
    speed_rpm : float
        Where the slope is wanted, rpm.
    window_fraction : float, default 0.08
        Half-width of the window, fraction of ``speed_rpm``.
    max_exponent_se : float, default 0.15
        Refuse (None) when the exponent's standard error is larger.

    Returns
    -------
    SpeedSlope or None
        None when fewer than :data:`MIN_SLOPE_POINTS` usable points lie in the window,
        they span less than 0.5 % in speed, or the exponent is not known within
        ``max_exponent_se``.

    References
    ----------
    .. [1] Weighted least-squares straight line and the standard error of its slope
       (``sqrt(1 / sum w (x - xw)^2)``; any statistics text, from memory); the local power
       law ``|H| ~ n^p`` as the tangent of ``ln|H|`` against ``ln n`` (common practice, no
       source).
    """
    if not (math.isfinite(speed_rpm) and speed_rpm > 0):
        return None
    lo, hi = speed_rpm * (1 - window_fraction), speed_rpm * (1 + window_fraction)
    chosen = [(p.speed_rpm, v) for p in points if lo <= p.speed_rpm <= hi
              for v in (p.value(pickup),) if v is not None and v.usable and v.amplitude > 0]
    if len(chosen) < MIN_SLOPE_POINTS:
        return None
    x = np.log([s for s, _ in chosen])
    if x.max() - x.min() < math.log(1.005):
        return None
    amp = np.log([v.amplitude for _, v in chosen])
    phase = np.unwrap(np.radians([v.phase_deg for _, v in chosen]))
    # standard error of ln|R| and of the phase (rad): sigma / |R|, sigma = radius / 2.45
    se = np.array([max(v.confidence_radius / CIRCLE_95_PER_SIGMA, 1e-12 * v.amplitude)
                   / v.amplitude for _, v in chosen])
    w = 1.0 / se ** 2
    xw = float(np.sum(w * x) / np.sum(w))
    sxx = float(np.sum(w * (x - xw) ** 2))
    if not sxx > 0:
        return None
    p = float(np.sum(w * (x - xw) * amp) / sxx)
    q = float(np.sum(w * (x - xw) * phase) / sxx)
    # the scatter about the line scales the error when it is larger than the noise says
    # (a curving response inside the window); at least the noise's own error
    dof = max(len(x) - 2, 1)
    chi_amp = float(np.sum(w * (amp - _line(x, amp, w, p)) ** 2)) / dof
    chi_phase = float(np.sum(w * (phase - _line(x, phase, w, q)) ** 2)) / dof
    p_se = math.sqrt(max(chi_amp, 1.0) / sxx)
    q_se = math.sqrt(max(chi_phase, 1.0) / sxx)
    if p_se > max_exponent_se:
        return None
    return SpeedSlope(pickup, speed_rpm, p, math.degrees(q), len(chosen), p_se,
                      math.degrees(q_se))


def _line(x: np.ndarray, y: np.ndarray, w: np.ndarray, slope: float) -> np.ndarray:
    """The weighted least-squares line of slope ``slope`` through (x, y), at x."""
    xw = float(np.sum(w * x) / np.sum(w))
    yw = float(np.sum(w * y) / np.sum(w))
    return yw + slope * (x - xw)


def analyse_sweep(speeds_rpm: np.ndarray, phasors: Mapping[str, np.ndarray],
                  sigmas: Mapping[str, np.ndarray], unit: str = "V pk",
                  min_ratio: float = MIN_SWEEP_RATIO,
                  spans_rpm: np.ndarray | None = None,
                  sensed_power: int | None = None) -> Sweep:
    """Bin a capture's per-revolution 1x into a sweep and find its resonances per pickup.

    Each resonance is found by the half-power method on the binned points
    (:func:`half_power_resonances`) and its damping, with a 95 % interval, by the SDOF fit
    to the revolutions near it (:func:`fit_sdof_response`, method ``"sdof_fit"``), or none
    ("not resolved") when the fit cannot tell it.

    Parameters
    ----------
    speeds_rpm : numpy.ndarray
        Each revolution's speed, rpm.
    phasors : mapping of str to numpy.ndarray
        Per pickup, each revolution's 1x phasor in ``unit``.
    sigmas : mapping of str to numpy.ndarray
        Per pickup, each revolution's standard error per component, ``unit``.
    unit : str, default "V pk"
        A key of :data:`trueturn.dsp.units.UNITS`.
    min_ratio : float, default 1.3
        The fastest revolution must be this many times the slowest for a sweep.
    spans_rpm : numpy.ndarray or None, default None
        Each revolution's speed change across itself, rpm (:func:`revolution_spans_rpm`
        for consecutive revolutions); None: each value is a point sample at its speed.
    sensed_power : int or None, default None
        What the pickups sense, as a power of speed (:data:`NORMALISING_POWER`: 4 for
        accelerometers whose 1x was converted to ``unit`` at each revolution's speed); it
        matters for the swept model, whose ringing is at the mode's frequency, not the
        revolution's. None: the unit's own quantity.

    Returns
    -------
    Sweep
        The points, slowest first, and the resonances (none unless it is a sweep).

    References
    ----------
    .. [1] See :func:`bin_revolutions`, :func:`half_power_resonances` and
       :func:`fit_sdof_response` (Ewins 2000, Rao); the phase turn through a resonance:
       Ewins, sec. 2.2 (SDOF phase), from memory.
    """
    points = bin_revolutions(speeds_rpm, phasors, sigmas, unit)
    speeds = np.asarray(speeds_rpm, dtype=float)
    low = float(speeds.min()) if speeds.size else math.nan
    high = float(speeds.max()) if speeds.size else math.nan
    is_sweep = bool(speeds.size) and high >= min_ratio * low and len(points) >= MIN_SWEEP_POINTS
    found: list[Resonance] = []
    if is_sweep:
        for name in phasors:
            used = [(p.speed_rpm, v.amplitude, v.phase_deg) for p in points
                    for v in (p.value(name),) if v is not None and v.usable and v.amplitude > 0]
            if len(used) < 3:
                continue
            n = np.array([u[0] for u in used])
            peaks = half_power_resonances(n, normalised_response(
                n, np.array([u[1] for u in used]), unit), name, np.array([u[2] for u in used]))
            values = np.asarray(phasors[name])
            errors = np.asarray(sigmas[name])
            found += _one_per_mode(peaks, speeds, values, errors, spans_rpm, unit,
                                   sensed_power)
    found.sort(key=lambda r: (r.speed_rpm, r.pickup))
    return Sweep(unit, points, tuple(found), low, high, is_sweep)


#: the balancing speed should stay this far (fraction of the resonance speed, either side)
#: from a support resonance: near one the 1x changes fast with speed and the influence
#: coefficients with it. Separation margins of 15-20 % are the usual shop and design rule
#: (from memory: API 684-style separation margins; common practice, no single source); we
#: take the cautious end, 20 %.
RESONANCE_MARGIN = 0.20
#: a point holding at least this many revolutions is part of a steady run (the balancing
#: speed of a coast-down is where it ran before the motor was switched off)
STEADY_POINT_REVS = 8
#: "well below" the first resonance: at 0.7 of it a single-degree-of-freedom response is
#: amplified less than 2x (1 / (1 - 0.7^2) = 1.96)
BELOW_RESONANCE_FRACTION = 0.7
#: the rise is judged on at least this many usable points spanning at least this speed ratio
MIN_RISE_POINTS = 5
MIN_RISE_SPAN = 1.3


def balancing_speed_rpm(sweep: Sweep) -> float | None:
    """The speed the machine ran steadily at during the capture: the point holding the most
    revolutions, when it holds at least :data:`STEADY_POINT_REVS`; None otherwise.

    Parameters
    ----------
    sweep : Sweep
        The sweep.

    Returns
    -------
    float or None
        Speed, rpm.

    References
    ----------
    .. [1] Ours: a coast-down starts from the running speed (no external source).
    """
    if not sweep.points:
        return None
    best = max(sweep.points, key=lambda p: p.revolutions)
    return best.speed_rpm if best.revolutions >= STEADY_POINT_REVS else None


def near_resonances(speed_rpm: float, resonances: Sequence[Resonance],
                    margin: float = RESONANCE_MARGIN) -> list[Resonance]:
    """The resonances within ``margin`` of ``speed_rpm`` (fraction of the resonance speed).

    Parameters
    ----------
    speed_rpm : float
        The balancing speed, rpm.
    resonances : sequence of Resonance
        Resonances found by :func:`analyse_sweep` (their fitted natural speed when
        resolved, else the peak) or :func:`half_power_resonances`.
    margin : float, default 0.20
        The separation margin, fraction of the resonance speed.

    Returns
    -------
    list of Resonance
        Those with ``|speed - resonance| <= margin * resonance``.

    References
    ----------
    .. [1] Separation margin of 15-20 % between running and critical speeds (from memory:
       API 684-style margins; common practice, no single source).
    """
    return [r for r in resonances if abs(speed_rpm - r.speed_rpm) <= margin * r.speed_rpm]


def rise_below_first_resonance(sweep: Sweep, pickup: str) -> tuple[float, int] | None:
    """How the 1x displacement grows with speed well below the first resonance at a pickup.

    A least-squares line of ``ln|R|`` against ``ln n`` through the usable points below
    :data:`BELOW_RESONANCE_FRACTION` of the lowest resonance found at that pickup, turned
    into the displacement exponent (the reading's own power of omega taken off: 2 for
    acceleration and volts, 1 for velocity). An unbalance force grows as ``n^2``, and so
    does the displacement it causes below a resonance.

    Parameters
    ----------
    sweep : Sweep
        The sweep (must be one, with a resonance at the pickup).
    pickup : str
        The pickup's name.

    Returns
    -------
    tuple or None
        ``(exponent, points)``; None when no resonance was found at the pickup or fewer
        than :data:`MIN_RISE_POINTS` usable points span :data:`MIN_RISE_SPAN` below it.

    References
    ----------
    .. [1] S. S. Rao, *Mechanical Vibrations*, rotating unbalance: well below resonance
       ``X ~ m e omega^2 / k`` (from memory).
    """
    own = [r.speed_rpm for r in sweep.resonances if r.pickup == pickup]
    if not sweep.is_sweep or not own:
        return None
    top = BELOW_RESONANCE_FRACTION * min(own)
    chosen = [(p.speed_rpm, v.amplitude) for p in sweep.points if p.speed_rpm <= top
              for v in (p.value(pickup),) if v is not None and v.usable and v.amplitude > 0]
    if len(chosen) < MIN_RISE_POINTS:
        return None
    x = np.log([s for s, _ in chosen])
    if x.max() - x.min() < math.log(MIN_RISE_SPAN):
        return None
    slope = float(np.polyfit(x, np.log([a for _, a in chosen]), 1)[0])
    own_power = NORMALISING_POWER[UNITS[sweep.unit][0]] - 2
    return slope - own_power, len(chosen)
