"""Measurement figures (issue #5): efficiency against the Cramér-Rao bound, bias under speed
drift with strong mains hum, the 1x's 95 % circle near a mains line (and the app's meter
waiting out a line 0.3-0.4 Hz from the 1x), decode + DSP speed against real time, and
update latency."""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
import time

import numpy as np

from common import Row
from trueturn.dsp import LiveAnalyzer, analyze_capture
from trueturn.dsp.findings import Code
from trueturn.dsp.order import estimate_orders
from trueturn.dsp.synthetic import OrderComponent, SyntheticRun, ToneComponent, synthesize
from trueturn.link.codec import Message, StreamDecoder

TICK_HZ = 2_000_000
# the meter's default hum model on 50 Hz mains: combs of three tones at line and twice line
HUM_COMB = (49.9, 50.0, 50.1, 99.8, 100.0, 100.2)


def _crlb_ratio(snr_db: float, trials: int = 1000) -> tuple[float, float]:
    """RMS 1x phase error / sqrt(CRLB), CRLB = 2 sigma^2 / (N A^2).

    From memory: S. M. Kay, Fundamentals of Statistical Signal Processing: Estimation
    Theory (1993), sinusoid of known frequency in white Gaussian noise. The estimator runs
    as in the meter: per-revolution DC, 1x, 2x, 3x plus the 50/100 Hz hum combs.
    """
    rng = np.random.default_rng(20 + int(snr_db))
    fs_hz, rot_hz, revs, sigma = 2000.0, 29.0, 12, 1.0
    amp = math.sqrt(2 * sigma**2 * 10 ** (snr_db / 10))
    period = int(TICK_HZ / fs_hz)
    n = int((revs + 1) / rot_hz * fs_hz)
    ticks = np.arange(n, dtype=np.int64) * period + 33
    edges = np.round(np.arange(revs + 1) / rot_hz * TICK_HZ).astype(np.int64) + 100
    theta = 2 * np.pi * rot_hz * (ticks - 100) / TICK_HZ
    used = int(((ticks >= edges[0]) & (ticks < edges[-1])).sum())
    errors = []
    for _ in range(trials):
        phase = rng.uniform(0, 2 * np.pi)
        y = amp * np.cos(theta - phase) + rng.normal(0, sigma, n) + 2.0
        est = estimate_orders(ticks, y, edges[:-1], edges[1:], TICK_HZ, (1, 2, 3), HUM_COMB)
        errors.append(np.angle(est.phasors[:, 0].mean() * np.exp(-1j * phase)))
    crlb_std = math.sqrt(2 * sigma**2 / (used * amp**2))
    # (ratio, its Monte Carlo standard error: the RMS of n normal errors spreads ~1/sqrt(2n))
    ratio = float(np.sqrt(np.mean(np.square(errors)))) / crlb_std
    return ratio, ratio / math.sqrt(2 * trials)


def _drift_hum_bias(speed_rpm: float, mains_hz: float,
                    grid_offset_hz: float = 0.0) -> tuple[float, float]:
    """Worst phase (deg) and amplitude (%) error over 4 seeds: +/-3 % drift, hum 10x 1x.

    ``grid_offset_hz``: the hum sits that far from the nominal mains frequency the meter is
    set to (a real grid wanders by a few hundredths of a hertz); 100-revolution window then.
    """
    worst_deg, worst_pct = 0.0, 0.0
    for seed in range(4):
        run = SyntheticRun(
            speed_rpm=speed_rpm, duration_s=5.0, drift_fraction=0.03, noise_counts=0.5,
            orders=((OrderComponent(1, 30.0, 40.0 + 70 * seed),),
                    (OrderComponent(1, 25.0, 300.0 - 50 * seed),)),
            tones=((ToneComponent(mains_hz + grid_offset_hz, 300.0, 33.0 * seed),),
                   (ToneComponent(mains_hz + grid_offset_hz, 250.0, 10.0),)),
            seed=seed)
        raw, truth = synthesize(run)
        revs = 100 if grid_offset_hz else None
        for r in analyze_capture(raw, mains_hz=mains_hz, revs=revs).readings:
            want = truth.order_phasors[r.channel][1] * 5.0 / 1024
            worst_deg = max(worst_deg, abs(math.degrees(np.angle(r.phasor / want))))
            worst_pct = max(worst_pct, 100 * abs(abs(r.phasor) / abs(want) - 1))
    return worst_deg, worst_pct


def _hum_circle(offset_hz: float, seeds: int = 200, revs: int = 30,
                mains_hz: float = 60.0) -> tuple[float, float]:
    """(share of readings whose 95 % circle holds the true 1x, share blocked as
    ``order_on_mains`` on the 1x) for a 1x ``offset_hz`` from the mains line over ``revs``
    revolutions as the app keeps a run: a 40-count 1x, a 3-count 2x, hum 1.2 counts at the
    line and 0.6 at twice it, 1 count of noise, random phases per seed (invented numbers of
    the balancing bench's size; a 2-pole motor on its own mains). A blocked reading counts
    as held (it is not shown as true)."""
    held = blocked = 0
    for seed in range(seeds):
        rng = np.random.default_rng(seed)
        rot_hz = mains_hz + offset_hz
        ph = rng.uniform(0.0, 360.0, 4)
        run = SyntheticRun(
            speed_rpm=60.0 * rot_hz, duration_s=(revs + 2) / rot_hz, channels=1,
            orders=((OrderComponent(1, 40.0, ph[0]), OrderComponent(2, 3.0, ph[1])),),
            tones=((ToneComponent(mains_hz, 1.2, ph[2]),
                    ToneComponent(2 * mains_hz, 0.6, ph[3])),),
            noise_counts=1.0, first_edge_rev=float(rng.uniform()), seed=seed)
        raw, truth = synthesize(run)
        r = analyze_capture(raw, revs=revs, mains_hz=mains_hz, unit="V pk").readings[0]
        stop = any(f.code is Code.ORDER_ON_MAINS and f.blocking for f in r.findings)
        blocked += stop
        held += stop or abs(r.phasor - truth.order_phasors[0][1] * 5.0 / 1024) \
            <= r.confidence_radius
    return held / seeds, blocked / seeds


def _mains_wait_circle(offset_hz: float, hum_ratio: float, grid_hz: float, seeds: int = 200,
                       mains_hz: float = 60.0) -> tuple[float, float, float]:
    """(share of runs taken, share of those whose 95 % circle holds the true 1x, median
    revolutions averaged) for the app's meter (``wait_out_mains``, 60-revolution window),
    a 1x ``offset_hz`` from the line and hum ``hum_ratio`` times the 1x at the line (half
    that at twice it), the grid ``grid_hz`` off: looked at every 0.1 s of signal as the app
    refreshes, the first steady reading over at least 30 revolutions taken as the app keeps
    a run. A 30-count 1x, a 3-count 2x, 1 count of noise, the speed ramping 0.1 % over the
    8 s (invented numbers)."""
    taken = inside = 0
    revs: list[int] = []
    for seed in range(seeds):
        rng = np.random.default_rng(seed)
        ph = rng.uniform(0.0, 360.0, 4)
        hum = hum_ratio * 30.0
        run = SyntheticRun(
            speed_rpm=60.0 * (mains_hz + offset_hz), duration_s=8.0, rate_hz=2000, channels=1,
            orders=((OrderComponent(1, 30.0, ph[0]), OrderComponent(2, 3.0, ph[1])),),
            tones=((ToneComponent(mains_hz + grid_hz, hum, ph[2]),
                    ToneComponent(2 * (mains_hz + grid_hz), hum / 2, ph[3])),),
            noise_counts=1.0, drift_fraction=0.0005, first_edge_rev=float(rng.uniform()),
            seed=seed)
        raw, truth = synthesize(run)
        meter = LiveAnalyzer(max_revs=60, unit="V pk", mains_hz=mains_hz, wait_out_mains=True)
        looked = None
        for m in StreamDecoder().feed(raw):
            if not isinstance(m, Message) or not meter.feed(m):
                continue
            now = meter._latest_tick  # the stream's own clock
            if looked is not None and now - looked < 0.1 * meter.tick_hz:
                continue
            looked = now
            readings = meter.readings()
            if readings and readings[0].steady and readings[0].revolutions >= 30:
                r = readings[0]
                taken += 1
                revs.append(r.revolutions)
                inside += abs(r.phasor - truth.order_phasors[0][1] * 5.0 / 1024) \
                    <= r.confidence_radius
                break
    return taken / seeds, inside / max(taken, 1), float(np.median(revs)) if revs else math.nan


def _speed() -> tuple[float, float, float, float]:
    """(decode + DSP, DSP only, decode only, share of DSP time in the order fit) seconds of
    signal per CPU second, 2 ch x 4 kSps, on one core: measured in a child process whose BLAS runs one thread (CPU time counts
    every thread, and an idle BLAS worker spinning on a second core is no work done)."""
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1", MKL_NUM_THREADS="1")
    out = subprocess.run([sys.executable, os.path.abspath(__file__), "--speed"], env=env,
                         capture_output=True, text=True, check=True,
                         cwd=os.path.dirname(os.path.abspath(__file__)))
    both, dsp_only, decode_only, fit_share = json.loads(out.stdout.strip().splitlines()[-1])
    return both, dsp_only, decode_only, fit_share


def _speed_here() -> tuple[float, float, float, float]:
    """:func:`_speed` in this process (best of nine runs of each: the machine is shared,
    and the best run is the one least disturbed by other work)."""
    duration_s = 20.0
    raw, _ = synthesize(SyntheticRun(speed_rpm=2880.0, duration_s=duration_s, rate_hz=4000,
                                     channels=2, noise_counts=2.0, seed=1))
    best_all = best_dsp = best_decode = best_feed = math.inf
    for _ in range(9):
        t0 = time.process_time()
        analyze_capture(raw)
        best_all = min(best_all, time.process_time() - t0)
        t0 = time.process_time()
        messages = [m for m in StreamDecoder().feed(raw) if isinstance(m, Message)]
        best_decode = min(best_decode, time.process_time() - t0)
        t0 = time.process_time()
        meter = LiveAnalyzer(max_revs=100_000)
        for m in messages:
            meter.feed(m)
        meter.readings()
        meter.spectra()
        best_dsp = min(best_dsp, time.process_time() - t0)
        t0 = time.process_time()  # the same without the fit (nothing is ever processed)
        meter = LiveAnalyzer(max_revs=100_000, batch_revs=1 << 30)
        for m in messages:
            meter.feed(m)
        best_feed = min(best_feed, time.process_time() - t0)
    fit_share = max(0.0, 1.0 - best_feed / best_dsp)
    return duration_s / best_all, duration_s / best_dsp, duration_s / best_decode, fit_share


def _latency_ms() -> tuple[float, float, float]:
    """(p99, max processing ms, block fill ms): revolution end to updated reading, live."""
    run = SyntheticRun(speed_rpm=2880.0, duration_s=10.0, rate_hz=4000, channels=2, seed=2)
    raw, _ = synthesize(run)
    messages = [m for m in StreamDecoder().feed(raw) if isinstance(m, Message)]
    meter = LiveAnalyzer(max_revs=100)
    times = []
    for m in messages:
        t0 = time.perf_counter()
        if meter.feed(m):
            meter.readings()
            times.append(time.perf_counter() - t0)
    block_fill_ms = 1000.0 * run.block_conversions / (run.rate_hz * run.channels)
    ms = 1000 * np.array(times)
    return float(np.percentile(ms, 99)), float(ms.max()), block_fill_ms


def rows() -> list[Row]:
    out = []
    for snr_db in (-10.0, 0.0, 10.0):
        ratio, spread = _crlb_ratio(snr_db)
        out.append(Row(f"dsp: 1x phase RMS error / CRLB, per-sample SNR {snr_db:+.0f} dB",
                       f"{ratio:.3f} +/- {spread:.3f}", "<= 1.15", ratio <= 1.15))
    for speed_rpm, mains, offset in ((3000.0, 60.0, 0.0), (2400.0, 50.0, 0.0),
                                     (3000.0, 60.0, 0.05)):
        deg, pct = _drift_hum_bias(speed_rpm, mains, offset)
        what = f"{speed_rpm:.0f} rpm +/-3 %, {mains:.0f} Hz hum at 10x 1x"
        if offset:
            what += f", grid {offset:+.2f} Hz off, 100 revs"
        out.append(Row(f"dsp: 1x phase error, {what}", f"{deg:.3f} deg", "< 0.5 deg", deg < 0.5))
        out.append(Row(f"dsp: 1x amplitude error, {what}", f"{pct:.3f} %", "< 1 %", pct < 1.0))
    for offset_hz in (-1.0, 2.0, 0.5):
        held, blocked = _hum_circle(offset_hz)
        out.append(Row(f"dsp: true 1x inside its 95 % circle or the reading blocked, 1x "
                       f"{offset_hz:+.1f} Hz from 60 Hz mains, 30 revs, 200 seeds",
                       f"{100 * held:.1f} % ({100 * blocked:.0f} % blocked)", ">= 93 %",
                       held >= 0.93))
    for offset_hz, ratio, grid_hz in ((-0.3, 1.0, 0.02), (0.4, 3.0, 0.02), (0.3, 3.0, 0.03)):
        took, held, median_revs = _mains_wait_circle(offset_hz, ratio, grid_hz)
        out.append(Row(f"dsp: app meter waits out the hum: true 1x inside its 95 % circle, 1x "
                       f"{offset_hz:+.1f} Hz from 60 Hz mains, hum {ratio:g}x the 1x, grid "
                       f"{grid_hz:+.2f} Hz off, 200 seeds",
                       f"{100 * held:.1f} % ({100 * took:.0f} % taken, median {median_revs:.0f} "
                       "revs)", ">= 93 %, all taken", held >= 0.93 and took == 1.0))
    both, dsp_only, decode_only, fit_share = _speed()
    out.append(Row("dsp: decode + DSP vs real time, 2 ch x 4 kSps, one core",
                   f"{both:.0f}x", ">= 500x", both >= 500))
    out.append(Row("dsp: DSP alone (messages already decoded) vs real time", f"{dsp_only:.0f}x",
                   "(info)", None))
    out.append(Row("dsp: decode alone (trueturn.link.codec.StreamDecoder) vs real time",
                   f"{decode_only:.0f}x", "(info)", None))
    out.append(Row("dsp: share of DSP time in fitting, readings and spectra (rest: per-message "
                   "work, tach)", f"{100 * fit_share:.0f} %", "(info)", None))
    p99, worst, fill = _latency_ms()
    total = worst + fill
    out.append(Row("dsp: revolution end to updated reading (block fill + worst processing)",
                   f"{total:.1f} ms ({fill:.0f} + {worst:.1f}; p99 {p99:.2f})", "<= 250 ms",
                   total <= 250))
    return out


if __name__ == "__main__":
    if sys.argv[1:] == ["--speed"]:
        print(json.dumps(_speed_here()))
    else:
        from common import format_table

        print(format_table(rows()))
