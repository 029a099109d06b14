"""A metric against any swept dimension of a cube, one line per method with its spread.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from timescale.interface.plot.style import (
    Drawing,
    _auto_log,
    _check_cube,
    _check_dim,
    _check_var,
    _coord_axis,
    _coord_name,
    _failed_any,
    _finish,
    _legend,
    _methods,
    _nanmedian,
    _nanquantile,
    _new_axes,
    _reduced,
    _select,
    _short_name,
    _strict,
    _var_display,
    method_style,
)
from timescale.numerics.metrics import HIGHER_IS_BETTER as _HIGHER_IS_BETTER

# ---- metric against a swept dimension ----------------------------------------------------------

def _set_coord_ticks(ax, axis, pos, labels, numeric, log):
    setter = ax.set_xticks if axis == "x" else ax.set_yticks
    if len(pos) <= 12:
        setter(pos)
        (ax.set_xticklabels if axis == "x" else ax.set_yticklabels)(labels)
        if log:
            (ax.xaxis if axis == "x" else ax.yaxis).set_minor_formatter(_null_formatter())


def _null_formatter():
    from matplotlib.ticker import NullFormatter

    return NullFormatter()




def _reduce_others(arr, how, higher):
    """Reduce the last axis by median, or by the best / worst value for this metric."""
    with np.errstate(all="ignore"):
        ok = np.any(np.isfinite(arr), axis=-1)
        out = np.full(arr.shape[:-1], np.nan)
        if not np.any(ok):
            return out
        a = arr[ok]
        if how == "median":
            out[ok] = np.nanmedian(a, axis=-1)
        elif (how == "best") != higher:  # best of lower-is-better, or worst of higher-is-better
            out[ok] = np.nanmin(a, axis=-1)
        else:
            out[ok] = np.nanmax(a, axis=-1)
        return out


@_strict
def plot_metric(ds, metric="nrmse", over="factor", *, ax=None, methods=None, select=None,
                others="median", band=(0.1, 0.9), logx=None, logy=None, target=None, floor=None,
                title=None, legend=True):
    """A metric against one swept dimension, one line per method, with a spread band over trials.

    Every dimension other than `over` and ``trial`` (pulses, other swept settings) is first
    fixed by `select` or reduced by `others`; then the line is the median over trials and the
    shaded band spans the `band` quantiles over trials. Failed cells are marked × on the lower
    edge.

    Parameters
    ----------
    ds : xarray.Dataset
        Results cube.
    metric : str
        Variable to draw (``"nrmse"``, ``"sndr_db"``, ``"area"``, ...).
    over : str
        Dimension on the horizontal axis (``"factor"``, ``"pulse"`` or a swept setting).
    ax : Axes, optional
    methods : sequence of str, optional
        Methods to draw (default: all in the cube).
    select : Mapping[str, Any], optional
        ``{dim: value}`` to fix other dims first.
    others : {"median", "best", "worst"}
        How the remaining dims are reduced: their median, or the best (worst) value for this
        metric (lowest, or highest for ``sndr_db``, ``correlation`` and the jitter SNRs).
    band : (float, float) or None
        Quantiles of the spread band over trials (None: no band).
    logx, logy : bool, optional
        Log axes (default: when the values span a factor of 20 or more).
    target : float, optional
        Draw a horizontal line at this value (SI units of the metric).
    floor : float, optional
        Draw values below this (SI) at it, marked ▽, so that results exact to rounding
        (NRMSE 1e-14) do not squeeze the rest of a log axis.
    title : str, optional
    legend : bool or "outside"
        Draw a legend inside the panel, to its right ("outside"), or not.

    Returns
    -------
    Drawing
        ``artists[method]``: its median line; ``"floor:<method>"``: markers of floored values; ``"band:<method>"``: its band;
        ``"failed:<method>"``: failed-cell markers; ``data[method]``: (positions, median, lo, hi)
        in SI.
    """
    _check_cube(ds)
    _check_var(ds, metric, "metric")
    _check_dim(ds, over, "over")
    if others not in ("median", "best", "worst"):
        raise ValueError(f"others must be 'median', 'best' or 'worst', got {others!r}")
    if band is not None:
        if (not isinstance(band, (tuple, list)) or len(band) != 2
                or not all(isinstance(q, (int, float)) and 0 <= q <= 1 for q in band) or band[0] > band[1]):
            raise ValueError(f"band must be two quantiles 0 <= lo <= hi <= 1 or None, got {band!r}")
    sub = _select(ds, select)
    if over not in sub.dims:
        raise ValueError(f"select fixes {over!r} to one value; it cannot also be on the axis")
    meths = _methods(sub, methods)
    fig, ax = _new_axes(ax, (6.4, 4.2))
    da = sub[metric]
    higher = metric in _HIGHER_IS_BETTER
    k, ylabel = _var_display(da)
    pos, ticklabels, xlabel, numeric = _coord_axis(sub, over)
    if logx is None:
        logx = numeric and _auto_log(pos)
    art: dict[str, tuple] = {}
    data: dict[str, Any] = {}
    other_dims: list[str] = []
    allvals = []
    any_failed = False
    n_trials = sub.sizes.get("trial", 1) if "trial" in da.dims else 1
    if floor is not None and not (isinstance(floor, (int, float)) and floor > 0):
        raise ValueError(f"floor must be a number > 0 or None, got {floor!r}")
    any_floored = False
    for i_m, m in enumerate(meths):
        dm = da.sel({"method_name": m})
        keep = [over] + (["trial"] if "trial" in dm.dims else [])
        arr, other_dims = _reduced(dm, keep)  # (n_over[, n_trial], k_other)
        per_trial = _reduce_others(arr, others, higher) if other_dims else arr[..., 0]
        if per_trial.ndim == 1:
            per_trial = per_trial[:, None]
        med = _nanmedian(per_trial)
        shown = med
        if floor is not None:
            floored = np.isfinite(med) & (med < floor)
            per_trial = np.where(per_trial < floor, floor, per_trial)
            shown = np.where(floored, floor, med)
        allvals.append(per_trial * k)
        st = method_style(m)
        # earlier methods drawn wider so an identical later line leaves them visible
        line = ax.plot(pos, shown * k, color=st["color"], marker=st["marker"], linestyle=st["linestyle"],
                       linewidth=max(1.0, 2.4 - 0.45 * i_m), markersize=max(3.5, 7.5 - 1.3 * i_m),
                       label=m, zorder=3 + 0.1 * i_m)
        art[m] = tuple(line)
        if floor is not None and np.any(floored):
            any_floored = True
            art[f"floor:{m}"] = tuple(ax.plot(pos[floored], np.full(int(floored.sum()), floor * k),
                                              linestyle="none", marker="v", markersize=11,
                                              markerfacecolor="none", markeredgecolor=st["color"],
                                              markeredgewidth=1.4, zorder=4))
        lo = hi = None
        if band is not None and per_trial.shape[-1] > 1:
            lo, hi = _nanquantile(per_trial, band[0]), _nanquantile(per_trial, band[1])
            poly = ax.fill_between(pos, lo * k, hi * k, color=st["color"], alpha=0.2, linewidth=0,
                                   zorder=2)
            art[f"band:{m}"] = (poly,)
        failed = _failed_any(sub, m, [over]) if "status" in sub else np.zeros(len(pos), bool)
        if np.any(failed):
            any_failed = True
            # x in data, y at 3 % of the axes height: visible whatever the scale
            fx = ax.plot(pos[failed], np.full(int(failed.sum()), 0.03), linestyle="none", marker="x",
                         markersize=9, markeredgewidth=2, color=st["color"],
                         transform=ax.get_xaxis_transform(), clip_on=False, zorder=5)
            art[f"failed:{m}"] = tuple(fx)
        data[m] = (pos, med, lo, hi)
    if logy is None:
        span = [a.ravel() for a in allvals] + [np.atleast_1d(v * k) for v in (target, floor) if v is not None]
        logy = _auto_log(np.concatenate(span) if span else [])
    if logx:
        ax.set_xscale("log")
    if logy:
        ax.set_yscale("log")
    if any_floored and logy:  # room under the floor for the failed-cell marks
        top = np.nanmax(np.concatenate([a.ravel() for a in allvals] + [[floor * k]]))
        if target is not None:
            top = max(top, float(target) * k)
        ax.set_ylim(floor * k / 6, top * 2)
    _set_coord_ticks(ax, "x", pos, ticklabels, numeric, logx)
    if not numeric:
        ax.set_xlim(-0.5, len(pos) - 0.5)
    if target is not None:
        art["target"] = (ax.axhline(float(target) * k, color="#555555", linestyle="--", linewidth=1.0,
                                    label=f"target {float(target) * k:g}"),)
    if any_failed:
        ax.plot([], [], linestyle="none", marker="x", color="#555555", markeredgewidth=2,
                label="failed cell (on lower edge)")
    if any_floored:
        ax.plot([], [], linestyle="none", marker="v", markerfacecolor="none", markeredgecolor="#555555",
                markersize=9, label=f"below {floor * k:g}, drawn at it")
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.set_title(title or f"{_short_name(da)} versus {_coord_name(sub, over)}", fontsize="medium")
    _finish(ax)
    notes = []
    if other_dims:
        notes.append(f"{others} over {', '.join(_coord_name(sub, d) for d in other_dims)}")
    if n_trials > 1:
        notes.append(f"line: median of {n_trials} trials")
        if band is not None:
            notes.append(f"band: {100 * band[0]:g}–{100 * band[1]:g} % of trials")
    leg = _legend(ax, legend, title="\n".join(notes) or None)
    return Drawing(fig, (ax,), art, leg, data)
