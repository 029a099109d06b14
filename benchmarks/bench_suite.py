"""Benchmark: a 10,000-cell suite in-process, on 2 local processes and on a 2-worker Dask
LocalCluster, with cells/s and speed-up against the in-process run measured in the same run;
then the runner's own cost per cell.

The machine may be shared: the in-process run is timed before and after the parallel ones and
its CPU share is printed, so load from other programs shows up in the output. Dask workers are
warmed (imports, one cell) before timing; forked local processes inherit the parent's imports.

    python benchmarks/bench_suite.py                 # docs/suites/resample-grid-10k.toml
    python benchmarks/bench_suite.py --pulses 1      # a quarter of it (2,500 cells)

Runner overhead is measured two ways:
1. a method that returns at once, registered in code: a whole cell through ``run_suite``
   against ``run_cell`` called in a bare loop (the cell still computes every metric);
2. ``run_cell`` replaced by a stub that returns a real, pre-computed row, so what remains is
   only the runner: cell layout, time limit, checkpoint writing, progress, pickling, assembly.
"""

from __future__ import annotations

import argparse
import dataclasses
import logging
import os
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import xarray as xr

import timescale as ts
from timescale.runner import execute
from timescale.plugin import Bill, Design, Method, Simulation, param
from timescale.runner.cells import run_cell
from timescale.runner.suite import Suite

ROOT = Path(__file__).resolve().parent.parent


@dataclasses.dataclass(frozen=True)
class _InstantParams:
    knob: float = param(1.0, doc="a parameter to sweep (unused)")


class Instant(Method):
    """Returns its input at once (ideal factor-1 'scaling'): the runner's per-cell floor."""

    name = "bench-instant"
    summary = "returns at once (benchmark)"
    Params = _InstantParams

    def design(self, pulse, factor, params, technology):
        return Design(factor=factor)

    def simulate(self, pulse, design, params, rng, trials=1, technology=None):
        return Simulation(pulse=pulse)

    def bill(self, design, params, technology):
        return Bill(area=0.0, power=0.0, energy_per_pulse=0.0, bw_internal=0.0)


def _timed(label, suite, tmp, **kw):
    ck = Path(tmp) / f"{label}.checkpoint"
    c0, t0 = time.process_time(), time.perf_counter()
    res = ts.run_suite(suite, checkpoint=ck, progress=False, **kw)
    dt = time.perf_counter() - t0
    _timed.cpu = time.process_time() - c0  # this process only (not its workers)
    ck.unlink(missing_ok=True)
    return res, dt


def _warm_worker(path):
    """Import and run a few cells once, so a freshly spawned Dask worker is timed warm (forked
    local processes inherit the parent's imports)."""
    from timescale.runner.cells import run_cell
    from timescale.runner.suite import Suite as _Suite

    plan = _Suite.from_toml(path).plan()
    for i in range(3):
        run_cell(plan.cell(i, 1))
    return True


def _load():
    try:
        return os.getloadavg()[0]
    except OSError:
        return float("nan")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--suite", default=str(ROOT / "docs" / "suites" / "resample-grid-10k.toml"))
    ap.add_argument("--pulses", type=int, default=None, help="keep only the first N pulse widths")
    ap.add_argument("--overhead-cells", type=int, default=10_000, help="cells for the stubbed-runner run")
    ap.add_argument("--instant-cells", type=int, default=500, help="cells for the instant-method run")
    args = ap.parse_args(argv)

    suite = Suite.from_toml(args.suite)
    if args.pulses:
        suite = dataclasses.replace(suite, pulses=[s for _, s in suite.pulses[: args.pulses]])
    n = suite.n_cells()
    print(f"suite {suite.name}: {n} cells, {os.cpu_count()} CPUs, Python {sys.version.split()[0]}, "
          f"load average {_load():.2f} at start")
    _warm_worker(args.suite)  # first-call costs (imports, caches) out of the timed runs
    with tempfile.TemporaryDirectory() as tmp:
        serial, t_serial = _timed("serial", suite, tmp)
        print(f"  in-process        {t_serial:8.1f} s  {n / t_serial:8.1f} cells/s  1.00x   "
              f"(CPU {_timed.cpu:.1f} s: {100 * _timed.cpu / t_serial:.0f} % of one core; the rest went to other load)")
        procs, t_procs = _timed("procs", suite, tmp, workers=2)
        print(f"  2 processes       {t_procs:8.1f} s  {n / t_procs:8.1f} cells/s  {t_serial / t_procs:.2f}x")
        from dask.distributed import Client, LocalCluster

        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                          silence_logs=logging.CRITICAL) as cl, Client(cl) as client:
            client.run(_warm_worker, args.suite)
            dask_res, t_dask = _timed("dask", suite, tmp, client=client)
        print(f"  Dask 2 workers    {t_dask:8.1f} s  {n / t_dask:8.1f} cells/s  {t_serial / t_dask:.2f}x")
        # the machine is shared: a second in-process run shows how much the load drifted
        serial2, t_serial2 = _timed("serial2", suite, tmp)
        base = 0.5 * (t_serial + t_serial2)
        print(f"  in-process again  {t_serial2:8.1f} s  {n / t_serial2:8.1f} cells/s  "
              f"(drift {100 * (t_serial2 / t_serial - 1):+.0f} %; CPU {100 * _timed.cpu / t_serial2:.0f} % of one core)")
        print(f"  speed-up against the mean in-process time: 2 processes {base / t_procs:.2f}x, "
              f"Dask {base / t_dask:.2f}x (target >= 1.7x)")
        xr.testing.assert_identical(serial.cube, serial2.cube)
        for label, other in (("2 processes", procs), ("Dask", dask_res)):
            xr.testing.assert_identical(serial.cube, other.cube)
        print("  cubes identical (xarray.testing.assert_identical): yes")
        print(f"  failed cells: {serial.cube.attrs['n_failed']}")

        # what one cell costs inside run_cell: the method vs the metrics
        serial_spec = suite.plan().cell(0, 1)
        reps = 200
        t0 = time.perf_counter()
        for i in range(reps):
            run_cell(dataclasses.replace(serial_spec, index=i))
        t_cell = (time.perf_counter() - t0) / reps
        print(f"\nrun_cell of one suite cell: {t_cell * 1e3:.2f} ms")

        with ts.registered(Instant()):
            k = args.instant_cells
            inst = Suite(pulses=[{"shape": "monocycle", "name": "p", "fwhm": 300e-12,
                                  "center": 1.5e-9, "duration": 3e-9, "rate": 40e9}],
                         methods=["bench-instant"], factors=[1.0],
                         sweep={"knob": list(np.arange(1.0, k + 1.0))}, seed=1)
            plan = inst.plan()
            bare, whole = [], []
            for _ in range(3):  # alternate, keep the best of each: less exposed to load drift
                t0 = time.perf_counter()
                for i in range(k):
                    run_cell(plan.cell(i, 1))
                bare.append((time.perf_counter() - t0) / k)
                whole.append(_timed("instant", inst, tmp)[1] / k)
            t_bare, t_run = min(bare), min(whole)
            print(f"instant method ({k} cells, best of 3): run_cell alone {t_bare * 1e3:.3f} ms/cell "
                  f"(all of it the metrics), through run_suite {t_run * 1e3:.3f} ms/cell -> runner adds "
                  f"{(t_run - t_bare) * 1e3:.3f} ms/cell (a difference of two noisy numbers)")

            # runner alone: run_cell stubbed to return a real row (same size as a real one)
            template = run_cell(plan.cell(0, 1))
            m = args.overhead_cells
            big = dataclasses.replace(inst, sweep={"knob": list(np.arange(1.0, m + 1.0))})

            def stub(spec):
                return dataclasses.replace(template, index=spec.index)

            real = execute.run_cell
            execute.run_cell = stub  # inherited by forked worker processes
            try:
                _, t_stub = _timed("stub", big, tmp)
                _, t_stub_timeout = _timed("stub-t", dataclasses.replace(big, timeout=10.0), tmp)
                _, t_stub_p = _timed("stub-p", big, tmp, workers=2)
            finally:
                execute.run_cell = real
            print(f"runner alone ({m} cells, run_cell stubbed): in-process {t_stub / m * 1e3:.3f} ms/cell, "
                  f"with a time limit {t_stub_timeout / m * 1e3:.3f} ms/cell, "
                  f"2 processes {t_stub_p / m * 1e3:.3f} ms/cell (wall)")
            print(f"runner cost against a suite cell: {t_stub / m / t_cell * 100:.2f} % of the cell")
    print(f"load average {_load():.2f} at the end")


if __name__ == "__main__":
    main()
