"""Spectrum peaks and their labels (trueturn.dsp.spectrum)."""

from __future__ import annotations

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
