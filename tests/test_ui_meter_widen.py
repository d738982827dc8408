"""A run whose 1x is steady but small against its pickup's noise averages longer instead of
waiting for ever (procedure.guide.Procedure.widen_to, ui.meter.MeterAdapter.widen).

The meter's window slides: once it is full, waiting only replaces old revolutions with new
ones and the 95 % circle stays about as wide. Averaging N independent revolutions shrinks
the mean's scatter as one over the square root of N (the standard error of a mean, any
statistics text; from memory), so the window doubles until the phase is within its limit,
or up to WIDEN_FACTOR_MAX times what the run wants, where the reading is kept with the
circle it has."""

from __future__ import annotations

import math
from dataclasses import replace

import pytest

from test_ui_procedure import Rig  # tests/ on the path, as the suite runs
from trueturn.dsp.synthetic import OrderComponent, SyntheticRun, synthesize
from trueturn.link.codec import Message, StreamDecoder
from trueturn.procedure.guide import WIDEN_FACTOR_MAX, Mode
from trueturn.ui.meter import METER_WINDOW_REVS, MeterAdapter


def _fed(revs: int, window: int, seed: int) -> MeterAdapter:
    """A meter fed ``revs`` revolutions of a small 1x (40 counts of noise against 12 of
    1x) on one pickup, averaging ``window`` of them."""
    run = SyntheticRun(speed_rpm=3000.0, duration_s=(revs + 2) / 50.0, channels=1,
                       orders=((OrderComponent(1, 12.0, 40.0),),), noise_counts=40.0,
                       seed=seed)
    adapter = MeterAdapter(["left"], 60.0, max_revs=window)
    for item in StreamDecoder().feed(synthesize(run)[0]):
        if isinstance(item, Message):
            adapter.feed(item)
    return adapter


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_a_wider_window_averages_the_revolutions_already_fitted(seed: int) -> None:
    meter = _fed(480, METER_WINDOW_REVS, seed)
    narrow = meter.view().readings["left"]
    assert narrow.revolutions == METER_WINDOW_REVS
    assert meter.set_window(4 * METER_WINDOW_REVS) == 4 * METER_WINDOW_REVS
    wide = meter.view().readings["left"]
    assert wide.revolutions == 4 * METER_WINDOW_REVS      # no new revolution was needed
    # four times the revolutions: half the circle (1/sqrt(4)), within the spread of the
    # circles' own estimates over 60 and 240 revolutions
    assert narrow.confidence_radius is not None and wide.confidence_radius is not None
    assert wide.confidence_radius / narrow.confidence_radius == pytest.approx(0.5, rel=0.3)
    # never past what the analyser holds
    assert meter.set_window(10 ** 6) == meter.analyzer.hold_revs


def test_the_procedure_widens_a_steady_window_and_keeps_the_reading_at_its_end() -> None:
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    proc = rig.proc
    rig.hands_on()
    proc.arm_run(True, rig.t)                  # the as-found run
    rig.spin(2.0, rig.setup.speed_rpm)
    wanted = proc.revolutions_wanted
    most = proc.revolutions_most
    assert most == WIDEN_FACTOR_MAX * wanted

    def over(revs: int, phase_width_deg: float = 8.0, steady: bool = True) -> dict:
        out = {}
        for n, r in rig.readings().items():
            radius = r.amplitude * math.sin(math.radians(phase_width_deg))
            out[n] = replace(r, revolutions=revs, confidence_deg=phase_width_deg,
                             confidence_radius=radius, steady=steady)
        return out

    # steady over the whole window, the phase 8 degrees wide (limit 5): not kept; once the
    # window has slid a whole window's length (the speed's settling out of it), wider
    assert not proc.ready(over(60))
    assert proc.widen_to(over(60), 60, 61) is None
    assert proc.widen_to(over(60), 60, 120) == 120
    # the wider window still filling: wait
    assert proc.widen_to(over(100), 120, 130) is None
    assert proc.widen_to(over(120), 120, 240) == 240
    # not steady: averaging longer is no help, nothing to widen
    assert proc.widen_to(over(60, steady=False), 60, 120) is None
    # at the longest window the reading is kept as its noise leaves it
    assert proc.widen_to(over(most), most, 2 * most) is None
    assert proc.ready(over(most))
    assert not proc.ready(over(most, steady=False))
    # within the limit at once: kept, no widening
    assert proc.ready(over(wanted, phase_width_deg=3.0))
    assert proc.widen_to(over(wanted, phase_width_deg=3.0), 60, 120) is None
