"""Amplitude-only balancing (no tach): the four-run method and its least-squares form.

Four-run method (published widely, e.g. the vector construction in Wowk, "Machinery
Vibration: Balancing", and in Foiles/Allaire/Gunter's review of balancing methods; from
memory): run 1 as found (amplitude V0), runs 2-4 with one trial mass T at three positions
120° apart (V1..V3). Here it is written for any set of runs on ONE plane: with ``u`` the
as-found unbalance expressed as a complex mass (grams at the plane's radius) and ``t_s`` the
pickup's sensitivity (reading units per gram), every run k with masses ``w_k`` obeys

    V_k,s = t_s * |u + w_k|,

i.e. V_k² = q + a|w_k|² + 2 Re(p conj(w_k)) with a = t², p = t² u, q = t²|u|²: linear in
(q, a, p) — the classic circle construction — which gives the start; a nonlinear least-squares
fit of all pickups together (``scipy.optimize.least_squares``) enforces q = |p|²/a. The
correction is ``C = -u``. Several starts expose ambiguous answers (e.g. only two trial
positions, or positions on one line), which are reported, never silently chosen.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
from scipy.optimize import least_squares

from trueturn.angles import amplitude_phase, angle_difference_deg
from trueturn.balance.influence import (
    CIRCLE95_SIGMAS,
    MIN_TRIAL_CHANGE,
    Correction,
    Solution,
    clipped_readings,
    mass_vector,
    speed_groups,
    trial_handling,
)
from trueturn.balance.readings import BalanceInput
from trueturn.balance.sanity import check_trial_information
from trueturn.errors import UserError
from trueturn.model.units import mass_text

#: two fitted answers closer than this fraction of their size are the same answer
SAME_ANSWER = 0.05
#: fit scatter (RMS) above this fraction of the mean reading: inconsistent readings, warned
#: and never given a PASS (common practice, no source)
MAX_FIT_SCATTER = 0.10


def _fit(w: np.ndarray, v: np.ndarray, weights: np.ndarray, u0: complex, t0: np.ndarray
         ) -> tuple[complex, np.ndarray, float, np.ndarray]:
    """Nonlinear least squares of V[k, s] = t_s |u + w_k| from one start."""
    scale = np.maximum(v.max(axis=0), 1e-30)

    def residuals(x: np.ndarray) -> np.ndarray:
        u = x[0] + 1j * x[1]
        model = np.abs(u + w)[:, None] * x[2:][None, :]
        return (((model - v) / scale) * weights).ravel()

    n_runs, n_sensors = v.shape
    factor = (weights / scale)[None, :]

    def jacobian(x: np.ndarray) -> np.ndarray:
        z = x[0] + 1j * x[1] + w
        mag = np.maximum(np.abs(z), 1e-300)
        jac = np.zeros((n_runs, n_sensors, 2 + n_sensors))
        jac[:, :, 0] = (z.real / mag)[:, None] * x[2:][None, :] * factor
        jac[:, :, 1] = (z.imag / mag)[:, None] * x[2:][None, :] * factor
        for s in range(n_sensors):
            jac[:, s, 2 + s] = mag * factor[0, s]
        return jac.reshape(n_runs * n_sensors, 2 + n_sensors)

    x0 = np.concatenate([[u0.real, u0.imag], t0])
    res = least_squares(residuals, x0, jac=jacobian, method="lm", xtol=1e-12, ftol=1e-12,
                        max_nfev=400)
    return res.x[0] + 1j * res.x[1], np.abs(res.x[2:]), float(np.sum(res.fun ** 2)), res.jac


def _linear_start(w: np.ndarray, v: np.ndarray) -> list[complex]:
    """Closed-form circle construction per pickup (needs four runs of independent positions)."""
    design = np.column_stack([np.ones(len(w)), np.abs(w) ** 2, 2 * w.real, 2 * w.imag])
    if np.linalg.matrix_rank(design) < 4:
        return []
    starts = []
    for s in range(v.shape[1]):
        (q, a, p_re, p_im), *_ = np.linalg.lstsq(design, v[:, s] ** 2, rcond=None)
        if a > 0:
            starts.append(complex(p_re, p_im) / a)
    return starts


def fit_amplitude_only(w: np.ndarray, v: np.ndarray, weights: np.ndarray | None = None
                       ) -> tuple[list[tuple[complex, np.ndarray, float]], np.ndarray]:
    """All distinct fits of ``V[k, s] = t_s |u + w_k|``, best first, and the best one's Jacobian.

    Starts from the linear circle construction in ``V^2`` and eight more around the trial
    size; each start is refined by nonlinear least squares; fits closer than 5 % of their
    size are one answer.

    Parameters
    ----------
    w : numpy.ndarray
        Complex mass on the plane in each run, relative to as found, shape (K,); grams at the
        plane's radius (angle in the :mod:`trueturn.angles` convention).
    v : numpy.ndarray
        1x amplitude per run and pickup, shape (K, S), reading units.
    weights : numpy.ndarray or None, default None
        Weight per pickup, shape (S,); None weighs them equally.

    Returns
    -------
    fits : list of (complex, numpy.ndarray, float)
        Each distinct answer as ``(u, t, cost)``: the as-found unbalance as a complex mass
        (g), the pickups' sensitivities (reading units per g) and the weighted sum of squared
        relative misfits, lowest cost first.
    jacobian : numpy.ndarray
        Jacobian of the best fit's residuals, shape (K S, 2 + S).

    References
    ----------
    .. [1] The four-run method (as found plus one trial at 0, 120 and 240 deg), e.g. the vector
       construction in V. Wowk, "Machinery Vibration: Balancing", and the review of balancing
       methods by W. C. Foiles, P. E. Allaire and E. J. Gunter (from memory).
    .. [2] Nonlinear least squares by ``scipy.optimize.least_squares`` (Levenberg-Marquardt).
    """
    weights = np.ones(v.shape[1]) if weights is None else weights
    size = float(np.max(np.abs(w))) or 1.0
    starts = _linear_start(w, v)
    starts += [m * size * np.exp(1j * np.radians(a))
               for m in (0.7,) for a in range(0, 360, 45)]
    fits = []
    for u0 in starts:
        t0 = np.median(v / np.maximum(np.abs(u0 + w), 1e-9 * size)[:, None], axis=0)
        u, t, cost, jac = _fit(w, v, weights, u0, t0)
        fits.append((u, t, cost, jac))
    fits.sort(key=lambda f: f[2])
    distinct: list[tuple[complex, np.ndarray, float]] = []
    for u, t, cost, _ in fits:
        if all(abs(u - d[0]) > SAME_ANSWER * max(abs(u), abs(d[0]), 1e-3 * size) for d in distinct):
            distinct.append((u, t, cost))
    return distinct, fits[0][3]


def _is_four_run(w: np.ndarray) -> bool:
    if len(w) != 4 or abs(w[0]) > 1e-12 or np.ptp(np.abs(w[1:])) > 1e-9 * abs(w[1]):
        return False
    angles = sorted(float(np.degrees(np.angle(x))) % 360 for x in w[1:])
    gaps = [angles[1] - angles[0], angles[2] - angles[1], 360 - angles[2] + angles[0]]
    return all(abs(angle_difference_deg(g, 120)) < 1.0 for g in gaps)


def solve_amplitude_only(inp: BalanceInput) -> Solution:
    """Correction for one plane from amplitudes only (no tach); reports ambiguous answers.

    Parameters
    ----------
    inp : BalanceInput
        The checked input: one plane, runs at one speed, readings without phase.

    Returns
    -------
    Solution
        The correction (g, degrees, with 95 % half-widths when the readings carry confidence
        radii), candidates that fit equally well (``ambiguous``), the fit scatter per pickup
        (reading units), ``inconsistent`` when it exceeds 10 % of the readings, warnings, and
        the residual of the last run (g·mm).

    Raises
    ------
    UserError
        When there is not exactly one plane, the runs are at several speeds, fewer than three
        runs (or three distinct trial positions) remain, or every reading is zero.

    References
    ----------
    .. [1] The four-run method (as found plus one trial at 0, 120 and 240 deg), e.g. the vector
       construction in V. Wowk, "Machinery Vibration: Balancing", and the review of balancing
       methods by W. C. Foiles, P. E. Allaire and E. J. Gunter (from memory).
    .. [2] The 10 % fit-scatter limit: common practice, no source.
    """
    last_clipped = any(r.clipped for r in inp.runs[-1].readings.values())
    if len(inp.planes) != 1:
        raise UserError("amplitude-only method (no phase_deg): supports exactly one plane, "
                        f"got {len(inp.planes)}; give phase readings for several planes")
    if len(speed_groups(inp.runs)) > 1:
        raise UserError("amplitude-only method: all runs must be at one speed")
    plane = inp.planes[0]
    clipped = clipped_readings(inp.runs)
    if clipped:
        # a clipped reading never enters the fit: its whole run is left out (one joint fit)
        kept = tuple(r for r in inp.runs if not any(x.clipped for x in r.readings.values()))
        if len(kept) < 3:
            raise UserError("amplitude-only method: after leaving out the runs with clipped "
                            f"readings {len(kept)} run(s) remain, at least 3 are needed; repeat "
                            "the clipped run(s) with the pickup's gain reduced")
        inp = replace(inp, runs=kept)
    w = np.array([mass_vector(r.masses, inp.planes)[0] for r in inp.runs])
    if len(w) < 3:
        raise UserError(f"amplitude-only method: needs at least 3 runs (the four-run method "
                        f"uses 4: as found plus one trial at three positions), got {len(w)}")
    if len({complex(round(x.real, 9), round(x.imag, 9)) for x in w}) < 3:
        raise UserError("amplitude-only method: singular system, the runs need at least three "
                        "different trial positions or masses")
    names = [s.name for s in inp.sensors]
    v = np.array([[r.readings[n].amplitude for n in names] for r in inp.runs])
    if not np.any(v > 0):
        raise UserError("amplitude-only method: every reading is zero: no vibration was "
                        "measured (check the pickups and their cables)")
    # no information, no answer: the trials must change the amplitudes beyond their scatter
    conf = np.array([[r.readings[n].confidence_radius or 0.0 for n in names] for r in inp.runs])
    check_trial_information(
        plane.name, float(np.max(np.abs(w))),
        [float(np.max(np.abs(v[1:, s] - v[0, s]))) for s in range(len(names))],
        [float(v[0, s]) for s in range(len(names))],
        [float(np.sqrt(2.0) * conf[:, s].max()) if conf[:, s].any() else None
         for s in range(len(names))], inp.mass_unit)
    weights = np.array([s.weight for s in inp.sensors])
    distinct, jac = fit_amplitude_only(w, v, weights)
    best_u, best_t, best_cost = distinct[0]
    tol = 2.0 * best_cost + 1e-12
    rivals = [d for d in distinct[1:] if d[2] <= tol]
    warnings = []
    ambiguous = bool(rivals)
    if ambiguous:
        alts = "; ".join(f"{mass_text(abs(d[0]), inp.mass_unit)} at "
                         f"{amplitude_phase(-d[0])[1]:.0f}°" for d in rivals)
        warnings.append("ambiguous: the amplitudes fit more than one answer equally well "
                        f"(also {alts}); add a run with the trial mass at another position")
    if len(w) < 4:
        warnings.append("only three runs: the answer cannot be checked for consistency; "
                        "the four-run method uses a third trial position")
    # trial effect against the as-found level
    trial_g = float(np.max(np.abs(w)))
    change = trial_g / max(abs(best_u), 1e-30)
    if change < MIN_TRIAL_CHANGE:
        factor = MIN_TRIAL_CHANGE / change
        warnings.append(f"plane {plane.name}: the trial mass ({mass_text(trial_g, inp.mass_unit)})"
                        f" changes the 1x by only about {100 * change:.0f} %; use a trial mass "
                        f"about {factor:.1f}× bigger (about "
                        f"{mass_text(trial_g * factor, inp.mass_unit)})")
    fit_rms = np.sqrt(np.mean((best_t[None, :] * np.abs(best_u + w)[:, None] - v) ** 2, axis=0))
    pm = None
    sig = np.array([[(r.readings[n].confidence_radius or 0.0) / CIRCLE95_SIGMAS for n in names]
                    for r in inp.runs])
    if sig.any():
        rng = np.random.default_rng(20211)
        draws = []
        for _ in range(100):
            vd = np.abs(v + sig * rng.normal(size=v.shape))
            u, _, _, _ = _fit(w, vd, weights, best_u, best_t)
            draws.append(-u)
        d = np.array(draws)
        mass_pm = float(np.percentile(np.abs(np.abs(d) - abs(best_u)), 95))
        r95 = float(np.percentile(np.abs(d + best_u), 95))
        angle_pm = 180.0 if r95 >= abs(best_u) else float(np.degrees(np.arcsin(r95 / abs(best_u))))
        pm = (mass_pm, angle_pm)
    mass, angle = (float(x) for x in amplitude_phase(-best_u))
    if rivals:
        # the ± covers every answer that fits equally well
        others = [amplitude_phase(-d[0]) for d in rivals]
        spread_mass = max(abs(m - mass) for m, _ in others)
        spread_angle = max(abs(angle_difference_deg(a, angle)) for _, a in others)
        pm = (max(pm[0] if pm else 0.0, spread_mass), max(pm[1] if pm else 0.0, spread_angle))
    scatter = fit_rms / np.maximum(np.mean(v, axis=0), 1e-30)
    inconsistent = bool(np.max(scatter) > MAX_FIT_SCATTER)
    if inconsistent:
        worst = int(np.argmax(scatter))
        warnings.append(f"inconsistent amplitudes: the fit scatters by {fit_rms[worst]:.3g} on "
                        f"pickup {names[worst]}'s readings of {v[:, worst].min():.3g}..."
                        f"{v[:, worst].max():.3g} ({100 * scatter[worst]:.0f} %, want ≤ "
                        f"{100 * MAX_FIT_SCATTER:.0f} %); repeat the runs (steady speed, masses "
                        "fastened, pickup firm)")
    correction = Correction(plane.name, mass, angle, plane.radius_mm,
                            None if pm is None else pm[0], None if pm is None else pm[1])
    now = inp.runs[-1].masses
    # plain floats: the trim goes into the job file as it is (numpy scalars would not)
    keep_mass, keep_angle = (float(x) for x in
                             amplitude_phase(-best_u - mass_vector(now, inp.planes)[0]))
    cond = float(np.linalg.cond(jac)) if jac.size else None
    rival_parts = [[float(x) for x in amplitude_phase(-d[0])] for d in rivals]
    candidates = [[Correction(plane.name, m, a, plane.radius_mm)] for m, a in rival_parts]
    method = "amplitude-only (four-run method)" if _is_four_run(w) else "amplitude-only (least squares)"
    return Solution(
        method=method,
        corrections=[correction],
        predicted_residual={},
        fit_scatter={n: float(fit_rms[s]) for s, n in enumerate(names)},
        clipped=clipped,
        clipped_last_run=last_clipped,
        inconsistent=inconsistent,
        condition_number=cond,
        warnings=warnings,
        trial_masses=trial_handling(inp.runs),
        on_rotor_now=list(now),
        corrections_keeping_current=[Correction(plane.name, keep_mass, keep_angle, plane.radius_mm)],
        influence=None,
        as_found={n: complex(best_t[s] * abs(best_u)) for s, n in enumerate(names)},
        residual_now_gmm=[float(abs(best_u + mass_vector(now, inp.planes)[0]) * plane.radius_mm)],
        residual_now_vector_gmm=[complex((best_u + mass_vector(now, inp.planes)[0])
                                         * plane.radius_mm)],
        candidates=candidates,
        ambiguous=ambiguous,
    )
