"""Plain-text summaries of a results cube (for the terminal; the report builds on the same
numbers)."""

from __future__ import annotations

import numpy as np
import xarray as xr

from .units import display_unit, format_value

__all__ = ["cell_table", "format_table", "TABLE_METRICS"]

#: Metrics shown in the per-cell table, in order.
TABLE_METRICS = ("nrmse", "sndr_db", "fitted_factor", "latency", "bw_out", "area", "power",
                 "energy_per_pulse")


def format_table(header: list[str], rows: list[list[str]]) -> str:
    """Align columns: text left, everything else right."""
    widths = [max(len(str(c)) for c in col) for col in zip(header, *rows)]
    def line(cells):
        return "  ".join(str(c).ljust(w) if i < 3 else str(c).rjust(w)
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
    extra = [d for d in ds["status"].dims if d not in ("method", "pulse", "factor")]
    rows = []
    for meth in ds["method"].values:
        for pulse in ds["pulse"].values:
            for f in ds["factor"].values:
                sel = dict(method=meth, pulse=pulse, factor=f)
                row = [str(meth), str(pulse), f"{float(f):g}"]
                for m in metrics:
                    da = ds[m].sel(sel)
                    vals = np.asarray(da.values, dtype=float)
                    v = np.nanmedian(vals) if np.any(np.isfinite(vals)) else np.nan
                    row.append(format_value(v, ds[m].attrs.get("units", ""), unit=False))
                st = ds["status"].sel(sel).values
                st = np.atleast_1d(st)
                counts = {s: int(np.sum(st == s)) for s in ("ok", "warned", "failed") if np.any(st == s)}
                row.append(", ".join(f"{k}" if len(st) == 1 else f"{v} {k}" for k, v in counts.items()))
                rows.append(row)
    table = format_table(header, rows)
    if extra:
        table += f"\n(median over {', '.join(extra)})"
    return table
