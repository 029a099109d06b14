"""Running pulses through methods: one-shot :func:`stretch`, the pure per-cell :func:`run_cell`,
and :func:`compare`, which fills a results cube.

Data flow: Pulse → Method.design → Method.simulate → Outcome → metrics → Row → cube.
"""

from __future__ import annotations

import json
import math
import traceback
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from . import _checks, metrics
from .errors import TimescaleWarning
from .plugin import Method, Metric, Outcome, Pulse
from .registry import get_method
from .technology import DEFAULT_TECHNOLOGY, Technology

__all__ = ["stretch", "compare", "CellSpec", "Row", "run_cell", "cell_rng", "DEFAULT_SAMPLER_JITTER"]

#: RMS jitter of the reference sampler used for the jitter-limited SNR metrics, s.
DEFAULT_SAMPLER_JITTER = 1e-12


def _check_factor(factor) -> float:
    if isinstance(factor, bool) or not isinstance(factor, (int, float, np.integer, np.floating)):
        raise TypeError(f"factor must be a real number > 0 (α > 1 stretches, α < 1 compresses), got {factor!r}")
    f = float(factor)
    if not math.isfinite(f) or f <= 0:
        raise ValueError(f"factor must be finite and > 0 (α > 1 stretches, α < 1 compresses), got {factor!r}")
    return f


def _check_pulse(pulse, name="pulse") -> Pulse:
    if not isinstance(pulse, Pulse):
        raise TypeError(f"{name} must be a timescale.Pulse, got {type(pulse).__name__}")
    if pulse.values.ndim != 1:
        raise ValueError(f"{name} must hold one record (values of shape (n,)), got shape {pulse.values.shape}")
    return pulse


def _check_trials(trials) -> int:
    if isinstance(trials, bool) or not isinstance(trials, (int, np.integer)) or trials < 1:
        raise ValueError(f"trials must be a whole number >= 1, got {trials!r}")
    return int(trials)


def stretch(pulse: Pulse, method, factor: float, *, trials: int = 1, seed=None,
            technology: Technology | None = None, **params) -> Outcome:
    """Run one pulse through one method at one factor.

    Parameters
    ----------
    pulse : Pulse
        Input, one record.
    method : str or Method
        A method name (see :func:`timescale.available_methods`) or a Method object.
    factor : float
        Stretch factor α > 0 (α > 1 stretches, α < 1 compresses).
    trials : int
        Monte Carlo trials (the output has this many records).
    seed : int or numpy.random.SeedSequence, optional
        Seed of the random generator.
    technology : Technology, optional
        Process card (default: the ``example-balanced`` preset).
    **params
        The method's parameters (``timescale methods`` lists them).

    Returns
    -------
    Outcome
        ``.pulse`` (output), ``.design``, ``.bill``, ``.warnings``, ``.metrics``.
    """
    m = get_method(method)
    rng = np.random.default_rng(seed)
    return _outcome(m, _check_pulse(pulse), _check_factor(factor), m.make_params(**params),
                    technology or DEFAULT_TECHNOLOGY, rng, _check_trials(trials), reissue=True)


def _outcome(m: Method, pulse, factor, params, technology, rng, trials, reissue=False) -> Outcome:
    """Design, simulate and bill; timescale warnings are kept on the outcome (and shown to the
    caller too when `reissue`)."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", TimescaleWarning)
        design = m.design(pulse, factor, params, technology)
        sim = m.simulate(pulse, design, params, rng, trials, technology)
        bill = m.bill(design, params, technology)
    for w in caught:  # re-issue what was not ours; ours only when asked
        if reissue or not issubclass(w.category, TimescaleWarning):
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    ours = tuple(dict.fromkeys(str(w.message) for w in caught if issubclass(w.category, TimescaleWarning)))
    out = sim.pulse
    if out.values.ndim == 1:
        out = out.with_values(np.broadcast_to(out.values, (trials, out.n)).copy())
    if out.values.shape[0] != trials or out.values.ndim != 2:
        raise ValueError(
            f"method {m.name!r} returned output of shape {out.values.shape}; expected ({trials}, n)"
        )
    return Outcome(method=m.name, factor=factor, input=pulse, pulse=out, design=design, bill=bill,
                   params=params, orientation=sim.orientation, metrics=sim.metrics, path=sim.path,
                   clean=sim.clean, warnings=ours)


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


def cell_rng(entropy: int, index: int) -> np.random.Generator:
    """The random generator of cell `index`: a child of the root SeedSequence by index, so the
    result does not depend on execution order or on where the cell runs."""
    return np.random.default_rng(np.random.SeedSequence(entropy=entropy, spawn_key=(int(index),)))


def run_cell(spec: CellSpec) -> Row:
    """Run one cell and measure it; never raises for a failure inside the method.

    A method that raises, or returns non-finite output, gives a row with status ``"failed"``
    and the reason; a method that warns gives ``"warned"``.
    """
    try:
        m = get_method(spec.method)
        params = m.make_params(**dict(spec.params))
        oc = _outcome(m, spec.pulse, spec.factor, params, spec.technology,
                      cell_rng(spec.entropy, spec.index), spec.trials)
        if not np.all(np.isfinite(oc.pulse.values)):
            raise FloatingPointError("the method returned non-finite output samples")
        values, attrs = measure(oc, spec.sampler_jitter)
        design_json = json.dumps(oc.design.as_dict(), sort_keys=True)
        bill_json = json.dumps(oc.bill.as_dict(), sort_keys=True)
    except Exception as exc:  # isolate the cell: record why, keep the suite going
        msg = f"{type(exc).__name__}: {exc}"
        tb = traceback.extract_tb(exc.__traceback__)
        if tb:
            msg += f" (at {tb[-1].filename.rsplit('/', 1)[-1]}:{tb[-1].lineno})"
        return Row(spec.index, "failed", msg)
    return Row(
        spec.index,
        "warned" if oc.warnings else "ok",
        "; ".join(oc.warnings),
        values,
        attrs,
        design_json,
        bill_json,
        oc.path,
        oc.orientation,
        oc.pulse if spec.keep_waveform else None,
    )


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


# ---- compare ---------------------------------------------------------------------------------

def compare(pulses, methods=None, factors=(2.0,), *, trials: int = 1, seed=None,
            technology: Technology | None = None, sampler_jitter: float = DEFAULT_SAMPLER_JITTER,
            **params):
    """Run every pulse through every method at every factor; return the results cube.

    A shorthand for an in-process :class:`~timescale.Suite` without sweeps (one home for
    building cubes: :func:`timescale.run_suite`).

    Parameters
    ----------
    pulses : Pulse or Mapping[str, Pulse]
        Input pulses (one record each).
    methods : sequence of str or Method, optional
        Methods to compare (default: every available method).
    factors : float or sequence of float
        Stretch factors α.
    trials : int
        Monte Carlo trials per cell; adds a ``trial`` dimension when > 1.
    seed : int, optional
        Root seed; each cell draws from a child stream by cell index.
    technology : Technology, optional
        Process card (default ``example-balanced``).
    sampler_jitter : float
        RMS jitter for the jitter-limited SNR metrics, s.
    **params
        Method parameters: ``name=value`` goes to every selected method that has the
        parameter; ``method_name={...}`` (as ``**{"switched-bandwidth": {...}}``) to that
        method only.

    Returns
    -------
    xarray.Dataset
        Dims ``method``, ``pulse``, ``factor`` (and ``trial``), one variable per metric with
        ``units`` and ``long_name``, ``status`` and ``message`` per cell, the input pulses,
        provenance attributes.
    """
    from .execute import run_suite
    from .suite import Suite

    if isinstance(pulses, Pulse):
        pulses = {pulses.name: pulses}
    if isinstance(pulses, Mapping):
        for k, p in pulses.items():
            _check_pulse(p, f"pulses[{k!r}]")
    if technology is not None and not isinstance(technology, Technology):
        raise TypeError(f"technology must be a timescale.Technology, got {type(technology).__name__}")
    factors = [_check_factor(f) for f in np.atleast_1d(np.asarray(factors, dtype=object))]
    suite = Suite(pulses=pulses, methods=methods, factors=factors, params=params,
                  trials=_check_trials(trials), seed=seed, technology=technology,
                  sampler_jitter=_checks.positive("sampler_jitter", sampler_jitter))
    return run_suite(suite, progress=False).cube
