"""Spectrum peaks and their labels (trueturn.dsp.spectrum)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from trueturn.dsp.spectrum import label_peak, spectrum


@pytest.mark.parametrize("hz, rot_hz, line_hz, label", [
    (50.0, 50.0, 60.0, "1x"),       # common practice, no source: 3000 rpm is 50 Hz
    (120.0, 23.0, 60.0, "2x line"),  # common practice: magnetic hum at twice line, 60 Hz mains
    (100.0, 23.0, 50.0, "2x line"),  # ... and 100 Hz on 50 Hz mains
    (60.0, 23.0, 60.0, "line"),
    (69.0, 23.0, 60.0, "3x"),
    (46.0, 23.0, 60.0, "2x"),
    (87.0, 23.0, 60.0, "other"),
])
def test_labels(hz: float, rot_hz: float, line_hz: float, label: str) -> None:
    assert label_peak(hz, rot_hz, line_hz, tolerance_hz=1.0) == label


def test_peaks_found_labelled_and_sized() -> None:
    fs = 4000.0
    t = np.arange(int(8 * fs)) / fs
    rng = np.random.default_rng(5)
    x = (0.8 * np.cos(2 * np.pi * 27.3 * t) + 0.2 * np.cos(2 * np.pi * 54.6 * t + 1)
         + 1.5 * np.cos(2 * np.pi * 60.0 * t) + 0.4 * np.cos(2 * np.pi * 120.0 * t)
         + rng.normal(0, 0.05, t.size))
    spec = spectrum(x, fs, rotation_hz=27.3, line_hz=60.0, resolution_hz=0.25)
    by_label = {p.label: p for p in spec.peaks}
    assert set(by_label) == {"1x", "2x", "line", "2x line"}
    # tone amplitudes from power summed over the main lobe (Parseval), independent of bin
    for label, hz, amp in (("1x", 27.3, 0.8), ("2x", 54.6, 0.2), ("line", 60.0, 1.5),
                           ("2x line", 120.0, 0.4)):
        assert by_label[label].hz == pytest.approx(hz, abs=0.1)
        assert by_label[label].amplitude == pytest.approx(amp, rel=0.03)
    # Parseval check of the whole density against numpy's variance (reference: numpy.var)
    df = spec.resolution_hz
    assert float((spec.asd ** 2).sum() * df) == pytest.approx(float(np.var(x)), rel=0.02)


VOLTS_PER_COUNT = 5.0 / 1024  # 10-bit ADC, 5 V reference (ATmega328P datasheet transfer)


def _peaks(run_kwargs: dict, mains_hz: float) -> list:
    from trueturn.dsp import analyze_capture
    from trueturn.dsp.synthetic import SyntheticRun, synthesize

    raw, _ = synthesize(SyntheticRun(duration_s=4.0, noise_counts=2.0, seed=3, **run_kwargs))
    result = analyze_capture(raw, mains_hz=mains_hz)
    return [p for s in result.spectra if s.sensor == "pickup 1" for p in s.peaks]


@pytest.mark.parametrize(("order_counts", "hum_counts", "first", "second"), [
    (8.0, 40.0, "line", "2x"),   # the line dominates: issue #14 item 12
    (40.0, 8.0, "2x", "line"),
])
def test_a_2x_on_the_line_lists_both_and_names_the_stronger(
        order_counts: float, hum_counts: float, first: str, second: str) -> None:
    # 2x at 50.5 Hz on 50 Hz mains: half a hertz apart, inside one spectral bin (about 1 Hz),
    # so the spectrum shows one peak; the order fit measures both (two beats in 4 s).
    from trueturn.dsp.synthetic import OrderComponent, ToneComponent

    peaks = _peaks({"speed_rpm": 1515.0, "orders": ((OrderComponent(1, 100.0, 30.0),
                                                     OrderComponent(2, order_counts, 80.0)),
                                                    (OrderComponent(1, 60.0, 200.0),)),
                    "tones": ((ToneComponent(50.0, hum_counts, 10.0),), ())}, 50.0)
    near = [p for p in peaks if abs(p.hz - 50.3) < 1.0]
    assert len(near) == 1
    assert near[0].label == first and near[0].also == (second,)
    # its amplitude is the power of both together (Parseval over the main lobe)
    both = math.hypot(order_counts, hum_counts) * VOLTS_PER_COUNT
    assert near[0].amplitude == pytest.approx(both, rel=0.1)


def test_the_line_inside_the_lobe_of_a_strong_1x_is_listed_with_its_fitted_level() -> None:
    # Bench-grinder-like: 1x at 58.9 Hz, 60 Hz hum a tenth of it, 1.1 Hz away: inside the
    # 1x's main lobe (Hann, +/- 2 bins of about 1 Hz), so no peak of its own; the order
    # fit measures it, and the spectrum lists it there, marked fitted.
    from trueturn.dsp.synthetic import OrderComponent, ToneComponent

    hum = 12.0
    peaks = _peaks({"speed_rpm": 58.9 * 60, "orders": ((OrderComponent(1, 120.0, 30.0),),
                                                       (OrderComponent(1, 60.0, 200.0),)),
                    "tones": ((ToneComponent(60.0, hum, 10.0),), ())}, 60.0)
    line = [p for p in peaks if p.label == "line"]
    assert len(line) == 1 and line[0].fitted and line[0].hz == 60.0
    # the least-squares amplitude of a tone in white noise has a standard error of
    # sigma * sqrt(2 / N) (linear model, from memory: Kay 1993, ch. 4): 4 s x 4 kSps at
    # sigma 2 counts gives 0.022 counts; the comb of three tones 0.1 Hz apart, fitted over
    # 4 s, inflates it (estimate: up to 3x); 5 of those
    sigma_counts = 2.0 * math.sqrt(2 / 16000)
    assert line[0].amplitude == pytest.approx(hum * VOLTS_PER_COUNT,
                                              abs=5 * 3 * sigma_counts * VOLTS_PER_COUNT)
    assert any(p.label == "1x" and not p.fitted for p in peaks)
