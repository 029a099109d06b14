"""Small multiples: a heat map of a metric over two swept dimensions, one panel per method.
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
    _methods,
    _nanmedian,
    _reduced,
    _select,
    _short_name,
    _strict,
    _swept_dims,
    _var_display,
    method_style,
)

# ---- small multiples ---------------------------------------------------------------------------

@_strict
def plot_map(ds, metric="nrmse", x="factor", y=None, *, ax=None, methods=None, select=None,
             log=None, cmap="cividis", annotate=None, title=None):
    """Small multiples: one heat map of a metric over two swept dimensions per method, on one
    shared colour scale.

    Parameters
    ----------
    ds : xarray.Dataset
    metric : str
    x, y : str
        Dimensions on the horizontal and vertical axes (y default: the first other swept dim
        with more than one value).
    ax : Axes or sequence of Axes, optional
        One panel per method (default: a new figure with a row of panels).
    methods : sequence of str, optional
    select : Mapping[str, Any], optional
    log : bool, optional
        Logarithmic colour scale (default: when values span a factor of 20 or more).
    cmap : str
        A perceptually uniform colour map ("cividis" is colour-blind safe).
    annotate : bool, optional
        Print each cell's value (default: when a panel has at most 64 cells).
    title : str, optional

    Returns
    -------
    Drawing
        ``artists[method]``: its mesh; ``"failed:<method>"``: failed-cell marks;
        ``"colorbar"``; ``data[method]``: the (y, x) array of medians in SI.
    """
    import matplotlib.colors as mcolors

    _check_cube(ds)
    _check_var(ds, metric, "metric")
    _check_dim(ds, x, "x")
    sub = _select(ds, select)
    if y is None:
        cands = [d for d in _swept_dims(sub) if d != x and sub.sizes.get(d, 1) > 1]
        if not cands:
            raise ValueError(f"y: the cube has no second swept dimension with more than one value "
                             f"besides {x!r}; dims: {', '.join(_swept_dims(sub))}")
        y = cands[0]
    _check_dim(sub, y, "y")
    if y == x:
        raise ValueError(f"x and y must be different dimensions, both are {x!r}")
    meths = _methods(sub, methods)
    if ax is None:
        import matplotlib.pyplot as plt

        fig, axs = plt.subplots(1, len(meths), figsize=(3.2 * len(meths) + 1.2, 3.6), squeeze=False,
                                layout="constrained", sharey=True)
        axs = list(axs[0])
    else:
        axs = [ax] if not isinstance(ax, (list, tuple, np.ndarray)) else list(np.ravel(ax))
        if len(axs) != len(meths):
            raise ValueError(f"ax must hold one Axes per method ({len(meths)}), got {len(axs)}")
        fig = axs[0].figure
    da = sub[metric]
    k, clabel = _var_display(da)
    px, tx, xlabel, _ = _coord_axis(sub, x)
    py, ty, ylabel, _ = _coord_axis(sub, y)
    grids = {}
    for m in meths:
        arr, other = _reduced(da.sel({"method_name": m}), [y, x])
        grids[m] = (_nanmedian(arr.reshape(-1, arr.shape[-1])).reshape(arr.shape[:2]), other)
    allv = np.concatenate([g.ravel() for g, _ in grids.values()]) * k
    fin = allv[np.isfinite(allv)]
    if log is None:
        log = _auto_log(fin)
    if fin.size:
        vmin, vmax = float(fin.min()), float(fin.max())
        if vmin == vmax:
            vmin, vmax = (vmin * 0.9, vmax * 1.1) if vmin > 0 else (vmin - 1, vmax + 1)
    else:
        vmin, vmax = 0.0, 1.0
    norm = mcolors.LogNorm(vmin, vmax) if log and vmin > 0 else mcolors.Normalize(vmin, vmax)
    if annotate is None:
        annotate = len(px) * len(py) <= 64
    art: dict[str, tuple] = {}
    data: dict[str, Any] = {}
    mesh = None
    reduced = []
    partial_fail = False
    for a, m in zip(axs, meths):
        g, reduced = grids[m]
        data[m] = g
        a.set_facecolor("#dddddd")
        mesh = a.pcolormesh(np.arange(len(px) + 1) - 0.5, np.arange(len(py) + 1) - 0.5,
                            np.ma.masked_invalid(g * k), cmap=cmap, norm=norm, shading="flat")
        art[m] = (mesh,)
        a.set_xticks(np.arange(len(px)), tx)
        a.set_yticks(np.arange(len(py)), ty)
        a.set_xlabel(xlabel)
        if a is axs[0]:
            a.set_ylabel(ylabel)
        st = method_style(m)
        a.set_title(m, color=st["color"], fontweight="bold", fontsize="medium")
        failed = _failed_any(sub, m, [y, x]) if "status" in sub else np.zeros(g.shape, bool)
        texts, fails = [], []
        for iy in range(len(py)):
            for ix in range(len(px)):
                v = g[iy, ix] * k
                if not np.isfinite(v):
                    if failed[iy, ix]:
                        fails.append(a.text(ix, iy, "failed", ha="center", va="center", color="#990000",
                                            fontsize="x-small", fontweight="bold"))
                    continue
                if annotate or failed[iy, ix]:
                    rgba = mesh.cmap(norm(v))
                    lum = 0.299 * rgba[0] + 0.587 * rgba[1] + 0.114 * rgba[2]
                    t = a.text(ix, iy, (f"{v:.2g}" if annotate else "") + ("†" if failed[iy, ix] else ""),
                               ha="center", va="center", fontsize="x-small",
                               color="black" if lum > 0.5 else "white")
                    (fails if failed[iy, ix] else texts).append(t)
                    partial_fail = partial_fail or bool(failed[iy, ix])
        if fails:
            art[f"failed:{m}"] = tuple(fails)
        if texts:
            art[f"values:{m}"] = tuple(texts)
    cb = fig.colorbar(mesh, ax=axs, shrink=0.9, label=clabel)
    art["colorbar"] = (cb,)
    sup = title or f"{_short_name(da)} over {_coord_name(sub, x)} and {_coord_name(sub, y)}"
    if reduced:
        sup += f"\n(median over {', '.join(_coord_name(sub, d) for d in reduced)})"
    if partial_fail:
        sup += "\n† some of the runs merged into this cell failed"
    fig.suptitle(sup, fontsize="medium")
    return Drawing(fig, tuple(axs), art, None, data)
