"""Executors: map the pure :func:`~timescale.runner.cells.run_cell` over chunks of cell indices
in-process, on local worker processes, or on a Dask cluster, with the per-cell time limit.
Each executor yields lists of rows as they complete.

Every worker process and every Dask task limits BLAS/OpenMP to
:func:`~timescale.runner.threads.worker_threads` threads (default 1), so that workers side by
side do not oversubscribe the cores (see :mod:`timescale.runner.threads`).
"""

from __future__ import annotations

import os
import signal
import threading
import time

from timescale.runner.cells import Row, run_cell
from timescale.runner.suite import Plan
from timescale.runner.threads import limit_threads, limited, worker_threads

__all__ = ["iter_serial", "iter_processes", "iter_dask", "import_dask", "CellTimeout", "DASK_HINT"]

DASK_HINT = 'Dask is not installed; install the optional extra with: pip install "timescale[dask]"'

class CellTimeout(Exception):
    """A cell ran over the suite's per-cell time limit."""



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
_LIMITER = None  # keeps the worker's thread limit alive


def _init_worker(plan, entropy, threads=1):
    global _WORKER, _LIMITER
    _WORKER = (plan, entropy)
    _LIMITER = limit_threads(threads)  # one BLAS thread per worker unless told otherwise
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
    with limited(payload[2], environ=False):  # the worker's libraries are loaded: limit them
        return _run_indices(payload[0], payload[1], indices)


# ---- executors (the driver side): each yields lists of rows as they complete -------------------

def iter_serial(plan, entropy, pending):
    for i in pending:
        yield _run_indices(plan, entropy, (i,))


def _chunk_size(n, workers, cap):
    # ~8 chunks per worker keeps both cores busy to the end; the cap bounds checkpoint loss
    return int(max(1, min(cap, n // max(1, workers * 8))))


def iter_processes(plan, entropy, pending, workers, chunk):
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
    from concurrent.futures.process import BrokenProcessPool

    chunk = chunk or _chunk_size(len(pending), workers, 64)
    ex = ProcessPoolExecutor(workers, initializer=_init_worker, initargs=(plan, entropy, worker_threads()))
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


def import_dask():
    try:
        import dask.distributed as dd
    except ImportError as exc:
        raise ImportError(DASK_HINT) from exc
    return dd


def iter_dask(plan, entropy, pending, client, chunk):
    dd = import_dask()
    nworkers = max(1, len(client.scheduler_info().get("workers", {})))
    chunk = chunk or _chunk_size(len(pending), nworkers, 128)
    [payload] = client.scatter([(plan, entropy, worker_threads())], broadcast=True)  # once per worker
    futs = [client.submit(_dask_chunk, payload, pending[k:k + chunk], pure=False)
            for k in range(0, len(pending), chunk)]
    try:
        for f in dd.as_completed(futs, loop=client.loop):  # the client may not be the default one
            yield f.result()
            f.release()
    finally:
        client.cancel([f for f in futs if not f.done()])
