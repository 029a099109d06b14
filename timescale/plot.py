"""Figures for comparing time-scaling methods (matplotlib; never calls ``show``).

Every function follows one template: it computes what it needs, draws into ``ax=`` (a new
figure when omitted), rejects keywords it does not know (``TypeError`` naming them), labels the
axes from the cube's ``long_name`` and ``units`` in display units (:mod:`timescale.units`) and
returns a :class:`Drawing` holding the artists it made.

Each method keeps one colour and marker in every figure (:func:`method_style`): a fixed table for
the known method names and a stable hash of the name for any other, drawn from the Okabe–Ito
colour-blind-safe palette (Okabe & Ito, "Color Universal Design", 2008). The input pulse is
black, the ideal reference a dashed dark grey.

Kinds
-----
:func:`plot_waveforms`   input, outputs and the ideal on a normalized time axis, residual below
:func:`plot_spectra`     input and output spectra with their occupied bandwidths
:func:`plot_metric`      a metric against any swept dimension, one line per method
:func:`plot_tradeoff`    cost against fidelity, one point per design, non-dominated front
:func:`plot_map`         small multiples: a heat map over two swept dimensions per method
"""

from __future__ import annotations

import functools
import inspect
import math
import zlib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import xarray as xr

from .errors import closest
from .units import axis_label, display_unit, scaled_unit

__all__ = [
    "Drawing",
    "method_style",
    "METHOD_STYLES",
    "INPUT_STYLE",
    "IDEAL_STYLE",
    "pareto_mask",
    "plot_waveforms",
    "plot_spectra",
    "plot_metric",
    "plot_tradeoff",
    "plot_map",
    "KINDS",
]

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

_CELL = ("method", "pulse", "factor")


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
    if "method" not in ds.dims:
        raise ValueError(f"{name} has no 'method' dimension; is it a timescale results cube?")


def _numeric_vars(ds):
    return [k for k, v in ds.data_vars.items()
            if np.issubdtype(v.dtype, np.number) and "method" in v.dims and k != "orientation"]


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
    return [d for d in ds["status"].dims if d != "method"] if "status" in ds else \
        [d for d in ds.dims if d not in ("method", "trial")]


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
    have = [str(m) for m in ds["method"].values]
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
    st = ds["status"].sel({"method": method})
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


def _output_view(oc, trial):
    """Output of an outcome mapped onto the input's time: τ = (t − d)/α, amplitude y/g, with
    the ideal and the residual on the same τ grid (all relative to the input peak). A
    time-reversed image (orientation −1) is mapped with τ = −(t − d)/α, so it lies on x(τ)
    like every other output."""
    from . import metrics
    from .signal import resample_to

    x = oc.input.row(0)
    y = oc.pulse.row(trial)
    a, o = float(oc.factor), int(oc.orientation)
    fit = metrics.fit_reference(y, x, a, o)
    g, d = float(np.ravel(fit.gain)[0]), float(np.ravel(fit.latency)[0])
    peak = float(np.max(np.abs(x.values))) or 1.0
    # display only: a band-limited interpolant on a grid 8x finer (in τ) than the input's, so a
    # coarse output does not read as a polyline (records capped at 20 000 points)
    up = min(8.0 * x.rate / a / y.rate, 20000.0 / y.n)
    if up > 1.0:
        n_up = int(y.n * up)
        y = resample_to(y, y.rate * up, t_start=y.t0, n=n_up)
    tau = o * (y.t - d) / a
    ref = metrics.reference(x, a, o).shift(d)
    pad_before = max(0.0, ref.t0 - y.t0) + ref.dt
    pad_after = max(0.0, y.t_end - ref.t_end) + ref.dt
    r = resample_to(ref.pad(pad_before, pad_after), y.rate, t_start=y.t0, n=y.n).values
    if not math.isfinite(g) or g == 0:
        g = 1.0
    yn = y.values / g / peak
    rn = r / peak
    return tau, yn, rn, yn - rn, g, d


def _as_outcomes(outcomes):
    from .plugin import Outcome

    if isinstance(outcomes, Outcome):
        items = [(outcomes.method, outcomes)]
    elif isinstance(outcomes, Mapping):
        items = [(str(k), v) for k, v in outcomes.items()]
    elif isinstance(outcomes, Sequence) and not isinstance(outcomes, str):
        items = [(o.method if isinstance(o, Outcome) else "?", o) for o in outcomes]
    else:
        raise TypeError("outcomes must be an Outcome, a sequence of Outcomes or a mapping of "
                        f"labels to Outcomes (from timescale.stretch), got {type(outcomes).__name__}")
    if not items:
        raise ValueError("outcomes must hold at least one Outcome")
    for label, o in items:
        if not isinstance(o, Outcome):
            raise TypeError(f"outcomes[{label!r}] must be an Outcome (from timescale.stretch), "
                            f"got {type(o).__name__}")
    x0 = items[0][1].input
    for label, o in items[1:]:
        same = (o.input.n == x0.n and o.input.rate == x0.rate and
                np.array_equal(o.input.values, x0.values))
        if not same:
            raise ValueError(f"outcomes must share one input pulse; {label!r} has a different input "
                             f"than {items[0][0]!r}")
    factors = {float(o.factor) for _, o in items}
    if len(factors) > 1 and not isinstance(outcomes, Mapping):
        items = [(f"{lab}, α = {o.factor:g}", o) for lab, o in items]
    labels = [lab for lab, _ in items]
    if len(set(labels)) != len(labels):
        raise ValueError(f"outcomes must have distinct labels, got {labels}; pass a mapping "
                         "of labels to Outcomes")
    return items


def _window(tau_list, values_list, fraction=1e-2, margin=0.35):
    """The τ span where any trace exceeds `fraction` of its peak, widened by `margin`."""
    lo, hi = math.inf, -math.inf
    for t, v in zip(tau_list, values_list):
        a = np.abs(v)
        if not a.size or not np.any(np.isfinite(a)):
            continue
        on = np.flatnonzero(a >= fraction * np.nanmax(a))
        if on.size:
            lo, hi = min(lo, t[on[0]]), max(hi, t[on[-1]])
    if not math.isfinite(lo):
        return None
    w = hi - lo or 1.0
    return lo - margin * w, hi + margin * w


# ---- waveforms ---------------------------------------------------------------------------------

@_strict
def plot_waveforms(outcomes, *, ax=None, trial=0, residual=True, window=None, title=None,
                   legend=True):
    """Input, each output and the ideal scaled pulse on a common normalized time axis.

    Every output y is drawn against τ = (t − d)/α and divided by its fitted gain g, so a perfect
    method lies on the ideal x(τ) (x(−τ) for a time-reversed image) whatever its factor. The
    residual y/g − ideal is drawn in a panel underneath. Amplitudes are relative to the input's
    peak.

    Parameters
    ----------
    outcomes : Outcome, sequence of Outcome, or Mapping[str, Outcome]
        Results of :func:`timescale.stretch` for one input pulse.
    ax : Axes, optional
        Panel to draw in; the residual panel is split off its lower part. New figure if None.
    trial : int
        Which Monte Carlo trial to show.
    residual : bool
        Draw the residual panel.
    window : (float, float), optional
        τ limits, s (default: where the traces are above 1 % of their peak, with a margin).
    title : str, optional
    legend : bool or "outside"
        Draw a legend inside the panel, to its right ("outside"), or not.

    Returns
    -------
    Drawing
        ``artists``: one line per label (its output), ``"input"``, ``"ideal"``, and
        ``"residual:<label>"``; ``data``: fitted ``gain`` and ``latency`` (s) per label.
    """
    items = _as_outcomes(outcomes)
    if isinstance(trial, bool) or not isinstance(trial, (int, np.integer)) or trial < 0:
        raise ValueError(f"trial must be a whole number >= 0, got {trial!r}")
    for label, o in items:
        if trial >= o.pulse.values.reshape(-1, o.pulse.n).shape[0]:
            raise ValueError(f"trial={trial} but outcome {label!r} has "
                             f"{o.pulse.values.reshape(-1, o.pulse.n).shape[0]} trial(s)")
    rax = None
    if ax is None:
        import matplotlib.pyplot as plt

        if residual:
            fig, (ax, rax) = plt.subplots(2, 1, figsize=(7.0 + 3.5 * (legend is True), 5.2), sharex=True, layout="constrained",
                                          gridspec_kw={"height_ratios": [3, 1.3]})
        else:
            fig, ax = plt.subplots(figsize=(7.0 + 3.5 * (legend is True), 4.0), layout="constrained")
    elif isinstance(ax, (list, tuple)) and len(ax) == 2:
        ax, rax = ax
        fig = ax.figure
        if not residual:
            raise ValueError("ax holds two panels but residual=False; pass one Axes")
    else:
        fig, ax = _new_axes(ax, (7.0, 5.0))
        if residual:  # split the residual panel off the one given
            from mpl_toolkits.axes_grid1 import make_axes_locatable

            rax = make_axes_locatable(ax).append_axes("bottom", size="38%", pad=0.12, sharex=ax)
    axes = [ax] + ([rax] if rax is not None else [])
    if rax is not None:
        ax.tick_params(labelbottom=False)
    x = items[0][1].input.row(0)
    unit_t, k_t = display_unit("s")
    peak = float(np.max(np.abs(x.values))) or 1.0
    art: dict[str, tuple] = {}
    data: dict[str, Any] = {"gain": {}, "latency": {}}
    art["input"] = tuple(ax.plot(x.t * k_t, x.values / peak, label=f"input ({x.name})", **INPUT_STYLE))
    taus, vals = [x.t], [x.values]
    seen_orient = {}
    per_method_count: dict[str, int] = {}
    for label, o in items:
        tau, yn, rn, res, g, d = _output_view(o, trial)
        data["gain"][label], data["latency"][label] = g, d
        st = method_style(o.method)
        n_same = per_method_count.get(o.method, 0)
        per_method_count[o.method] = n_same + 1
        ls = ("-", "--", "-.", ":")[n_same % 4] if n_same else st["linestyle"]
        if not seen_orient:
            seen_orient[1] = True
            art["ideal"] = tuple(ax.plot(tau * k_t, rn, label="ideal x(τ)", zorder=6, **IDEAL_STYLE))
        markevery = max(1, tau.size // 14)
        note = ", time-reversed image drawn reversed" if int(o.orientation) == -1 else ""
        art[label] = tuple(ax.plot(tau * k_t, yn, color=st["color"], linestyle=ls, marker=st["marker"],
                                   markevery=markevery, markersize=4, linewidth=1.4,
                                   label=f"{label} (g = {g:.3g}{note})", zorder=4))
        if rax is not None:
            art[f"residual:{label}"] = tuple(rax.plot(tau * k_t, res, color=st["color"], linestyle=ls,
                                                      marker=st["marker"], markevery=markevery,
                                                      markersize=3, linewidth=1.0))
        taus.append(tau)
        vals.append(yn)
    # the input and the ideal set the window: noise or a long tail would widen it to nothing
    win = window if window is not None else _window(taus[:1], vals[:1], margin=0.6)
    if win is not None:
        ax.set_xlim(win[0] * k_t, win[1] * k_t)
    ax.set_ylabel("amplitude / fitted gain\n(relative to input peak)")
    tlabel = f"normalized time τ = (t − d)/α ({unit_t})"
    if rax is not None:
        rax.axhline(0.0, color="#333333", linewidth=0.8)
        rax.set_ylabel("residual\n(rel. input peak)")
        rax.set_xlabel(tlabel)
        _finish(rax)
    else:
        ax.set_xlabel(tlabel)
    factors = sorted({float(o.factor) for _, o in items})
    ax.set_title(title or ("Output waveforms against the ideal scaled pulse, α = "
                           + ", ".join(f"{f:g}" for f in factors)), fontsize="medium")
    _finish(ax)
    # a pulse fills its panel edge to edge: the legend goes beside it unless asked otherwise
    leg = _legend(ax, "outside" if legend is True else legend)
    return Drawing(fig, tuple(axes), art, leg, data)


# ---- spectra -----------------------------------------------------------------------------------

def _spectrum_db(p, floor_db):
    f, X = p.spectrum(max(p.n, 1 << int(math.ceil(math.log2(max(p.n, 2) * 4)))))
    mag = np.abs(X)
    top = np.max(mag) or 1.0
    with np.errstate(divide="ignore"):
        db = 20 * np.log10(mag / top)
    return f, np.maximum(db, floor_db - 10)


@_strict
def plot_spectra(outcomes, *, ax=None, trial=0, fraction=0.99, floor_db=-60.0, title=None,
                 legend=True):
    """Input and output magnitude spectra, each relative to its own peak, with the occupied
    bandwidth of each marked by a vertical line in its colour.

    Parameters
    ----------
    outcomes : Outcome, sequence of Outcome, or Mapping[str, Outcome]
        Results of :func:`timescale.stretch` for one input pulse.
    ax : Axes, optional
    trial : int
        Monte Carlo trial shown.
    fraction : float
        Energy fraction of the occupied bandwidth (0.99: the ITU-R SM.328 99 % bandwidth).
    floor_db : float
        Lowest level shown, dB.
    title : str, optional
    legend : bool or "outside"
        Draw a legend inside the panel, to its right ("outside"), or not.

    Returns
    -------
    Drawing
        ``artists``: one spectrum line per label and ``"input"``, the markers under
        ``"bandwidth:<label>"``; ``data["bandwidth"]``: occupied bandwidth per label, Hz.
    """
    items = _as_outcomes(outcomes)
    if not (isinstance(fraction, (int, float)) and 0 < fraction < 1):
        raise ValueError(f"fraction must be in (0, 1), got {fraction!r}")
    fig, ax = _new_axes(ax, (7.0, 4.2))
    unit_f, k_f = display_unit("Hz")
    x = items[0][1].input.row(0)
    art: dict[str, tuple] = {}
    bws: dict[str, float] = {}
    traces = [("input", f"input ({x.name})", x, {"color": "#000000", "linewidth": 2.2, "alpha": 0.45,
                                                  "linestyle": "-"})]
    for label, o in items:
        st = method_style(o.method)
        traces.append((label, f"{label}, α = {o.factor:g}", o.pulse.row(trial),
                       {"color": st["color"], "linestyle": st["linestyle"], "linewidth": 1.4,
                        "marker": st["marker"], "markersize": 4}))
    f_lo, f_hi = math.inf, 0.0
    for key, lab, p, style in traces:
        f, db = _spectrum_db(p, floor_db)
        bw = float(np.ravel(p.occupied_bandwidth(fraction))[0])
        bws[key] = bw
        keep = f > 0
        me = max(1, int(np.sum(keep)) // 20)
        lines = ax.plot(f[keep] * k_f, db[keep], label=f"{lab}: {100 * fraction:g} % BW {bw * k_f:.3g} {unit_f}",
                        markevery=me, **style)
        vl = ax.axvline(bw * k_f, color=style["color"], linestyle=":", linewidth=1.3,
                        alpha=min(1.0, style.get("alpha", 1.0) + 0.4))
        art[key] = tuple(lines)
        art[f"bandwidth:{key}"] = (vl,)
        f_lo, f_hi = min(f_lo, bw), max(f_hi, bw)
    ax.set_xscale("log")
    ax.set_xlim(f_lo / 30 * k_f, f_hi * 4 * k_f)
    from matplotlib.ticker import FuncFormatter

    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))  # 0.1, 1, 10 GHz
    ax.set_ylim(floor_db, 5)
    ax.set_xlabel(f"frequency ({unit_f})")
    ax.set_ylabel("magnitude relative to own peak (dB)")
    ax.set_title(title or f"Spectra of input and outputs (dotted: {100 * fraction:g} % occupied bandwidth)",
                 fontsize="medium")
    _finish(ax)
    leg = _legend(ax, legend, loc="lower left")
    return Drawing(fig, (ax,), art, leg, {"bandwidth": bws})


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


_HIGHER_IS_BETTER = ("sndr_db", "correlation", "jitter_snr_out_db", "jitter_snr_in_db")


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
        dm = da.sel({"method": m})
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
        keep = [d for d in sub["status"].dims if d != "method"] if "status" in sub else \
            [d for d in sub[fidelity].dims if d not in ("method", "trial")]
        fx, _ = _reduced(sub[fidelity].sel({"method": m}), keep)
        cy, _ = _reduced(sub[cost].sel({"method": m}), keep)
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
        arr, other = _reduced(da.sel({"method": m}), [y, x])
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


#: Figure kinds by their command-line name.
KINDS = {
    "waveforms": plot_waveforms,
    "spectra": plot_spectra,
    "metric": plot_metric,
    "tradeoff": plot_tradeoff,
    "map": plot_map,
}
