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

from test_ui_procedure import Rig, running_the_check_run, with_circle  # tests/ on the path
from trueturn.dsp.synthetic import OrderComponent, SyntheticRun, synthesize
from trueturn.link.codec import Message, StreamDecoder
from trueturn.model import Reading
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

    # within the limit at once: kept, no widening
    assert proc.ready(over(wanted, phase_width_deg=3.0))
    assert proc.widen_to(over(wanted, phase_width_deg=3.0), 60, 120) is None
    # steady over the whole window, the phase 8 degrees wide (limit 5): not kept; once the
    # window has slid a whole window's length (the speed's settling out of it), wider
    assert not proc.ready(over(60))
    assert proc.widen_to(over(60), 60, 61) is None
    assert proc.widen_to(over(60), 60, 120) == 120
    # the wider window still filling: wait, even once the phase is within its limit
    assert proc.widen_to(over(100), 120, 130) is None
    assert not proc.ready(over(100, phase_width_deg=3.0))
    assert proc.ready(over(120, phase_width_deg=3.0))
    assert proc.widen_to(over(120), 120, 240) == 240
    # not steady: averaging longer is no help, nothing to widen
    assert proc.widen_to(over(60, steady=False), 60, 120) is None
    # at the longest window the reading is kept as its noise leaves it
    assert proc.widen_to(over(most), most, 2 * most) is None
    assert proc.ready(over(most))
    assert not proc.ready(over(most, steady=False))


def _at_the_check_run(circle_of_as_found: float) -> tuple[Rig, dict[str, Reading]]:
    """The bench grinder's two-plane job, run to its first check run: the rig, and the
    check run's readings with circles of ``circle_of_as_found`` times the as-found 1x."""
    rig = Rig("bench-grinder", Mode.TWO_PLANE)
    rig.hands_on()
    rig.run()                                   # as found
    return rig, running_the_check_run(rig, circle_of_as_found)


def test_an_undecided_check_run_averages_longer_before_its_verdict() -> None:
    # A check run whose residual is within the grade on the estimate but whose 95 % bound
    # reaches past it (ISO 14253-1 decision rule, from memory: conformance is proven only
    # with the uncertainty inside the allowance) would send the person to a trim that
    # corrects noise. When the longest average would decide it (its circles shrink as one
    # over the square root of the revolutions: the standard error of a mean), its window
    # doubles instead, up to what the meter holds
    rig, check = _at_the_check_run(0.2)         # within on the estimate, not proven
    proc = rig.proc
    as_found = proc.runs[0].readings
    wanted = proc.revolutions_wanted
    hold = 600
    assert proc.ready(check)
    assert proc.widen_to(check, wanted, wanted, hold) == 2 * wanted
    # not kept until the readings fill the wider window
    assert not proc.ready(check)

    def over(revs: int, circle_of_as_found: float) -> dict[str, Reading]:
        return {n: with_circle(r, circle_of_as_found * as_found[n].amplitude, revs)
                for n, r in check.items()}

    assert proc.ready(over(2 * wanted, 0.08))
    assert proc.widen_to(over(2 * wanted, 0.08), 2 * wanted, 2 * wanted, hold) is None
    assert proc.widen_to(over(2 * wanted, 0.15), 2 * wanted, 2 * wanted, hold) == 4 * wanted
    # (this rotor's bound meets its allowance at a circle of about 0.135 of the as-found
    # 1x: 0.145 over 480 revolutions is undecided, over 600 it would read 0.13)
    # no further than the meter holds; there the verdict takes the circle as it is
    assert proc.widen_to(over(4 * wanted, 0.145), 4 * wanted, 4 * wanted, hold) == hold
    assert proc.widen_to(over(hold, 0.145), hold, hold, hold) is None
    assert proc.ready(over(hold, 0.145))
    proc.record(over(hold, 0.08), rig.setup.speed_rpm, rig.t)
    assert proc.verdict is not None and proc.verdict.passed


@pytest.mark.parametrize("circle_of_as_found", [0.4, 0.1])
def test_a_check_run_a_longer_average_would_not_decide_is_kept_at_once(
        circle_of_as_found: float) -> None:
    # 0.4 of the as-found 1x: undecided, and still so with the circle shrunk to the longest
    # window's (600 revolutions: 0.45 of it); 0.1: proven as it is
    rig, check = _at_the_check_run(circle_of_as_found)
    proc = rig.proc
    wanted = proc.revolutions_wanted
    assert proc.ready(check)
    assert proc.widen_to(check, wanted, wanted, 600) is None


def test_a_check_run_clearly_over_the_grade_is_not_averaged_longer() -> None:
    # the estimate itself past the allowance: a longer average would not change the
    # answer, the trim follows at once
    rig, _ = _at_the_check_run(0.4)
    proc = rig.proc
    as_found = proc.runs[0].readings
    wanted = proc.revolutions_wanted
    as_left = {n: with_circle(replace(r, revolutions=wanted), 0.4 * r.amplitude)
               for n, r in as_found.items()}    # the correction did nothing
    assert proc.ready(as_left)
    assert proc.widen_to(as_left, wanted, wanted, 600) is None
