"""BLAS thread limits: the command line, local worker processes and Dask tasks run the numerical
libraries on one thread each by default (threadpoolctl reports what the libraries themselves
say), and the limit can be changed."""

import os

import numpy as np
import pytest
from threadpoolctl import threadpool_info

import timescale as ts
from timescale.plugin import Metric, Simulation
from timescale.runner import threads
from timescale.runner.execute import run_suite
from timescale.runner.suite import Suite
from toy_methods import Ideal


class BlasThreads(Ideal):
    """Reports, as a metric, the most threads any loaded BLAS/OpenMP library may use."""

    name = "test-blas-threads"
    summary = "reports the BLAS thread limit of the process it runs in"

    def simulate(self, pulse, design, params, rng, trials=1, technology=None):
        n = max((lib["num_threads"] for lib in threadpool_info()), default=0)
        return Simulation(pulse=pulse.dilate(design.factor),
                          metrics={"blas_threads": Metric(float(n), "", "BLAS threads")})


def _suite(n=4):
    return Suite(pulses=[{"shape": "gaussian", "name": "g", "fwhm": 200e-12, "center": 1e-9,
                          "duration": 2e-9, "rate": 40e9}],
                 methods=["test-blas-threads"], factors=[1.0], sweep={"gain": list(np.arange(1.0, n + 1.0))})


def _seen(res):
    return set(np.unique(res.cube["blas_threads"].values).tolist())


@pytest.fixture
def method():
    if not threadpool_info():
        pytest.skip("no BLAS/OpenMP library that threadpoolctl can see")
    with ts.registered(BlasThreads()):
        yield


def test_process_workers_use_one_blas_thread_by_default(method):
    assert threads.worker_threads() == 1
    assert _seen(run_suite(_suite(), workers=2, progress=False)) == {1.0}


def test_worker_thread_limit_can_be_changed(method):
    try:
        threads.set_worker_threads(2)
        seen = _seen(run_suite(_suite(), workers=2, progress=False))
    finally:
        threads.set_worker_threads(threads.DEFAULT_THREADS)
    # OpenBLAS never starts more threads than the machine has cores
    assert seen == {float(min(2, os.cpu_count()))}


def test_dask_tasks_use_one_blas_thread(method):
    distributed = pytest.importorskip("dask.distributed")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        assert _seen(run_suite(_suite(), client=client, progress=False)) == {1.0}


def test_limited_restores_the_environment(monkeypatch):
    monkeypatch.delenv("OPENBLAS_NUM_THREADS", raising=False)
    with threads.limited(1):
        assert os.environ["OPENBLAS_NUM_THREADS"] == "1"
    assert "OPENBLAS_NUM_THREADS" not in os.environ


def test_bad_thread_counts_are_refused():
    with pytest.raises(ValueError, match="threads must be a whole number >= 0"):
        threads.set_worker_threads(-1)
    with pytest.raises(ValueError, match="threads must be a whole number >= 0"):
        threads.set_worker_threads(1.5)
