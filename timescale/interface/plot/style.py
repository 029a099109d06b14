"""The shared style and plumbing of every figure: one colour and marker per method, input and
ideal styles, the :class:`Drawing` record, strict keywords, axis labels from the cube's units,
selection helpers.
"""

from __future__ import annotations

import functools
import inspect
import zlib
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import xarray as xr

from timescale.data.errors import closest
from timescale.data.units import axis_label, display_unit, scaled_unit

# Okabe–Ito palette (hex), black reserved for the input pulse.
_OI = {
    "black": "#000000", "orange": "#E69F00", "sky blue": "#56B4E9", "bluish green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "reddish purple": "#CC79A7",
}

#: Fixed styles of the known method names: colour, marker, line style.
METHOD_STYLES: dict[str, dict[str, str]] = {
    "resample": {"color": _OI["blue"], "marker": "o", "linestyle": "-"},
    "chirp-dispersive": {"color": _OI["vermillion"], "marker": "s", "linestyle": "-"},
    "switched-bandwidth": {"color": _OI["bluish green"], "marker": "^", "linestyle": "-"},
}
# Any other method: colours not used above (the rest of Okabe–Ito, then four of Paul Tol's
# colour-blind-safe "muted" scheme), markers not used above, a few dash patterns.
_FALLBACK_COLORS = (_OI["orange"], _OI["sky blue"], _OI["reddish purple"],
                    "#332288", "#882255", "#999933", "#44AA99")
_FALLBACK_MARKERS = ("D", "v", "P", "X", "<", ">", "h", "*")
_FALLBACK_LINES = ("-", "--", "-.")

#: Style of the input pulse in every figure.
INPUT_STYLE = {"color": "#000000", "linestyle": "-", "linewidth": 2.6, "alpha": 0.25}
#: Style of the ideal scaled reference in every figure.
IDEAL_STYLE = {"color": "#333333", "linestyle": (0, (4, 2)), "linewidth": 1.2}

_CELL = ("method_name", "pulse", "factor")


def method_style(name: str) -> dict[str, str]:
    """Colour, marker and line style of a method, the same in every figure and every run.

    Parameters
    ----------
    name : str
        Method name.

    Returns
    -------
    dict
        ``{"color": hex, "marker": matplotlib marker, "linestyle": str}``.
    """
    if not isinstance(name, str):
        raise TypeError(f"name must be a method name (str), got {name!r}")
    if name in METHOD_STYLES:
        return dict(METHOD_STYLES[name])
    # crc32 rather than hash(): Python's str hash changes from run to run
    # colour, marker and dashes from independent hashes, so two names sharing a colour
    # most likely still differ in marker
    h = [zlib.crc32(f"{salt}:{name}".encode("utf-8")) for salt in ("colour", "marker", "line")]
    return {
        "color": _FALLBACK_COLORS[h[0] % len(_FALLBACK_COLORS)],
        "marker": _FALLBACK_MARKERS[h[1] % len(_FALLBACK_MARKERS)],
        "linestyle": _FALLBACK_LINES[h[2] % len(_FALLBACK_LINES)],
    }


@dataclass(frozen=True)
class Drawing:
    """What a plot function returns.

    Attributes
    ----------
    figure : matplotlib.figure.Figure
    axes : tuple of Axes
        The panels drawn on (main panel first).
    artists : Mapping[str, tuple]
        The artists made, by what they show: a method name (its lines or points), ``"input"``,
        ``"ideal"``, ``"band:<method>"``, ``"front:<method>"``, ``"failed:<method>"``, ...
    legend : matplotlib.legend.Legend or None
    data : Mapping[str, Any]
        Numbers behind the figure (e.g. the front points per method), in SI units.
    """

    figure: Any
    axes: tuple
    artists: Mapping[str, tuple] = field(default_factory=dict)
    legend: Any = None
    data: Mapping[str, Any] = field(default_factory=dict)

    def lines_of(self, key: str) -> list:
        """The Line2D artists stored under `key`."""
        from matplotlib.lines import Line2D

        return [a for a in self.artists.get(key, ()) if isinstance(a, Line2D)]


# ---- shared helpers ----------------------------------------------------------------------------

def _strict(fn):
    """Reject unknown keywords with a message naming them and the valid ones."""
    sig = inspect.signature(fn)
    valid = [n for n, p in sig.parameters.items()
             if p.kind in (p.KEYWORD_ONLY, p.POSITIONAL_OR_KEYWORD)]

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        unknown = [k for k in kwargs if k not in valid]
        if unknown:
            hint = closest(unknown[0], valid)
            raise TypeError(
                f"{fn.__name__}() got unknown keyword(s) {', '.join(map(repr, unknown))}{hint}; "
                f"valid keywords: {', '.join(valid)}"
            )
        return fn(*args, **kwargs)

    return wrapper


def _new_axes(ax, figsize):
    import matplotlib.pyplot as plt

    if ax is None:
        fig, ax = plt.subplots(figsize=figsize, layout="constrained")
        return fig, ax
    from matplotlib.axes import Axes

    if not isinstance(ax, Axes):
        raise TypeError(f"ax must be a matplotlib Axes or None, got {type(ax).__name__}")
    return ax.figure, ax


def _check_cube(ds, name="ds"):
    if not isinstance(ds, xr.Dataset):
        raise TypeError(f"{name} must be a results cube (xarray.Dataset), got {type(ds).__name__}")
    if "method_name" not in ds.dims:
        raise ValueError(f"{name} has no 'method_name' dimension; is it a timescale results cube?")


def _numeric_vars(ds):
    return [k for k, v in ds.data_vars.items()
            if np.issubdtype(v.dtype, np.number) and "method_name" in v.dims and k != "orientation"]


def _check_var(ds, name, what):
    if not isinstance(name, str):
        raise TypeError(f"{what} must be a cube variable name (str), got {name!r}")
    valid = _numeric_vars(ds)
    if name not in valid:
        raise ValueError(f"{what}={name!r} is not a metric of this cube{closest(name, valid)}; "
                         f"valid: {', '.join(valid)}")
    return name


def _swept_dims(ds):
    """Dims a figure may put on an axis: every cell dim except ``method`` and ``trial``."""
    return [d for d in ds["status"].dims if d != "method_name"] if "status" in ds else \
        [d for d in ds.dims if d not in ("method_name", "trial")]


def _check_dim(ds, name, what):
    valid = _swept_dims(ds)
    if not isinstance(name, str) or name not in valid:
        raise ValueError(f"{what}={name!r} is not a swept dimension of this cube"
                         f"{closest(str(name), valid)}; valid: {', '.join(valid)}")
    return name


def _select(ds, select):
    """Apply ``{dim: value or list of values}``; float coordinates match within rounding."""
    if select is None:
        return ds
    if not isinstance(select, Mapping):
        raise TypeError(f"select must be a mapping of dimension to value(s), got {type(select).__name__}")
    out = ds
    for dim, want in select.items():
        if dim not in ds.dims:
            raise ValueError(f"select names {dim!r}, which is not a dimension of the cube"
                             f"{closest(str(dim), list(ds.dims))}; valid: {', '.join(map(str, ds.dims))}")
        coord = ds[dim].values
        wants = list(want) if isinstance(want, (list, tuple, np.ndarray)) else [want]
        idx = []
        for w in wants:
            if np.issubdtype(coord.dtype, np.number):
                try:
                    hit = np.flatnonzero(np.isclose(coord.astype(float), float(w), rtol=1e-9, atol=0))
                except (TypeError, ValueError):
                    hit = np.array([], dtype=int)
            else:
                hit = np.flatnonzero(coord.astype(str) == str(w))
            if hit.size == 0:
                raise ValueError(f"select[{dim!r}] = {w!r} is not on the cube; valid: "
                                 f"{', '.join(map(str, coord))}")
            idx.append(int(hit[0]))
        out = out.isel({dim: idx if isinstance(want, (list, tuple, np.ndarray)) else idx[0]})
    return out


def _methods(ds, methods):
    have = [str(m) for m in ds["method_name"].values]
    if methods is None:
        return have
    if isinstance(methods, str):
        methods = [methods]
    for m in methods:
        if m not in have:
            raise ValueError(f"methods names {m!r}, which is not in the cube{closest(str(m), have)}; "
                             f"valid: {', '.join(have)}")
    return list(methods)


def _short(text: str) -> str:
    """A name without its parenthetical remark ("stretch factor α (>1 ...)" -> "stretch factor α")."""
    return str(text).split(" (")[0]


def _coord_name(ds, dim) -> str:
    return _short(ds[dim].attrs.get("long_name") or dim)


def _coord_axis(ds, dim):
    """Positions, tick labels and axis label for a coordinate (numeric in display units, or
    categorical positions 0..n-1)."""
    c = ds[dim]
    vals = c.values
    units = c.attrs.get("units", "")
    long_name = _coord_name(ds, dim)
    if np.issubdtype(vals.dtype, np.number):
        unit, k = scaled_unit(units, vals)
        x = vals.astype(float) * k
        label = f"{long_name} ({unit})" if unit else long_name
        return x, [f"{v:g}" for v in x], label, True
    return np.arange(vals.size, dtype=float), [str(v) for v in vals], long_name, False


def _var_display(da):
    unit, k = display_unit(da.attrs.get("units", ""))
    return k, axis_label(da.attrs.get("long_name") or da.name, da.attrs.get("units", ""))


_TITLE_NAMES = {
    "nrmse": "NRMSE", "sndr_db": "SNDR", "correlation": "Correlation with the ideal",
    "bw_out": "Output 99 % bandwidth", "bw_in": "Input 99 % bandwidth", "area": "Silicon area",
    "power": "Active power", "energy_per_pulse": "Energy per pulse", "latency": "Latency",
    "fitted_factor": "Fitted factor", "achieved_factor": "Achieved factor",
    "jitter_snr_out_db": "Jitter-limited SNR of the output", "bw_internal": "Internal bandwidth",
}


def _short_name(da):
    """A compact name for titles (the long name for variables not in the table)."""
    name = _TITLE_NAMES.get(str(da.name))
    if name:
        return name
    ln = str(da.attrs.get("long_name") or da.name)
    return ln[:1].upper() + ln[1:]


def _auto_log(values):
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    return bool(v.size and np.all(v > 0) and v.max() / v.min() >= 20)


def _reduced(da, keep):
    """Stack every dim not in `keep` into one trailing axis; returns (array, names of the
    stacked dims)."""
    other = [d for d in da.dims if d not in keep]
    da = da.transpose(*keep, *other)
    arr = np.asarray(da.values, dtype=float).reshape([da.sizes[d] for d in keep] + [-1])
    return arr, other


def _nanmedian(a, axis=-1):
    with np.errstate(all="ignore"):
        ok = np.any(np.isfinite(a), axis=axis)
        out = np.full(ok.shape, np.nan)
        if np.any(ok):
            out[ok] = np.nanmedian(a[ok], axis=-1) if axis == -1 else np.nan
        return out


def _nanquantile(a, q):
    out = np.full(a.shape[:-1], np.nan)
    ok = np.any(np.isfinite(a), axis=-1)
    if np.any(ok):
        out[ok] = np.nanquantile(a[ok], q, axis=-1)
    return out


def _failed_any(ds, method, keep):
    """Per position on `keep` dims: does any cell of `method` there have status failed?"""
    st = ds["status"].sel({"method_name": method})
    other = [d for d in st.dims if d not in keep]
    st = st.transpose(*keep, *other)
    arr = np.asarray(st.values).astype(str).reshape([st.sizes[d] for d in keep] + [-1])
    return np.any(arr == "failed", axis=-1)


def _legend(ax, where, title=None, **kw):
    """Legend inside (``where`` True) or to the right of the panel ("outside"); None if False."""
    if where is False or where is None:
        return None
    if where not in (True, "outside"):
        raise ValueError(f"legend must be True, False or 'outside', got {where!r}")
    handles, labels = ax.get_legend_handles_labels()
    if not handles:
        return None
    if where == "outside":
        kw = {"loc": "upper left", "bbox_to_anchor": (1.02, 1.0), "borderaxespad": 0.0}
    leg = ax.legend(handles, labels, title=title, fontsize="small", title_fontsize="small",
                    framealpha=0.9, **kw)
    leg._legend_box.align = "left"  # notes in the title read as a left-aligned block
    return leg


def _finish(ax):
    ax.grid(True, which="major", alpha=0.3, linewidth=0.6)
