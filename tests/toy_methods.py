"""Toy methods used by the tests to exercise the machinery (not physics)."""

import dataclasses

from timescale.plugin import Bill, Design, Method, Simulation, param


@dataclasses.dataclass(frozen=True)
class IdealParams:
    gain: float = param(1.0, doc="output gain")


class Ideal(Method):
    """Exact x(t/α) with a gain: a minimal method used to test the machinery."""

    name = "test-ideal"
    summary = "ideal scaling used by the tests"
    Params = IdealParams

    def design(self, pulse, factor, params, technology):
        return Design(factor=factor)

    def simulate(self, pulse, design, params, rng, trials=1, technology=None):
        return Simulation(pulse=pulse.dilate(design.factor).scale(params.gain))

    def bill(self, design, params, technology):
        return Bill(area=0.0, power=0.0, energy_per_pulse=0.0, bw_internal=0.0)
