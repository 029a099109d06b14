"""compare() and the results cube: dims, failures isolated, NetCDF round trip, bad input."""

import dataclasses
import os

import numpy as np
import pytest
import xarray as xr

import timescale
from timescale.plugin import Design, Simulation, param
from timescale.runner.cube import input_pulses

from toy_methods import Ideal


@dataclasses.dataclass(frozen=True)
class _P:
    fail_above: float = param(4.0, doc="raise for factors above this")


class Fragile(Ideal):
    name = "test-fragile"
    Params = _P

    def design(self, pulse, factor, params, technology):
        if factor > params.fail_above:
            raise ValueError(f"factor {factor} is beyond what this toy can do")
        return Design(factor=factor)

    def simulate(self, pulse, design, params, rng, trials=1, technology=None):
        return Simulation(pulse=pulse.dilate(design.factor))


def pulses():
    g = timescale.Pulse.gaussian(sigma=80e-12, center=0.6e-9, duration=2e-9, rate=60e9, name="g")
    m = timescale.Pulse.monocycle(sigma=80e-12, center=0.6e-9, duration=2e-9, rate=60e9, name="m")
    return {"g": g, "m": m}


def test_cube_dims_units_and_failed_cells():
    with timescale.registered(Fragile()):
        ds = timescale.compare(pulses(), ["resample", "test-fragile"], [0.5, 2.0, 8.0], seed=1)
    assert dict(ds.sizes) == {"method_name": 2, "pulse": 2, "factor": 3, "input_sample": 120}
    # the inputs travel with the cube, so a figure can re-run any cell from the file alone
    stored = input_pulses(ds)
    np.testing.assert_array_equal(stored["m"].values, pulses()["m"].values)
    assert stored["m"].rate == pulses()["m"].rate
    for name in ("nrmse", "correlation", "achieved_factor", "fitted_factor", "sndr_db", "latency",
                 "bw_in", "bw_out", "bw_internal", "rms_bw_in", "rms_bw_out", "jitter_snr_in_db",
                 "jitter_snr_out_db", "area", "power", "energy_per_pulse"):
        assert "units" in ds[name].attrs and ds[name].attrs["long_name"], name
    assert ds["latency"].attrs["units"] == "s"
    # the method dim is "method_name", so keyword selection works (xarray's .sel has its own
    # "method" keyword, which once swallowed a dim of that name silently)
    st = ds["status"].sel(method_name="test-fragile")
    assert st.dims == ("pulse", "factor")
    assert list(st.sel(pulse="g").values) == ["ok", "ok", "failed"]
    msg = str(ds["message"].sel({"method_name": "test-fragile", "pulse": "g", "factor": 8.0}).values)
    assert "beyond what this toy can do" in msg
    assert np.isnan(ds["nrmse"].sel({"method_name": "test-fragile", "factor": 8.0})).all()
    assert ds.attrs["n_failed"] == 2
    assert (ds["nrmse"].sel({"method_name": "resample"}) < 1e-12).all()


def test_trials_add_a_dim():
    ds = timescale.compare(pulses()["g"], ["resample"], 2.0, trials=3, seed=5, capture=True, jitter=2e-12)
    assert ds["nrmse"].dims == ("method_name", "pulse", "factor", "trial")
    vals = ds["nrmse"].values.ravel()
    assert len(set(vals)) == 3  # jitter differs per trial


def test_same_seed_same_cube_and_netcdf_round_trip(tmp_path):
    kw = dict(trials=2, seed=11, capture=True, jitter=1e-12)
    a = timescale.compare(pulses(), ["resample"], [0.5, 2.0], **kw)
    b = timescale.compare(pulses(), ["resample"], [0.5, 2.0], **kw)
    xr.testing.assert_identical(a, b)
    path = timescale.save_cube(a, tmp_path / "cube.nc")
    xr.testing.assert_identical(a, timescale.load_cube(path))
    assert sorted(os.listdir(tmp_path)) == ["cube.nc"]  # no temporary left behind
    for v in a.attrs.values():
        assert isinstance(v, (str, int, float))


def test_save_refuses_to_overwrite_when_asked(tmp_path):
    ds = timescale.compare(pulses()["g"], ["resample"], 2.0)
    path = timescale.save_cube(ds, tmp_path / "c.nc")
    with pytest.raises(FileExistsError, match="exists"):
        timescale.save_cube(ds, path, overwrite=False)


def test_failed_write_leaves_nothing(tmp_path, monkeypatch):
    ds = timescale.compare(pulses()["g"], ["resample"], 2.0)

    def boom(*a, **k):
        raise OSError("disk full")

    monkeypatch.setattr(xr.Dataset, "to_netcdf", boom)
    with pytest.raises(OSError):
        timescale.save_cube(ds, tmp_path / "c.nc")
    assert os.listdir(tmp_path) == []


@pytest.mark.parametrize("factor, err", [(0.0, ValueError), (-2.0, ValueError), (float("nan"), ValueError),
                                         (float("inf"), ValueError), ("2", TypeError)])
def test_bad_factor(factor, err):
    with pytest.raises(err, match="factor"):
        timescale.compare(pulses()["g"], ["resample"], [factor])


def test_parameter_no_method_has():
    with pytest.raises(ValueError, match=r"unknown key 'bitz' \(did you mean 'bits'\?\)"):
        timescale.compare(pulses()["g"], ["resample"], 2.0, bitz=3)


def test_batched_pulse_is_refused():
    g = pulses()["g"]
    b = g.with_values(np.stack([g.values, g.values]))
    with pytest.raises(ValueError, match="one record"):
        timescale.compare(b, ["resample"], 2.0)


def test_a_cube_from_version_0_1_loads_with_the_new_method_dim(tmp_path):
    # timescale 0.1 named the method dim "method"; such files load with it renamed
    ds = timescale.compare(pulses(), ["resample"], [2.0], seed=3)
    old = ds.rename({"method_name": "method"})
    path = tmp_path / "old.nc"
    old.to_netcdf(path, engine="h5netcdf")
    back = timescale.load_cube(path)
    assert "method" not in back.dims and back.sizes["method_name"] == 1
    assert back["method_name"].attrs["long_name"] == "time-scaling method"
    xr.testing.assert_identical(back.drop_attrs(), ds.drop_attrs())
