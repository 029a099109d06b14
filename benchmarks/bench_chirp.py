"""Speed of the chirp-dispersive chain against a plain scipy.signal.fftconvolve chain.

Run: ``python benchmarks/bench_chirp.py [--repeat 5]``. Prints CPU times measured in this run
(BLAS on one thread; the **median** of the repeats and the **first call**, the load average
beside them) and their ratios, and checks that both chains give the same output (max |difference|
relative to the peak, on the plain chain's grid). Four cases:

The first two compare the chains with each other (the plain one samples the line's impulse
response over the whole sampled band and cuts it there, so the two differ most where the
signal fills that band); the third checks both against a closed form; the fourth times the
method's own sizing.

1. one 1e6-sample time stretch: chirp × (bias + pulse) → ideal quadratic line → envelope,
   via :mod:`timescale.dispersion` (FFT with spread padding at next_fast_len sizes) against the
   same chain convolving with the sampled line impulse response h(t) = e^{jt²/(2Φ)}/√(2πjΦ)
   using ``scipy.signal.fftconvolve``;
2. a 100-point sweep of the stretch factor of an invented UWB pulse through
   ``timescale.stretch`` (design + simulate + bill) against the fftconvolve chain per point;
3. a Gaussian envelope through a quadratic-phase line, both chains against the closed form.
4. the share of the self-sizing in that sweep: ``design`` alone per point against the whole
   ``timescale.stretch``, for the first point of a new pulse (its sizing table is computed
   then) and warm, on the 130 nm-class card, stretch and lens.
"""

from __future__ import annotations

import argparse
import math
import os
import time

os.environ["OMP_NUM_THREADS"] = "1"
os.environ["OPENBLAS_NUM_THREADS"] = "1"

import numpy as np  # noqa: E402
from scipy.signal import fftconvolve  # noqa: E402

import timescale
from timescale.numerics import dispersion as dsp
from timescale.data.pulse import Pulse


def plain_chain(env, rate, t0, gdd_chirp, gdd_line):
    """Reference: chirp, convolve with the sampled quadratic-phase impulse response, |·|."""
    t = t0 + np.arange(env.size) / rate
    s = env * np.exp(0.5j * t * t / gdd_chirp)  # gdd_chirp = inf: no chirp
    # h spans the delays Φ·Δω over the sampled band ±πf_s; e^{jt²/(2Φ)} ↔ √(2πjΦ)e^{−jΦω²/2}
    half = int(math.ceil(abs(gdd_line) * math.pi * rate * rate))
    th = np.arange(-half, half + 1) / rate
    h = np.exp(0.5j * th * th / gdd_line) / np.sqrt(2j * math.pi * gdd_line) / rate
    return np.abs(fftconvolve(s, h))


def ours_chain(env, rate, t0, gdd_chirp, gdd_line):
    """Returns (times of the output samples, |envelope|)."""
    t = t0 + np.arange(env.size) / rate
    s = dsp.Wave(env * np.exp(0.5j * t * t / gdd_chirp), rate, t0, carrier=0.0)
    w = dsp.disperse(s, gdd_line)
    return w.t, dsp.envelope(w)


def plain_times(n, rate, t0, gdd_line):
    half = int(math.ceil(abs(gdd_line) * math.pi * rate * rate))
    return t0 + (np.arange(n + 2 * half) - half) / rate


def timed(fn, *args, repeat=5):
    """(first-call CPU time, median CPU time of the repeats, output)."""
    times = []
    for _ in range(repeat):
        c0 = time.process_time()
        out = fn(*args)
        times.append(time.process_time() - c0)
    return times[0], float(np.median(times)), out


def load():
    try:
        return os.getloadavg()[0]
    except OSError:
        return float("nan")


def deviation(t_ours, y_ours, t_plain, y_plain, n, rate, t0, gdd_line):
    """max |ours − plain| relative to the peak, where the plain full convolution is not cut by the
    record's ends (its 'valid' part: the whole line response lies on the input record)."""
    half = int(math.ceil(abs(gdd_line) * math.pi * rate * rate))
    lo, hi = t0 + half / rate, t0 + (n - 1 - half) / rate
    inside = (t_plain >= max(lo, t_ours[0])) & (t_plain <= min(hi, t_ours[-1]))
    if not inside.any():
        return float("nan")
    return float(np.max(np.abs(np.interp(t_plain[inside], t_ours, y_ours) - y_plain[inside])) / np.max(y_plain))


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args(argv)
    print(f"bench_chirp: {os.cpu_count()} CPUs, load average {load():.2f} at start; CPU times, BLAS 1 thread")
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
    f_ours, t_ours, (tt, y_ours) = timed(ours_chain, env, rate, t0, phi1, phi2, repeat=args.repeat)
    f_plain, t_plain, y_plain = timed(plain_chain, env, rate, t0, phi1, phi2, repeat=args.repeat)
    dev = deviation(tt, y_ours, plain_times(n, rate, t0, phi2), y_plain, n, rate, t0, phi2)
    print(f"1e6-sample stretch (M = {factor}), median of {args.repeat}: timescale.dispersion {t_ours * 1e3:.1f} ms "
          f"(first {f_ours * 1e3:.1f}), fftconvolve {t_plain * 1e3:.1f} ms (first {f_plain * 1e3:.1f}); ratio "
          f"plain/ours = {t_plain / t_ours:.2f} (first calls {f_plain / f_ours:.2f}) [load {load():.2f}]")
    print(f"   output samples: ours {y_ours.size}, plain {y_plain.size}; max |ours − plain| = {dev:.1e} of the peak (where the full convolution is not cut by the record's ends)")

    # -- 2. a 100-point factor sweep of an invented UWB pulse --------------------------------
    x = Pulse.monocycle(sigma=50e-12, center=1e-9, duration=3e-9, rate=100e9, name="invented-uwb")
    factors = np.linspace(1.5, 8.0, 100)
    method = timescale.get_method("chirp-dispersive")
    t = time.process_time()
    designs = []
    for a in factors:
        oc = timescale.stretch(x, method, float(a), seed=0)
        designs.append(oc.design)
    t_sweep = time.process_time() - t
    inputs = []
    for d in designs:
        fs = d.sim_rate
        tt = np.arange(d.window[0], d.window[1], 1 / fs)
        inputs.append((d.bias + np.interp(tt, x.t, x.values), fs,
                       tt[0] - 0.5 * (d.window[0] + d.window[1]), d.gdd_chirp, d.gdd_line))
    sweeps_plain, sweeps_core, worst = [], [], 0.0
    for rep_ in range(3):  # three passes over the sweep, medians reported
        t = time.process_time()
        outs_plain = [plain_chain(*a) for a in inputs]
        sweeps_plain.append(time.process_time() - t)
        t = time.process_time()
        outs_core = [ours_chain(*a) for a in inputs]
        sweeps_core.append(time.process_time() - t)
    for a, yp, (to, yo) in zip(inputs, outs_plain, outs_core):
        worst = np.nanmax([worst, deviation(to, yo, plain_times(a[0].size, a[1], a[2], a[4]), yp, a[0].size, a[1],
                                            a[2], a[4])])
    t_plain, t_core = float(np.median(sweeps_plain)), float(np.median(sweeps_core))
    print(f"100-point sweep: timescale.stretch (design+simulate+bill) {t_sweep:.2f} s (one pass); chain only, "
          f"median of 3 passes: timescale.dispersion {t_core:.3f} s, fftconvolve {t_plain:.3f} s; ratios plain/ours = "
          f"{t_plain / t_core:.2f} (chain), {t_plain / t_sweep:.3f} (full method); worst max |ours − plain| "
          f"{worst:.1e} of the peak [load {load():.2f}]")

    # -- 3. error check against a closed form ----------------------------------------------------
    # A Gaussian envelope exp(−t²/(2σ²)) through the quadratic phase exp(−jΦω²/2) stays Gaussian:
    # |y(t)| = (1 + (Φ/σ²)²)^(−1/4) · exp(−t²/(2σ²(1 + (Φ/σ²)²))) (Agrawal, Nonlinear Fiber
    # Optics, §3.2, dispersion-induced broadening of a Gaussian pulse)
    n3, rate3, sig, phi = 2 ** 16, 2e12, 3e-12, 200e-24
    t03 = -n3 / rate3 / 2
    t3 = t03 + np.arange(n3) / rate3
    g = np.exp(-0.5 * (t3 / sig) ** 2)
    b2 = (phi / sig ** 2) ** 2

    def exact(t):
        return (1 + b2) ** -0.25 * np.exp(-0.5 * t * t / (sig * sig * (1 + b2)))

    f_o, m_o, (to3, yo3) = timed(ours_chain, g, rate3, t03, math.inf, phi, repeat=args.repeat)
    f_p, m_p, yp3 = timed(plain_chain, g, rate3, t03, math.inf, phi, repeat=args.repeat)
    tp3 = plain_times(n3, rate3, t03, phi)
    print(f"Gaussian (sigma {sig * 1e12:g} ps, GDD {phi * 1e24:g} ps^2, {n3} samples), median of {args.repeat}: ours "
          f"{m_o * 1e3:.1f} ms, fftconvolve {m_p * 1e3:.1f} ms; max error against the closed form: ours "
          f"{np.max(np.abs(yo3 - exact(to3))):.1e}, fftconvolve {np.max(np.abs(yp3 - exact(tp3))):.1e} of the "
          f"input peak [load {load():.2f}]")

    # -- 4. the self-sizing's share: design alone against the whole stretch -------------------
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
    print(f"load average {load():.2f} at the end")


if __name__ == "__main__":
    main()
