"""Running one pulse through one method: design, simulate, bill, with warnings kept on the
:class:`~timescale.contract.plugin.Outcome` (the contract's own operation; the runner and the
conformance suite both call it).
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from timescale.contract.plugin import Limit, Method, Outcome
from timescale.contract.registry import get_method
from timescale.data.errors import TimescaleWarning
from timescale.data.pulse import Pulse
from timescale.data.technology import DEFAULT_TECHNOLOGY, Technology

__all__ = ["stretch", "run_method", "check_factor", "check_pulse", "check_trials"]


def check_factor(factor) -> float:
    """Return `factor` as a float, or raise naming what a stretch factor α may be."""
    if isinstance(factor, bool) or not isinstance(factor, (int, float, np.integer, np.floating)):
        raise TypeError(f"factor must be a real number > 0 (α > 1 stretches, α < 1 compresses), got {factor!r}")
    f = float(factor)
    if not math.isfinite(f) or f <= 0:
        raise ValueError(f"factor must be finite and > 0 (α > 1 stretches, α < 1 compresses), got {factor!r}")
    return f


def check_pulse(pulse, name="pulse") -> Pulse:
    """Return `pulse` when it is a one-record :class:`Pulse`, else raise naming `name`."""
    if not isinstance(pulse, Pulse):
        raise TypeError(f"{name} must be a timescale.Pulse, got {type(pulse).__name__}")
    if pulse.values.ndim != 1:
        raise ValueError(f"{name} must hold one record (values of shape (n,)), got shape {pulse.values.shape}")
    return pulse


def check_trials(trials) -> int:
    """Return `trials` as an int when it is a whole number >= 1, else raise."""
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
    return run_method(m, check_pulse(pulse), check_factor(factor), m.make_params(**params),
                    technology or DEFAULT_TECHNOLOGY, rng, check_trials(trials), reissue=True)


def run_method(m: Method, pulse, factor, params, technology, rng, trials, reissue=False, *,
               evaluated_on: Technology | None = None) -> Outcome:
    """Design, simulate, bill and check the process limits; timescale warnings are kept on the
    outcome (and shown to the caller too when `reissue`). The design is sized on `technology`
    and simulated, billed and checked on `evaluated_on` (default: the same card), e.g. a
    process corner or another temperature."""
    card = technology if evaluated_on is None else evaluated_on
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", TimescaleWarning)
        design = m.design(pulse, factor, params, technology)
        sim = m.simulate(pulse, design, params, rng, trials, card)
        bill = m.bill(design, params, card)
        limits = tuple(m.limits(design, params, card))
    for lim in limits:
        if not isinstance(lim, Limit):
            raise TypeError(f"method {m.name!r}: limits() must return timescale.plugin.Limit records, "
                            f"got {type(lim).__name__}")
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
                   clean=sim.clean, warnings=ours, limits=limits)
