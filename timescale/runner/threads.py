"""BLAS and OpenMP thread limits for the runner: one thread per worker by default.

A suite runs many small cells side by side (one per core, in processes or Dask workers); the
numerical libraries (OpenBLAS, MKL, OpenMP) would otherwise start one thread per core *in every
worker*, so the workers fight over the cores and a cell costs more CPU than it did alone (small
matrix products and eigenvalue problems slow down many times under such oversubscription).
So the command line, the local worker processes and the Dask tasks limit those libraries to
:func:`worker_threads` threads each (default 1), through threadpoolctl for libraries already
loaded and the usual environment variables for those loaded later and for child processes.
``timescale --threads N`` or :func:`set_worker_threads` changes it; 0 leaves the libraries'
own setting alone.
"""

from __future__ import annotations

import contextlib
import os

__all__ = ["DEFAULT_THREADS", "worker_threads", "set_worker_threads", "limit_threads", "limited"]

#: BLAS/OpenMP threads per worker unless told otherwise.
DEFAULT_THREADS = 1

_ENV = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "BLIS_NUM_THREADS",
        "VECLIB_MAXIMUM_THREADS", "NUMEXPR_NUM_THREADS")
_threads = DEFAULT_THREADS


def _check(threads) -> int:
    if isinstance(threads, bool) or not isinstance(threads, int) or threads < 0:
        raise ValueError(f"threads must be a whole number >= 0 (0: leave the libraries' own setting), "
                         f"got {threads!r}")
    return threads


def worker_threads() -> int:
    """BLAS/OpenMP threads each worker (and the command line's own process) may use; 0 = no limit."""
    return _threads


def set_worker_threads(threads: int) -> None:
    """Set the thread limit of the workers started from now on (0: no limit)."""
    global _threads
    _threads = _check(threads)


def limit_threads(threads: int):
    """Limit the numerical libraries of this process to `threads` threads, now and for the ones
    loaded later (environment variables, inherited by child processes); 0 does nothing.

    Returns the threadpoolctl limiter (or None), which keeps the limit until its
    ``restore_original_limits()``.
    """
    if _check(threads) == 0:
        return None
    for name in _ENV:
        os.environ[name] = str(threads)
    from threadpoolctl import threadpool_limits

    return threadpool_limits(limits=threads)


@contextlib.contextmanager
def limited(threads: int, *, environ: bool = True):
    """Context: at most `threads` BLAS/OpenMP threads inside it, for the libraries already loaded
    (threadpoolctl) and, with `environ`, those loaded or started inside it (environment
    variables, restored on exit); 0 does nothing. Used by the command line and (without
    `environ`: the process environment is shared by a worker's threads) by every Dask task."""
    if _check(threads) == 0:
        yield
        return
    saved = {name: os.environ.get(name) for name in _ENV} if environ else {}
    for name in saved:
        os.environ[name] = str(threads)
    from threadpoolctl import threadpool_limits

    try:
        with threadpool_limits(limits=threads):
            yield
    finally:
        for name, value in saved.items():
            if value is None:
                os.environ.pop(name, None)
            else:
                os.environ[name] = value
