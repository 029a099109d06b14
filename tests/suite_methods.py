"""Methods used by the suite and executor tests to exercise the machinery (not physics)."""

import dataclasses
import math
import time

import numpy as np

from timescale.plugin import Bill, Design, Method, Simulation, param


@dataclasses.dataclass(frozen=True)
class NoisyParams:
    noise: float = param(1e-3, units="V", doc="rms white noise added to the output")
    delay: float = param(0.0, units="s", doc="wall time the simulation waits (for kill tests)")


class Noisy(Method):
    """Exact x(t/α) plus white noise drawn from the cell's generator."""

    name = "suite-noisy"
    summary = "ideal scaling plus white noise (tests)"
    Params = NoisyParams

    def design(self, pulse, factor, params, technology):
        return Design(factor=factor)

    def simulate(self, pulse, design, params, rng, trials=1, technology=None):
        if params.delay:
            time.sleep(params.delay)
        out = pulse.dilate(design.factor)
        noisy = out.values + params.noise * rng.standard_normal((trials, out.n))
        return Simulation(pulse=out.with_values(noisy), clean=out)

    def bill(self, design, params, technology):
        return Bill(area=1e-9, power=1e-3, energy_per_pulse=1e-12, bw_internal=1e9)


@dataclasses.dataclass(frozen=True)
class BrokenParams:
    mode: str = param("ok", doc="how to misbehave", choices=("ok", "raise", "nan"))


class Broken(Method):
    """Fails on request: raises for factors above 3 or mode "raise", returns NaN for "nan"."""

    name = "suite-broken"
    summary = "a method that fails on request (tests)"
    Params = BrokenParams

    def design(self, pulse, factor, params, technology):
        if factor > 3 or params.mode == "raise":
            raise ValueError("this design cannot reach the factor")
        return Design(factor=factor)

    def simulate(self, pulse, design, params, rng, trials=1, technology=None):
        out = pulse.dilate(design.factor)
        if params.mode == "nan":
            v = np.array(out.values, dtype=float)
            v[len(v) // 2] = math.nan
            return Simulation(pulse=_RawPulse(v, out))
        return Simulation(pulse=out)

    def bill(self, design, params, technology):
        return Bill(area=0.0, power=0.0, energy_per_pulse=0.0, bw_internal=0.0)


class _RawPulse:
    """Quacks like a Pulse but holds non-finite samples (a Pulse refuses them)."""

    def __init__(self, values, like):
        self.values = values
        self.n = values.shape[-1]
        self.rate, self.t0 = like.rate, like.t0

    def with_values(self, values):
        return _RawPulse(np.asarray(values), self)
