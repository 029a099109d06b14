"""Cost against fidelity, one point per design, with each method's non-dominated front.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from timescale.interface.plot.style import (
    Drawing,
    _auto_log,
    _check_cube,
    _check_var,
    _finish,
    _legend,
    _methods,
    _nanmedian,
    _new_axes,
    _reduced,
    _select,
    _short_name,
    _strict,
    _var_display,
    method_style,
)
from timescale.numerics.metrics import HIGHER_IS_BETTER as _HIGHER_IS_BETTER

# ---- pure computations -------------------------------------------------------------------------

def pareto_mask(cost, badness) -> np.ndarray:
    """Which points are non-dominated when both `cost` and `badness` are to be minimised.

    A point is dominated when another point is no worse in both and strictly better in one.
    NaN points are never on the front.

    Parameters
    ----------
    cost, badness : array_like, same shape (n,)

    Returns
    -------
    ndarray of bool, shape (n,)
    """
    c = np.asarray(cost, dtype=float).ravel()
    b = np.asarray(badness, dtype=float).ravel()
    if c.shape != b.shape:
        raise ValueError(f"cost and badness must have the same length, got {c.size} and {b.size}")
    ok = np.isfinite(c) & np.isfinite(b)
    mask = ok.copy()
    for i in np.flatnonzero(ok):
        no_worse = (c[ok] <= c[i]) & (b[ok] <= b[i])
        better = (c[ok] < c[i]) | (b[ok] < b[i])
        if np.any(no_worse & better):
            mask[i] = False
    return mask


# ---- trade-off ---------------------------------------------------------------------------------


@_strict
def plot_tradeoff(ds, cost="area", fidelity="nrmse", *, ax=None, methods=None, select=None,
                  target=None, floor=None, logx=None, logy=None, title=None, legend=True):
    """Cost against fidelity: one point per design (cell, median over trials), with each
    method's non-dominated front drawn as a staircase.

    A design is on its method's front when no other design of that method is both cheaper and
    more faithful. Lower cost is better; lower `fidelity` is better unless it is one of
    ``sndr_db``, ``correlation``, ``jitter_snr_out_db`` (higher is better).

    Parameters
    ----------
    ds : xarray.Dataset
    cost : str
        ``"area"``, ``"power"``, ``"energy_per_pulse"`` or any metric.
    fidelity : str
        ``"nrmse"``, ``"sndr_db"`` or any metric.
    ax : Axes, optional
    methods : sequence of str, optional
    select : Mapping[str, Any], optional
    target : float, optional
        Fidelity target drawn as a vertical line (SI units of `fidelity`).
    floor : float, optional
        Draw fidelity values below this (SI) at it (the front is found on the true values).
    logx, logy : bool, optional
    title : str, optional
    legend : bool or "outside"
        Draw a legend inside the panel, to its right ("outside"), or not.

    Returns
    -------
    Drawing
        ``artists[method]``: its points; ``"front:<method>"``: its front line;
        ``data["front:<method>"]``: front points as an (n, 2) array (fidelity, cost) in SI;
        ``data["points:<method>"]``: all its points.
    """
    _check_cube(ds)
    _check_var(ds, cost, "cost")
    _check_var(ds, fidelity, "fidelity")
    sub = _select(ds, select)
    meths = _methods(sub, methods)
    fig, ax = _new_axes(ax, (6.4, 4.6))
    kx, xlabel = _var_display(sub[fidelity])
    ky, ylabel = _var_display(sub[cost])
    higher = fidelity in _HIGHER_IS_BETTER
    art: dict[str, tuple] = {}
    data: dict[str, Any] = {}
    xs_all, ys_all = [], []
    n_missing = 0
    n_floored = 0
    if floor is not None and not (isinstance(floor, (int, float)) and floor > 0):
        raise ValueError(f"floor must be a number > 0 or None, got {floor!r}")
    for m in meths:
        keep = [d for d in sub["status"].dims if d != "method_name"] if "status" in sub else \
            [d for d in sub[fidelity].dims if d not in ("method_name", "trial")]
        fx, _ = _reduced(sub[fidelity].sel({"method_name": m}), keep)
        cy, _ = _reduced(sub[cost].sel({"method_name": m}), keep)
        fx, cy = _nanmedian(fx.reshape(-1, fx.shape[-1])), _nanmedian(cy.reshape(-1, cy.shape[-1]))
        ok = np.isfinite(fx) & np.isfinite(cy)
        n_missing += int(np.sum(~ok))
        fx, cy = fx[ok], cy[ok]
        st = method_style(m)
        data[f"points:{m}"] = np.column_stack([fx, cy])
        if not fx.size:
            continue
        front = pareto_mask(cy, -fx if higher else fx)
        fx_true = fx
        if floor is not None:
            n_floored += int(np.sum(fx < floor))
            fx = np.maximum(fx, floor)
        pts = ax.scatter(fx * kx, cy * ky, color=st["color"], marker=st["marker"], s=28, alpha=0.35,
                         linewidths=0, zorder=2)
        on = ax.scatter(fx[front] * kx, cy[front] * ky, color=st["color"], marker=st["marker"], s=46,
                        edgecolors="black", linewidths=0.6, zorder=4, label=m)
        order = np.argsort(fx_true[front] * (-1 if higher else 1))
        fpts = np.column_stack([fx_true[front][order], cy[front][order]])
        data[f"front:{m}"] = fpts
        drawn = np.maximum(fpts[:, 0], floor) if floor is not None else fpts[:, 0]
        line = ax.plot(drawn * kx, fpts[:, 1] * ky, color=st["color"], linestyle=st["linestyle"],
                       drawstyle="steps-post", linewidth=1.4, zorder=3)
        art[m] = (pts, on)
        art[f"front:{m}"] = tuple(line)
        xs_all.append(fx * kx)
        ys_all.append(cy * ky)
    xs = np.concatenate(xs_all) if xs_all else np.array([])
    ys = np.concatenate(ys_all) if ys_all else np.array([])
    if logx if logx is not None else _auto_log(xs):
        ax.set_xscale("log")
    if logy if logy is not None else _auto_log(ys):
        ax.set_yscale("log")
    if target is not None:
        art["target"] = (ax.axvline(float(target) * kx, color="#555555", linestyle="--", linewidth=1.0,
                                    label=f"fidelity target {float(target) * kx:g}"),)
    if xs.size:
        ax.plot([], [], color="#555555", linestyle="-", label="front (no cheaper, better design)")
        ax.scatter([], [], color="#999999", alpha=0.35, s=28, label="dominated design")
    ax.set_xlabel(xlabel + ("  → better" if higher else "  ← better"))
    ax.set_ylabel(ylabel + "  ↓ better")
    ax.set_title(title or f"{_short_name(sub[cost])} versus {_short_name(sub[fidelity])}",
                 fontsize="medium")
    _finish(ax)
    note = "one point per design (median over trials)"
    if n_missing:
        note += f"\n{n_missing} design(s) without a value not shown"
    if n_floored:
        note += f"\n{n_floored} design(s) below {floor * kx:g} drawn at it"
    leg = _legend(ax, legend, title=note)
    return Drawing(fig, (ax,), art, leg, data)
