"""Waveform and spectrum figures of outcomes: outputs mapped onto the input's time with the ideal
and the residual, and spectra with their occupied bandwidths.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from timescale.data.units import display_unit
from timescale.interface.plot.style import (
    IDEAL_STYLE,
    INPUT_STYLE,
    Drawing,
    _finish,
    _legend,
    _new_axes,
    _strict,
    method_style,
)


def _output_view(oc, trial):
    """Output of an outcome mapped onto the input's time: τ = (t − d)/α, amplitude y/g, with
    the ideal and the residual on the same τ grid (all relative to the input peak). A
    time-reversed image (orientation −1) is mapped with τ = −(t − d)/α, so it lies on x(τ)
    like every other output."""
    from timescale.data.signal import resample_to
    from timescale.numerics import metrics

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
    from timescale.contract.plugin import Outcome

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
