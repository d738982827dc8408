"""Measurement: shaft angle from the tach, order-tracked 1x/2x/3x phasors, averaging,
steadiness, spectrum and units. Pure numpy/scipy; see host/trueturn/dsp/README.md."""

from trueturn.dsp.analysis import Analysis, analyze_capture
from trueturn.dsp.meter import LiveAnalyzer, PickupReading
from trueturn.dsp.units import PickupProfile

__all__ = ["Analysis", "LiveAnalyzer", "PickupProfile", "PickupReading", "analyze_capture"]
