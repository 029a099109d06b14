"""How the cost grows with the number of Monte Carlo trials K: CPU time and peak memory.

Two workloads, each K in a fresh Python process (so one run's memory does not shape the next):

1. the kernel: K mismatch trials of a 16-state switched Padé filter over 4000 samples
   (``timescale.numerics.lti.simulate``); its output is K × 4000 doubles;
2. a whole ``compare`` cell: the switched-bandwidth method sized for an invented 200 ps pulse,
   gm mismatch and switch jitter, K trials (design, simulation, every metric, the cube).

Printed per K: CPU time (BLAS on one thread) and its ratio to the smallest K's per trial, the
peak resident memory the call added (the kernel's high-water mark reset just before it, read
from /proc, Linux only) against the size of its output (the waveforms for the kernel, the
waveforms and the cube for ``compare``), and the exponent b of CPU ∝ K^b between successive
K (1 = linear). The load average is printed beside each line.

With ``--baseline DIR`` (a checkout of an older commit) the same is measured for that code in the
same run. Run: python benchmarks/bench_scaling.py [--ks 100,1000,10000] [--baseline DIR]
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

ROOT = Path(__file__).resolve().parent.parent


def load():
    try:
        return os.getloadavg()[0]
    except OSError:
        return float("nan")


def _rss(field):
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith(field):
                return int(line.split()[1]) * 1024
    return 0


def _reset_peak():
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")  # resets the high-water mark VmHWM to the current RSS
        return True
    except OSError:
        return False


def measure(workload, K):
    """Run one workload once for memory and once more for time; returns a dict."""
    import numpy as np

    if workload == "kernel":
        sys.path.insert(0, str(Path(__file__).resolve().parent))
        import bench_switched as bs
        from timescale.numerics import lti

        As, B, C, D, u = bs.trials_case("pade", 16, K)
        sch = lti.Schedule.switched(lti.StateSpace(As, B, C, D), bs.ALPHA, bs.KS * bs.DT)

        def call():
            return lti.simulate(sch, u, bs.DT)

        def out_bytes(res):
            return res.nbytes
    else:
        import timescale as ts
        from timescale.runner import compare as _c, cube as _cube  # noqa: F401 (imports first)
        import timescale_builtins.switched_bandwidth  # noqa: F401

        x = ts.Pulse.gaussian(fwhm=200e-12, center=1e-9, duration=2e-9, rate=100e9, name="invented")
        oc = ts.stretch(x, "switched-bandwidth", 2.0, trials=1, gm_mismatch=0.01, jitter=1e-12)
        n_out = oc.pulse.n

        def call():
            return ts.compare(x, ["switched-bandwidth"], factors=[2.0], trials=K, seed=1, gm_mismatch=0.01,
                              jitter=1e-12)

        def out_bytes(res):
            return K * n_out * 8 + int(res.nbytes)
    call() if K <= 300 else None  # small K: warm the code paths; large K: the first call is the test
    rss0 = _rss("VmRSS:")
    ok = _reset_peak()
    res = call()
    peak = (_rss("VmHWM:") - rss0) if ok else float("nan")
    ob = out_bytes(res)
    del res
    c0 = time.process_time()
    call()
    cpu = time.process_time() - c0
    return {"K": K, "cpu": cpu, "peak": peak, "out": ob}


def child(code_dir, workload, K):
    env = dict(os.environ, PYTHONPATH=str(code_dir))
    out = subprocess.run([sys.executable, str(Path(__file__).resolve()), "--child", workload, str(K)], env=env,
                         capture_output=True, text=True, check=True, cwd=tempfile.gettempdir())
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--ks", default="100,1000,3000,10000")
    ap.add_argument("--workloads", default="kernel,compare")
    ap.add_argument("--baseline", type=Path, default=None)
    ap.add_argument("--child", nargs=2, default=None, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        print(json.dumps(measure(args.child[0], int(args.child[1]))))
        return 0
    ks = [int(k) for k in args.ks.split(",")]
    codes = [("new", ROOT)]
    if args.baseline:
        base = args.baseline.resolve()
        link = base / "timescale_builtins"
        if not link.exists():
            link.symlink_to(base / "plugins")
        codes.append(("old", base))
    print(f"bench_scaling: {os.cpu_count()} CPUs, load average {load():.2f} at start; CPU times, BLAS 1 thread")
    for workload in args.workloads.split(","):
        print(f"\n{workload}:")
        for label, d in codes:
            prev = None
            first = None
            for K in ks:
                r = child(d, workload, K)
                first = first or r
                slope = "" if prev is None else \
                    f"  exponent {math.log(r['cpu'] / prev['cpu']) / math.log(r['K'] / prev['K']):.2f}"
                print(f"  {label} K={K:6d}: CPU {r['cpu']:8.3f} s ({r['cpu'] / r['K'] / (first['cpu'] / first['K']):.2f}x "
                      f"the per-trial cost at K={first['K']}){slope}; peak {r['peak'] / 2 ** 20:8.1f} MiB for "
                      f"{r['out'] / 2 ** 20:7.1f} MiB of output ({r['peak'] / r['out']:.2f}x) [load {load():.2f}]")
                prev = r
    print(f"\nload average {load():.2f} at the end")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
