"""Speed and accuracy of the switched-filter kernel against scipy lsim, the numpy floor and ngspice.

Everything is measured in this run, ratios against baselines measured in the same run, with the
load average printed beside each figure (the machine may be shared). Our times are CPU times of
this process with BLAS on one thread; every case is timed twice: the **first call** in a fresh
Python process (imports done, nothing else computed: it pays for fresh memory pages, the
discretization and every cache) and **warm** (median of 3 calls in the same process).

1. K mismatch trials (1 % rms on every nonzero of A) × 4000 samples, switched to α = 2 on a
   sample, for every prototype (Padé, Bessel–Thomson, constant-k ladder) at 16 and 32 states:
   ours against ``scipy.signal.lsim`` per trial and segment (timed on a subset, per trial);
2. one 1e5-sample record of a pulse train switched twice in every period (200 switches), the
   same prototypes: ours against lsim per segment;
3. the numpy floor of both: the lifted block products alone (U·Tᵀ, U·Rᵀ, Z·Oᵀ on precomputed
   matrices, each one matrix product, no recursion, discretization or bookkeeping);
4. errors against the **exact discretization** (first-order hold, every sample interval
   integrated with ``scipy.linalg.expm`` of the Van Loan block, stepped sample by sample), ours
   and lsim's reported separately, relative to the peak;
5. ngspice on the same gm-C circuit and the same schedule (an abrupt switch; ngspice's control
   ramps over 1 fs): its transient time as ngspice reports it (``rusage``), its start-up on a
   line of its own; per trial in a batch (ours: K trials / K) and for one trial (ours: one call).

With ``--baseline DIR`` (a checkout of an older commit, e.g. made by
``git archive <commit> | tar -x -C DIR``) every first-call and warm figure of ours is also
measured for that code, in the same run, in its own fresh processes.

Run: python benchmarks/bench_switched.py [--trials 1000] [--lsim-trials 20] [--baseline DIR]
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

os.environ["OMP_NUM_THREADS"] = "1"
os.environ["OPENBLAS_NUM_THREADS"] = "1"

import numpy as np  # noqa: E402
import scipy.linalg as sla  # noqa: E402

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
TAU, ALPHA, DT, N, KS = 1.5e-9, 2.0, 2.5e-12, 4000, 440
CASES = [("pade", 16), ("pade", 32), ("bessel", 16), ("bessel", 32), ("ladder", 8), ("ladder", 16)]
PERIOD, NL = 1000, 100_000


def load():
    try:
        return os.getloadavg()[0]
    except OSError:
        return float("nan")


def prototype(kind, order):
    from timescale_builtins.switched_bandwidth import prototypes

    p = prototypes.build(kind, order, TAU, "matched")
    s = p.system
    return np.asarray(s.A), np.asarray(s.B), np.asarray(s.C), float(s.D)


def trials_case(kind, order, K, seed=0):
    A, B, C, D = prototype(kind, order)
    rng = np.random.default_rng(seed)
    As = A[None] * (1 + 0.01 * rng.standard_normal((K,) + A.shape) * (A != 0))
    t = np.arange(N) * DT
    u = np.exp(-0.5 * ((t - 0.5e-9) / 80e-12) ** 2)
    return As, B, C, D, u


def train_case(kind, order):
    A, B, C, D = prototype(kind, order)
    t = np.arange(NL) * DT
    u = np.zeros(NL)
    starts = np.arange(0, NL, PERIOD)
    for s in starts:
        u += np.exp(-0.5 * ((t - s * DT - 0.5e-9) / 80e-12) ** 2)
    bounds = np.array([b for s in starts[:-1] for b in (s + KS, s + PERIOD)])
    return A, B, C, D, u, bounds


# ---- ours (run in a child process for first-call figures, and for the baseline code) --------------
def run_ours(kind, order, what, K):
    """Time one case with whatever `timescale` is importable: first call, then warm (median of 3).
    Returns a dict (printed as JSON by the child)."""
    from timescale.numerics import lti

    # the schedule is built once, outside the timing (a designer builds it once and simulates
    # it; lsim likewise gets its matrices ready-made)
    if what == "trials":
        As, B, C, D, u = trials_case(kind, order, K)
        sch = lti.Schedule.switched(lti.StateSpace(As, B, C, D), ALPHA, KS * DT)
    else:
        A, B, C, D, u, bounds = train_case(kind, order)
        systems = [lti.StateSpace(A, B, C, D) if i % 2 == 0 else
                   lti.StateSpace(A / ALPHA, B / ALPHA, C, D) for i in range(bounds.size + 1)]
        sch = lti.Schedule(tuple(systems), bounds * DT)

    def call():
        return lti.simulate(sch, u, DT)
    times = []
    for _ in range(4):
        c0 = time.process_time()
        y = call()
        times.append(time.process_time() - c0)
    out = {"first": times[0], "warm": float(np.median(times[1:])), "code": lti.__file__}
    if what == "trials" and K <= 8:
        out["y"] = y.tolist()
    return out, y


def child(code_dir, kind, order, what, K, keep=None):
    """Run `run_ours` in a fresh interpreter with `code_dir` first on the path."""
    env = dict(os.environ, PYTHONPATH=str(code_dir))
    args = [sys.executable, str(Path(__file__).resolve()), "--child", kind, str(order), what, str(K)]
    if keep:
        args += ["--keep", keep]
    out = subprocess.run(args, env=env, capture_output=True, text=True, check=True, cwd=tempfile.gettempdir())
    return json.loads(out.stdout.strip().splitlines()[-1])


# ---- baselines --------------------------------------------------------------------------------------
def lsim_switched(A, B, C, D, u, bounds, alpha):
    """scipy.signal.lsim on each constant segment (switch instants on samples), state carried on."""
    from scipy import signal as ss

    Nn = u.size
    t = np.arange(Nn) * DT
    y = np.empty(Nn)
    x0 = np.zeros(A.shape[0])
    edges = [0] + list(bounds) + [Nn - 1]
    for s, (a, b) in enumerate(zip(edges[:-1], edges[1:])):
        sc = 1.0 if s % 2 == 0 else 1.0 / alpha
        _, ys, xs = ss.lsim((A * sc, B[:, None] * sc, C[None], D), u[a:b + 1], t[a:b + 1] - t[a],
                            X0=x0, interp=True)
        y[a:b + 1] = ys
        x0 = xs[-1]
    return y


def exact_switched(A, B, C, D, u, bounds, alpha):
    """The exact FOH discretization stepped sample by sample: x[k+1] = Φ x[k] + Γ0 u[k] + Γ1 u[k+1]
    with (Φ, Γ0, Γ1) from scipy.linalg.expm of the Van Loan block; A may be (K, n, n)."""
    As = A if A.ndim == 3 else A[None]
    K, n = As.shape[0], As.shape[-1]
    steps = []
    for sc in (1.0, 1.0 / alpha):
        Phi, G0, G1 = np.empty((K, n, n)), np.empty((K, n)), np.empty((K, n))
        for k in range(K):
            M = np.zeros((n + 2, n + 2))
            M[:n, :n], M[:n, n], M[n, n + 1] = As[k] * sc * DT, B * sc * DT, 1.0
            E = sla.expm(M)
            Phi[k], G0[k], G1[k] = E[:n, :n], E[:n, n] - E[:n, n + 1], E[:n, n + 1]
        steps.append((Phi, G0, G1))
    seg = np.zeros(u.size - 1, dtype=int)
    for i, b in enumerate(bounds):
        seg[b:] = (i + 1) % 2
    x = np.zeros((K, n))
    y = np.empty((K, u.size))
    y[:, 0] = x @ C + D * u[0]
    for j in range(u.size - 1):
        Phi, G0, G1 = steps[seg[j]]
        x = np.einsum("kij,kj->ki", Phi, x) + G0 * u[j] + G1 * u[j + 1]
        y[:, j + 1] = x @ C + D * u[j + 1]
    return y


def numpy_floor(K, Nn, n, L, per_trial):
    """CPU time of the lifted block products alone on random matrices of the right shapes: for
    every trial the outputs U·Tᵀ and Z·Oᵀ and the state inputs U·Rᵀ, each one matrix product."""
    rng = np.random.default_rng(1)
    NB = -(-Nn // L)
    Ks = K if per_trial else 1
    U = rng.standard_normal((NB, L))
    T = rng.standard_normal((L, Ks * L))
    R = rng.standard_normal((L, Ks * n))
    Z = rng.standard_normal((Ks, NB, n))
    O = rng.standard_normal((Ks, n, L))
    times = []
    for _ in range(3):
        c0 = time.process_time()
        U @ T
        U @ R
        Z @ O
        times.append(time.process_time() - c0)
    return min(times)


# ---- ngspice ----------------------------------------------------------------------------------------
def ngspice_run(folder, net):
    (folder / "f.cir").write_text(net)
    w0 = time.perf_counter()
    out = subprocess.run(["ngspice", "-b", str(folder / "f.cir")], cwd=folder, check=True,
                         capture_output=True, text=True, timeout=600)
    wall = time.perf_counter() - w0
    tran = [float(line.split("=")[1]) for line in out.stdout.splitlines() if "Transient analysis time" in line]
    return (tran[0] if tran else float("nan")), wall


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=1000)
    ap.add_argument("--lsim-trials", type=int, default=20, help="trials timed with lsim (per-trial figure)")
    ap.add_argument("--error-trials", type=int, default=3, help="trials checked against the exact discretization")
    ap.add_argument("--baseline", type=Path, default=None, help="checkout of older code to time beside ours")
    ap.add_argument("--only", default=None, help="comma-separated kinds to run (pade,bessel,ladder)")
    ap.add_argument("--child", nargs=4, default=None, help=argparse.SUPPRESS)
    ap.add_argument("--keep", default=None, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        kind, order, what, K = args.child
        res, _ = run_ours(kind, int(order), what, int(K))
        print(json.dumps(res))
        return 0
    from timescale.numerics.lti import kernel as _k  # noqa: F401 (the code under test is ours)

    cases = [c for c in CASES if not args.only or c[0] in args.only.split(",")]
    K = args.trials
    print(f"bench_switched: {os.cpu_count()} CPUs, load average {load():.2f} at start; CPU times, BLAS 1 thread")
    codes = [("new", ROOT)] + ([("old", args.baseline.resolve())] if args.baseline else [])

    def ours(kind, order, what, k):
        res = {}
        for label, d in codes:  # alternate new/old so drifting load hits both alike
            res[label] = child(d, kind, order, what, k)
            res[label]["load"] = load()
        return res

    def ratio_line(label, ref, res, floor=None):
        parts = []
        for lab, r in res.items():
            parts.append(f"{lab}: first {r['first'] * 1e3:8.1f} ms ({ref / r['first']:6.1f}x)  warm "
                         f"{r['warm'] * 1e3:8.1f} ms ({ref / r['warm']:6.1f}x)"
                         + (f"  warm/floor {r['warm'] / floor:4.1f}" if floor else "") + f"  [load {r['load']:.2f}]")
        print(f"    {label}\n      " + "\n      ".join(parts))

    print(f"\n[1] {K} trials x {N} samples, 1 % gm mismatch, switch to alpha={ALPHA} on sample {KS}")
    for kind, order in cases:
        As, B, C, D, u = trials_case(kind, order, K)
        n = As.shape[-1]
        res = ours(kind, order, "trials", K)
        Kl = min(args.lsim_trials, K)
        c0 = time.process_time()
        yl = [lsim_switched(As[k], B, C, D, u, [KS], ALPHA) for k in range(Kl)]
        t_lsim = (time.process_time() - c0) / Kl
        floor = numpy_floor(K, N, n, 16 if n <= 24 else 32, True)
        from timescale.numerics import lti

        y = lti.simulate(lti.Schedule.switched(lti.StateSpace(As, B, C, D), ALPHA, KS * DT), u, DT)
        ke = min(args.error_trials, K)
        ex = exact_switched(As[:ke], B, C, D, u, [KS], ALPHA)
        peak = np.max(np.abs(ex), axis=1)
        e_ours = float(np.max(np.max(np.abs(y[:ke] - ex), axis=1) / peak))
        e_lsim = float(np.max([np.max(np.abs(yl[k] - ex[k])) / peak[k] for k in range(ke)]))
        print(f"  {kind}-{order} ({n} states): lsim {t_lsim * 1e3:.2f} ms/trial (x{K} = {t_lsim * K:.1f} s, timed on "
              f"{Kl}); numpy floor {floor * 1e3:.1f} ms; error vs exact discretization: ours {e_ours:.1e}, "
              f"lsim {e_lsim:.1e} of the peak [load {load():.2f}]")
        ratio_line(f"ours for {K} trials, ratio = lsim x {K} / ours:", t_lsim * K, res, floor)

    print(f"\n[2] one {NL}-sample record, pulse train switched twice per {PERIOD}-sample period")
    for kind, order in cases:
        A, B, C, D, u, bounds = train_case(kind, order)
        n = A.shape[0]
        res = ours(kind, order, "train", 1)
        c0 = time.process_time()
        yl = lsim_switched(A, B, C, D, u, bounds, ALPHA)
        t_lsim = time.process_time() - c0
        floor = numpy_floor(1, NL, n, 64, False)
        from timescale.numerics import lti

        systems = [lti.StateSpace(A, B, C, D) if i % 2 == 0 else lti.StateSpace(A / ALPHA, B / ALPHA, C, D)
                   for i in range(bounds.size + 1)]
        y = lti.simulate(lti.Schedule(tuple(systems), bounds * DT), u, DT)[0]
        ex = exact_switched(A, B, C, D, u, bounds, ALPHA)[0]
        peak = np.max(np.abs(ex))
        print(f"  {kind}-{order} ({n} states), {bounds.size} switches: lsim {t_lsim:.3f} s; numpy floor "
              f"{floor * 1e3:.2f} ms; error vs exact discretization: ours {np.max(np.abs(y - ex)) / peak:.1e}, "
              f"lsim {np.max(np.abs(yl - ex)) / peak:.1e} of the peak [load {load():.2f}]")
        ratio_line("ours, ratio = lsim / ours:", t_lsim, res, floor)

    print("\n[3] ngspice, the same gm-C circuit (Pade-16, 200 fF per node) and the same abrupt switch")
    if shutil.which("ngspice") is None:
        print("  ngspice not installed: skipped")
        return 0
    from timescale.numerics import lti
    from timescale_builtins.switched_bandwidth import prototypes

    A, B, C, D = prototype("pade", 16)
    t = np.arange(N) * DT
    u = np.exp(-0.5 * ((t - 0.5e-9) / 80e-12) ** 2)
    ts = KS * DT
    y1 = lti.simulate(lti.Schedule.switched(lti.StateSpace(A, B, C, D), ALPHA, ts + 0.5e-15), u, DT)[0]
    with tempfile.TemporaryDirectory() as d:
        d = Path(d)
        _, t_start = ngspice_run(d, "* empty\nR1 a 0 1\nV1 a 0 0\n.control\nop\nquit\n.endc\n.end\n")
        net = prototypes.ngspice_netlist(lti.StateSpace(A, B, C, D), 200e-15, ts, ALPHA, ramp=1e-15,
                                         source="exp(-0.5*((time-0.5e-9)/80e-12)^2)",
                                         t_stop=(N - 1) * DT, t_step=DT, out_file=str(d / "o.txt"))
        net = net.replace("quit\n", "rusage time trantime\nquit\n")
        t_tran, t_wall = ngspice_run(d, net)
        data = np.loadtxt(d / "o.txt", skiprows=1)
    ysp = data[:, 1:-1] @ C + D * data[:, -1]
    dev = np.max(np.abs(np.interp(data[:, 0], t, y1) - ysp)) / np.max(np.abs(y1))
    batch = child(ROOT, "pade", 16, "trials", K)
    one = child(ROOT, "pade", 16, "trials", 1)
    print(f"  ngspice start-up (empty netlist, whole process): {t_start * 1e3:.1f} ms")
    print(f"  ngspice one trial: transient {t_tran * 1e3:.1f} ms (its own 'rusage'; whole process "
          f"{t_wall * 1e3:.1f} ms); deviation from ours {dev:.1e} of the peak [load {load():.2f}]")
    print(f"  per trial in a batch of {K}: ours {batch['warm'] / K * 1e3:.3f} ms warm, {batch['first'] / K * 1e3:.3f} ms "
          f"first call -> ngspice/ours {t_tran / (batch['warm'] / K):.0f}x warm, {t_tran / (batch['first'] / K):.0f}x first")
    print(f"  one trial alone: ours {one['warm'] * 1e3:.2f} ms warm, {one['first'] * 1e3:.2f} ms first call -> "
          f"ngspice/ours {t_tran / one['warm']:.0f}x warm, {t_tran / one['first']:.0f}x first")
    print(f"\nload average {load():.2f} at the end")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
