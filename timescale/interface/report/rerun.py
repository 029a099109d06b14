"""Re-running a cube's representative cells (from the parameters, technology and seed stored in
its attributes) so the report can draw waveforms that a cube does not keep.
"""

from __future__ import annotations

import json
import warnings

import numpy as np

from timescale.analysis.findings import _HIGHER_IS_BETTER, _cell_dims, _fmt_factor, _median_trials
from timescale.runner.cube import input_pulses

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
            np.any(np.isfinite(np.asarray(fid.sel({"method_name": m, "pulse": p, "factor": f}).values, dtype=float)))
            for m in ds["method_name"].values)]
        if ok:
            return p, max(ok)
    return str(ds["pulse"].values[0]), max(factors)


def _rerun(ds, pulses, fidelity, pulse=None, factor=None):
    """Outcomes for the representative cell of each method (or the given pulse and factor);
    returns (outcomes, notes, pulse name, factor)."""
    from timescale.contract.outcome import stretch
    from timescale.contract.registry import available_methods
    from timescale.data.technology import DEFAULT_TECHNOLOGY, Technology

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
    for m in (str(v) for v in ds["method_name"].values):
        if m not in have:
            notes.append(f"{m}: not installed here, so its waveform could not be re-run.")
            continue
        kw = dict(params.get(m, {}))
        if settings:  # the setting with the best fidelity at this pulse and factor
            fid = _median_trials(ds[fidelity]).sel({"method_name": m, "pulse": pname, "factor": factor})
            arr = np.asarray(fid.transpose(*settings).values, dtype=float)
            if np.any(np.isfinite(arr)):
                higher = fidelity in _HIGHER_IS_BETTER
                idx = np.unravel_index(np.nanargmax(arr) if higher else np.nanargmin(arr), arr.shape)
                from timescale.contract.registry import get_method

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
