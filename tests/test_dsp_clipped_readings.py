"""Each reading says whether its own pickup clipped within its own window (issue #20).

A sample at an ADC rail - 0 or 1023 counts: the ATmega328P's 10-bit result runs 0..0x3FF
(datasheet, "ADC Conversion Result": ADC = Vin * 1024 / Vref, full scale 0x3FF) - means the
waveform was cut there and its 1x reads low, so the balancing engine must be told per reading
(model.Reading.clipped), not only for the stream as a whole.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from trueturn.dsp import LiveAnalyzer, analyze_capture
from trueturn.dsp.synthetic import OrderComponent, SyntheticRun, synthesize
from trueturn.link.codec import Message, StreamDecoder

ADC_TOP = 1023  # ATmega328P datasheet: 10-bit result, 0..1023


def _messages(raw: bytes) -> list[Message]:
    return [m for m in StreamDecoder().feed(raw) if isinstance(m, Message)]


def _rail_share(amplitude: float, dc: float) -> float:
    """The share of a sinusoid's samples (uniform phase) at or beyond either rail: the time
    ``dc + A cos`` spends above ``top`` and below 0, ``(acos(a) + acos(b)) / pi``."""
    upper = math.acos(min(1.0, (ADC_TOP - dc) / amplitude))
    lower = math.acos(min(1.0, dc / amplitude))
    return (upper + lower) / math.pi


LOUD = SyntheticRun(speed_rpm=2400.0, duration_s=3.0, channels=2, noise_counts=1.0,
                    orders=((OrderComponent(1, 600.0, 30.0),),   # beyond both rails
                            (OrderComponent(1, 100.0, 200.0),)), seed=3)


def test_a_pickup_beyond_the_adc_range_reads_clipped_and_the_other_does_not() -> None:
    raw, _ = synthesize(LOUD)
    result = analyze_capture(raw)
    loud, quiet = sorted(result.readings, key=lambda r: r.channel)
    assert loud.clipped and not quiet.clipped
    assert quiet.clipped_samples == 0
    # the count is the samples of the averaged revolutions at a rail: the share a sinusoid
    # of 600 counts about 512 spends beyond 0..1023 (1 count of noise moves it by < 1 %)
    samples = loud.window_s * LOUD.rate_hz
    assert loud.clipped_samples / samples == pytest.approx(_rail_share(600.0, 512.0), rel=0.03)
    # and the plain reading every other layer keeps carries the flag
    assert loud.as_reading().clipped and not quiet.as_reading().clipped
    # a clipped sinusoid's 1x reads low (what makes the flag matter)
    assert loud.amplitude < 600.0 * 5.0 / 1024


def _with_rail_sample(msgs: list[Message], block: int, channel: int) -> list[Message]:
    """The messages with one sample of ``channel`` in the ``block``-th sample block set to
    the top rail."""
    out, seen = [], 0
    for m in msgs:
        if m.name == "samples":
            if seen == block:
                values = np.array([int(x) for x in m["samples"]])
                values[channel] = ADC_TOP
                m = m._replace(values={**m.values, "samples": values})
            seen += 1
        out.append(m)
    return out


def test_one_sample_at_the_rail_marks_only_its_pickup_and_only_in_its_window() -> None:
    run = SyntheticRun(speed_rpm=2400.0, duration_s=3.0, channels=2, noise_counts=1.0, seed=5)
    msgs = _with_rail_sample(_messages(synthesize(run)[0]), block=20, channel=0)
    meter = LiveAnalyzer(max_revs=200)
    for m in msgs:
        meter.feed(m)
    meter.end_of_stream()
    every = {r.channel: r for r in meter.readings()}
    assert every[0].clipped and every[0].clipped_samples == 1
    assert not every[1].clipped
    # the last 40 revolutions (1 s) began long after block 20 (0.6 s in): not clipped
    recent = {r.channel: r for r in meter.readings(last=40)}
    assert not recent[0].clipped and recent[0].clipped_samples == 0


def test_clipping_is_counted_across_a_lost_block_too() -> None:
    # a lost sample block sends the meter down its other fitting path (uneven samples)
    run = LOUD.__class__(**{**LOUD.__dict__, "lost_blocks": (30,)})
    loud, quiet = sorted(analyze_capture(synthesize(run)[0]).readings, key=lambda r: r.channel)
    assert loud.clipped and loud.clipped_samples > 0
    assert not quiet.clipped
