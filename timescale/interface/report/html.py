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
from pathlib import Path

import xarray as xr

from timescale.analysis.findings import (
    _HIGHER_IS_BETTER,
    _TABLE,
    DEFAULT_TARGET,
    _cell_dims,
    _cell_text,
    _fmt_factor,
    cell_summary,
    findings,
)
from timescale.data.units import display_unit, format_value, scaled_unit
from timescale.interface.report.figures import _build_figures
from timescale.interface.report.rerun import _rerun

# ---- HTML --------------------------------------------------------------------------------------

__all__ = ["write_report"]

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
    from timescale.interface.plot import method_style

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
    from timescale.data.technology import Technology

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
    if not isinstance(ds, xr.Dataset) or "method_name" not in ds.dims or "status" not in ds:
        raise TypeError(f"ds must be a timescale results cube (xarray.Dataset with a method dim and "
                        f"a status variable), got {type(ds).__name__}")
    if fidelity not in ds:
        raise ValueError(f"fidelity={fidelity!r} is not a variable of the cube")
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise ValueError(f"folder {str(folder)!r} exists and is not a folder")
    folder.mkdir(parents=True, exist_ok=True)
    from timescale.interface.plot import method_style

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
    methods = [str(m) for m in ds["method_name"].values]
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
