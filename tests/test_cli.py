"""Command line: methods and demo, as a user runs them."""

import subprocess
import sys

import xarray as xr

from timescale import available_methods
from timescale.interface.cli import main


def test_methods_lists_resample_with_units(capsys):
    assert main(["methods"]) == 0
    out = capsys.readouterr().out
    assert "resample" in out and "[bit]" in out and "[s]" in out


def test_demo_writes_a_cube_and_prints_a_table(tmp_path, capsys):
    path = tmp_path / "demo.nc"
    assert main(["demo", "-o", str(path)]) == 0
    out = capsys.readouterr().out
    assert "Invented scenario" in out and "nrmse" in out
    ds = xr.load_dataset(path, engine="h5netcdf")
    # every installed method runs in the demo (issue 2: "through every installed method")
    assert sorted(ds["method_name"].values) == sorted(available_methods())
    assert set(ds["status"].values.ravel()) <= {"ok", "warned", "infeasible", "failed"}
    # the fidelity reference never fails, and every method appears as a row of the table
    assert (ds["status"].sel({"method_name": "resample"}).values != "failed").all()
    for name in available_methods():
        assert name in out


def test_console_script_runs():
    r = subprocess.run([sys.executable, "-m", "timescale", "methods"], capture_output=True, text=True)
    assert r.returncode == 0 and "resample" in r.stdout


def test_bad_input_is_a_clear_error(tmp_path, capsys):
    assert main(["demo", "-o", str(tmp_path / "missing-folder" / "x.nc")]) == 2
    captured = capsys.readouterr()
    assert "does not exist" in captured.err and "missing-folder" in captured.err
    assert "Invented scenario" not in captured.out  # refused before the demo ran, not after
    assert list(tmp_path.iterdir()) == []  # nothing half-written
