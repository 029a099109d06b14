"""Speed and accuracy of the switched-filter simulation against scipy lsim and ngspice.

Prints, measured in this run:
1. K mismatch trials of a 16-state switched Padé all-pass over 4000 samples: our batched
   exact simulation vs scipy.signal.lsim called per trial (before and after the switch);
2. one 1e5-sample record of a pulse train switched in every period, ours vs lsim per segment;
3. one trial as an ngspice transient of the same gm-C netlist (default tolerances).
Ratios are of wall-clock time (ours: median of three calls, and the first call alone);
errors are max |difference| relative to the peak.

Run: python benchmarks/bench_switched.py [--trials 1000] [--lsim-trials 100]
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import tempfile
import time

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402
from scipy import signal as ss  # noqa: E402

from timescale.numerics import lti  # noqa: E402
from timescale_builtins.switched_bandwidth import prototypes  # noqa: E402


def lsim_switched(A, B, C, D, u, dt, ks_list, alpha):
    """lsim on each constant segment (switch instants on samples), state carried across."""
    N = u.size
    t = np.arange(N) * dt
    y = np.empty(N)
    x0 = np.zeros(A.shape[0])
    edges = [0] + list(ks_list) + [N - 1]
    for s, (a, b) in enumerate(zip(edges[:-1], edges[1:])):
        sc = 1.0 if s % 2 == 0 else 1.0 / alpha
        _, ys, xs = ss.lsim((A * sc, B[:, None] * sc, C[None], D), u[a:b + 1], t[a:b + 1] - t[a],
                            X0=x0, interp=True)
        y[a:b + 1] = ys
        x0 = xs[-1]
    return y


def _timed(fn, repeats=3):
    """(result, first-call time, median time over `repeats` calls), s."""
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return out, times[0], float(np.median(times))


def main(argv=None):
    ap = argparse.ArgumentParser()
    ap.add_argument("--trials", type=int, default=1000)
    ap.add_argument("--lsim-trials", type=int, default=100, help="trials timed with lsim")
    args = ap.parse_args(argv)
    rng = np.random.default_rng(0)
    tau, alpha, dt = 1.5e-9, 2.0, 2.5e-12
    proto = prototypes.pade(16, tau)
    A, B, C, D = (np.asarray(proto.system.A), np.asarray(proto.system.B),
                  np.asarray(proto.system.C), float(proto.system.D))
    N, K = 4000, args.trials
    t = np.arange(N) * dt
    u = np.exp(-0.5 * ((t - 0.5e-9) / 80e-12) ** 2)
    ks = 440  # switch on a sample so lsim can be split exactly
    mis = 1 + 0.01 * rng.standard_normal((K,) + A.shape) * (A != 0)
    As = A[None] * mis
    # 1. Monte Carlo trials (first call, then the median of three: the first call also pays
    #    for fresh memory pages)
    sch1 = lti.Schedule.switched(lti.StateSpace(As, B, C, D), alpha, ks * dt)
    y, t_first, t_ours = _timed(lambda: lti.simulate(sch1, u, dt))
    Kl = min(args.lsim_trials, K)
    t0 = time.perf_counter()
    err = 0.0
    for k in range(Kl):  # the baseline: one lsim call per trial and segment
        yl = lsim_switched(As[k], B, C, D, u, dt, [ks], alpha)
        err = max(err, np.max(np.abs(yl - y[k])) / np.max(np.abs(yl)))
    t_lsim = (time.perf_counter() - t0) / Kl
    print(f"[1] {K} trials x {N} samples, 16 states: ours {t_ours:.3f} s median of 3 "
          f"({t_ours / K * 1e3:.3f} ms/trial; first call {t_first:.3f} s); lsim {t_lsim * 1e3:.2f} "
          f"ms/trial (timed on {Kl}); ratio {t_lsim * K / t_ours:.1f}x (first call "
          f"{t_lsim * K / t_first:.1f}x); max error vs lsim {err:.2e} of peak")
    # 2. long record: pulse train, switched in every period (forward at +ks, back at period end)
    period = 1000
    NL = 100_000
    tl = np.arange(NL) * dt
    ul = np.zeros(NL)
    starts = np.arange(0, NL, period)
    for s in starts:
        ul += np.exp(-0.5 * ((tl - s * dt - 0.5e-9) / 80e-12) ** 2)
    bounds = []
    for s in starts[:-1]:
        bounds += [s + ks, s + period]
    bounds = np.array(bounds[:-1] if bounds[-1] >= NL - 1 else bounds)
    systems = [lti.StateSpace(A, B, C, D) if i % 2 == 0 else lti.StateSpace(A / alpha, B / alpha, C, D)
               for i in range(bounds.size + 1)]
    sch = lti.Schedule(tuple(systems), bounds * dt)
    yL, t_first_L, t_ours_L = _timed(lambda: lti.simulate(sch, ul, dt)[0])
    t0 = time.perf_counter()
    yLl = lsim_switched(A, B, C, D, ul, dt, list(bounds), alpha)
    t_lsim_L = time.perf_counter() - t0
    errL = np.max(np.abs(yLl - yL)) / np.max(np.abs(yLl))
    print(f"[2] 1e5-sample train, {bounds.size} switches: ours {t_ours_L:.4f} s median of 3 (first "
          f"call {t_first_L:.4f} s); lsim {t_lsim_L:.3f} s; ratio {t_lsim_L / t_ours_L:.1f}x (first "
          f"call {t_lsim_L / t_first_L:.1f}x); max error vs lsim {errL:.2e} of peak")
    # 3. ngspice, one trial of case 1 (nominal system)
    if shutil.which("ngspice") is None:
        print("[3] ngspice not installed: skipped")
        return 0
    y1 = lti.simulate(lti.Schedule.switched(proto.system, alpha, ks * dt + 0.5e-12, ramp=1e-12,
                                            segments=16), u, dt)[0]
    with tempfile.TemporaryDirectory() as d:
        net = prototypes.ngspice_netlist(proto.system, 200e-15, ks * dt, alpha, ramp=1e-12,
                                         source="exp(-0.5*((time-0.5e-9)/80e-12)^2)",
                                         t_stop=(N - 1) * dt, t_step=dt, out_file=f"{d}/o.txt")
        open(f"{d}/f.cir", "w").write(net)
        t0 = time.perf_counter()
        subprocess.run(["ngspice", "-b", f"{d}/f.cir"], cwd=d, check=True, capture_output=True)
        t_sp = time.perf_counter() - t0
        data = np.loadtxt(f"{d}/o.txt", skiprows=1)
    ysp = data[:, 1:-1] @ C + D * data[:, -1]
    errS = np.max(np.abs(np.interp(data[:, 0], t, y1) - ysp)) / np.max(np.abs(y1))
    t_trial = t_ours / K
    print(f"[3] ngspice one trial {t_sp:.3f} s (incl. start-up); ours {t_trial * 1e3:.3f} ms/trial "
          f"batched; ratio {t_sp / t_trial:.0f}x per trial; ngspice deviation {errS:.2e} of peak")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
