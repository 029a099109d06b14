"""The results cube: assemble rows into a labelled xarray Dataset, save it atomically, load it.

Layout: one data variable per metric over the dims (``method``, ``pulse``, ``factor``, one dim
per swept parameter, ``trial`` when there are trials), each with ``units`` and ``long_name``;
``status`` ("ok" / "warned" / "failed", or "n/a" for a swept parameter the method does not
have, see :mod:`timescale.suite`) and ``message`` per cell (without the trial dim);
``design`` and ``bill`` as JSON strings per cell; provenance in the Dataset's attributes as
str/int/float only (JSON strings for structured values). A failed cell is NaN, never dropped.
"""

from __future__ import annotations

import json
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import xarray as xr

from timescale.numerics.metrics import METRICS

__all__ = ["Axis", "assemble", "save_cube", "load_cube", "waveforms_dataset", "input_pulses", "ENGINE",
           "CELL_DIMS"]

#: NetCDF engine used for every read and write (NetCDF-4 through h5netcdf).
ENGINE = "h5netcdf"
#: The leading dims every cube has. The method dim is ``method_name`` so that keyword selection
#: works (``ds.sel(method_name="resample")``); ``method`` is a keyword of xarray's ``.sel``.
CELL_DIMS = ("method_name", "pulse", "factor")
#: What timescale 0.1 called the method dim; :func:`load_cube` renames it.
OLD_METHOD_DIM = "method"

_COORD_ATTRS = {
    "method_name": {"long_name": "time-scaling method", "units": ""},
    "pulse": {"long_name": "input pulse", "units": ""},
    "factor": {"long_name": "stretch factor α (>1 stretches, <1 compresses)", "units": ""},
    "trial": {"long_name": "Monte Carlo trial", "units": ""},
}


@dataclass(frozen=True)
class Axis:
    """One cube dimension: its name, its labels, and optional attributes (units, long_name)."""

    name: str
    values: list
    units: str = ""
    long_name: str = ""


def _package_version() -> str:
    from importlib import metadata

    try:
        return metadata.version("timescale")
    except metadata.PackageNotFoundError:  # running from a source tree
        return "unknown"


def assemble(rows, axes, *, trials=1, provenance=None, methods=(), pulses=None):
    """Build the cube from rows whose ``index`` is the C-order position on `axes`.

    Parameters
    ----------
    rows : iterable of timescale.run.Row
    axes : sequence of Axis
        The cell dims in order.
    trials : int
        Adds a ``trial`` dim when > 1.
    provenance : dict, optional
        Extra attributes (str/int/float).
    methods : sequence of Method
        For plugin versions and summaries in the attributes.
    pulses : Mapping[str, Pulse], optional
        The input pulses, stored in the cube (``input_value`` over ``pulse`` and
        ``input_sample``, with ``input_t0`` and ``input_rate``) so that figures can re-run
        a cell from the cube alone; see :func:`input_pulses`.
    """
    rows = list(rows)
    shape = tuple(len(a.values) for a in axes)
    ncell = int(np.prod(shape))
    with_trial = trials > 1
    names = list(METRICS)
    attrs: dict[str, tuple[str, str]] = dict(METRICS)
    for r in rows:
        for k in r.values:
            if k not in attrs:
                names.append(k)
            attrs.setdefault(k, r.attrs.get(k, ("", k)))
    names = names[: len(METRICS)] + sorted(set(names[len(METRICS):]))
    data = {k: np.full((ncell, trials), np.nan) for k in names}
    status = np.full(ncell, "failed", dtype=object)
    message = np.full(ncell, "cell was not run", dtype=object)
    design = np.full(ncell, "", dtype=object)
    bill = np.full(ncell, "", dtype=object)
    path = np.full(ncell, "", dtype=object)
    limits = np.full(ncell, "", dtype=object)
    binding = np.full(ncell, "", dtype=object)
    orientation = np.full(ncell, np.nan)
    for r in rows:
        i = r.index
        status[i], message[i] = r.status, r.message
        design[i], bill[i], path[i] = r.design, r.bill, r.path
        limits[i], binding[i] = r.limits, r.binding
        if r.status not in ("failed", "n/a"):  # "n/a": a swept parameter the method lacks
            orientation[i] = r.orientation
        for k, v in r.values.items():
            data[k][i] = v
    dims = tuple(a.name for a in axes)
    vdims = dims + (("trial",) if with_trial else ())
    vshape = shape + ((trials,) if with_trial else ())
    ds = xr.Dataset()
    for k in names:
        units, long_name = attrs[k]
        ds[k] = xr.DataArray(data[k].reshape(vshape), dims=vdims,
                             attrs={"units": units, "long_name": long_name})
    for k, arr, ln in (("status", status, "cell status (ok, warned, infeasible, failed, n/a)"),
                       ("message", message, "warnings or the failure reason"),
                       ("design", design, "design record (JSON)"),
                       ("bill", bill, "bill of the design (JSON)"),
                       ("path", path, "simulation path"),
                       ("limits", limits, "process limits checked (JSON: need, allowed, margin)"),
                       ("binding_limit", binding, "the process limit with the least margin")):
        ds[k] = xr.DataArray(arr.reshape(shape), dims=dims, attrs={"units": "", "long_name": ln})
    ds["orientation"] = xr.DataArray(orientation.reshape(shape), dims=dims,
                                     attrs={"units": "", "long_name": "image orientation (+1 upright, -1 time-reversed)"})
    if pulses:
        ds = ds.merge(_inputs_dataset(pulses, [str(v) for v in next(a.values for a in axes if a.name == "pulse")]))
    for a in axes:
        vals = np.asarray(a.values, dtype=object if isinstance(a.values[0], str) else None)
        at = dict(_COORD_ATTRS.get(a.name, {"units": a.units, "long_name": a.long_name or a.name}))
        ds = ds.assign_coords({a.name: xr.DataArray(vals, dims=(a.name,), attrs=at)})
    if with_trial:
        ds = ds.assign_coords(trial=xr.DataArray(np.arange(trials), dims=("trial",), attrs=_COORD_ATTRS["trial"]))
    ds.attrs.update(
        title="timescale results cube",
        timescale_version=_package_version(),
        plugins=json.dumps({m.name: {"version": m.version, "summary": m.summary} for m in methods}, sort_keys=True),
        n_cells=ncell,
        n_failed=int(np.sum(status == "failed")),
        n_warned=int(np.sum(status == "warned")),
        n_infeasible=int(np.sum(status == "infeasible")),
        n_not_applicable=int(np.sum(status == "n/a")),
    )
    for k, v in (provenance or {}).items():
        if not isinstance(v, (str, int, float)):
            v = json.dumps(v, sort_keys=True, default=str)
        ds.attrs[k] = v
    return ds


def _inputs_dataset(pulses, order) -> xr.Dataset:
    n = max(pulses[k].n for k in order)
    values = np.full((len(order), n), np.nan)
    for i, k in enumerate(order):
        values[i, : pulses[k].n] = pulses[k].values
    units = {pulses[k].units for k in order}
    return xr.Dataset({
        "input_value": xr.DataArray(values, dims=("pulse", "input_sample"), attrs={
            "units": units.pop() if len(units) == 1 else "", "long_name": "input pulse samples (NaN past the record)"}),
        "input_t0": xr.DataArray(np.array([pulses[k].t0 for k in order]), dims=("pulse",),
                                 attrs={"units": "s", "long_name": "time of the first input sample"}),
        "input_rate": xr.DataArray(np.array([pulses[k].rate for k in order]), dims=("pulse",),
                                   attrs={"units": "Hz", "long_name": "input sample rate"}),
    })


def input_pulses(ds: xr.Dataset) -> dict:
    """The input pulses stored in a cube, ``{name: Pulse}`` (empty when the cube has none)."""
    from timescale.data.pulse import Pulse

    if "input_value" not in ds:
        return {}
    units = ds["input_value"].attrs.get("units", "") or "V"
    out = {}
    for name in ds["pulse"].values:
        sel = {"pulse": name}
        v = np.asarray(ds["input_value"].sel(sel).values, dtype=float)
        v = v[: int(np.sum(np.isfinite(v)))]
        out[str(name)] = Pulse(v, float(ds["input_rate"].sel(sel)), float(ds["input_t0"].sel(sel)),
                               units, str(name))
    return out


def waveforms_dataset(rows, axes):
    """Companion dataset of kept output waveforms: ``time`` (s) and ``value`` over the cell dims,
    ``trial`` and ``sample`` (each cell keeps its own grid; NaN pads shorter records)."""
    rows = [r for r in rows if r.waveform is not None]
    shape = tuple(len(a.values) for a in axes)
    if not rows:
        return xr.Dataset()
    nmax = max(r.waveform.n for r in rows)
    trials = max(r.waveform.values.shape[0] for r in rows)
    t = np.full((int(np.prod(shape)), nmax), np.nan)
    v = np.full((int(np.prod(shape)), trials, nmax), np.nan)
    for r in rows:
        w = r.waveform
        t[r.index, : w.n] = w.t
        v[r.index, : w.values.shape[0], : w.n] = w.values
    dims = tuple(a.name for a in axes)
    ds = xr.Dataset({
        "time": xr.DataArray(t.reshape(shape + (nmax,)), dims=dims + ("sample",),
                             attrs={"units": "s", "long_name": "output sample time"}),
        "value": xr.DataArray(v.reshape(shape + (trials, nmax)), dims=dims + ("trial", "sample"),
                              attrs={"units": "V", "long_name": "output waveform"}),
    })
    return ds.assign_coords({a.name: list(a.values) for a in axes})


def save_cube(ds: xr.Dataset, path, *, overwrite: bool = True) -> Path:
    """Write `ds` to NetCDF atomically: a unique temporary file in the same folder, then rename.

    Parameters
    ----------
    ds : xarray.Dataset
    path : str or Path
        Destination (``.nc``).
    overwrite : bool
        When False, refuse to replace an existing file.

    Returns
    -------
    Path
    """
    if not isinstance(ds, xr.Dataset):
        raise TypeError(f"ds must be an xarray.Dataset, got {type(ds).__name__}")
    path = Path(path)
    if path.exists() and not overwrite:
        raise FileExistsError(f"{str(path)!r} exists; pass overwrite=True (or --overwrite) to replace it")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise ValueError(f"folder {str(folder)!r} for path does not exist")
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    os.close(fd)
    try:
        ds.to_netcdf(tmp, engine=ENGINE)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path


def load_cube(path) -> xr.Dataset:
    """Read a cube written by :func:`save_cube` (fully into memory, file closed)."""
    path = Path(path)
    if not path.is_file():
        raise ValueError(f"path {str(path)!r} is not a file")
    ds = xr.load_dataset(path, engine=ENGINE)
    if OLD_METHOD_DIM in ds.dims and CELL_DIMS[0] not in ds.dims:  # a file from timescale 0.1
        ds = ds.rename({OLD_METHOD_DIM: CELL_DIMS[0]})
        ds[CELL_DIMS[0]].attrs.update(_COORD_ATTRS[CELL_DIMS[0]])
    return ds
