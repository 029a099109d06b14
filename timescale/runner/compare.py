"""``compare``: every pulse through every method at every factor, in-process, as a results cube.

A shorthand for an in-process :class:`~timescale.runner.suite.Suite` without sweeps, so there is
one path from cells to cube (:func:`~timescale.runner.execute.run_suite`).
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from timescale.contract.outcome import check_factor, check_pulse, check_trials
from timescale.data import checks
from timescale.data.pulse import Pulse
from timescale.data.technology import Technology
from timescale.runner.cells import DEFAULT_SAMPLER_JITTER
from timescale.runner.execute import run_suite
from timescale.runner.suite import Suite

__all__ = ["compare"]


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
    if isinstance(pulses, Pulse):
        pulses = {pulses.name: pulses}
    if isinstance(pulses, Mapping):
        for k, p in pulses.items():
            check_pulse(p, f"pulses[{k!r}]")
    if technology is not None and not isinstance(technology, Technology):
        raise TypeError(f"technology must be a timescale.Technology, got {type(technology).__name__}")
    factors = [check_factor(f) for f in np.atleast_1d(np.asarray(factors, dtype=object))]
    suite = Suite(pulses=pulses, methods=methods, factors=factors, params=params,
                  trials=check_trials(trials), seed=seed, technology=technology,
                  sampler_jitter=checks.positive("sampler_jitter", sampler_jitter))
    return run_suite(suite, progress=False).cube
