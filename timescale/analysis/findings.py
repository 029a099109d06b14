"""Turning a results cube into plain verdicts: per-cell summaries and, per method, which factors it
serves at a fidelity target and why it misses the others (pure functions).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
import xarray as xr

from timescale.data.units import format_value
from timescale.numerics.metrics import HIGHER_IS_BETTER as _HIGHER_IS_BETTER

__all__ = ["findings", "cell_summary", "Finding", "CellRow", "DEFAULT_TARGET"]

#: Default fidelity target: NRMSE at or below this counts as serving a factor.
DEFAULT_TARGET = 0.1

_TABLE = ("nrmse", "sndr_db", "fitted_factor", "bw_out", "area", "power", "energy_per_pulse")


# ---- pure summaries ----------------------------------------------------------------------------

def _cell_dims(ds):
    return [d for d in ds["status"].dims if d != "method_name"]


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
    sub = ds.sel({"method_name": method})
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
                         f"{', '.join(k for k in ds.data_vars if 'method_name' in ds[k].dims)}")
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
    for m in (str(v) for v in ds["method_name"].values):
        sub = ds.sel({"method_name": m})
        # a design the process cannot build serves nothing, however good its waveform
        fid = _median_trials(sub[fidelity]).where(sub["status"] != "infeasible")
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
