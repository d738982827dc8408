"""Order tracking: 1x, 2x, 3x phasors per revolution by least squares in the shaft-angle domain.

Model for the samples y(t) of one pickup in revolution r (shaft angle theta(t) from
:mod:`trueturn.dsp.shaft`, t the sample's tick including the ADC aperture delay):

    y(t) = d_r + sum_h [a_rh cos(h theta) + b_rh sin(h theta)]            (synchronous, per rev)
              + sum_f [u_f cos(2 pi f t) + v_f sin(2 pi f t)]             (known tones, per block)
              + noise

The per-revolution part is the order-tracked signal; the second part models known
non-synchronous tones (mains hum at the line frequency and twice it) as nuisance terms
shared by the whole window, so a hum 10 Hz from 1x at ten times its size does not leak
into the 1x vector. The tone coefficients are estimated over the whole window with the
synchronous part held common to all its revolutions (so a hum only 1 Hz from 1x, as on an
induction motor, is still told apart once the window spans a few beats); the
per-revolution vectors are then the least-squares fit of each revolution with the fitted
tones removed (Frisch-Waugh-Lovell partition). All of it comes from per-revolution normal
equations, built and solved in batched calls, and a few small sums.
Ordinary least squares with white noise is the maximum-likelihood estimator, so the 1x
phase reaches the Cramér-Rao bound (tests/test_dsp_order.py, bench/bench_dsp.py).

Phasor convention (:mod:`trueturn.angles`): order h is ``c_h = a_h + i b_h``, i.e.
``y = |c| cos(h theta - arg c)``, so ``arg c_1`` is the lag of the 1x positive peak after
the tach edge. References: Kay, Fundamentals of Statistical Signal Processing: Estimation
Theory (1993), ch. 4 and 8 (linear model, least squares); Fyfe & Munck, "Analysis of
computed order tracking", Mech. Syst. Signal Process. 11(2), 1997 (angle-domain resampling,
here replaced by fitting directly at the sample angles).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

# A nuisance tone whose energy is half explained by the window's synchronous model (it lies
# within about half a beat per window of an order, e.g. 3000 rpm on 50 Hz mains) cannot be
# told apart from that order without inflating its error; it is dropped and reported.
MIN_NUISANCE_KEPT_FRACTION = 0.5
# Summing groups of samples (fit_blocks ``group``) keeps at least this many sums per
# revolution: the 1x keeps > 99 % of its information, 3x > 96 % (sinc^2 of 1/20 and 3/20).
MIN_GROUPS_PER_REV = 20
MAX_GROUP = 4


def group_for(samples_per_rev: float) -> int:
    """The number of samples summed per fitted value.

    Up to ``MAX_GROUP`` (4), doubling while at least ``MIN_GROUPS_PER_REV`` (20) sums per
    revolution remain: the 1x then keeps over 99 % of its information (sinc^2 of 1/20).

    Parameters
    ----------
    samples_per_rev : float
        Samples of one pickup per revolution.

    Returns
    -------
    int
        1, 2 or 4.

    References
    ----------
    .. [3] Sum of a geometric progression of phasors, ``sum_k exp(i b k) = exp(i b (n-1)/2)
       sin(n b/2) / sin(b/2)`` (Dirichlet kernel; common practice, no source): the sums of
       ``group`` samples obey the same linear model, weighted 1/n.
    """
    group = 1
    while group < MAX_GROUP and samples_per_rev >= 2 * group * MIN_GROUPS_PER_REV:
        group *= 2
    return group


@dataclass(frozen=True)
class BlockFit:
    """Per-revolution sufficient statistics of one pickup (R revolutions, p = 1 + 2 orders
    revolution columns, q = 2 tones nuisance columns).

    ``coef_y`` (R, p): per-revolution coefficients without nuisance terms; ``coef_n``
    (R, p, q): the per-revolution fit of each nuisance column; ``schur_nn`` (R, q, q) and
    ``schur_ny`` (R, q): nuisance normal equations after removing each revolution's own fit;
    ``resid_yy`` (R,): residual energy without nuisance terms; ``gram_aa`` (R, p, p),
    ``gram_an`` (R, p, q), ``gram_nn`` (R, q, q), ``gram_ay`` (R, p), ``gram_ny`` (R, q): the raw
    normal-equation blocks; ``sample_counts`` (R,) samples and ``observations`` (R,) values
    fitted (samples, or sums of samples: :func:`fit_blocks`).
    """

    orders: tuple[int, ...]
    nuisance_hz: tuple[float, ...]
    coef_y: np.ndarray
    coef_n: np.ndarray
    schur_nn: np.ndarray
    schur_ny: np.ndarray
    resid_yy: np.ndarray
    gram_aa: np.ndarray
    gram_an: np.ndarray
    gram_nn: np.ndarray
    gram_ay: np.ndarray
    gram_ny: np.ndarray
    sample_counts: np.ndarray
    observations: np.ndarray

    @property
    def revolutions(self) -> int:
        return int(self.coef_y.shape[0])


ROW_FIELDS = ("coef_y", "coef_n", "schur_nn", "schur_ny", "resid_yy", "gram_aa", "gram_an",
              "gram_nn", "gram_ay", "gram_ny", "sample_counts", "observations")


def join_fits(fits: list[BlockFit], last: int | None = None) -> BlockFit:
    """Stack the revolutions of several blocks (same orders, tones and time origin).

    Parameters
    ----------
    fits : list of BlockFit
        The blocks, oldest first.
    last : int or None, default None
        Keep only the last ``last`` revolutions; None keeps all.

    Returns
    -------
    BlockFit
        One block holding every (or the last) revolution's statistics.

    References
    ----------
    .. [1] S. M. Kay, "Fundamentals of Statistical Signal Processing: Estimation Theory",
       Prentice Hall, 1993, ch. 4 and 8 (linear model, least squares; from memory).
    """
    rows = {name: np.concatenate([getattr(f, name) for f in fits]) for name in ROW_FIELDS}
    if last is not None:
        rows = {k: v[-last:] for k, v in rows.items()}
    return BlockFit(fits[0].orders, fits[0].nuisance_hz, **rows)


@dataclass(frozen=True)
class OrderEstimate:
    """Per-revolution order phasors after removing the nuisance tones.

    ``phasors`` (R, len(orders)) complex, peak amplitude in the input unit; ``dc`` (R,);
    ``noise_rms`` the residual standard deviation; ``dropped_hz`` nuisance tones that could
    not be separated from the orders; ``nuisance`` the fitted tone phasors (amplitude, peak).
    ``unseen_cov`` (p, p), p = 1 + 2 len(orders) in the order ``[dc, a_1, b_1, a_2, ...]``:
    the covariance of the mean of the per-revolution coefficients that the fitted tones add
    and the scatter between revolutions does not show (:func:`unseen_covariance`), input
    unit squared; zeros without tones.
    """

    orders: tuple[int, ...]
    phasors: np.ndarray
    dc: np.ndarray
    noise_rms: float
    dropped_hz: tuple[float, ...]
    nuisance: dict[float, complex]
    nuisance_hz: tuple[float, ...] = ()
    gamma: np.ndarray = field(default_factory=lambda: np.zeros(0))
    nuisance_gram: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    samples: int = 0
    unseen_cov: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))

    def order_unseen_variance(self, order: int) -> float:
        """The largest variance, along any direction of the complex plane, that the tone fit
        adds to the mean phasor of one order beyond what the revolutions' scatter shows.

        Parameters
        ----------
        order : int
            One of ``orders``.

        Returns
        -------
        float
            The larger eigenvalue of the 2 x 2 block of ``unseen_cov`` for the order's cosine
            and sine coefficients, input unit squared; 0 when nothing was fitted.

        References
        ----------
        .. [1] S. M. Kay, "Fundamentals of Statistical Signal Processing: Estimation Theory",
           Prentice Hall, 1993, ch. 4 and 8 (covariance of a linear least-squares estimate;
           from memory).
        """
        if self.unseen_cov.size == 0:
            return 0.0
        k = 1 + 2 * self.orders.index(order)
        block = self.unseen_cov[k:k + 2, k:k + 2]
        return max(float(np.linalg.eigvalsh(0.5 * (block + block.T))[-1]), 0.0)

    def tone_amplitude(self, tones_hz: tuple[float, ...]) -> float:
        """Peak amplitude of the fitted waveform of some nuisance tones together.

        A comb around one hum frequency, from its mean power over the window:
        ``sqrt(2 gamma' G gamma / n)``.

        Parameters
        ----------
        tones_hz : tuple of float
            The tones, Hz (members of ``nuisance_hz``).

        Returns
        -------
        float
            Peak amplitude, input unit; 0 when none of the tones was fitted.

        References
        ----------
        .. [1] S. M. Kay, "Fundamentals of Statistical Signal Processing: Estimation Theory",
           Prentice Hall, 1993, ch. 4 and 8 (linear model, least squares; from memory).
        """
        cols = [c for k, f in enumerate(self.nuisance_hz) if f in tones_hz
                for c in (2 * k, 2 * k + 1)]
        if not cols or not self.samples:
            return 0.0
        g = self.gamma[cols]
        power = float(g @ self.nuisance_gram[np.ix_(cols, cols)] @ g) / self.samples
        return math.sqrt(2.0 * max(power, 0.0))


def revolution_basis(theta_rad: np.ndarray, orders: tuple[int, ...],
                     out: np.ndarray | None = None) -> np.ndarray:
    """Design columns ``[1, cos(h theta), sin(h theta) for h in orders]``.

    Parameters
    ----------
    theta_rad : numpy.ndarray
        Shaft angle of each sample, rad, shape (n,).
    orders : tuple of int
        The orders (1 for 1x...).
    out : numpy.ndarray or None, default None
        An array (or a column slice of one) of shape (n, 1 + 2 len(orders)) to fill instead.

    Returns
    -------
    numpy.ndarray
        The columns, shape (n, 1 + 2 len(orders)).

    References
    ----------
    .. [1] S. M. Kay, "Fundamentals of Statistical Signal Processing: Estimation Theory",
       Prentice Hall, 1993, ch. 4 and 8 (linear model, least squares; from memory).
    .. [2] K. R. Fyfe, E. D. S. Munck, "Analysis of computed order tracking", Mech. Syst.
       Signal Process. 11(2), 1997 (angle-domain order tracking; here fitted directly at the
       sample angles; from memory).
    """
    if out is None:
        out = np.empty((theta_rad.shape[0], 1 + 2 * len(orders)))
    out[:, 0] = 1.0
    z1 = np.exp(1j * theta_rad)
    powers = {1: z1}
    top = max(orders, default=1)
    if min(orders, default=1) >= 1 and top <= 8:
        for h in range(2, top + 1):  # exp(i h theta) by repeated products: one exp in all
            powers[h] = powers[h - 1] * z1
    for k, h in enumerate(orders):
        z = powers[h] if h in powers else np.exp(1j * h * theta_rad)
        out[:, 1 + 2 * k] = z.real
        out[:, 2 + 2 * k] = z.imag
    return out


def tone_basis(times_s: np.ndarray, tones_hz: tuple[float, ...],
               out: np.ndarray | None = None) -> np.ndarray:
    """Design columns ``[cos(2 pi f t), sin(2 pi f t) for f in tones_hz]``.

    Related tones (twice another, or another plus a difference already at hand, as in a comb
    ``f, f +/- d``) are built by complex products instead of new exponentials.

    Parameters
    ----------
    times_s : numpy.ndarray
        Sample times from the time origin, s, shape (n,).
    tones_hz : tuple of float
        The tones, Hz.
    out : numpy.ndarray or None, default None
        An array (or a column slice of one) of shape (n, 2 len(tones_hz)) to fill instead.

    Returns
    -------
    numpy.ndarray
        The columns, shape (n, 2 len(tones_hz)).

    References
    ----------
    .. [1] S. M. Kay, "Fundamentals of Statistical Signal Processing: Estimation Theory",
       Prentice Hall, 1993, ch. 4 and 8 (linear model, least squares; from memory).
    """
    if out is None:
        out = np.empty((times_s.shape[0], 2 * len(tones_hz)))
    done: dict[float, np.ndarray] = {}
    diffs: dict[float, np.ndarray] = {}

    def near(table: dict[float, np.ndarray], f: float) -> float | None:
        return next((g for g in table if abs(g - f) < 1e-9), None)

    for k, f in enumerate(tones_hz):
        z = None
        half = near(done, f / 2.0)
        if half is not None:
            z = done[half] * done[half]
        else:
            for g, zg in done.items():
                d = near(diffs, f - g)
                if d is not None:
                    z = zg * diffs[d]
                    break
                d = near(diffs, g - f)
                if d is not None:
                    z = zg * np.conj(diffs[d])
                    break
        if z is None:
            z = np.exp((2j * math.pi * f) * times_s)
            for g, zg in done.items():
                if g < f and near(diffs, f - g) is None:
                    diffs[f - g] = z * np.conj(zg)
        done[f] = z
        out[:, 2 * k] = z.real
        out[:, 2 * k + 1] = z.imag
    return out


def fit_block(sample_ticks: np.ndarray, values: np.ndarray, starts: np.ndarray,
              ends: np.ndarray, tick_hz: float, orders: tuple[int, ...] = (1, 2, 3),
              nuisance_hz: tuple[float, ...] = (), origin_tick: int = 0,
              group: int = 1) -> BlockFit:
    """Per-revolution least-squares statistics of one pickup for the revolutions ``[starts, ends)``.

    A revolution with fewer observations than twice the number of unknowns gets NaN
    coefficients (left out by :func:`solve_orders`).

    Parameters
    ----------
    sample_ticks : numpy.ndarray
        Sample times, board timer ticks (sorted, 64-bit, aperture delay included).
    values : numpy.ndarray
        The samples, any unit (ADC counts, volts).
    starts : numpy.ndarray
        Tick of the tach edge that starts each revolution.
    ends : numpy.ndarray
        Tick of the tach edge that ends each revolution.
    tick_hz : float
        The board's timer tick rate, Hz.
    orders : tuple of int, default (1, 2, 3)
        The orders fitted.
    nuisance_hz : tuple of float, default ()
        Known non-synchronous tones (mains hum), Hz.
    origin_tick : int, default 0
        Time origin of the tones, ticks; the same for every block later combined.
    group : int, default 1
        Samples summed per fitted value (:func:`fit_blocks`).

    Returns
    -------
    BlockFit
        Normal-equation blocks and per-revolution coefficients.

    References
    ----------
    .. [1] S. M. Kay, "Fundamentals of Statistical Signal Processing: Estimation Theory",
       Prentice Hall, 1993, ch. 4 and 8 (linear model, least squares; from memory).
    .. [2] K. R. Fyfe, E. D. S. Munck, "Analysis of computed order tracking", Mech. Syst.
       Signal Process. 11(2), 1997 (angle-domain order tracking; here fitted directly at the
       sample angles; from memory).
    """
    return fit_blocks([sample_ticks], [values], starts, ends, tick_hz, orders, nuisance_hz,
                      origin_tick, group)[0]


def fit_blocks(sample_ticks: list[np.ndarray], values: list[np.ndarray], starts: np.ndarray,
               ends: np.ndarray, tick_hz: float, orders: tuple[int, ...] = (1, 2, 3),
               nuisance_hz: tuple[float, ...] = (), origin_tick: int = 0,
               group: int = 1) -> list[BlockFit]:
    """:func:`fit_block` for several pickups over the same revolutions, in one batch.

    ``group`` > 1 fits the sums of that many consecutive samples wherever a revolution's
    samples are evenly spaced (the normal case: one ADC clock, no lost samples inside): an
    unbiased fit that costs about ``group`` times less; other revolutions, and all of them
    with ``group = 1``, are fitted sample by sample.

    Parameters
    ----------
    sample_ticks : list of numpy.ndarray
        Sample times per pickup, board timer ticks.
    values : list of numpy.ndarray
        The samples per pickup, any unit.
    starts : numpy.ndarray
        Tick of the tach edge that starts each revolution.
    ends : numpy.ndarray
        Tick of the tach edge that ends each revolution.
    tick_hz : float
        The board's timer tick rate, Hz.
    orders : tuple of int, default (1, 2, 3)
        The orders fitted.
    nuisance_hz : tuple of float, default ()
        Known non-synchronous tones, Hz.
    origin_tick : int, default 0
        Time origin of the tones, ticks.
    group : int, default 1
        Samples summed per fitted value (:func:`group_for`).

    Returns
    -------
    list of BlockFit
        One per pickup.

    References
    ----------
    .. [1] S. M. Kay, "Fundamentals of Statistical Signal Processing: Estimation Theory",
       Prentice Hall, 1993, ch. 4 and 8 (linear model, least squares; from memory).
    .. [2] K. R. Fyfe, E. D. S. Munck, "Analysis of computed order tracking", Mech. Syst.
       Signal Process. 11(2), 1997 (angle-domain order tracking; here fitted directly at the
       sample angles; from memory).
    .. [3] Sum of a geometric progression of phasors, ``sum_k exp(i b k) = exp(i b (n-1)/2)
       sin(n b/2) / sin(b/2)`` (Dirichlet kernel; common practice, no source): the sums of
       ``group`` samples obey the same linear model, weighted 1/n.
    """
    starts = np.asarray(starts, dtype=np.int64)
    ends = np.asarray(ends, dtype=np.int64)
    n_revs = len(starts)
    n_ch = len(sample_ticks)
    p = 1 + 2 * len(orders)
    q = 2 * len(nuisance_hz)
    m = p + q + 1
    # one row per (pickup, revolution); every pickup's samples in one array
    ticks_all = [np.asarray(t, dtype=np.int64) for t in sample_ticks]
    values_all = np.concatenate([np.asarray(v, dtype=float) for v in values]) if n_ch else \
        np.zeros(0)
    offsets = np.cumsum([0] + [len(t) for t in ticks_all])
    lo_rows, counts_rows, step_rows, even_rows, first_rows = [], [], [], [], []
    for c, ticks in enumerate(ticks_all):
        lo = np.searchsorted(ticks, starts, side="left")
        counts = np.searchsorted(ticks, ends, side="left") - lo
        even, step_c = _evenly_spaced(ticks, lo, counts) if group > 1 else \
            (np.zeros(n_revs, dtype=bool), 0)
        lo_rows.append(lo + offsets[c])
        counts_rows.append(counts)
        step_rows.append(np.full(n_revs, step_c, dtype=np.int64))
        even_rows.append(even)
        first_rows.append(ticks[np.minimum(lo, max(len(ticks) - 1, 0))] if len(ticks) else
                          np.zeros(n_revs, dtype=np.int64))
    lo, counts, step, even, first = (np.concatenate(x) for x in (
        lo_rows, counts_rows, step_rows, even_rows, first_rows))
    row_starts, row_ends = np.tile(starts, n_ch), np.tile(ends, n_ch)
    if even.all():  # the usual case: no copying into a gram assembled from parts
        gram, observations = _gram(values_all, lo, first, step, row_starts, row_ends, counts,
                                   tick_hz, orders, nuisance_hz, origin_tick, group)
    else:
        gram = np.empty((n_ch * n_revs, m, m))
        observations = counts.copy()
    if even.any() and not even.all():
        gram[even], observations[even] = _gram(
            values_all, lo[even], first[even], step[even], row_starts[even], row_ends[even],
            counts[even], tick_hz, orders, nuisance_hz, origin_tick, group)
    if not even.all():
        odd = ~even
        ticks_flat = np.concatenate(ticks_all) if n_ch else np.zeros(0, dtype=np.int64)
        gram[odd] = _dense_gram(ticks_flat, values_all, row_starts[odd], row_ends[odd],
                                lo[odd], counts[odd], tick_hz, orders, nuisance_hz,
                                origin_tick)
    return _finish(gram, observations, counts, n_ch, n_revs, orders, nuisance_hz)


def fit_even(values: list[np.ndarray], first_ticks: list[int], step_ticks: int,
             starts: np.ndarray, ends: np.ndarray, tick_hz: float,
             orders: tuple[int, ...] = (1, 2, 3), nuisance_hz: tuple[float, ...] = (),
             origin_tick: int = 0, group: int = 1) -> list[BlockFit]:
    """:func:`fit_blocks` for pickups whose samples are all evenly spaced.

    Sample k of pickup c is at tick ``first_ticks[c] + k step_ticks`` (a stream without lost
    samples, as the meter holds it). Each revolution's samples are found by arithmetic instead
    of a search, and every revolution is fitted from its sums of ``group`` samples; the result
    is that of :func:`fit_blocks` on the same samples.

    Parameters
    ----------
    values : list of numpy.ndarray
        The samples per pickup, any unit.
    first_ticks : list of int
        Tick of each pickup's first sample (aperture delay included).
    step_ticks : int
        Ticks between consecutive samples of one pickup.
    starts : numpy.ndarray
        Tick of the tach edge that starts each revolution.
    ends : numpy.ndarray
        Tick of the tach edge that ends each revolution.
    tick_hz : float
        The board's timer tick rate, Hz.
    orders : tuple of int, default (1, 2, 3)
        The orders fitted.
    nuisance_hz : tuple of float, default ()
        Known non-synchronous tones, Hz.
    origin_tick : int, default 0
        Time origin of the tones, ticks.
    group : int, default 1
        Samples summed per fitted value.

    Returns
    -------
    list of BlockFit
        One per pickup.

    References
    ----------
    .. [1] S. M. Kay, "Fundamentals of Statistical Signal Processing: Estimation Theory",
       Prentice Hall, 1993, ch. 4 and 8 (linear model, least squares; from memory).
    .. [3] Sum of a geometric progression of phasors, ``sum_k exp(i b k) = exp(i b (n-1)/2)
       sin(n b/2) / sin(b/2)`` (Dirichlet kernel; common practice, no source): the sums of
       ``group`` samples obey the same linear model, weighted 1/n.
    """
    starts = np.asarray(starts, dtype=np.int64)
    ends = np.asarray(ends, dtype=np.int64)
    n_revs = len(starts)
    n_ch = len(values)
    lo_rows, counts_rows, first_rows = [], [], []
    offset = 0
    for c in range(n_ch):
        size = len(values[c])
        t0 = int(first_ticks[c])
        lo = np.clip(-((t0 - starts) // step_ticks), 0, size)  # first sample at or after
        hi = np.clip(-((t0 - ends) // step_ticks), 0, size)
        lo_rows.append(lo + offset)
        counts_rows.append(hi - lo)
        first_rows.append(t0 + lo * step_ticks)
        offset += size
    values_all = np.concatenate([np.asarray(v, dtype=float) for v in values]) if n_ch else \
        np.zeros(0)
    lo, counts, first = (np.concatenate(x) for x in (lo_rows, counts_rows, first_rows))
    step = np.full(len(lo), step_ticks, dtype=np.int64)
    gram, observations = _gram(values_all, lo, first, step, np.tile(starts, n_ch),
                               np.tile(ends, n_ch), counts, tick_hz, orders, nuisance_hz,
                               origin_tick, group)
    return _finish(gram, observations, counts, n_ch, n_revs, orders, nuisance_hz)


def _finish(gram: np.ndarray, observations: np.ndarray, counts: np.ndarray, n_ch: int,
            n_revs: int, orders: tuple[int, ...],
            nuisance_hz: tuple[float, ...]) -> list[BlockFit]:
    """Per-revolution statistics from the normal equations ``gram`` (rows: pickup by
    pickup, revolution by revolution), split into one :class:`BlockFit` per pickup."""
    p = 1 + 2 * len(orders)
    q = 2 * len(nuisance_hz)
    aa = gram[:, :p, :p]
    rhs = gram[:, :p, p:]
    ok = observations >= 2 * p
    aa_safe = np.where(ok[:, None, None], aa, np.eye(p))
    solved = np.linalg.solve(aa_safe, rhs)  # (R, p, q + 1)
    coef_n = solved[:, :, :q]
    coef_y = solved[:, :, q]
    na = gram[:, p:p + q, :p]
    schur_nn = gram[:, p:p + q, p:p + q] - np.matmul(na, coef_n)
    schur_ny = gram[:, p:p + q, -1] - np.einsum("rqp,rp->rq", na, coef_y)
    resid_yy = gram[:, -1, -1] - np.einsum("rp,rp->r", rhs[:, :, q], coef_y)
    # views into gram: the meter's row store copies them, nothing else writes to gram
    blocks = [coef_n, schur_nn, schur_ny, resid_yy, gram[:, :p, :p], gram[:, :p, p:p + q],
              gram[:, p:p + q, p:p + q], gram[:, :p, -1], gram[:, p:p + q, -1]]
    bad = ~ok
    if bad.any():
        coef_y[bad] = np.nan
        for arr in blocks:
            arr[bad] = 0.0
    fits = []
    for c in range(n_ch):
        r = slice(c * n_revs, (c + 1) * n_revs)
        fits.append(BlockFit(tuple(orders), tuple(nuisance_hz), coef_y[r],
                             *(arr[r] for arr in (*blocks, counts, observations))))
    return fits


def _evenly_spaced(ticks: np.ndarray, lo: np.ndarray,
                   counts: np.ndarray) -> tuple[np.ndarray, int]:
    """(revolutions whose samples are all ``step`` ticks apart, ``step``): ``step`` is the
    usual spacing (the median), a revolution qualifies when none of its spacings differs."""
    even = np.zeros(len(lo), dtype=bool)
    used = counts > 1
    if not used.any():
        return even, 0
    first, stop = int(lo[used].min()), int((lo + counts)[used].max())
    gaps = np.diff(ticks[first:stop])
    step = int(np.median(gaps))
    if step <= 0:
        return even, 0
    odd_before = np.concatenate(([0], np.cumsum(gaps != step)))  # odd spacings so far
    last = np.clip(lo + counts - 1 - first, 0, len(gaps))
    begin = np.clip(lo - first, 0, len(gaps))
    return used & (odd_before[last] == odd_before[begin]), step


def _dense_gram(sample_ticks: np.ndarray, values: np.ndarray, starts: np.ndarray,
                ends: np.ndarray, lo: np.ndarray, counts: np.ndarray, tick_hz: float,
                orders: tuple[int, ...], nuisance_hz: tuple[float, ...],
                origin_tick: int) -> np.ndarray:
    """(R, m, m) normal equations ``X'X`` of ``X = [revolution basis, tones, y]`` per
    revolution, sample by sample (any spacing); row r's samples start at index ``lo[r]``."""
    n_revs = len(starts)
    p = 1 + 2 * len(orders)
    q = 2 * len(nuisance_hz)
    m = p + q + 1
    # Lay the samples out as (revolution, slot) directly; slots past a revolution's last
    # sample repeat a valid sample and are zeroed at the end (they add nothing to the sums).
    length = max(int(counts.max()) if counts.size else 0, 1)
    slots = np.arange(length)
    valid = slots[None, :] < counts[:, None]
    grid = np.minimum(lo[:, None] + slots[None, :], max(len(sample_ticks) - 1, 0)).ravel()
    ticks = sample_ticks[grid]
    periods = np.repeat(ends - starts, length)
    theta = (2.0 * math.pi) * (ticks - np.repeat(starts, length)) / periods
    # column-major (m, R*L): every column is written contiguously
    columns = np.empty((m, n_revs * length))
    revolution_basis(theta, orders, out=columns[:p].T)
    if q:
        tone_basis((ticks - origin_tick) / tick_hz, nuisance_hz, out=columns[p:p + q].T)
    columns[-1] = values[grid]
    columns *= valid.reshape(1, -1)
    per_rev = columns.reshape(m, n_revs, length).transpose(1, 0, 2)  # (R, m, L)
    return np.matmul(per_rev, per_rev.transpose(0, 2, 1))


def _dirichlet(angle: np.ndarray, n: np.ndarray | float) -> np.ndarray:
    """``D_n(b) = sin(n b/2) / sin(b/2)``, so that ``sum_{k<n} exp(i b k) = exp(i b (n-1)/2)
    D_n(b)`` (Dirichlet kernel; n at b = 0, where the quotient is 0/0)."""
    half = 0.5 * angle
    sin_half = np.sin(half)
    tiny = np.abs(sin_half) < 1e-12
    return np.where(tiny, n, np.sin(half * n) / np.where(tiny, 1.0, sin_half))


def _progression(start_rad: np.ndarray, step_rad: np.ndarray, n: int,
                 scale: np.ndarray | None = None) -> np.ndarray:
    """``scale * exp(i (start + step j))`` for j < n, one row per element of
    ``start``/``step`` (and ``scale``), by products (doubling: relative error about
    log2(n) x 1e-16)."""
    z = np.empty((n, len(start_rad)), dtype=complex)  # built along the first axis
    z[0] = np.exp(1j * start_rad) if scale is None else scale * np.exp(1j * start_rad)
    step = np.exp(1j * step_rad)
    done = 1
    while done < n:  # doubling: rows [done, 2 done) are rows [0, done) times step^done
        take = min(done, n - done)
        np.multiply(z[:take], step, out=z[done:done + take])
        done += take
        if done < n:
            step = step * step
    return z.T


def _gram(values: np.ndarray, lo: np.ndarray, first_ticks: np.ndarray,
          step_ticks: np.ndarray, starts: np.ndarray, ends: np.ndarray, counts: np.ndarray,
          tick_hz: float, orders: tuple[int, ...], nuisance_hz: tuple[float, ...],
          origin_tick: int, group: int) -> tuple[np.ndarray, np.ndarray]:
    """Normal equations of revolutions whose samples are evenly spaced, fitted to the sums
    of ``group`` consecutive samples: (gram (R, m, m), observations per row (R,)).

    Row r has its sample k at tick ``first_ticks[r] + k step_ticks[r]``, values from
    ``values[lo[r]]`` on. Every model column is a constant or the real or imaginary part of
    ``exp(i (a + b k))`` (shaft angle and tone phase are linear in k), so its sum over the
    n samples of a group is exactly that column at the group's centre times ``D_n(b)``
    (:func:`_dirichlet`). Summing is a linear map of the data: the sums obey the same model
    with these exact columns, so least squares on them (weighted 1/n, a sum's noise variance
    being n sigma^2) is unbiased for every order and tone, with no approximation. It gives
    up only the detail within a group: a component with c groups per cycle keeps about
    ``sinc^2(1/c)`` of its information (1x with 20 groups per revolution: 99 %, a phase
    error 0.4 % above the Cramér-Rao bound; tests/test_dsp_order.py checks this path
    against the bound).
    """
    n_rows = len(first_ticks)
    p = 1 + 2 * len(orders)
    q = 2 * len(nuisance_hz)
    m = p + q + 1
    n_groups = max(-(-int(counts.max()) // group), 1)
    period = (ends - starts).astype(float)
    columns = np.empty((m, n_rows * n_groups))
    cols = columns.reshape(m, n_rows, n_groups)
    root = math.sqrt(group)
    # Group sums of the values from one running sum: sum over [s, e) = c[e] - c[s], a
    # group's start s = lo + group j, its end at most the revolution's (exact to ~1e-16 of
    # the running total: counts of 10-bit samples over a batch, far below the noise)
    running = np.empty(values.size + 1)
    running[0] = 0.0
    np.cumsum(values, out=running[1:])
    stop = (lo + counts)[:, None]  # a revolution's end: groups past it are empty (0 sums)
    begin = np.minimum(lo[:, None] + group * np.arange(n_groups), stop)  # (R, G)
    end = np.minimum(begin + group, stop)
    cols[-1] = (running[end] - running[begin]) / root
    # Each column is a constant or exp(i (a + b k)) at sample k; its sum over a group of n
    # samples centred at k0 is exp(i (a + b k0)) D_n(b) (Dirichlet kernel): for the whole
    # groups a geometric progression along j carrying the factor D_group(b)/sqrt(group) in
    # its first term (products, no sine or cosine per value); a row's short last group has
    # its centre elsewhere and its own factor, set on its own; empty groups are zeroed.
    rows = np.nonzero(counts % group)[0]
    last = counts[rows] // group
    rem = (counts[rows] % group).astype(float)
    centre_full = 0.5 * (group - 1)
    centre_short = group * last + 0.5 * (rem - 1)
    cols[0] = root
    cols[0, rows, last] = np.sqrt(rem)
    cols[-1, rows, last] *= root / np.sqrt(rem)
    rad_shaft = (2.0 * math.pi) * (first_ticks - starts) / period  # at sample 0
    rad_step = (2.0 * math.pi) * step_ticks / period  # per sample
    rad_time = (first_ticks - origin_tick).astype(float) / tick_hz  # seconds
    sec_step = step_ticks / tick_hz
    col = 1
    steps = [(h * rad_shaft, h * rad_step) for h in orders]
    steps += [(2.0 * math.pi * f * rad_time, 2.0 * math.pi * f * sec_step) for f in nuisance_hz]
    for a, b in steps:
        z = _progression(a + b * centre_full, b * group, n_groups,
                         _dirichlet(b, float(group)) / root)
        if len(rows):
            br = b[rows]
            z[rows, last] = (_dirichlet(br, rem) / np.sqrt(rem)) * np.exp(
                1j * (a[rows] + br * centre_short))
        cols[col], cols[col + 1] = z.real, z.imag
        col += 2
    filled = np.minimum(counts, group * n_groups)
    empty = np.arange(n_groups)[None, :] * group >= filled[:, None]  # (R, G)
    if empty.any():
        cols[:, empty] = 0.0
    per_rev = columns.reshape(m, n_rows, n_groups).transpose(1, 0, 2)  # (R, m, G)
    return np.matmul(per_rev, per_rev.transpose(0, 2, 1)), n_groups - np.count_nonzero(
        empty, axis=1)


def solve_orders(fit: BlockFit) -> OrderEstimate:
    """Per-revolution order phasors with the nuisance tones fitted over all the revolutions.

    ``fit`` may be stacked from several blocks (:func:`join_fits`). Revolutions with NaN
    coefficients (too few samples) are left out. A tone that the window cannot tell apart from
    the synchronous model (less than half its energy left after projecting the model out: it
    lies within about half a beat per window of an order) is dropped and reported. Tones may
    be close together (a comb around a hum frequency that is not exactly known); the solve is
    a minimum-norm least squares, so only the fitted waveform matters.

    Parameters
    ----------
    fit : BlockFit
        The per-revolution statistics (:func:`fit_blocks`, :func:`join_fits`).

    Returns
    -------
    OrderEstimate
        Phasors per revolution and order (peak, input unit, phase as lag per
        :mod:`trueturn.angles`), DC, residual noise RMS, dropped tones (Hz) and the fitted
        tone phasors.

    References
    ----------
    .. [1] S. M. Kay, "Fundamentals of Statistical Signal Processing: Estimation Theory",
       Prentice Hall, 1993, ch. 4 and 8 (linear model, least squares; from memory).
    .. [2] K. R. Fyfe, E. D. S. Munck, "Analysis of computed order tracking", Mech. Syst.
       Signal Process. 11(2), 1997 (angle-domain order tracking; here fitted directly at the
       sample angles; from memory).
    .. [3] Frisch-Waugh-Lovell partition of a linear model (nuisance columns projected out;
       from memory: any econometrics textbook).
    """
    good = np.isfinite(fit.coef_y).all(axis=1)

    def used(rows: np.ndarray) -> np.ndarray:  # no copy when every revolution is good
        return rows if all_good else rows[good]

    all_good = bool(good.all())
    coef_y, coef_n = used(fit.coef_y), used(fit.coef_n)
    schur_nn, schur_ny, resid_yy = used(fit.schur_nn), used(fit.schur_ny), used(fit.resid_yy)
    sample_counts = used(fit.sample_counts)
    observations = used(fit.observations)
    q = coef_n.shape[2]
    p = coef_y.shape[1]
    gamma = np.zeros(q)
    dropped: list[float] = []
    nn = np.zeros((q, q))
    unseen = np.zeros((p, p))
    if q and len(coef_y):
        # window model: synchronous coefficients common to all revolutions, tones shared
        aa = used(fit.gram_aa).sum(axis=0)
        an = used(fit.gram_an).sum(axis=0)
        nn = used(fit.gram_nn).sum(axis=0)
        ay = used(fit.gram_ay).sum(axis=0)
        ny = used(fit.gram_ny).sum(axis=0)
        w = np.linalg.lstsq(aa, np.concatenate([an, ay[:, None]], axis=1), rcond=None)[0]
        s_nn = nn - an.T @ w[:, :q]
        s_ny = ny - an.T @ w[:, q]
        keep = np.ones(q, dtype=bool)
        raw = np.diag(nn)
        for k, f in enumerate(fit.nuisance_hz):
            cols = slice(2 * k, 2 * k + 2)
            kept_fraction = np.diag(s_nn)[cols] / np.maximum(raw[cols], 1e-300)
            if raw[cols].sum() <= 0 or kept_fraction.min() < MIN_NUISANCE_KEPT_FRACTION:
                keep[cols] = False
                dropped.append(f)
        if keep.any():
            # the minimum-norm solution (close tones of a comb may be nearly collinear)
            s_pinv = np.linalg.pinv(s_nn[np.ix_(keep, keep)], rcond=1e-10, hermitian=True)
            gamma[keep] = s_pinv @ s_ny[keep]
            unseen = unseen_covariance(coef_n[:, :, keep], w[:, :q][:, keep], s_pinv)
    beta = coef_y - np.einsum("rpq,q->rp", coef_n, gamma)
    # residual energy summed over the revolutions (only the sum is needed: the sums of the
    # per-revolution terms, contracted with gamma once)
    resid = float(resid_yy.sum()) - 2.0 * float(schur_ny.sum(axis=0) @ gamma) \
        + float(gamma @ schur_nn.sum(axis=0) @ gamma)
    dof = max(int(observations.sum()) - p * len(beta) - int(np.count_nonzero(gamma)), 1)
    noise_rms = math.sqrt(max(resid, 0.0) / dof)
    phasors = beta[:, 1::2] + 1j * beta[:, 2::2]
    nuisance = {f: complex(gamma[2 * k], gamma[2 * k + 1])
                for k, f in enumerate(fit.nuisance_hz) if f not in dropped}
    return OrderEstimate(fit.orders, phasors, beta[:, 0], noise_rms, tuple(dropped), nuisance,
                         tuple(fit.nuisance_hz), gamma, nn, int(sample_counts.sum()),
                         unseen * noise_rms ** 2)


def unseen_covariance(coef_n: np.ndarray, window_coef_n: np.ndarray,
                      schur_pinv: np.ndarray) -> np.ndarray:
    """What the fitted tones add to the error of the mean per-revolution coefficients and
    the scatter between revolutions does not show, per unit noise variance.

    Revolution r's coefficients are ``beta_r = b_r - C_r gamma``, with ``b_r`` its own fit
    without tones, ``C_r`` (p, q) its fit of each tone column and ``gamma`` the tones fitted
    over the window with the synchronous part common to all revolutions (:func:`solve_orders`).
    In white noise of variance sigma^2 every piece is linear in the noise, and with
    ``W`` the window's fit of the tone columns (the Gram-weighted mean of ``C_r``), ``S`` the
    tones' Schur complement, ``C`` the mean of ``C_r`` and ``D_r = C_r - C``:

    * ``Cov(mean beta) = sigma^2 [sum A_r^-1 / R^2 + W S^-1 W' - (C - W) S^-1 (C - W)']``
      (``A_r`` a revolution's Gram matrix of the synchronous columns);
    * the scatter of the ``beta_r`` divided by R has the expectation
      ``sigma^2 [sum A_r^-1 / R^2 - sum D_r S^-1 D_r' / (R (R - 1))]``.

    The difference, returned here, is the share of the tones' fitting error that is common
    to all revolutions: large when an order lies within about one beat per window of a tone
    (the 1x of a 2-pole motor 1 Hz below its own mains over half a second), where the circle
    from the scatter alone holds far less than it says.

    Parameters
    ----------
    coef_n : numpy.ndarray
        ``C_r`` of the fitted tone columns, shape (R, p, k).
    window_coef_n : numpy.ndarray
        ``W``, shape (p, k).
    schur_pinv : numpy.ndarray
        The (pseudo-)inverse of ``S``, shape (k, k), as used for the tones' fit.

    Returns
    -------
    numpy.ndarray
        Shape (p, p), to be multiplied by the noise variance; symmetric.

    References
    ----------
    .. [1] S. M. Kay, "Fundamentals of Statistical Signal Processing: Estimation Theory",
       Prentice Hall, 1993, ch. 4 and 8 (covariance ``sigma^2 (H'H)^-1`` of a linear
       least-squares estimate; from memory).
    .. [2] Frisch-Waugh-Lovell partition of a linear model (from memory: any econometrics
       textbook); the expectation of a sample covariance of linear functions of Gaussian
       noise (elementary; common practice, no source).
    """
    n_revs, p = coef_n.shape[0], coef_n.shape[1]
    if n_revs == 0 or coef_n.shape[2] == 0:
        return np.zeros((p, p))
    mean_c = coef_n.mean(axis=0)
    offset = mean_c - window_coef_n
    out = window_coef_n @ schur_pinv @ window_coef_n.T - offset @ schur_pinv @ offset.T
    if n_revs > 1:
        dev = coef_n - mean_c
        # sum_r D_r S+ D_r': one matrix product, then one contraction over r and the tones
        # (a three-operand einsum would loop over every index at once)
        out += np.tensordot(dev @ schur_pinv, dev, axes=([0, 2], [0, 2])) / (
            n_revs * (n_revs - 1))
    return 0.5 * (out + out.T)


def estimate_orders(sample_ticks: np.ndarray, values: np.ndarray, starts: np.ndarray,
                    ends: np.ndarray, tick_hz: float, orders: tuple[int, ...] = (1, 2, 3),
                    nuisance_hz: tuple[float, ...] = ()) -> OrderEstimate:
    """One-shot :func:`fit_block` and :func:`solve_orders` for a whole record of one pickup.

    Parameters
    ----------
    sample_ticks : numpy.ndarray
        Sample times, board timer ticks.
    values : numpy.ndarray
        The samples, any unit.
    starts : numpy.ndarray
        Tick of the tach edge that starts each revolution.
    ends : numpy.ndarray
        Tick of the tach edge that ends each revolution.
    tick_hz : float
        The board's timer tick rate, Hz.
    orders : tuple of int, default (1, 2, 3)
        The orders fitted.
    nuisance_hz : tuple of float, default ()
        Known non-synchronous tones, Hz.

    Returns
    -------
    OrderEstimate
        As :func:`solve_orders`.

    References
    ----------
    .. [1] S. M. Kay, "Fundamentals of Statistical Signal Processing: Estimation Theory",
       Prentice Hall, 1993, ch. 4 and 8 (linear model, least squares; from memory).
    .. [2] K. R. Fyfe, E. D. S. Munck, "Analysis of computed order tracking", Mech. Syst.
       Signal Process. 11(2), 1997 (angle-domain order tracking; here fitted directly at the
       sample angles; from memory).
    """
    origin = int(starts[0]) if len(starts) else 0
    fit = fit_block(np.asarray(sample_ticks, dtype=np.int64), np.asarray(values, dtype=float),
                    starts, ends, tick_hz, orders, nuisance_hz, origin)
    return solve_orders(fit)
