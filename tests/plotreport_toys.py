"""Toy methods and cubes for the figure and report tests (not physics: stand-ins whose behaviour
the tests control: a band limit that grows with a setting, noise per trial, a refusal above a
factor).
"""

from __future__ import annotations

import json
from dataclasses import dataclass

import numpy as np
from scipy import signal as ss

import timescale
from timescale.runner.cube import Axis, assemble
from timescale.plugin import Bill, BillItem, Design, Method, Simulation, param
from timescale.runner.cells import CellSpec, run_cell


@dataclass(frozen=True)
class ToyParams:
    scale: float = param(1.0, doc="band limit as a multiple of the output's 99 % bandwidth")
    noise: float = param(0.0, units="V", doc="rms white noise added to the output")
    max_factor: float = param(100.0, doc="refuse factors above this")


@dataclass(frozen=True, kw_only=True)
class ToyDesign(Design):
    cutoff: float


class ToyLowpass(Method):
    """Ideal dilation followed by a 4th-order Butterworth low-pass at scale x the output band."""

    name = "toy-lowpass"
    summary = "toy: ideal scaling through a low-pass filter (test stand-in)"
    Params = ToyParams
    version = "0.0-test"

    def design(self, pulse, factor, params, technology):
        if factor > params.max_factor:
            raise ValueError(f"factor {factor} above max_factor {params.max_factor}")
        bw = pulse.occupied_bandwidth() / factor
        return ToyDesign(factor=factor, cutoff=params.scale * bw)

    def simulate(self, pulse, design, params, rng, trials=1, technology=None):
        y = pulse.dilate(design.factor).pad(0.0, 3 * pulse.duration * design.factor)
        b, a = ss.butter(4, min(design.cutoff / (y.rate / 2), 0.99))
        v = ss.lfilter(b, a, y.values)
        v = np.broadcast_to(v, (trials, v.size)) + params.noise * rng.standard_normal((trials, v.size))
        return Simulation(pulse=y.with_values(v))

    def bill(self, design, params, technology):
        # cost grows with the band it must pass (stand-in for a real bill)
        return Bill.from_items([BillItem("filter", area=design.cutoff * 1e-17, power=design.cutoff * 1e-12)],
                               active_time=1e-8, bw_internal=design.cutoff)


class ToyNoisy(ToyLowpass):
    """Same as toy-lowpass, a different name (so it takes a hash-based style)."""

    name = "toy-noisy"
    summary = "toy: scaling with output noise (test stand-in)"


def pulses():
    g = timescale.Pulse.gaussian(fwhm=300e-12, center=0.8e-9, duration=3e-9, rate=40e9, name="gaussian")
    m = timescale.Pulse.monocycle(fwhm=300e-12, center=0.8e-9, duration=3e-9, rate=40e9, name="monocycle")
    return {"gaussian": g, "monocycle": m}


def swept_cube(trials=3, seed=7, scales=(0.6, 1.0, 2.0), factors=(0.5, 2.0, 4.0)):
    """A cube over method × pulse × factor × scale (× trial), with failed cells: toy-lowpass
    refuses factor 4 (max_factor=3); toy-noisy adds noise that varies by trial."""
    methods = [ToyLowpass(), ToyNoisy()]
    pmap = pulses()
    axes = [Axis("method_name", [m.name for m in methods]), Axis("pulse", list(pmap)),
            Axis("factor", list(factors)),
            Axis("scale", list(scales), units="", long_name="band limit / output bandwidth")]
    base = {"toy-lowpass": {"max_factor": 3.0}, "toy-noisy": {"noise": 0.02}}
    specs = []
    i = 0
    for m in methods:
        for pn, p in pmap.items():
            for f in factors:
                for s in scales:
                    specs.append(CellSpec(i, m, {**base[m.name], "scale": s}, pn, p, f, trials, seed))
                    i += 1
    rows = [run_cell(s) for s in specs]
    prov = {"params": json.dumps(base), "technology": timescale.preset("example-balanced").to_json()
            if hasattr(timescale, "preset") else "{}", "seed_entropy": str(seed),
            "suite": json.dumps({"name": "toy sweep", "factors": list(factors), "scale": list(scales)})}
    return assemble(rows, axes, trials=trials, provenance=prov, methods=methods)
