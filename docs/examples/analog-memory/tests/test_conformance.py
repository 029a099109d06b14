"""The conformance suite every timescale method passes, applied to this package."""

from timescale.testing import MethodConformance

from timescale_analog_memory import AnalogMemory


class TestAnalogMemory(MethodConformance):
    method = AnalogMemory()
