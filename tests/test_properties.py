"""Property tests (hypothesis): linearity (homogeneity and superposition), identity at α = 1, metric invariances."""

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


@settings(max_examples=15, deadline=None)
@given(s1=widths, s2=widths, b=amps, alpha=factors, seed=st.integers(0, 2 ** 31))
def test_capture_chain_is_additive(s1, s2, b, alpha, seed):
    # superposition (definition of a linear system) for one fixed design (capture rate, full
    # scale): jittered capture (same draws: same seed), zero-order hold and Butterworth replay
    # are linear in the input; only the 24-bit quantizer is not, and each of the three runs
    # rounds by at most q/2 per code, spread by the filter (|h| integrates to < 2 for a
    # 4th-order Butterworth: derived bound 3q overall)
    x1, x2 = pulse(s1, "g"), pulse(s2, "m")
    x12 = x1.with_values(x1.values + b * x2.values)
    method = timescale.get_method("resample")
    params = method.make_params(capture=True, bits=24, full_scale=8.0, oversampling=3.0, jitter=1e-12)
    design = method.design(x12, alpha, params, timescale.preset("example-balanced"))

    def run(x):
        rng = np.random.default_rng(seed)
        return method.simulate(x, design, params, rng, trials=2).pulse.values

    y1, y2, y12 = run(x1), run(x2), run(x12)
    q = 2 * 8.0 / 2 ** 24
    np.testing.assert_allclose(y12, y1 + b * y2, rtol=0, atol=3 * q * (1 + abs(b)))
    assert np.max(np.abs(y1[0] - y1[1])) > 10 * q  # the two trials' jitter differs: a real check


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
