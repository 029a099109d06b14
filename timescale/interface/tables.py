"""Plain-text summaries of a results cube (for the terminal; the report builds on the same
numbers)."""

from __future__ import annotations

import numpy as np
import xarray as xr

from timescale.data.units import display_unit, format_value

__all__ = ["cell_table", "format_table", "TABLE_METRICS", "cube_overview", "method_table",
           "failure_table", "METHOD_METRICS"]

#: Metrics shown in the per-cell table, in order.
TABLE_METRICS = ("nrmse", "sndr_db", "fitted_factor", "latency", "bw_out", "area", "power",
                 "energy_per_pulse")


def format_table(header: list[str], rows: list[list[str]], text_columns: int = 3) -> str:
    """Align columns: the first `text_columns` left, everything else right."""
    widths = [max(len(str(c)) for c in col) for col in zip(header, *rows)]
    def line(cells):
        return "  ".join(str(c).ljust(w) if i < text_columns else str(c).rjust(w)
                         for i, (c, w) in enumerate(zip(cells, widths)))
    return "\n".join([line(header), line(["-" * w for w in widths])] + [line(r) for r in rows])


def cell_table(ds: xr.Dataset, metrics=TABLE_METRICS) -> str:
    """One line per (method, pulse, factor) cell with the median over trials and any other
    swept dims of each metric, in display units, and the cell status."""
    metrics = [m for m in metrics if m in ds]
    header = ["method", "pulse", "factor"]
    for m in metrics:
        unit, _ = display_unit(ds[m].attrs.get("units", ""))
        header.append(f"{m} ({unit})" if unit else m)
    header.append("status")
    extra = [d for d in ds["status"].dims if d not in ("method_name", "pulse", "factor")]
    rows = []
    for meth in ds["method_name"].values:
        for pulse in ds["pulse"].values:
            for f in ds["factor"].values:
                sel = dict(method_name=meth, pulse=pulse, factor=f)
                row = [str(meth), str(pulse), f"{float(f):g}"]
                for m in metrics:
                    da = ds[m].sel(sel)
                    vals = np.asarray(da.values, dtype=float)
                    v = np.nanmedian(vals) if np.any(np.isfinite(vals)) else np.nan
                    row.append(format_value(v, ds[m].attrs.get("units", ""), unit=False))
                st = ds["status"].sel(sel).values
                st = np.atleast_1d(st)
                counts = {s: int(np.sum(st == s)) for s in ("ok", "warned", "infeasible", "failed") if np.any(st == s)}
                row.append(", ".join(f"{k}" if len(st) == 1 else f"{v} {k}" for k, v in counts.items()))
                rows.append(row)
    table = format_table(header, rows)
    if extra:
        table += f"\n(median over {', '.join(extra)})"
    return table


#: Metrics shown in the per-method table, in order.
METHOD_METRICS = ("nrmse", "sndr_db", "fitted_factor", "bw_internal", "area", "power", "energy_per_pulse")
_STATUSES = ("ok", "warned", "infeasible", "failed", "n/a")


def cube_overview(ds: xr.Dataset) -> str:
    """The cube's dims (with sizes and coordinate ranges) and its metrics (with display units
    and long names), as text."""
    from timescale.data.units import display_unit

    lines = ["dims:"]
    for d, size in ds.sizes.items():
        vals = ds[d].values if d in ds.coords else np.arange(size)
        units = ds[d].attrs.get("units", "") if d in ds.coords else ""
        if vals.dtype.kind in "fiu" and size:
            lo, hi = vals.min(), vals.max()
            span = (format_value(lo, units) if lo == hi else
                    f"{format_value(lo, units)} … {format_value(hi, units)}")
        else:
            shown = [str(v) for v in vals[:4]]
            span = ", ".join(shown) + (", …" if size > 4 else "")
        lines.append(f"  {d:<16} {size:>6}  {span}")
    lines.append("metrics:")
    for k, v in ds.data_vars.items():
        if k in ("status", "message", "design", "bill", "path", "orientation") or "method_name" not in v.dims:
            continue  # per-cell records and the stored input pulses are not metrics
        unit, _ = display_unit(v.attrs.get("units", ""))
        lines.append(f"  {k:<22} {('(' + unit + ')') if unit else '':<8} {v.attrs.get('long_name', '')}")
    return "\n".join(lines)


def method_table(ds: xr.Dataset, metrics=METHOD_METRICS) -> str:
    """One line per method: cell counts by status and the median (over every other dim and
    trial, failed and not-applicable cells excluded since they are NaN) of each metric, in
    display units."""
    metrics = [m for m in metrics if m in ds]
    header = ["method"] + list(_STATUSES)
    for m in metrics:
        unit, _ = display_unit(ds[m].attrs.get("units", ""))
        header.append(f"{m} ({unit})" if unit else m)
    rows = []
    for meth in ds["method_name"].values:
        st = np.asarray(ds["status"].sel({"method_name": meth}).values).ravel()
        row = [str(meth)] + [str(int(np.sum(st == s))) for s in _STATUSES]
        for m in metrics:
            vals = np.asarray(ds[m].sel({"method_name": meth}).values, dtype=float)
            v = np.nanmedian(vals) if np.any(np.isfinite(vals)) else np.nan
            row.append(format_value(v, ds[m].attrs.get("units", ""), unit=False))
        rows.append(row)
    return format_table(header, rows, text_columns=1) + "\n(median over pulses, factors, sweeps and trials)"


def failure_table(ds: xr.Dataset, limit: int = 10) -> str:
    """The reasons cells failed, most frequent first (``""`` when none failed)."""
    st = np.asarray(ds["status"].values).ravel()
    msgs = np.asarray(ds["message"].values).ravel()[st == "failed"]
    if not len(msgs):
        return ""
    reasons: dict[str, int] = {}
    meths = ds["method_name"].broadcast_like(ds["status"]).transpose(*ds["status"].dims).values.ravel()[st == "failed"]
    for meth, msg in zip(meths, msgs):
        key = f"{meth}: {str(msg).split(' (at ')[0]}"
        reasons[key] = reasons.get(key, 0) + 1
    top = sorted(reasons.items(), key=lambda kv: (-kv[1], kv[0]))
    lines = [f"{len(msgs)} failed cell(s):"] + [f"  {n:>6} x {k}" for k, n in top[:limit]]
    if len(top) > limit:
        lines.append(f"  ... and {len(top) - limit} other reason(s)")
    return "\n".join(lines)
