"""Speed of the chirp-dispersive chain against a plain scipy.signal.fftconvolve chain.

Run: ``python benchmarks/bench_chirp.py``. Prints times measured in this run and their ratios
(no absolute thresholds). Two cases:

1. one 1e6-sample time stretch: chirp × (bias + pulse) → ideal quadratic line → envelope,
   via :mod:`timescale.dispersion` (FFT with spread padding at next_fast_len sizes) against the
   same chain convolving with the sampled line impulse response h(t) = e^{jt²/(2Φ)}/√(2πjΦ)
   using ``scipy.signal.fftconvolve``;
2. a 100-point sweep of the stretch factor of an invented UWB pulse through
   ``timescale.stretch`` (design + simulate + bill) against the fftconvolve chain per point;
3. the share of the self-sizing in that sweep: ``design`` alone per point against the whole
   ``timescale.stretch``, for the first point of a new pulse (its sizing table is computed
   then) and warm, on the 130 nm-class card, stretch and lens.
"""

from __future__ import annotations

import math
import time

import numpy as np
from scipy.signal import fftconvolve

import timescale
from timescale.numerics import dispersion as dsp
from timescale.data.pulse import Pulse


def plain_chain(env, rate, t0, gdd_chirp, gdd_line):
    """Reference: chirp, convolve with the sampled quadratic-phase impulse response, |·|."""
    t = t0 + np.arange(env.size) / rate
    s = env * np.exp(0.5j * t * t / gdd_chirp)
    # h spans the delays Φ·Δω over the sampled band ±πf_s; e^{jt²/(2Φ)} ↔ √(2πjΦ)e^{−jΦω²/2}
    half = int(math.ceil(abs(gdd_line) * math.pi * rate * rate))
    th = np.arange(-half, half + 1) / rate
    h = np.exp(0.5j * th * th / gdd_line) / np.sqrt(2j * math.pi * gdd_line) / rate
    return np.abs(fftconvolve(s, h))


def ours_chain(env, rate, t0, gdd_chirp, gdd_line):
    t = t0 + np.arange(env.size) / rate
    s = dsp.Wave(env * np.exp(0.5j * t * t / gdd_chirp), rate, t0, carrier=0.0)
    return dsp.envelope(dsp.disperse(s, gdd_line))


def timed(fn, *args, repeat=3):
    best = math.inf
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn(*args)
        best = min(best, time.perf_counter() - t)
    return best, out


def main():
    # -- 1. one 1e6-sample stretch (invented burst of Gaussian pulses, complex baseband) -----
    n, rate = 1_000_000, 2e12
    t0 = -n / rate / 2
    t = t0 + np.arange(n) / rate
    gate = np.exp(-(t / (0.35 * n / rate)) ** 8)
    pulses = sum(np.exp(-((t - c) / 3e-12) ** 2) for c in np.linspace(-80e-12, 80e-12, 9))
    env = gate * (1.0 + 0.3 * pulses)
    phi1 = 2000e-24
    factor = 1.2
    phi2 = (factor - 1) * phi1  # M = 1 + Φ2/Φ1
    t_ours, y_ours = timed(ours_chain, env, rate, t0, phi1, phi2, repeat=2)
    t_plain, y_plain = timed(plain_chain, env, rate, t0, phi1, phi2, repeat=2)
    print(f"1e6-sample stretch (M = {factor}): timescale.dispersion {t_ours * 1e3:.1f} ms, "
          f"fftconvolve {t_plain * 1e3:.1f} ms, ratio plain/ours = {t_plain / t_ours:.2f}")
    print(f"   output samples: ours {y_ours.size}, plain {y_plain.size}")

    # -- 2. a 100-point factor sweep of an invented UWB pulse --------------------------------
    x = Pulse.monocycle(sigma=50e-12, center=1e-9, duration=3e-9, rate=100e9, name="invented-uwb")
    factors = np.linspace(1.5, 8.0, 100)
    method = timescale.get_method("chirp-dispersive")
    t = time.perf_counter()
    designs = []
    for a in factors:
        oc = timescale.stretch(x, method, float(a), seed=0)
        designs.append(oc.design)
    t_sweep = time.perf_counter() - t
    inputs = []
    for d in designs:
        fs = d.sim_rate
        tt = np.arange(d.window[0], d.window[1], 1 / fs)
        inputs.append((d.bias + np.interp(tt, x.t, x.values), fs,
                       tt[0] - 0.5 * (d.window[0] + d.window[1]), d.gdd_chirp, d.gdd_line))
    t = time.perf_counter()
    for args in inputs:
        plain_chain(*args)
    t_plain = time.perf_counter() - t
    t = time.perf_counter()
    for args in inputs:
        ours_chain(*args)
    t_core = time.perf_counter() - t
    print(f"100-point sweep: timescale.stretch (design+simulate+bill) {t_sweep:.2f} s; chain only: "
          f"timescale.dispersion {t_core:.3f} s, fftconvolve {t_plain:.3f} s; ratios plain/ours = "
          f"{t_plain / t_core:.2f} (chain), {t_plain / t_sweep:.3f} (full method)")


    # -- 3. the self-sizing's share: design alone against the whole stretch -------------------
    tech = timescale.preset("example-cmos130")
    for arrangement in ("stretch", "lens"):
        params = method.make_params(arrangement=arrangement)
        pulse = Pulse.gaussian(fwhm=1e-9, center=5e-9, duration=12e-9, rate=20e9, name="invented-1ns")
        t = time.perf_counter()
        method.design(pulse, 2.0, params, tech)
        t_first = time.perf_counter() - t
        # two interleaved factor sets, so neither loop finds the other's lines in the caches
        pts = np.linspace(1.5, 4.0, 40)
        t = time.perf_counter()
        for a in pts[::2]:
            method.design(pulse, float(a), params, tech)
        t_design = (time.perf_counter() - t) / pts[::2].size
        t = time.perf_counter()
        for a in pts[1::2]:
            timescale.stretch(pulse, method, float(a), technology=tech, arrangement=arrangement, seed=0)
        t_whole = (time.perf_counter() - t) / pts[1::2].size
        print(f"{arrangement}: design of a new pulse {t_first * 1e3:.1f} ms, warm {t_design * 1e3:.1f} ms; "
              f"whole stretch {t_whole * 1e3:.1f} ms; design share warm {t_design / t_whole:.2f}, "
              f"first/warm {t_first / t_design:.1f}")


if __name__ == "__main__":
    main()
