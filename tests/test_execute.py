"""Executors: the same cube in-process, in local processes and on Dask; checkpoint and resume
after SIGTERM and SIGKILL; Monte Carlo independence; failure isolation; time limits; Dask
missing."""

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import timescale as ts
from timescale.runner.executors import DASK_HINT
from timescale.runner.execute import run_suite
from timescale.interface.tables import failure_table, method_table
from timescale.runner.suite import Suite

sys.path.insert(0, str(Path(__file__).parent))
from suite_methods import Broken, Noisy  # noqa: E402

GAUSS = {"shape": "gaussian", "name": "g", "fwhm": 200e-12, "center": 0.5e-9, "duration": 1e-9, "rate": 50e9}


def _suite(**kw):
    base = dict(pulses=[GAUSS, dict(GAUSS, name="g-twin")], methods=["resample", "suite-noisy"],
                factors=[0.5, 2.0, 3.0], sweep={"noise": [1e-3, 1e-2]}, trials=2, seed=11)
    base.update(kw)
    return Suite(**base)


@pytest.fixture
def noisy():
    with ts.registered(Noisy()):
        yield


def test_serial_processes_and_dask_give_identical_cubes(noisy):
    distributed = pytest.importorskip("dask.distributed")
    s = _suite()
    serial = run_suite(s, progress=False).cube
    procs = run_suite(s, workers=2, chunk_size=3, progress=False).cube
    xr.testing.assert_identical(serial, procs)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        on_dask = run_suite(s, client=client, chunk_size=2, progress=False).cube
        by_address = run_suite(s, scheduler=cluster.scheduler_address, progress=False).cube
    xr.testing.assert_identical(serial, on_dask)
    xr.testing.assert_identical(serial, by_address)
    assert serial.attrs["n_failed"] == 0 and serial.sizes["trial"] == 2


def test_monte_carlo_trials_and_identical_cells_differ(noisy):
    # Two pulses with identical samples and identical parameters are two cells: each draws from
    # its own child SeedSequence (numpy SeedSequence spawn_key), so their noise differs, as do
    # the trials within a cell. Same seed -> same numbers.
    s = Suite(pulses=[GAUSS, dict(GAUSS, name="g-twin")], methods=["suite-noisy"], factors=[2.0],
              params={"noise": 1e-2}, trials=4, seed=5)
    cube = run_suite(s, progress=False).cube
    a = cube["nrmse"].sel({"method_name": "suite-noisy", "pulse": "g", "factor": 2.0}).values
    b = cube["nrmse"].sel({"method_name": "suite-noisy", "pulse": "g-twin", "factor": 2.0}).values
    assert len(set(a.tolist())) == 4  # trials differ
    assert not np.any(a == b)  # identical cells differ
    xr.testing.assert_identical(cube, run_suite(s, progress=False).cube)
    other = run_suite(Suite(pulses=[GAUSS, dict(GAUSS, name="g-twin")], methods=["suite-noisy"],
                            factors=[2.0], params={"noise": 1e-2}, trials=4, seed=6), progress=False).cube
    assert not np.array_equal(other["nrmse"].values, cube["nrmse"].values)


def test_monte_carlo_trials_differ_on_dask(noisy):
    distributed = pytest.importorskip("dask.distributed")
    s = Suite(pulses=[GAUSS, dict(GAUSS, name="g-twin")], methods=["suite-noisy"], factors=[2.0, 2.0 + 1e-9],
              params={"noise": 1e-2}, trials=3, seed=8)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        cube = run_suite(s, client=client, chunk_size=1, progress=False).cube
    v = cube["nrmse"].values.reshape(4, 3)
    assert len(np.unique(v)) == v.size  # no two cells or trials share a draw (no task caching)


def test_broken_method_fails_only_its_cells(noisy):
    with ts.registered(Broken()):
        s = Suite(pulses=[GAUSS], methods=["resample", "suite-broken"], factors=[0.5, 2.0, 4.0],
                  sweep={"mode": ["ok", "nan"]}, seed=3)
        res = run_suite(s, progress=False)
    cube = res.cube
    st = cube["status"].sel({"pulse": "g"})
    # resample never fails (at 0.5 its replay DAC outruns the card: "infeasible", metrics kept)
    assert set(st.sel({"method_name": "resample", "mode": "ok"}).values) <= {"ok", "infeasible"}
    assert (st.sel({"method_name": "resample", "mode": "nan"}).values == "n/a").all()
    broken = st.sel({"method_name": "suite-broken"})
    assert list(broken.sel(mode="ok").values) == ["ok", "ok", "failed"]  # factor 4 > 3 raises
    assert list(broken.sel(mode="nan").values) == ["failed"] * 3
    assert cube.attrs["n_failed"] == 4
    assert np.isnan(cube["nrmse"].sel({"method_name": "suite-broken", "mode": "nan"}).values).all()
    assert np.isfinite(cube["nrmse"].sel({"method_name": "resample", "mode": "ok"}).values).all()
    msgs = cube["message"].sel({"method_name": "suite-broken", "pulse": "g"}).values
    assert "cannot reach the factor" in msgs[2, 0] and "non-finite" in msgs[0, 1]
    # factor 4 fails in design before the NaN output could appear, whatever the mode
    assert res.failures == {"ValueError: this design cannot reach the factor": 2,
                            "FloatingPointError: the method returned non-finite output samples": 2}
    assert "4 failed" in res.summary() and "non-finite" in res.summary()
    table = method_table(cube).splitlines()
    row = next(line for line in table if line.startswith("suite-broken")).split()
    assert row[1:6] == ["2", "0", "0", "4", "0"]  # ok, warned, infeasible, failed, n/a of that method
    assert "2 x suite-broken: FloatingPointError" in failure_table(cube)


def test_time_limit_fails_only_the_slow_cells(noisy):
    s = Suite(pulses=[GAUSS], methods=["suite-noisy"], factors=[2.0], sweep={"delay": [0.0, 5.0, 0.0 + 1e-6]},
              timeout=0.3, seed=1)
    cube = run_suite(s, progress=False).cube
    assert list(cube["status"].values.ravel()) == ["ok", "failed", "ok"]
    assert "time limit of 0.3 s" in cube["message"].values.ravel()[1]
    procs = run_suite(s, workers=2, chunk_size=1, progress=False).cube
    assert list(procs["status"].values.ravel()) == ["ok", "failed", "ok"]


def test_dask_missing_gives_install_hint_and_in_process_still_works(monkeypatch):
    for name in ("dask", "dask.distributed", "distributed"):
        monkeypatch.setitem(sys.modules, name, None)  # makes `import` raise ImportError
    s = Suite(pulses=[GAUSS], methods=["resample"], factors=[2.0], seed=1)
    with pytest.raises(ImportError) as info:
        run_suite(s, scheduler="tcp://127.0.0.1:1", progress=False)
    assert 'pip install "timescale[dask]"' in str(info.value) and str(info.value) == DASK_HINT
    assert run_suite(s, progress=False).cube.attrs["n_failed"] == 0


def test_output_and_checkpoint_are_not_overwritten(tmp_path):
    s = Suite(pulses=[GAUSS], methods=["resample"], factors=[2.0], seed=1)
    out = tmp_path / "r.nc"
    out.write_text("precious")
    with pytest.raises(FileExistsError, match="overwrite"):
        run_suite(s, output=out, progress=False)
    assert out.read_text() == "precious"
    ck = tmp_path / "other.checkpoint"
    run_suite(s, checkpoint=ck, progress=False)  # no output: the checkpoint stays
    with pytest.raises(FileExistsError, match="resume"):
        run_suite(s, checkpoint=ck, progress=False)
    s2 = Suite(pulses=[GAUSS], methods=["resample"], factors=[3.0], seed=1)
    with pytest.raises(ValueError, match="different suite"):
        run_suite(s2, checkpoint=ck, resume=True, progress=False)
    res = run_suite(s, checkpoint=ck, resume=True, progress=False)
    assert res.n_run == 0 and res.cube.attrs["n_failed"] == 0


KILL_SUITE = """
name = "kill-test"
methods = ["resample"]
factors = {start = 0.5, stop = 4.0, num = 10, scale = "log"}
seed = 99
[params]
capture = true
dac = "ideal"
[sweep]
bits = {start = 4, stop = 14, num = 6}
jitter = [0.0, 1e-12]
[[pulses]]
shape = "gaussian"
fwhm = 150e-12
center = 0.5e-9
duration = 1e-9
rate = 40e9
"""


def _lines(path):
    try:
        return path.read_bytes().count(b"\n")
    except FileNotFoundError:
        return 0


def _start_and_kill(args, ck, more, sig, env):
    start = _lines(ck)
    proc = subprocess.Popen([sys.executable, "-m", "timescale", *args], env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    deadline = time.monotonic() + 60
    while _lines(ck) < start + more and proc.poll() is None and time.monotonic() < deadline:
        time.sleep(0.01)
    assert proc.poll() is None, "the run finished before it could be killed"
    proc.send_signal(sig)
    _, err = proc.communicate(timeout=60)
    return proc.returncode, err.decode()


def test_killed_run_resumes_to_the_identical_cube(tmp_path):
    suite = tmp_path / "kill.toml"
    suite.write_text(KILL_SUITE)
    out = tmp_path / "r.nc"
    ck = Path(str(out) + ".checkpoint")
    env = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parent.parent))
    args = ["run", str(suite), "-o", str(out), "--no-progress"]
    rc, err = _start_and_kill(args, ck, 20, signal.SIGTERM, env)
    assert rc == 130 and "--resume" in err  # Ctrl-C-like stop, checkpoint kept
    after_term = _lines(ck) - 1
    rc, _ = _start_and_kill(args + ["--resume"], ck, 20, signal.SIGKILL, env)
    assert rc == -signal.SIGKILL
    after_kill = _lines(ck) - 1
    assert 19 <= after_term < after_kill < 120 and not out.exists()
    res = run_suite(suite, output=out, resume=True, progress=False)
    assert res.n_run == 120 - after_kill  # a line torn by the kill is not counted and is re-run
    assert not ck.exists()
    whole = run_suite(suite, progress=False).cube
    xr.testing.assert_identical(ts.load_cube(out), whole)
    xr.testing.assert_identical(res.cube, whole)


def test_kept_waveforms_go_to_a_companion_file(tmp_path, noisy):
    s = Suite(pulses=[GAUSS], methods=["suite-noisy"], factors=[0.5, 2.0], trials=2, keep="waveforms", seed=2)
    out = tmp_path / "w.nc"
    res = run_suite(s, output=out, progress=False)
    wf = ts.load_cube(tmp_path / "w.waveforms.nc")
    xr.testing.assert_identical(wf, res.waveforms)
    xr.testing.assert_identical(wf, run_suite(s, workers=2, progress=False).waveforms)
    # the kept record is the method's output: x(t/α) on a grid of rate/α (plus the cell's noise)
    one = wf["value"].sel({"method_name": "suite-noisy", "pulse": "g", "factor": 2.0}).values
    t = wf["time"].sel({"method_name": "suite-noisy", "pulse": "g", "factor": 2.0}).values
    assert one.shape == (2, 50) and np.allclose(np.diff(t), 2.0 / 50e9)
    assert not np.array_equal(one[0], one[1])
