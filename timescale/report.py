"""A self-contained comparison report (one HTML page plus the figures as PNG and SVG files).

The page needs no network and no script: figures are embedded as base64 PNG, styles inline.
Sections: what was compared (scenario, suite, methods, technology), the verdict at each factor,
a finding per method in plain words, figures, a table per method (best, median and worst cells,
failures with reasons), and the provenance.

Waveforms are not kept in a results cube, so the waveform and spectrum figures are re-run with
:func:`timescale.stretch` for one representative pulse and factor per method, from the
parameters, technology and seed recorded in the cube's attributes — when the input pulses are
known (passed as `pulses`, or the cube comes from ``timescale demo``) and the methods are
installed. Otherwise the page says why they are missing.

The numbers behind the text (:func:`findings`, :func:`cell_summary`) are pure functions.
"""

from __future__ import annotations

import base64
import html
import io
import json
import math
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import xarray as xr

from .cube import input_pulses
from .units import display_unit, format_value, scaled_unit

__all__ = ["write_report", "findings", "cell_summary", "Finding", "CellRow", "DEFAULT_TARGET"]

#: Default fidelity target: NRMSE at or below this counts as serving a factor.
DEFAULT_TARGET = 0.1

_HIGHER_IS_BETTER = ("sndr_db", "correlation", "jitter_snr_out_db", "jitter_snr_in_db")
_TABLE = ("nrmse", "sndr_db", "fitted_factor", "bw_out", "area", "power", "energy_per_pulse")


# ---- pure summaries ----------------------------------------------------------------------------

def _cell_dims(ds):
    return [d for d in ds["status"].dims if d != "method"]


def _median_trials(da):
    if "trial" in da.dims:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN cells stay NaN
            return da.median("trial", skipna=True)
    return da


def _passes(value, target, higher):
    return np.isfinite(value) & ((value >= target) if higher else (value <= target))


def _fmt_factor(f):
    return f"{float(f):g}"


def _cell_text(ds, sel):
    parts = []
    for d, v in sel.items():
        if d == "factor":
            parts.append(f"α = {float(v):g}")
        elif d == "pulse":
            parts.append(str(v))
        else:
            c = ds[d]
            units = c.attrs.get("units", "")
            if np.issubdtype(np.asarray(c.values).dtype, np.number) and units:
                parts.append(f"{d} = {format_value(v, units, 3)}")
            else:
                parts.append(f"{d} = {v if isinstance(v, str) else f'{v:g}'}")
    return ", ".join(parts)


@dataclass(frozen=True)
class CellRow:
    """One cell of a method in the summary table.

    Attributes
    ----------
    rank : str
        "best", "median" or "worst" (by the fidelity metric, median over trials).
    cell : dict
        Coordinates of the cell (pulse, factor, swept settings).
    values : dict
        Metric name -> median over trials, SI.
    status : str
    message : str
    """

    rank: str
    cell: dict
    values: dict
    status: str
    message: str


def cell_summary(ds: xr.Dataset, method: str, fidelity: str = "nrmse"):
    """Best, median and worst cells of `method` by `fidelity`, and its failures.

    Returns
    -------
    rows : list of CellRow
        Up to three rows (fewer when the method has fewer scored cells).
    failures : list of (message, count, example cell text)
        Failed cells grouped by reason.
    """
    sub = ds.sel({"method": method})
    dims = _cell_dims(ds)
    fid = _median_trials(sub[fidelity]).transpose(*dims)
    status = sub["status"].transpose(*dims)
    flat = np.asarray(fid.values, dtype=float).ravel()
    coords = [dict(zip(dims, (sub[d].values[i] for d, i in zip(dims, idx))))
              for idx in np.ndindex(*[sub.sizes[d] for d in dims])]
    higher = fidelity in _HIGHER_IS_BETTER
    scored = [i for i in np.argsort(-flat if higher else flat, kind="stable") if np.isfinite(flat[i])]
    picks = []
    if scored:
        picks = [("best", scored[0]), ("median", scored[(len(scored) - 1) // 2]), ("worst", scored[-1])]
        if len(scored) < 3:
            picks = [p for j, p in enumerate(picks) if j == 0 or p[1] not in {q[1] for q in picks[:j]}]
    rows = []
    for rank, i in picks:
        vals = {}
        for m in _TABLE:
            if m in sub:
                v = np.asarray(_median_trials(sub[m]).transpose(*dims).values, dtype=float).ravel()[i]
                vals[m] = float(v)
        rows.append(CellRow(rank, coords[i], vals, str(np.asarray(status.values).ravel()[i]),
                            str(np.asarray(sub["message"].transpose(*dims).values).ravel()[i])))
    fails: dict[str, list] = {}
    st = np.asarray(status.values).ravel().astype(str)
    msg = np.asarray(sub["message"].transpose(*dims).values).ravel()
    for i in np.flatnonzero(st == "failed"):
        fails.setdefault(str(msg[i]), []).append(i)
    failures = [(m, len(ix), _cell_text(ds, coords[ix[0]])) for m, ix in
                sorted(fails.items(), key=lambda kv: -len(kv[1]))]
    return rows, failures


@dataclass(frozen=True)
class Finding:
    """What one method achieves against the fidelity target.

    Attributes
    ----------
    method : str
    served : tuple of float
        Factors at which, for every pulse, some design (setting) meets the target.
    tested : tuple of float
        All factors in the cube.
    cheapest : dict
        factor -> {"area": m², "power": W} of the cheapest qualifying design (the largest over
        pulses, since every pulse must be served).
    best_missed : dict
        factor -> best fidelity reached where the target is missed.
    n_cells, n_failed, n_warned : int
    text : str
        The finding in plain words.
    per_pulse : dict
        pulse -> factor -> ("meets", area m², power W) | ("misses", best value) |
        ("failed", reason).
    """

    method: str
    served: tuple
    tested: tuple
    cheapest: dict = field(default_factory=dict)
    best_missed: dict = field(default_factory=dict)
    n_cells: int = 0
    n_failed: int = 0
    n_warned: int = 0
    text: str = ""
    per_pulse: dict = field(default_factory=dict)


def _factor_span(served, tested):
    if not served:
        return ""
    idx = [tested.index(f) for f in served]
    if idx == list(range(idx[0], idx[-1] + 1)) and len(idx) > 1:
        return f"α = {_fmt_factor(served[0])} to {_fmt_factor(served[-1])}"
    return "α = " + ", ".join(_fmt_factor(f) for f in served)


def _range_text(values, units):
    v = [x for x in values if np.isfinite(x)]
    if not v:
        return "—"
    lo, hi = min(v), max(v)
    if math.isclose(lo, hi, rel_tol=0.02):
        return format_value(lo, units, 3)
    return f"{format_value(lo, units, 3, unit=False)}–{format_value(hi, units, 3)}"


def findings(ds: xr.Dataset, *, target: float = DEFAULT_TARGET, fidelity: str = "nrmse"):
    """For each method: the factors it serves within the fidelity target and at what cost.

    A factor is served when, for every pulse, at least one design of the method (one setting of
    the swept parameters) meets the target with its median over trials. The cost quoted is that
    of the cheapest such design (by area, then power), the largest over pulses.

    Parameters
    ----------
    ds : xarray.Dataset
        Results cube.
    target : float
        Fidelity target in the metric's SI unit (NRMSE ≤ target; ≥ for SNDR-like metrics).
    fidelity : str
        Metric judged.

    Returns
    -------
    list of Finding
    """
    if fidelity not in ds:
        raise ValueError(f"fidelity={fidelity!r} is not in the cube; valid: "
                         f"{', '.join(k for k in ds.data_vars if 'method' in ds[k].dims)}")
    if not isinstance(target, (int, float)) or isinstance(target, bool) or not math.isfinite(target):
        raise ValueError(f"target must be a finite number, got {target!r}")
    higher = fidelity in _HIGHER_IS_BETTER
    dims = _cell_dims(ds)
    settings = [d for d in dims if d not in ("pulse", "factor")]
    tested = tuple(float(f) for f in ds["factor"].values)
    funits = ds[fidelity].attrs.get("units", "")
    short = "NRMSE" if fidelity == "nrmse" else ds[fidelity].attrs.get("long_name", fidelity)
    cmp = "≥" if higher else "≤"
    tgt = format_value(target, funits, 3)
    pulses = [str(p) for p in ds["pulse"].values]
    out = []
    for m in (str(v) for v in ds["method"].values):
        sub = ds.sel({"method": m})
        fid = _median_trials(sub[fidelity])
        area = _median_trials(sub["area"]) if "area" in sub else None
        power = _median_trials(sub["power"]) if "power" in sub else None
        # per pulse and factor: ("meets", area, power) | ("misses", best) | ("failed", reason)
        verdict: dict[str, dict[float, tuple]] = {p: {} for p in pulses}
        for f in ds["factor"].values:
            for p in pulses:
                cell = {"factor": f, "pulse": p}
                fv = np.asarray(fid.sel(cell).transpose(*settings).values, dtype=float).ravel()
                ok = _passes(fv, target, higher)
                if np.any(ok):
                    av = (np.asarray(area.sel(cell).transpose(*settings).values, dtype=float).ravel()
                          if area is not None else np.zeros_like(fv))
                    pv = (np.asarray(power.sel(cell).transpose(*settings).values, dtype=float).ravel()
                          if power is not None else np.zeros_like(fv))
                    cand = np.flatnonzero(ok)
                    j = cand[np.lexsort((pv[cand], av[cand]))[0]]
                    verdict[p][float(f)] = ("meets", float(av[j]), float(pv[j]))
                elif np.any(np.isfinite(fv)):
                    verdict[p][float(f)] = ("misses", float(np.nanmax(fv) if higher else np.nanmin(fv)))
                else:
                    msgs = np.asarray(sub["message"].sel(cell).values).astype(str).ravel()
                    verdict[p][float(f)] = ("failed", str(msgs[0]) if msgs.size else "")
        served = [f for f in tested if all(verdict[p][f][0] == "meets" for p in pulses)]
        cheapest = {f: {"area": max(verdict[p][f][1] for p in pulses),
                        "power": max(verdict[p][f][2] for p in pulses)} for f in served}
        missed = {}
        for f in tested:
            if f in served:
                continue
            bad = [verdict[p][f] for p in pulses if verdict[p][f][0] != "meets"]
            vals = [v[1] for v in bad if v[0] == "misses"]
            missed[f] = (max(vals) if not higher else min(vals)) if vals else math.nan
        st = np.asarray(sub["status"].values).astype(str).ravel()
        n_cells, n_failed, n_warned = st.size, int(np.sum(st == "failed")), int(np.sum(st == "warned"))
        n_p = len(pulses)
        every = "the input pulse" if n_p == 1 else ("both input pulses" if n_p == 2 else f"all {n_p} input pulses")
        setting_txt = (" with a suitable setting of " + ", ".join(settings)) if settings else ""
        if served:
            text = (f"Meets {short} {cmp} {tgt} at {_factor_span(served, list(tested))} "
                    f"({len(served)} of {len(tested)} factors tested) for {every}{setting_txt}. "
                    f"The cheapest qualifying design needs "
                    f"{_range_text([c['area'] for c in cheapest.values()], 'm2')} of silicon and "
                    f"{_range_text([c['power'] for c in cheapest.values()], 'W')}"
                    + (" across these factors." if len(served) > 1 else "."))
        else:
            text = f"At no factor tested does it meet {short} {cmp} {tgt} for {every}."
        # the factors it misses, grouped by what happened on each pulse
        groups: dict[str, list] = {}
        reasons: list[str] = []
        for f in tested:
            if f in served:
                continue
            kinds = []
            for p in pulses:
                v = verdict[p][f]
                if v[0] == "meets":
                    kinds.append((p, "meets the target"))
                elif v[0] == "misses":
                    kinds.append((p, f"best {format_value(v[1], funits, 2)}"))
                else:
                    kinds.append((p, "every run failed"))
                    r = v[1].split(" (at ")[0]
                    if r and r not in reasons:
                        reasons.append(r)
            same = {k for _, k in kinds}
            if len(same) == 1 and not next(iter(same)).startswith("best"):
                desc = next(iter(same))
            else:
                desc = "; ".join(f"{p}: {k}" if n_p > 1 else k for p, k in kinds)
            groups.setdefault(desc, []).append(f)
        if groups:
            text += " Misses it at " + ", ".join(
                f"{_factor_span(fs, list(tested)) if len(fs) > 1 else 'α = ' + _fmt_factor(fs[0])} ({d})"
                for d, fs in groups.items()) + "."
        for r in reasons[:2]:
            text += f" Reason given: {r if len(r) <= 260 else r[:257] + '…'}"
            text += "" if text.endswith(".") else "."
        if n_warned:
            text += f" {n_warned} of {n_cells} runs raised design warnings."
        out.append(Finding(m, tuple(served), tested, cheapest, missed, n_cells, n_failed, n_warned, text,
                           verdict))
    return out


# ---- re-running representative cells ---------------------------------------------------------

def _recover_pulses(ds, pulses):
    if pulses is not None:
        missing = [str(p) for p in ds["pulse"].values if str(p) not in pulses]
        if missing:
            raise ValueError(f"pulses lacks the cube's pulse(s) {', '.join(map(repr, missing))}")
        return dict(pulses), ""
    stored = input_pulses(ds)
    if stored and all(str(p) in stored for p in ds["pulse"].values):
        return stored, ""
    return None, ("The input pulses are not stored in the results cube, so the waveforms and "
                  "spectra could not be re-run (pass the pulses to write_report to include them).")


def _representative(ds, fidelity):
    """Pulse and factor shown in the waveform figures: the first pulse with a stretch factor
    (> 1) at which every method has a result, and the largest such factor; else the first pulse
    and the largest factor."""
    fid = _median_trials(ds[fidelity])
    factors = [float(f) for f in ds["factor"].values]
    for p in (str(v) for v in ds["pulse"].values):
        ok = [f for f in factors if f > 1 and all(
            np.any(np.isfinite(np.asarray(fid.sel({"method": m, "pulse": p, "factor": f}).values, dtype=float)))
            for m in ds["method"].values)]
        if ok:
            return p, max(ok)
    return str(ds["pulse"].values[0]), max(factors)


def _rerun(ds, pulses, fidelity, pulse=None, factor=None):
    """Outcomes for the representative cell of each method (or the given pulse and factor);
    returns (outcomes, notes, pulse name, factor)."""
    from .registry import available_methods
    from .run import stretch
    from .technology import DEFAULT_TECHNOLOGY, Technology

    pmap, note = _recover_pulses(ds, pulses)
    if pmap is None:
        return {}, [note], None, None
    rep_p, rep_f = _representative(ds, fidelity)
    pname = rep_p if pulse is None else str(pulse)
    factor = rep_f if factor is None else float(factor)
    if pname not in [str(p) for p in ds["pulse"].values]:
        raise ValueError(f"pulse {pname!r} is not in the cube; valid: "
                         f"{', '.join(str(p) for p in ds['pulse'].values)}")
    if not np.any(np.isclose(ds["factor"].values.astype(float), factor)):
        raise ValueError(f"factor {factor:g} is not in the cube; valid: "
                         f"{', '.join(_fmt_factor(f) for f in ds['factor'].values)}")
    factor = float(ds["factor"].values[np.argmin(np.abs(ds["factor"].values.astype(float) - factor))])
    try:
        tech = Technology.from_dict(json.loads(ds.attrs["technology"]))
    except (KeyError, ValueError, TypeError):
        tech = DEFAULT_TECHNOLOGY
    try:
        params = json.loads(ds.attrs.get("params", "{}"))
    except ValueError:
        params = {}
    try:
        seed = int(ds.attrs.get("seed_entropy", 0))
    except (TypeError, ValueError):
        seed = 0
    have = set(available_methods())
    settings = [d for d in _cell_dims(ds) if d not in ("pulse", "factor")]
    outcomes, notes = {}, []
    for m in (str(v) for v in ds["method"].values):
        if m not in have:
            notes.append(f"{m}: not installed here, so its waveform could not be re-run.")
            continue
        kw = dict(params.get(m, {}))
        if settings:  # the setting with the best fidelity at this pulse and factor
            fid = _median_trials(ds[fidelity]).sel({"method": m, "pulse": pname, "factor": factor})
            arr = np.asarray(fid.transpose(*settings).values, dtype=float)
            if np.any(np.isfinite(arr)):
                higher = fidelity in _HIGHER_IS_BETTER
                idx = np.unravel_index(np.nanargmax(arr) if higher else np.nanargmin(arr), arr.shape)
                from .registry import get_method

                fields = get_method(m).param_fields()
                for d, i in zip(settings, idx):
                    v = ds[d].values[i]
                    if d in fields:
                        kw[d] = v.item() if hasattr(v, "item") else v
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                outcomes[m] = stretch(pmap[pname], m, factor, seed=seed, technology=tech, **kw)
        except Exception as exc:  # a failed re-run must not sink the report
            notes.append(f"{m}: re-run failed ({type(exc).__name__}: {exc}).")
    return outcomes, notes, pname, factor


# ---- figures -----------------------------------------------------------------------------------

def _figure(figsize):
    from matplotlib.figure import Figure

    return Figure(figsize=figsize, layout="constrained")


def _per_pulse(ds, draw, figsize_per=(4.6, 3.7)):
    """One panel per pulse in a row; only the last carries the legend, to its right."""
    pulses = [str(p) for p in ds["pulse"].values]
    fig = _figure((figsize_per[0] * len(pulses) + 2.4, figsize_per[1]))
    axs = fig.subplots(1, len(pulses), squeeze=False)[0]
    for i, (a, p) in enumerate(zip(axs, pulses)):
        draw(a, p, "outside" if i == len(pulses) - 1 else False)
    return fig


def _swept_axis(ds):
    """The dim for the horizontal axis of the metric figures: factor, unless it has a single
    value and some other setting is swept."""
    if ds.sizes["factor"] > 1:
        return "factor"
    others = [d for d in _cell_dims(ds) if d not in ("pulse", "factor") and ds.sizes[d] > 1]
    return others[0] if others else "factor"


def _build_figures(ds, *, target, fidelity, outcomes, pname, factor):
    from . import plot

    figs = []  # (key, heading, caption, Figure)
    over = _swept_axis(ds)
    settings = [d for d in _cell_dims(ds) if d not in ("pulse", over) and ds.sizes[d] > 1]
    others = "best" if settings else "median"
    other_note = (f" Where several settings of {', '.join(settings)} were tried, each point is the "
                  f"best of them." if settings else "")
    over_name = plot._coord_name(ds, over)
    # results exact to rounding (NRMSE ~1e-14) would squeeze a log axis: draw them at a floor
    floor = target * 1e-4 if fidelity not in _HIGHER_IS_BETTER and target > 0 else None

    def fid_panel(a, p, legend):
        plot.plot_metric(ds, fidelity, over, ax=a, select={"pulse": p}, others=others, target=target,
                         floor=floor, title=f"{plot._short_name(ds[fidelity])}, {p}", legend=legend)

    figs.append(("fidelity", f"Fidelity against {over_name}",
                 f"How closely each method's output matches the ideal scaled pulse at each "
                 f"{over_name}; dashed: the target.{other_note} Lower is better.",
                 _per_pulse(ds, fid_panel)))
    if "bw_out" in ds:
        def bw_panel(a, p, legend):
            plot.plot_metric(ds, "bw_out", over, ax=a, select={"pulse": p}, others="median",
                             title=f"Output 99 % bandwidth, {p}", legend=legend)

        figs.append(("bandwidth", f"Output bandwidth against {over_name}",
                     "The band a digitizer after the time-scaler must pass (99 % occupied "
                     "bandwidth of the output).", _per_pulse(ds, bw_panel)))
    costs = [c for c in ("area", "power") if c in ds]
    if costs:
        fig = _figure((4.6 * len(costs) + 2.4, 3.7))
        axs = fig.subplots(1, len(costs), squeeze=False)[0]
        for i, (a, c) in enumerate(zip(axs, costs)):
            plot.plot_metric(ds, c, over, ax=a, others="median",
                             title=f"{plot._short_name(ds[c])} versus {over_name}",
                             legend="outside" if i == len(costs) - 1 else False)
        figs.append(("cost", f"Cost against {over_name}",
                     "Silicon area and active power of each design (median over pulses"
                     + (" and settings" if settings else "") + ").", fig))
        fig = _figure((4.8 * len(costs) + 2.6, 4.1))
        axs = fig.subplots(1, len(costs), squeeze=False)[0]
        for i, (a, c) in enumerate(zip(axs, costs)):
            plot.plot_tradeoff(ds, c, fidelity, ax=a, target=target, floor=floor,
                               legend="outside" if i == len(costs) - 1 else False)
        figs.append(("tradeoff", "Cost against fidelity",
                     "One point per design (pulse, factor and settings). Outlined points with the "
                     "staircase form each method's front: no other design of that method is both "
                     "cheaper and more faithful.", fig))
    two = [d for d in _cell_dims(ds) if d != "pulse" and ds.sizes[d] > 1]
    if len(two) >= 2:
        n = ds.sizes["method"]
        fig = _figure((3.3 * n + 1.4, 3.9))
        axs = fig.subplots(1, n, squeeze=False, sharey=True)[0]
        plot.plot_map(ds, fidelity, two[0], two[1], ax=list(axs))
        figs.append(("map", f"Fidelity over {plot._coord_name(ds, two[0])} and "
                             f"{plot._coord_name(ds, two[1])}",
                     "One map per method on a shared colour scale (median over pulses and trials); "
                     "grey cells failed.", fig))
    if outcomes:
        fig = _figure((11.0, 5.6))  # room for the legend beside the panels
        a, r = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [3, 1.3]})
        plot.plot_waveforms(outcomes, ax=[a, r],
                            title=f"Waveforms at α = {factor:g}, {pname}, mapped back onto the input's time")
        figs.append(("waveforms", "Waveforms",
                     f"Each method re-run for the pulse “{pname}” at α = {factor:g} with the cube's "
                     "parameters, technology and seed (best setting where settings were swept). "
                     "Outputs are shifted by their fitted latency, divided by their fitted gain "
                     "and drawn on τ = (t − d)/α, so a perfect method lies on the dashed ideal; "
                     "the lower panel shows what is left over.", fig))
        fig = _figure((7.6, 4.3))
        plot.plot_spectra(outcomes, ax=fig.subplots(),
                          title=f"Spectra at α = {factor:g}, {pname} (dotted: 99 % occupied bandwidth)")
        figs.append(("spectra", "Spectra",
                     "Magnitude spectra of the input and of each output, each relative to its own "
                     "peak; the dotted lines mark the 99 % occupied bandwidths.", fig))
    return figs


# ---- HTML --------------------------------------------------------------------------------------

_CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,Helvetica,Arial,sans-serif;margin:0;
color:#1a1a1a;background:#fafafa;line-height:1.45}
main{max-width:1120px;margin:0 auto;padding:24px 32px 64px;background:#fff}
h1{font-size:1.7em;margin:0.2em 0 0.1em} h2{font-size:1.3em;margin-top:2em;border-bottom:2px solid #ddd;
padding-bottom:4px} h3{font-size:1.08em;margin:1.4em 0 0.4em}
.sub{color:#555;margin:0 0 1em} .note{color:#555;font-size:0.92em}
table{border-collapse:collapse;margin:0.5em 0 1em;font-size:0.9em}
th,td{border:1px solid #ccc;padding:4px 8px;text-align:right;vertical-align:top}
th{background:#f0f0f0} td.l,th.l{text-align:left}
td.ok{background:#e3f1fa} td.miss{background:#f6f6f6;color:#777}
figure{margin:1em 0 2em} figure img{max-width:100%;height:auto;border:1px solid #eee}
figcaption{font-size:0.92em;color:#333;margin-top:4px}
.swatch{display:inline-block;width:0.9em;height:0.9em;border-radius:2px;margin-right:6px;
vertical-align:-0.1em}
.finding{border-left:5px solid #999;padding:4px 12px;margin:0.6em 0;background:#fcfcfc}
.warn{color:#8a3b00}
"""


def _esc(x) -> str:
    return html.escape(str(x), quote=True)


def _swatch(method):
    from .plot import method_style

    return f'<span class="swatch" style="background:{method_style(method)["color"]}"></span>'


def _json_attr(ds, key):
    raw = ds.attrs.get(key)
    if raw is None:
        return None
    try:
        return json.loads(raw)
    except (TypeError, ValueError):
        return raw


def _kv_table(pairs):
    rows = "".join(f'<tr><th class="l">{_esc(k)}</th><td class="l">{_esc(v)}</td></tr>' for k, v in pairs)
    return f"<table>{rows}</table>"


def _tech_table(tech: dict):
    from .technology import Technology

    units = Technology.field_units()
    rows = []
    for k, v in tech.items():
        if k in ("name", "description"):
            continue
        u = units.get(k, "")
        shown = format_value(v, u, 4) if u in ("s", "Hz", "m2", "m²", "W", "J", "V", "F", "H", "S", "A", "m", "") \
            else f"{v:.4g} {u}"
        rows.append((k.replace("_", " "), shown))
    half = (len(rows) + 1) // 2
    left, right = rows[:half], rows[half:]
    body = ""
    for i in range(half):
        a = left[i]
        b = right[i] if i < len(right) else ("", "")
        body += (f'<tr><th class="l">{_esc(a[0])}</th><td>{_esc(a[1])}</td>'
                 f'<th class="l">{_esc(b[0])}</th><td>{_esc(b[1])}</td></tr>')
    return f"<table>{body}</table>"


def _verdict_table(ds, finds, fidelity, target):
    tested = [float(f) for f in ds["factor"].values]
    head = "".join(f"<th>α = {_fmt_factor(f)}</th>" for f in tested)
    rows = ""
    for fd in finds:
        cells = ""
        for f in tested:
            if f in fd.cheapest:
                c = fd.cheapest[f]
                cells += (f'<td class="ok">meets<br><span class="note">{_esc(format_value(c["area"], "m2", 3))}, '
                          f'{_esc(format_value(c["power"], "W", 3))}</span></td>')
            else:
                notes = []
                for p, per in fd.per_pulse.items():
                    kind = per[f]
                    pre = f"{p}: " if len(fd.per_pulse) > 1 else ""
                    if kind[0] == "misses":
                        notes.append(f"{pre}best {format_value(kind[1], ds[fidelity].attrs.get('units', ''), 2)}")
                    elif kind[0] == "failed":
                        notes.append(f"{pre}failed")
                cells += (f'<td class="miss">misses<br><span class="note">'
                          f'{"<br>".join(_esc(n) for n in notes)}</span></td>')
        rows += f'<tr><th class="l">{_swatch(fd.method)}{_esc(fd.method)}</th>{cells}</tr>'
    return f'<table><tr><th class="l">method</th>{head}</tr>{rows}</table>'


def _summary_table(ds, method, fidelity):
    rows, failures = cell_summary(ds, method, fidelity)
    cols = [m for m in _TABLE if m in ds]
    head = "".join(
        f"<th>{_esc(m if m in ('nrmse',) else ds[m].attrs.get('long_name', m))}"
        f"{(' (' + display_unit(ds[m].attrs.get('units', ''))[0] + ')') if display_unit(ds[m].attrs.get('units', ''))[0] else ''}</th>"
        for m in cols)
    out = ""
    if rows:
        body = ""
        for r in rows:
            vals = "".join(f"<td>{_esc(format_value(r.values.get(m, math.nan), ds[m].attrs.get('units', ''), 3, unit=False))}</td>"
                           for m in cols)
            st = r.status + (f": {r.message}" if r.message else "")
            body += (f'<tr><th class="l">{_esc(r.rank)}</th><td class="l">{_esc(_cell_text(ds, r.cell))}</td>'
                     f'{vals}<td class="l">{_esc(st)}</td></tr>')
        out += (f'<table><tr><th class="l">cell</th><th class="l">pulse, factor, settings</th>{head}'
                f'<th class="l">status</th></tr>{body}</table>')
    else:
        out += '<p class="warn">No cell of this method produced a result.</p>'
    if failures:
        items = "".join(f"<li>{n} run(s), e.g. {_esc(ex)}: <code>{_esc(msg)}</code></li>" for msg, n, ex in failures)
        out += f'<p class="warn">Failed runs, by reason:</p><ul class="warn">{items}</ul>'
    return out


def _png_b64(fig, path_png, path_svg, dpi=130):
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    data = buf.getvalue()
    path_png.write_bytes(data)
    fig.set_layout_engine("none")  # keep the layout just computed; the SVG need not redo it
    fig.savefig(path_svg, format="svg")
    return base64.b64encode(data).decode("ascii")


def write_report(ds: xr.Dataset, folder, *, title: str | None = None, target: float = DEFAULT_TARGET,
                 fidelity: str = "nrmse", pulses=None) -> Path:
    """Write the comparison report for a results cube.

    Parameters
    ----------
    ds : xarray.Dataset
        Results cube (from :func:`timescale.compare` or a suite).
    folder : str or Path
        Output folder (created if needed): ``report.html`` and one PNG and one SVG per figure.
    title : str, optional
        Page title.
    target : float
        Fidelity target in SI units of `fidelity` (default NRMSE ≤ 0.1; for ``sndr_db`` a
        minimum in dB).
    fidelity : str
        The metric the findings and the fidelity figures judge.
    pulses : Mapping[str, Pulse], optional
        The cube's input pulses by name, to re-run the waveform figures (found automatically for
        the demo's cube).

    Returns
    -------
    Path
        The HTML page.
    """
    if not isinstance(ds, xr.Dataset) or "method" not in ds.dims or "status" not in ds:
        raise TypeError(f"ds must be a timescale results cube (xarray.Dataset with a method dim and "
                        f"a status variable), got {type(ds).__name__}")
    if fidelity not in ds:
        raise ValueError(f"fidelity={fidelity!r} is not a variable of the cube")
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise ValueError(f"folder {str(folder)!r} exists and is not a folder")
    folder.mkdir(parents=True, exist_ok=True)
    from .plot import method_style

    finds = findings(ds, target=target, fidelity=fidelity)
    outcomes, rerun_notes, pname, factor = _rerun(ds, pulses, fidelity)
    figs = _build_figures(ds, target=target, fidelity=fidelity, outcomes=outcomes, pname=pname,
                          factor=factor)

    title = title or str(ds.attrs.get("report_title") or "Time-scaling methods compared")
    plugins = _json_attr(ds, "plugins") or {}
    tech = _json_attr(ds, "technology")
    suite = _json_attr(ds, "suite")
    params = _json_attr(ds, "params") or {}
    cmp = "≥" if fidelity in _HIGHER_IS_BETTER else "≤"
    fid_name = "NRMSE" if fidelity == "nrmse" else ds[fidelity].attrs.get("long_name", fidelity)
    tgt = format_value(target, ds[fidelity].attrs.get("units", ""), 3)
    methods = [str(m) for m in ds["method"].values]
    dims = _cell_dims(ds)
    n_trials = ds.sizes.get("trial", 1)

    h = [f"<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'><title>{_esc(title)}</title>"
         f"<meta name='viewport' content='width=device-width, initial-scale=1'>"
         f"<style>{_CSS}</style></head><body><main>"]
    h.append(f"<h1>{_esc(title)}</h1>")
    sc = ds.attrs.get("scenario")
    if sc:
        h.append(f'<p class="sub">{_esc(sc)}</p>')
    h.append(f'<p class="note">Fidelity target used throughout: {_esc(fid_name)} {cmp} {_esc(tgt)}. '
             "Results are design estimates from models, not sign-off.</p>")

    # verdict and findings
    h.append("<h2>At a glance: which method serves which factor</h2>")
    h.append(f'<p class="note">“meets”: for every input pulse some design of the method reaches '
             f"{_esc(fid_name)} {cmp} {_esc(tgt)} (median over trials); below it, the area and power "
             "of the cheapest such design. “misses”: the best value reached.</p>")
    h.append(_verdict_table(ds, finds, fidelity, target))
    h.append("<h2>Findings per method</h2>")
    for fd in finds:
        col = method_style(fd.method)["color"]
        h.append(f'<div class="finding" style="border-left-color:{col}"><b>{_esc(fd.method)}</b> — '
                 f"{_esc(fd.text)}</div>")

    # what was compared
    h.append("<h2>What was compared</h2>")
    mrows = "".join(
        f'<tr><th class="l">{_swatch(m)}{_esc(m)}</th><td class="l">{_esc((plugins.get(m) or {}).get("summary", ""))}</td>'
        f'<td class="l">{_esc((plugins.get(m) or {}).get("version", ""))}</td>'
        f'<td class="l">{_esc(", ".join(f"{k} = {v}" for k, v in (params.get(m) or {}).items()) or "defaults")}</td></tr>'
        for m in methods)
    h.append(f'<table><tr><th class="l">method</th><th class="l">principle</th><th class="l">version</th>'
             f'<th class="l">parameters set</th></tr>{mrows}</table>')
    grid = [("input pulses", ", ".join(str(p) for p in ds["pulse"].values)),
            ("stretch factors α", ", ".join(_fmt_factor(f) for f in ds["factor"].values))]
    for d in dims:
        if d not in ("pulse", "factor"):
            grid.append((f"swept: {d}", ", ".join(_cell_text(ds, {d: v}).split(" = ", 1)[-1] for v in ds[d].values)))
    grid.append(("Monte Carlo trials per run", str(n_trials)))
    grid.append(("runs", f"{ds.attrs.get('n_cells', '?')} ({ds.attrs.get('n_failed', 0)} failed, "
                         f"{ds.attrs.get('n_warned', 0)} with warnings)"))
    if "sampler_jitter" in ds.attrs:
        unit, k = scaled_unit("s", [ds.attrs["sampler_jitter"]])
        grid.append(("sampler clock jitter (for the jitter-limited SNR)",
                     f"{float(ds.attrs['sampler_jitter']) * k:.3g} {unit}"))
    h.append(_kv_table(grid))
    # figures
    h.append("<h2>Figures</h2>")
    for key, heading, caption, fig in figs:
        b64 = _png_b64(fig, folder / f"{key}.png", folder / f"{key}.svg")
        h.append(f"<h3>{_esc(heading)}</h3><figure><img src='data:image/png;base64,{b64}' "
                 f"alt='{_esc(heading)}'><figcaption>{_esc(caption)} "
                 f"(<a href='{key}.svg'>SVG</a>, <a href='{key}.png'>PNG</a>)</figcaption></figure>")
    if rerun_notes:
        h.append("<h3>Waveforms</h3>" if not outcomes else "")
        h.append("".join(f'<p class="note">{_esc(n)}</p>' for n in rerun_notes))

    # tables
    h.append("<h2>Cells per method</h2>")
    h.append(f'<p class="note">Best, median and worst runs of each method by {_esc(fid_name)} '
             f"(median over trials), in display units, and the failed runs with their reasons.</p>")
    for m in methods:
        h.append(f"<h3>{_swatch(m)}{_esc(m)}</h3>")
        h.append(_summary_table(ds, m, fidelity))

    # setup details and provenance
    h.append("<h2>Setup details</h2>")
    if suite is not None:
        text = suite if isinstance(suite, str) else json.dumps(suite, indent=1, sort_keys=True)
        if isinstance(suite, dict):
            h.append("<h3>Suite</h3>" + _kv_table(
                (k, v if isinstance(v, str) else json.dumps(v)) for k, v in suite.items()))
        else:
            h.append(f"<h3>Suite</h3><pre class='note'>{_esc(text)}</pre>")
    if isinstance(tech, dict):
        h.append(f"<h3>Technology: {_esc(tech.get('name', ''))}</h3>")
        if tech.get("description"):
            h.append(f'<p class="note">{_esc(tech["description"])}</p>')
        h.append(_tech_table(tech))

    h.append("<h3>Provenance</h3>")
    prov = [(k, ds.attrs[k]) for k in ("timescale_version", "seed_entropy", "title") if k in ds.attrs]
    h.append(_kv_table(prov))
    h.append('<p class="note">Figures are also saved beside this page as PNG and SVG. '
             "The page needs no network connection.</p>")
    h.append("</main></body></html>")
    page = folder / "report.html"
    page.write_text("\n".join(h), encoding="utf-8")
    return page
