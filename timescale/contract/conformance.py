"""Conformance suite that every method, built-in or third-party, must pass.

Use it from a plugin's own tests::

    from timescale.testing import check_method
    def test_conformance():
        check_method(MyMethod())

or inherit :class:`MethodConformance` in a pytest class and set ``method``.

The checks, with default parameters (every non-ideality off):

* identity: at factor 1 the output matches the input to the method's ``identity_tolerance``
  (NRMSE after the best gain and latency);
* factor: at factors 0.5 and 2 the fitted factor is within ``factor_tolerance`` (relative) of
  the request, and the RMS duration moves the right way (longer for α > 1, shorter for α < 1);
* linearity: doubling the input doubles the output (relative 1e-6 of the output peak);
* bill: every total is finite and ≥ 0;
* determinism: the same seed gives the same output, bit for bit;
* the output has shape (trials, n) with finite values.
"""

from __future__ import annotations

import math

import numpy as np

from timescale.contract.outcome import stretch
from timescale.contract.plugin import Method
from timescale.data.pulse import Pulse
from timescale.data.technology import DEFAULT_TECHNOLOGY
from timescale.numerics import metrics

__all__ = ["check_method", "check_identity", "check_factor", "check_linearity", "check_bill",
           "check_determinism", "default_pulse", "MethodConformance"]


def default_pulse() -> Pulse:
    """The conformance pulse: a Gaussian of 100 ps standard deviation (235 ps FWHM) at 0.6 ns in a
    3 ns record sampled at 40 GS/s."""
    return Pulse.gaussian(sigma=100e-12, center=0.6e-9, duration=3e-9, rate=40e9, name="conformance")


def _check_shape(method, out, trials):
    v = out.pulse.values
    assert v.ndim == 2 and v.shape[0] == trials, (
        f"{method.name}: output shape {v.shape}, expected ({trials}, n)")
    assert np.all(np.isfinite(v)), f"{method.name}: output has non-finite samples"


def check_identity(method: Method, pulse: Pulse | None = None, **params) -> float:
    """Factor 1 reproduces the input within ``method.identity_tolerance``; returns the NRMSE."""
    x = pulse or default_pulse()
    out = stretch(x, method, 1.0, seed=0, **params)
    _check_shape(method, out, 1)
    err = float(metrics.fit_reference(out.pulse, x, 1.0, out.orientation).nrmse[0])
    assert err <= method.identity_tolerance, (
        f"{method.name}: NRMSE at factor 1 is {err:.3g}, above its identity_tolerance "
        f"{method.identity_tolerance:.3g}")
    return err


def check_factor(method: Method, pulse: Pulse | None = None, factors=(0.5, 2.0), **params) -> dict:
    """Fitted factor within ``method.factor_tolerance``; RMS duration moves the right way."""
    x = pulse or default_pulse()
    found = {}
    for a in factors:
        out = stretch(x, method, a, seed=0, **params)
        _check_shape(method, out, 1)
        fitted = float(np.atleast_1d(metrics.fitted_factor(out.pulse, x, a, out.orientation, span=1.5))[0])
        rms = float(np.atleast_1d(metrics.achieved_factor(out.pulse, x))[0])
        assert abs(fitted / a - 1) <= method.factor_tolerance, (
            f"{method.name}: asked for factor {a}, fitted {fitted:.5g} (tolerance "
            f"{method.factor_tolerance:.3g})")
        assert (rms > 1) == (a > 1), (
            f"{method.name}: factor {a} changed the RMS duration by {rms:.4g}: wrong direction")
        found[a] = fitted
    return found


def check_linearity(method: Method, pulse: Pulse | None = None, factor=2.0, **params) -> float:
    """Doubling the input doubles the output (same seed); returns the relative deviation."""
    x = pulse or default_pulse()
    y1 = stretch(x, method, factor, seed=1, **params).pulse
    y2 = stretch(x.scale(2.0), method, factor, seed=1, **params).pulse
    assert y1.values.shape == y2.values.shape, f"{method.name}: output length depends on amplitude"
    dev = float(np.max(np.abs(y2.values - 2 * y1.values)) / (2 * np.max(np.abs(y1.values))))
    assert dev <= 1e-6, f"{method.name}: not linear in amplitude (relative deviation {dev:.3g})"
    return dev


def check_bill(method: Method, pulse: Pulse | None = None, factor=2.0, **params):
    """Every bill total is finite and ≥ 0."""
    x = pulse or default_pulse()
    bill = stretch(x, method, factor, seed=0, technology=DEFAULT_TECHNOLOGY, **params).bill
    for name in ("area", "power", "energy_per_pulse", "bw_internal"):
        v = getattr(bill, name)
        assert math.isfinite(v) and v >= 0, f"{method.name}: bill.{name} = {v!r}"
    return bill


def check_determinism(method: Method, pulse: Pulse | None = None, factor=2.0, **params):
    """The same seed gives the same output, bit for bit."""
    x = pulse or default_pulse()
    a = stretch(x, method, factor, seed=123, trials=2, **params).pulse
    b = stretch(x, method, factor, seed=123, trials=2, **params).pulse
    assert np.array_equal(a.values, b.values) and a.t0 == b.t0 and a.rate == b.rate, (
        f"{method.name}: two runs with the same seed differ")


def check_method(method: Method, pulse: Pulse | None = None, **params) -> dict:
    """Run every conformance check on `method`; raise AssertionError at the first failure.

    Returns
    -------
    dict
        What was measured (identity NRMSE, fitted factors, linearity deviation).
    """
    return {
        "identity_nrmse": check_identity(method, pulse, **params),
        "fitted_factors": check_factor(method, pulse, **params),
        "linearity": check_linearity(method, pulse, **params),
        "bill": check_bill(method, pulse, **params),
        "determinism": check_determinism(method, pulse, **params),
    }


class MethodConformance:
    """pytest mixin: set ``method`` (and optionally ``pulse``, ``params``) in a subclass."""

    method: Method
    pulse: Pulse | None = None
    params: dict = {}

    def test_identity(self):
        check_identity(self.method, self.pulse, **self.params)

    def test_factor(self):
        check_factor(self.method, self.pulse, **self.params)

    def test_linearity(self):
        check_linearity(self.method, self.pulse, **self.params)

    def test_bill(self):
        check_bill(self.method, self.pulse, **self.params)

    def test_determinism(self):
        check_determinism(self.method, self.pulse, **self.params)
