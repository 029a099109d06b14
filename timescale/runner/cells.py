"""One cell of a suite: the pure :func:`run_cell` (a picklable :class:`CellSpec` in, a
:class:`Row` of per-trial metrics out) and :func:`measure`, which turns an outcome into the
core metrics.

Data flow: Pulse → Method.design → Method.simulate → Outcome → metrics → Row → cube.
"""

from __future__ import annotations

import json
import math
import traceback
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from timescale.contract.outcome import run_method
from timescale.contract.plugin import Metric, Outcome, Pulse
from timescale.contract.registry import get_method
from timescale.data.technology import DEFAULT_TECHNOLOGY, Technology
from timescale.numerics import metrics

__all__ = ["CellSpec", "Row", "run_cell", "measure", "cell_rng", "DEFAULT_SAMPLER_JITTER"]

#: RMS jitter of the reference sampler used for the jitter-limited SNR metrics, s.
DEFAULT_SAMPLER_JITTER = 1e-12


# ---- cells -----------------------------------------------------------------------------------

@dataclass(frozen=True)
class CellSpec:
    """Everything one cell needs; picklable, so it can travel to a worker.

    Attributes
    ----------
    index : int
        Cell index in the suite (drives its random stream).
    method : str or Method
        Method name (a Method object in-process).
    params : Mapping
        Method parameters for this cell.
    pulse_name : str
    pulse : Pulse
    factor : float
    trials : int
    entropy : int
        Root seed entropy of the suite.
    technology : Technology
    sampler_jitter : float
        RMS jitter for the jitter-SNR metrics, s.
    keep_waveform : bool
        Return the output waveform with the row.
    corner : str, optional
        Process corner to evaluate the design at (see :meth:`CellSpec.cards`).
    temperature : float, optional
        Operating temperature to evaluate the design at, K.
    """

    index: int
    method: Any
    params: Mapping[str, Any]
    pulse_name: str
    pulse: Pulse
    factor: float
    trials: int = 1
    entropy: int = 0
    technology: Technology = DEFAULT_TECHNOLOGY
    sampler_jitter: float = DEFAULT_SAMPLER_JITTER
    keep_waveform: bool = False
    corner: str | None = None
    temperature: float | None = None

    def cards(self) -> tuple[Technology, Technology]:
        """(card to size on, card to simulate, bill and check limits on).

        Both are `technology` unless a corner or temperature is given: then the design is sized
        on the typical card at its nominal temperature and evaluated on the card at that corner
        and temperature (the card's own where one of the two is not given).
        """
        t = self.technology
        if self.corner is None and self.temperature is None:
            return t, t
        evaluated = t.at_corner(t.corner if self.corner is None else self.corner,
                                t.temperature if self.temperature is None else self.temperature)
        return t.at_corner("typical", t.temperature_nominal), evaluated


@dataclass
class Row:
    """What :func:`run_cell` returns: per-trial metric values with their metadata."""

    index: int
    status: str
    message: str
    values: dict[str, np.ndarray] = field(default_factory=dict)
    attrs: dict[str, tuple[str, str]] = field(default_factory=dict)  # name -> (units, long_name)
    design: str = ""
    bill: str = ""
    path: str = ""
    orientation: int = 1
    waveform: Pulse | None = None
    limits: str = ""  # JSON list of the checked limits
    binding: str = ""  # the unmet (or nearest) limit, in words; "" when none is checked


def cell_rng(entropy: int, index: int) -> np.random.Generator:
    """The random generator of cell `index`: a child of the root SeedSequence by index, so the
    result does not depend on execution order or on where the cell runs."""
    return np.random.default_rng(np.random.SeedSequence(entropy=entropy, spawn_key=(int(index),)))


def run_cell(spec: CellSpec) -> Row:
    """Run one cell and measure it; never raises for a failure inside the method.

    A method that raises, or returns non-finite output, gives a row with status ``"failed"``
    and the reason; a design that breaks a process limit gives ``"infeasible"`` (with its
    metrics, and the binding limit first in the message); a method that warns gives
    ``"warned"``.
    """
    try:
        m = get_method(spec.method)
        params = m.make_params(**dict(spec.params))
        sized_on, evaluated_on = spec.cards()
        oc = run_method(m, spec.pulse, spec.factor, params, sized_on,
                        cell_rng(spec.entropy, spec.index), spec.trials, evaluated_on=evaluated_on)
        if not np.all(np.isfinite(oc.pulse.values)):
            raise FloatingPointError("the method returned non-finite output samples")
        values, attrs = measure(oc, spec.sampler_jitter)
        design_json = json.dumps(oc.design.as_dict(), sort_keys=True)
        bill_json = json.dumps(oc.bill.as_dict(), sort_keys=True)
        limits_json = json.dumps([lim.as_dict() for lim in oc.limits], sort_keys=True)
    except Exception as exc:  # isolate the cell: record why, keep the suite going
        msg = f"{type(exc).__name__}: {exc}"
        tb = traceback.extract_tb(exc.__traceback__)
        if tb:
            msg += f" (at {tb[-1].filename.rsplit('/', 1)[-1]}:{tb[-1].lineno})"
        return Row(spec.index, "failed", msg)
    ordered = sorted(oc.limits, key=lambda lim: lim.margin)
    unmet = [lim for lim in ordered if not lim.met]
    if unmet:
        status = "infeasible"
        message = "; ".join(["infeasible: " + unmet[0].describe()] + [u.describe() for u in unmet[1:]]
                            + list(oc.warnings))
    else:
        status, message = ("warned" if oc.warnings else "ok"), "; ".join(oc.warnings)
    return Row(spec.index, status, message, values, attrs, design_json, bill_json, oc.path,
               oc.orientation, oc.pulse if spec.keep_waveform else None, limits_json,
               ordered[0].name if ordered else "")


def measure(oc: Outcome, sampler_jitter: float = DEFAULT_SAMPLER_JITTER):
    """Every core metric of an outcome, plus the method's own.

    Returns
    -------
    values : dict of name -> ndarray of shape (trials,)
    attrs : dict of name -> (units, long_name)
    """
    x, y, a = oc.input, oc.pulse, oc.factor
    trials = y.values.shape[0]
    fit = metrics.fit_reference(y, x, a, oc.orientation)
    v: dict[str, Any] = {
        "nrmse": fit.nrmse,
        "nrmse_fixed": metrics.nrmse_fixed(y, x, a, oc.orientation),
        "correlation": fit.correlation,
        "sndr_db": fit.sndr_db,
        "latency": fit.latency,
        "gain": fit.gain,
        "achieved_factor": metrics.achieved_factor(y, x),
        "fitted_factor": metrics.fitted_factor(y, x, a, oc.orientation, span=1.5),
        "bw_in": x.occupied_bandwidth(),
        "bw_out": y.occupied_bandwidth(),
        "rms_bw_in": x.rms_bandwidth(),
        "rms_bw_out": y.rms_bandwidth(),
        "jitter_snr_in_db": metrics.jitter_snr_db(x, sampler_jitter),
        "jitter_snr_out_db": metrics.jitter_snr_db(y, sampler_jitter),
        "bw_internal": oc.bill.bw_internal,
        "area": oc.bill.area,
        "power": oc.bill.power,
        "energy_per_pulse": oc.bill.energy_per_pulse,
        "limit_margin": min((lim.margin for lim in oc.limits), default=math.nan),
    }
    attrs = dict(metrics.METRICS)
    for name, count in oc.bill.counts.items():
        v[f"count_{name}"] = float(count)
        attrs[f"count_{name}"] = ("", f"number of {name.replace('_', ' ')}")
    for name, met in oc.metrics.items():
        if not isinstance(met, Metric):
            raise TypeError(f"method metric {name!r} must be a timescale.plugin.Metric")
        if name in v:
            raise ValueError(f"method metric {name!r} clashes with a core metric")
        v[name] = met.value
        attrs[name] = (met.units, met.long_name)
    out = {}
    for name, val in v.items():
        arr = np.asarray(val, dtype=float)
        out[name] = np.broadcast_to(arr, (trials,)).copy() if arr.ndim <= 1 else arr
    return out, attrs


