"""Run a :class:`~timescale.suite.Suite`: map the pure :func:`~timescale.run.run_cell` over its
cells in-process, in local worker processes, or on a Dask distributed cluster.

Every cell draws its random numbers from a child of one root ``SeedSequence`` selected by the
cell's index, and every result lands in the cube by that index, so the cube is the same
(``xarray.testing.assert_identical``) whichever executor ran it, in whatever order, and across
an interruption and a resume.

Executors
---------
in-process (default)
    No server, no pickling; the cells run one after the other.
local processes (``workers=N``)
    A :class:`concurrent.futures.ProcessPoolExecutor`; the resolved plan (pulses, technology,
    method names and parameters) is sent once to each worker by the pool initializer, and the
    tasks are chunks of cell indices, so the runner's cost per cell stays small.
Dask (``scheduler="tcp://HOST:PORT"`` or ``client=Client(...)``)
    Dask is imported only here (``pip install "timescale[dask]"``). The plan is scattered once
    to every worker; tasks are chunks of indices submitted with ``pure=False``. Methods travel
    by name: the workers need the same plugins installed. A method registered in code travels
    as a pickled object. Prefer process workers with one thread each: Python's warning
    filters are process-wide, so cells that warn on threads of one process can see each
    other's warnings (the status "warned" could land on the wrong cell).

Checkpoint and resume
---------------------
Finished cells are appended to a checkpoint file (JSON lines: a header with the suite's
fingerprint and seed entropy, then one line per cell), flushed as each chunk completes and
fsync'd at most every half second. ``resume=True`` reads it back (ignoring a line cut short by a
kill), runs only the missing cells and gives the cube an uninterrupted run would have given.
By default the checkpoint is ``OUTPUT.checkpoint`` next to the output; it is removed once the
cube is written.

Time limit
----------
With ``Suite.timeout`` set, a cell running on a process's main thread (in-process and local
processes) is interrupted by ``SIGALRM`` after that many seconds and recorded as failed (the
alarm is noticed between Python bytecodes, so a single long call into compiled code finishes
first). On a worker thread (Dask) a cell cannot be interrupted; one that ran over the limit is
recorded as failed when it returns.
"""

from __future__ import annotations

import hashlib
import json
import os
import sys
import time
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import xarray as xr

from timescale.runner.cells import Row
from timescale.runner.checkpoint import CHECKPOINT_FORMAT, Checkpoint
from timescale.runner.cube import assemble, save_cube, waveforms_dataset
from timescale.runner.executors import import_dask, iter_dask, iter_processes, iter_serial
from timescale.runner.progress import Progress
from timescale.runner.suite import Plan, Suite

__all__ = ["run_suite", "SuiteResult"]

# ---- the result --------------------------------------------------------------------------------

@dataclass(frozen=True)
class SuiteResult:
    """What :func:`run_suite` returns.

    Attributes
    ----------
    cube : xarray.Dataset
        The results cube.
    waveforms : xarray.Dataset or None
        Companion dataset of output waveforms (``keep = "waveforms"``).
    output : Path or None
        Where the cube was written.
    n_cells : int
        Cells in the cube (all positions).
    n_run : int
        Cells computed in this call (the rest came from the checkpoint or are not applicable).
    failures : dict
        ``{reason: count}`` over the failed cells.
    elapsed : float
        Wall time of this call, s.
    """

    cube: xr.Dataset
    waveforms: xr.Dataset | None
    output: Path | None
    n_cells: int
    n_run: int
    failures: dict = field(default_factory=dict)
    elapsed: float = 0.0

    @property
    def n_failed(self) -> int:
        """Number of failed cells."""
        return int(self.cube.attrs["n_failed"])

    def summary(self) -> str:
        """A few lines: cells, failures by reason, rate."""
        a = self.cube.attrs
        lines = [f"{a['n_cells']} cells: {a['n_cells'] - a['n_failed'] - a['n_not_applicable']} run "
                 f"({a['n_warned']} warned), {a['n_failed']} failed, {a['n_not_applicable']} not applicable; "
                 f"{self.n_run} computed in {self.elapsed:.3g} s"]
        for reason, count in sorted(self.failures.items(), key=lambda kv: -kv[1]):
            lines.append(f"  failed x{count}: {reason}")
        return "\n".join(lines)



# ---- the driver ------------------------------------------------------------------------------------

def _fingerprint(suite: Suite, plan: Plan) -> str:
    h = hashlib.sha256()
    d = suite.to_dict()
    d["seed"] = suite.seed
    d["plan"] = {"methods": list(plan.methods), "params": plan.params, "shape": list(plan.shape),
                 "technology": plan.technology.as_dict(),
                 "sweep": [[s[0], list(s[1])] for s in plan.sweep]}
    h.update(json.dumps(d, sort_keys=True, default=repr).encode())
    for name, p in plan.pulses.items():  # the samples themselves, whatever built them
        h.update(name.encode())
        h.update(np.ascontiguousarray(p.values).tobytes())
        h.update(repr((p.rate, p.t0)).encode())
    return h.hexdigest()


def _waveforms_path(output: Path) -> Path:
    return output.with_name(output.stem + ".waveforms" + (output.suffix or ".nc"))


def run_suite(suite, *, workers=None, scheduler=None, client=None, checkpoint=None, resume=False,
              progress=None, output=None, overwrite=False, chunk_size=None) -> SuiteResult:
    """Run every cell of a suite and build the results cube.

    Parameters
    ----------
    suite : Suite, str or Path
        The suite, or the path of a suite file.
    workers : int, optional
        Run on this many local processes (``None`` or 1: in-process).
    scheduler : str, optional
        Address of a Dask scheduler (``"tcp://host:8786"``).
    client : dask.distributed.Client, optional
        A Dask client to run on (it stays open).
    checkpoint : str or Path, optional
        Checkpoint file; default ``OUTPUT.checkpoint`` when `output` is given, else none.
    resume : bool
        Continue from an existing checkpoint.
    progress : bool, optional
        Progress bar on stderr; default: on when stderr is a terminal.
    output : str or Path, optional
        Write the cube here (NetCDF, atomically); checked before any cell runs.
    overwrite : bool
        Replace an existing output (and start a fresh checkpoint over an old one).
    chunk_size : int, optional
        Cells per task for the process and Dask executors (default: automatic).

    Returns
    -------
    SuiteResult
        ``.cube``, ``.waveforms``, ``.failures``, ``.summary()``.
    """
    t_start = time.monotonic()
    if isinstance(suite, (str, os.PathLike)):
        suite = Suite.from_toml(suite)
    if not isinstance(suite, Suite):
        raise TypeError(f"suite must be a timescale.Suite or a suite file path, got {type(suite).__name__}")
    if workers is not None and (not isinstance(workers, (int, np.integer)) or isinstance(workers, bool) or workers < 1):
        raise ValueError(f"workers must be a whole number >= 1, got {workers!r}")
    chosen = [n for n, v in (("workers", workers not in (None, 1)), ("scheduler", scheduler is not None),
                             ("client", client is not None)) if v]
    if len(chosen) > 1:
        raise ValueError(f"give only one of workers=, scheduler=, client= (got {', '.join(chosen)})")
    if chunk_size is not None and (not isinstance(chunk_size, (int, np.integer)) or chunk_size < 1):
        raise ValueError(f"chunk_size must be a whole number >= 1, got {chunk_size!r}")
    out = None if output is None else Path(output)
    if out is not None:
        targets = [out] + ([_waveforms_path(out)] if suite.keep == "waveforms" else [])
        for t in targets:
            if t.exists() and not overwrite:
                raise FileExistsError(f"{str(t)!r} exists; pass overwrite=True (--overwrite) to replace it")
        if not (out.parent if str(out.parent) else Path(".")).is_dir():
            raise ValueError(f"output folder {str(out.parent)!r} does not exist")
    if scheduler is not None or client is not None:
        import_dask()  # fail now, with the install hint, not after the checkpoint is opened

    plan = suite.plan()
    n = plan.n_cells
    ck_path = Path(checkpoint) if checkpoint is not None else (
        out.with_name(out.name + ".checkpoint") if out is not None else None)
    fingerprint = _fingerprint(suite, plan)
    entropy = None if suite.seed is None else int(np.random.SeedSequence(suite.seed).entropy)
    rows: list = [None] * n
    ck = None
    if ck_path is not None:
        fresh = entropy if entropy is not None else int(np.random.SeedSequence().entropy)
        ck = Checkpoint(ck_path, {"timescale_checkpoint": CHECKPOINT_FORMAT, "fingerprint": fingerprint,
                                   "entropy": str(fresh), "n_cells": n}, resume, overwrite)
        entropy = int(ck.header["entropy"])
        for i, r in ck.rows.items():
            if 0 <= i < n:
                rows[i] = r
    elif resume:
        raise ValueError("resume=True needs a checkpoint: give checkpoint= or output=")
    if entropy is None:
        entropy = int(np.random.SeedSequence().entropy)

    pending = []
    for i in range(n):
        if rows[i] is None:
            cell = plan.cell(i, entropy)
            if isinstance(cell, Row):
                rows[i] = cell  # not applicable: nothing to run
            else:
                pending.append(i)
    enabled = sys.stderr.isatty() if progress is None else bool(progress)
    bar = Progress(n, n - len(pending), enabled)
    own_client = None
    chunks = None
    try:
        if not pending:
            chunks = iter(())
        elif client is not None:
            chunks = iter_dask(plan, entropy, pending, client, chunk_size)
        elif scheduler is not None:
            own_client = import_dask().Client(scheduler, set_as_default=False)
            chunks = iter_dask(plan, entropy, pending, own_client, chunk_size)
        elif workers not in (None, 1):
            chunks = iter_processes(plan, entropy, pending, int(workers), chunk_size)
        else:
            chunks = iter_serial(plan, entropy, pending)
        for got in chunks:
            if ck is not None:
                ck.append(got)
            for r in got:
                rows[r.index] = r
            bar.update(got)
    finally:
        if hasattr(chunks, "close"):
            chunks.close()  # stop the executor's workers when we leave early (Ctrl-C, error)
        bar.close()
        if ck is not None:
            ck.close()
        if own_client is not None:
            own_client.close()

    methods = [SimpleNamespace(name=m, version=v, summary=s) for m, (v, s) in plan.versions.items()]
    provenance = {
        "suite": json.dumps(suite.to_dict(), sort_keys=True, default=repr),
        "suite_name": suite.name,
        "seed_entropy": str(entropy),
        "technology": plan.technology.to_json(),
        "params": json.dumps(plan.params, sort_keys=True, default=repr),
        "sampler_jitter": plan.sampler_jitter,
        "not_applicable": json.dumps(plan.not_applicable(), sort_keys=True),
    }
    if suite.description:
        provenance["description"] = suite.description
    cube = assemble(rows, plan.axes(), trials=plan.trials, provenance=provenance, methods=methods,
                    pulses=plan.pulses)
    waves = waveforms_dataset(rows, plan.axes()) if plan.keep_waveform else None
    if out is not None:
        save_cube(cube, out, overwrite=overwrite)
        if waves is not None:
            save_cube(waves, _waveforms_path(out), overwrite=overwrite)
        if ck_path is not None and ck_path.exists():
            ck_path.unlink()  # the cube is the durable result now
    status = cube["status"].values.ravel()
    reasons = Counter(str(m).split(" (at ")[0] for m, s in zip(cube["message"].values.ravel(), status) if s == "failed")
    return SuiteResult(cube, waves, out, n, len(pending), dict(reasons), time.monotonic() - t_start)
