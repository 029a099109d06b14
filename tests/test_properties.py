"""Property tests (hypothesis): linearity, identity at α = 1, metric invariances."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

import timescale
from timescale import metrics

widths = st.floats(min_value=60e-12, max_value=250e-12)
factors = st.floats(min_value=0.3, max_value=6.0)
amps = st.floats(min_value=-5.0, max_value=5.0).filter(lambda a: abs(a) > 1e-3)


def pulse(sigma, kind):
    ctor = timescale.Pulse.gaussian if kind == "g" else timescale.Pulse.monocycle
    return ctor(sigma=sigma, center=1.2e-9, duration=3e-9, rate=50e9)


@settings(max_examples=25, deadline=None)
@given(sigma=widths, kind=st.sampled_from("gm"), a=amps, alpha=factors)
def test_resample_is_linear_in_amplitude(sigma, kind, a, alpha):
    x = pulse(sigma, kind)
    y1 = timescale.stretch(x, "resample", alpha).pulse.values
    ya = timescale.stretch(x.scale(a), "resample", alpha).pulse.values
    np.testing.assert_allclose(ya, a * y1, rtol=0, atol=1e-12 * abs(a))


@settings(max_examples=25, deadline=None)
@given(sigma=widths, kind=st.sampled_from("gm"))
def test_factor_one_is_identity(sigma, kind):
    x = pulse(sigma, kind)
    out = timescale.stretch(x, "resample", 1.0)
    assert metrics.fit_reference(out.pulse, x, 1.0).nrmse[0] < 1e-10


@settings(max_examples=25, deadline=None)
@given(sigma=widths, alpha=factors, g=amps, d=st.floats(min_value=-2e-9, max_value=5e-9))
def test_nrmse_ignores_gain_and_latency(sigma, alpha, g, d):
    x = pulse(sigma, "m")
    y = metrics.reference(x, alpha).scale(g).shift(d)
    fit = metrics.fit_reference(y, x, alpha)
    assert fit.nrmse < 1e-8
    assert abs(fit.latency - d) < 1e-15 + 1e-6 * x.dt
    assert abs(fit.gain / g - 1) < 1e-8
