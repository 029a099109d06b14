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
import io
import json
import os
import signal
import sys
import threading
import time
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import xarray as xr

from .cube import assemble, save_cube, waveforms_dataset
from .plugin import Pulse
from .run import Row, run_cell
from .suite import Plan, Suite

__all__ = ["run_suite", "SuiteResult", "CellTimeout", "DASK_HINT"]

DASK_HINT = 'Dask is not installed; install the optional extra with: pip install "timescale[dask]"'
_CHECKPOINT_FORMAT = 1
_FSYNC_INTERVAL = 0.5  # s: fsync at most this often (a flush already survives a killed process)


class CellTimeout(Exception):
    """A cell ran over the suite's per-cell time limit."""


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


# ---- cells (the worker side) -------------------------------------------------------------------

def _run_limited(spec, timeout):
    """run_cell with the per-cell time limit."""
    if timeout is None:
        return run_cell(spec)
    if threading.current_thread() is threading.main_thread() and hasattr(signal, "setitimer"):
        def _alarm(signum, frame):
            raise CellTimeout(f"the cell ran over its time limit of {timeout:g} s")

        old = signal.signal(signal.SIGALRM, _alarm)
        signal.setitimer(signal.ITIMER_REAL, timeout)
        try:
            return run_cell(spec)  # records CellTimeout raised inside the method as a failure
        except CellTimeout as exc:  # the alarm fell outside run_cell's own guard
            return Row(spec.index, "failed", f"CellTimeout: {exc}")
        finally:
            signal.setitimer(signal.ITIMER_REAL, 0)
            signal.signal(signal.SIGALRM, old)
    t0 = time.perf_counter()
    row = run_cell(spec)
    spent = time.perf_counter() - t0
    if spent > timeout:
        return Row(spec.index, "failed",
                   f"CellTimeout: the cell ran {spent:.3g} s, over its time limit of {timeout:g} s "
                   "(a worker thread cannot be interrupted; its result is discarded)")
    return row


def _run_indices(plan: Plan, entropy: int, indices) -> list:
    rows = []
    for i in indices:
        cell = plan.cell(i, entropy)
        rows.append(cell if isinstance(cell, Row) else _run_limited(cell, plan.timeout))
    return rows


_WORKER: tuple | None = None  # (plan, entropy), set once per worker process


def _init_worker(plan, entropy):
    global _WORKER
    _WORKER = (plan, entropy)
    # the parent coordinates a stop: workers ignore Ctrl-C (sent to the whole process group)
    # and die on SIGTERM, whatever handler the parent had installed before forking them
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    # a pool worker whose parent was killed (SIGKILL, crash) would otherwise wait forever
    parent = os.getppid()

    def _watch():
        while os.getppid() == parent:
            time.sleep(0.5)
        os._exit(1)

    threading.Thread(target=_watch, name="timescale-parent-watch", daemon=True).start()


def _process_chunk(indices):
    return _run_indices(_WORKER[0], _WORKER[1], indices)


def _dask_chunk(payload, indices):
    return _run_indices(payload[0], payload[1], indices)


# ---- executors (the driver side): each yields lists of rows as they complete -------------------

def _iter_serial(plan, entropy, pending):
    for i in pending:
        yield _run_indices(plan, entropy, (i,))


def _chunk_size(n, workers, cap):
    # ~8 chunks per worker keeps both cores busy to the end; the cap bounds checkpoint loss
    return int(max(1, min(cap, n // max(1, workers * 8))))


def _iter_processes(plan, entropy, pending, workers, chunk):
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
    from concurrent.futures.process import BrokenProcessPool

    chunk = chunk or _chunk_size(len(pending), workers, 64)
    ex = ProcessPoolExecutor(workers, initializer=_init_worker, initargs=(plan, entropy))
    try:
        todo = {ex.submit(_process_chunk, pending[k:k + chunk]) for k in range(0, len(pending), chunk)}
        while todo:
            done, todo = wait(todo, return_when=FIRST_COMPLETED)
            for f in done:
                try:
                    yield f.result()
                except BrokenProcessPool as exc:
                    raise RuntimeError(
                        "a worker process died (killed, out of memory or crashed); the finished "
                        "cells are in the checkpoint: run again with resume=True (--resume)") from exc
    finally:
        ex.shutdown(wait=True, cancel_futures=True)


def _dask():
    try:
        import dask.distributed as dd
    except ImportError as exc:
        raise ImportError(DASK_HINT) from exc
    return dd


def _iter_dask(plan, entropy, pending, client, chunk):
    dd = _dask()
    nworkers = max(1, len(client.scheduler_info().get("workers", {})))
    chunk = chunk or _chunk_size(len(pending), nworkers, 128)
    [payload] = client.scatter([(plan, entropy)], broadcast=True)  # once per worker
    futs = [client.submit(_dask_chunk, payload, pending[k:k + chunk], pure=False)
            for k in range(0, len(pending), chunk)]
    try:
        for f in dd.as_completed(futs, loop=client.loop):  # the client may not be the default one
            yield f.result()
            f.release()
    finally:
        client.cancel([f for f in futs if not f.done()])


# ---- checkpoint ---------------------------------------------------------------------------------

def _encode(row: Row, seen_attrs: set) -> str:
    d = {"i": row.index, "s": row.status, "m": row.message,
         "v": {k: np.asarray(v).tolist() for k, v in row.values.items()},
         "d": row.design, "b": row.bill, "p": row.path, "o": row.orientation}
    new = {k: list(v) for k, v in row.attrs.items() if k not in seen_attrs}
    if new:
        d["a"] = new
        seen_attrs.update(new)
    if row.waveform is not None:
        w = row.waveform
        d["w"] = {"values": w.values.tolist(), "rate": w.rate, "t0": w.t0, "units": w.units, "name": w.name}
    return json.dumps(d, separators=(",", ":"))


def _decode(d: dict, attrs: dict) -> Row:
    attrs.update({k: tuple(v) for k, v in d.get("a", {}).items()})
    w = d.get("w")
    wave = None if w is None else Pulse(np.asarray(w["values"], dtype=float), w["rate"], w["t0"], w["units"], w["name"])
    return Row(d["i"], d["s"], d["m"], {k: np.asarray(v, dtype=float) for k, v in d["v"].items()},
               attrs, d["d"], d["b"], d["p"], d["o"], wave)


class _Checkpoint:
    """Append-only JSON-lines record of finished cells."""

    def __init__(self, path: Path, header: dict, resume: bool, overwrite: bool):
        self.path = path
        self.rows: dict[int, Row] = {}
        self.seen: set = set()
        self.header = header
        if path.exists() and resume:
            self._load()
            self.fh = open(path, "ab")
        else:
            if path.exists() and not overwrite:
                raise FileExistsError(
                    f"checkpoint {str(path)!r} exists from an earlier run; pass resume=True "
                    "(--resume) to continue it, or overwrite=True (--overwrite) to start again")
            self.fh = open(path, "wb")
            self.fh.write((json.dumps(header) + "\n").encode())
            self._sync()
        self.last_sync = time.monotonic()

    def _load(self):
        with open(self.path, "rb") as fh:
            data = fh.read()
        lines = data.split(b"\n")
        try:
            head = json.loads(lines[0])
        except ValueError:
            raise ValueError(f"checkpoint {str(self.path)!r} has no valid header; delete it to start again") from None
        if head.get("timescale_checkpoint") != _CHECKPOINT_FORMAT or head.get("fingerprint") != self.header["fingerprint"]:
            raise ValueError(
                f"checkpoint {str(self.path)!r} belongs to a different suite (or format); delete it, "
                "or give another checkpoint path")
        self.header = head
        good = len(lines[0]) + 1
        attrs: dict = {}
        for line in lines[1:]:
            if not line:
                break
            try:
                row = _decode(json.loads(line), attrs)
            except (ValueError, KeyError, TypeError):
                break  # a line cut short by a kill: everything after it is re-run
            self.rows[row.index] = row
            good += len(line) + 1
        self.seen = set(attrs)
        if good < len(data):  # drop the torn tail so appended lines start clean
            with open(self.path, "r+b") as fh:
                fh.truncate(min(good, len(data)))

    def append(self, rows):
        buf = io.StringIO()
        for r in rows:
            buf.write(_encode(r, self.seen))
            buf.write("\n")
        self.fh.write(buf.getvalue().encode())
        self.fh.flush()
        if time.monotonic() - self.last_sync > _FSYNC_INTERVAL:
            self._sync()

    def _sync(self):
        self.fh.flush()
        os.fsync(self.fh.fileno())
        self.last_sync = time.monotonic()

    def close(self):
        if not self.fh.closed:
            self._sync()
            self.fh.close()


# ---- progress -------------------------------------------------------------------------------------

class _Progress:
    """Cells done, failed, rate on stderr: tqdm when installed, else one redrawn line."""

    def __init__(self, total, initial, enabled):
        self.total, self.done, self.failed = total, initial, 0
        self.enabled = enabled
        self.t0 = time.monotonic()
        self.start = initial
        self.last = 0.0
        self.bar = None
        if enabled:
            try:
                from tqdm import tqdm

                self.bar = tqdm(total=total, initial=initial, file=sys.stderr, unit="cell",
                                dynamic_ncols=True, smoothing=0.1)
            except ImportError:
                self.bar = None

    def update(self, rows):
        n = len(rows)
        self.done += n
        self.failed += sum(r.status == "failed" for r in rows)
        if not self.enabled:
            return
        now = time.monotonic()
        if self.bar is not None:
            self.bar.update(n)
            if now - self.last > 0.25:
                self.bar.set_postfix_str(f"failed {self.failed}", refresh=False)
                self.last = now
        elif now - self.last > 0.2 or self.done == self.total:
            self.last = now
            rate = (self.done - self.start) / max(now - self.t0, 1e-9)
            left = (self.total - self.done) / rate if rate > 0 else float("nan")
            sys.stderr.write(f"\r{self.done}/{self.total} cells  {self.failed} failed  "
                             f"{rate:.1f} cells/s  {left:.0f} s left ")
            sys.stderr.flush()

    def close(self):
        if not self.enabled:
            return
        if self.bar is not None:
            self.bar.set_postfix_str(f"failed {self.failed}")
            self.bar.close()
        else:
            sys.stderr.write("\n")
            sys.stderr.flush()


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
        _dask()  # fail now, with the install hint, not after the checkpoint is opened

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
        ck = _Checkpoint(ck_path, {"timescale_checkpoint": _CHECKPOINT_FORMAT, "fingerprint": fingerprint,
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
    bar = _Progress(n, n - len(pending), enabled)
    own_client = None
    chunks = None
    try:
        if not pending:
            chunks = iter(())
        elif client is not None:
            chunks = _iter_dask(plan, entropy, pending, client, chunk_size)
        elif scheduler is not None:
            own_client = _dask().Client(scheduler, set_as_default=False)
            chunks = _iter_dask(plan, entropy, pending, own_client, chunk_size)
        elif workers not in (None, 1):
            chunks = _iter_processes(plan, entropy, pending, int(workers), chunk_size)
        else:
            chunks = _iter_serial(plan, entropy, pending)
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
