"""Whole-cell cost of a Monte Carlo comparison: design, simulation, metrics and cube.

A design search evaluates thousands of cells, so what one whole cell costs is what matters:
``compare(pulse, ["switched-bandwidth"], factors=[2.0], trials=K, gm_mismatch=0.01,
jitter=1e-12)`` for the design the method sizes itself (Padé order 16 with its output summers,
24 states) and for two fixed Padé orders with about 16 and exactly 32 states (orders 11 and 21:
17 and 32 states; a summed gm-C Padé of order n has n + ⌈n/2⌉ nodes). Everything is measured in this run; CPU times of
this process with BLAS on one thread, the load average beside each figure.

Printed per case:

1. the whole ``compare`` call: **first call** in a fresh Python process (imports done first,
   scipy.signal, scipy.optimize and scipy.linalg included, and reported on their own: the call
   pays for fresh memory, every plan and cache) and **warm** (median of 3 calls);
2. the split of a warm cell: design (with bill and limits), simulation, metrics, cube;
3. the plain alternative a designer would write with scipy and numpy, given our design for free:
   per trial, ``scipy.signal.lsim`` on each side of the switch (switch rounded to a sample) and a
   cross-correlation fit (``numpy.correlate`` against the ideal x(t/α) on the output grid,
   parabolic sub-sample peak, least-squares gain, NRMSE); timed on a subset of trials, per
   trial × K. It computes less than the cell does (no fitted factor, bandwidths, jitter SNR,
   noise or bill), so the ratio is conservative;
4. with ``--baseline DIR`` (a checkout of an older commit) the same first-call and warm figures
   of that code, in the same run, in its own fresh processes.

Run: python benchmarks/bench_cell.py [--trials 1000] [--plain-trials 30] [--baseline DIR]
"""

from __future__ import annotations

import argparse
import json
import math
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

os.environ["OMP_NUM_THREADS"] = "1"
os.environ["OPENBLAS_NUM_THREADS"] = "1"

import numpy as np  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
CASES = {"sized": {}, "17 states": {"prototype": "pade", "order": 11},
         "32 states": {"prototype": "pade", "order": 21}}
MC = {"gm_mismatch": 0.01, "jitter": 1e-12}


def load():
    try:
        return os.getloadavg()[0]
    except OSError:
        return float("nan")


def pulse():
    from timescale.data.pulse import Pulse

    return Pulse.gaussian(fwhm=200e-12, center=1e-9, duration=2e-9, rate=100e9, name="invented-gaussian")


def run_compare(case, K):
    """First call and warm median of compare() with whatever `timescale` is importable."""
    c0 = time.process_time()
    import scipy.linalg  # noqa: F401 (every import out of the timing: newer code defers these
    import scipy.optimize  # noqa: F401  to first use, older code imported them up front)
    import scipy.signal  # noqa: F401

    import timescale as ts
    from timescale.runner import compare as _c, cube as _cube  # noqa: F401
    import timescale_builtins.switched_bandwidth  # noqa: F401

    t_import = time.process_time() - c0
    x = pulse()
    times = []
    for _ in range(4):
        c0 = time.process_time()
        cube = ts.compare(x, ["switched-bandwidth"], factors=[2.0], trials=K, seed=1, **MC, **CASES[case])
        times.append(time.process_time() - c0)
    status = str(cube["status"].values.ravel()[0])
    return {"import": t_import, "first": times[0], "warm": float(np.median(times[1:])), "status": status,
            "states": float(cube["filter_order"].values.ravel()[0]) if "filter_order" in cube else math.nan,
            "code": ts.__file__}


def child(code_dir, case, K):
    env = dict(os.environ, PYTHONPATH=str(code_dir))
    out = subprocess.run([sys.executable, str(Path(__file__).resolve()), "--child", case, str(K)], env=env,
                         capture_output=True, text=True, check=True, cwd=tempfile.gettempdir())
    return json.loads(out.stdout.strip().splitlines()[-1])


def split(case, K):
    """Warm CPU times of one cell's parts: design (+ bill, limits), simulation, metrics, cube."""
    from types import SimpleNamespace

    from timescale.contract.outcome import run_method
    from timescale.contract.registry import get_method
    from timescale.runner.cells import Row, cell_rng, measure
    from timescale.runner.cube import assemble
    from timescale.runner.suite import Suite

    x = pulse()
    suite = Suite(pulses={"p": x}, methods=["switched-bandwidth"], factors=[2.0], trials=K, seed=1,
                  params={**MC, **CASES[case]})
    plan = suite.plan()
    spec = plan.cell(0, 1)
    m = get_method("switched-bandwidth")
    params = m.make_params(**dict(spec.params))
    best = {}

    def timed(label, fn):
        c0 = time.process_time()
        out = fn()
        best[label] = min(best.get(label, math.inf), time.process_time() - c0)
        return out

    for _ in range(3):
        design = timed("design", lambda: m.design(x, 2.0, params, spec.technology))
        timed("bill", lambda: (m.bill(design, params, spec.technology), m.limits(design, params, spec.technology)))
        timed("simulation", lambda: m.simulate(x, design, params, cell_rng(1, 0), K, spec.technology))
        oc = run_method(m, x, 2.0, params, spec.technology, cell_rng(1, 0), K)
        values, attrs = timed("metrics", lambda: measure(oc))
        row = Row(0, "ok", "", values, attrs, "{}", "{}", oc.path, oc.orientation)
        methods = [SimpleNamespace(name=k, version=v, summary=s) for k, (v, s) in plan.versions.items()]
        timed("cube", lambda: assemble([row], plan.axes(), trials=K, provenance={}, methods=methods,
                                       pulses=plan.pulses))
    best["design"] += best.pop("bill")
    return best, design, oc, values


def plain(design, x, K, rng):
    """The designer's alternative, per trial: lsim both sides of the switch, then a numpy
    cross-correlation fit. Returns (per-trial CPU time, NRMSEs)."""
    from scipy import signal as ss

    A0, B0, C, D = np.array(design.A), np.array(design.B), np.array(design.C), design.D
    rate = design.sim_rate
    n_out = int(math.ceil((design.record_end - x.t0) * rate)) + 1
    u = np.concatenate([x.values, np.zeros(max(n_out - x.n, 0))])
    t = np.arange(u.size) / rate
    a = design.factor
    r0 = np.interp(t, a * (x.t - x.t0), x.values, left=0.0, right=0.0)  # ideal x(t/α) at latency 0
    out = []
    c0 = time.process_time()
    for _ in range(K):
        mis = 1 + 0.01 * rng.standard_normal(A0.shape) * (A0 != 0)
        A, B = A0 * mis, B0 * (1 + 0.01 * rng.standard_normal(B0.shape) * (B0 != 0))
        ks = int(round((design.t_switch - x.t0 + 1e-12 * rng.standard_normal()) * rate))
        _, y1, xs = ss.lsim((A, B[:, None], C[None], D), u[:ks + 1], t[:ks + 1], interp=True)
        _, y2, _ = ss.lsim((A / a, B[:, None] / a, C[None], D), u[ks:], t[ks:] - t[ks], X0=xs[-1], interp=True)
        y = np.concatenate([y1, y2[1:]])
        c = np.correlate(y, r0, mode="full")
        j = int(np.argmax(np.abs(c)))
        if 0 < j < c.size - 1:
            d = j + 0.5 * (c[j - 1] - c[j + 1]) / (c[j - 1] - 2 * c[j] + c[j + 1])
        else:
            d = float(j)
        shift = d - (r0.size - 1)
        r = np.interp(t - shift / rate, t, r0, left=0.0, right=0.0)
        g = float(y @ r) / float(r @ r)
        out.append(math.sqrt(float(np.sum((y - g * r) ** 2)) / (g * g * float(r @ r))))
    return (time.process_time() - c0) / K, np.array(out)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=1000)
    ap.add_argument("--plain-trials", type=int, default=30, help="trials timed for the plain alternative")
    ap.add_argument("--baseline", type=Path, default=None, help="checkout of older code to time beside ours")
    ap.add_argument("--child", nargs=2, default=None, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        print(json.dumps(run_compare(args.child[0], int(args.child[1]))))
        return 0
    K = args.trials
    codes = [("new", ROOT)]
    if args.baseline:
        base = args.baseline.resolve()
        link = base / "timescale_builtins"  # the plugins of that checkout under their import name
        if not link.exists():
            link.symlink_to(base / "plugins")
        codes.append(("old", base))
    print(f"bench_cell: {os.cpu_count()} CPUs, load average {load():.2f} at start; CPU times, BLAS 1 thread; "
          f"K = {K} trials, gm_mismatch {MC['gm_mismatch']}, switch jitter {MC['jitter']} s")
    for case in CASES:
        res = {}
        for label, d in codes:
            res[label] = child(d, case, K)
            res[label]["load"] = load()
        best, design, oc, values = split(case, K)
        t_plain, nr_plain = plain(design, oc.input, args.plain_trials, np.random.default_rng(5))
        ref = t_plain * K
        cell = sum(best.values())
        print(f"\n{case}: {design.prototype} order {design.order}, {design.states} states, {oc.pulse.n} output samples")
        print(f"  split (warm, best of 3): design {best['design'] * 1e3:.1f} ms, simulation "
              f"{best['simulation'] * 1e3:.1f} ms, metrics {best['metrics'] * 1e3:.1f} ms, cube {best['cube'] * 1e3:.1f} ms; "
              f"metrics/simulation = {best['metrics'] / best['simulation']:.2f} [load {load():.2f}]")
        print(f"  plain alternative: {t_plain * 1e3:.2f} ms/trial (timed on {args.plain_trials}) -> {ref:.1f} s for "
              f"{K}; median NRMSE: plain {np.median(nr_plain):.3g}, ours {np.median(values['nrmse']):.3g}")
        for label, r in res.items():
            print(f"  {label}: compare first call {r['first']:.3f} s ({ref / r['first']:.0f}x plain), warm {r['warm']:.3f} s "
                  f"({ref / r['warm']:.0f}x plain); imports before it {r['import']:.2f} s; status {r['status']} "
                  f"[load {r['load']:.2f}]")
        print(f"  (sum of the warm split {cell:.3f} s)")
    print(f"\nload average {load():.2f} at the end")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
