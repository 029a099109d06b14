"""The resample reference method: exact scaling, capture non-idealities, bill."""

import math

import numpy as np
import pytest

import timescale
from timescale import costs, metrics
from timescale.errors import DesignWarning, SamplingWarning
from timescale.testing import check_method

SIGMA, CENTER = 100e-12, 0.8e-9


def gaussian(rate=40e9):
    return timescale.Pulse.gaussian(sigma=SIGMA, center=CENTER, duration=3e-9, rate=rate)


@pytest.mark.parametrize("alpha", [2.0, 0.5])
def test_ideal_scaling_matches_analytic_x_t_over_alpha(alpha):
    # scaling a Gaussian: x(t/α) is a Gaussian of σ·α centred at α·c (closed form)
    x = gaussian()
    out = timescale.stretch(x, "resample", alpha)
    y = out.pulse
    d = out.design.latency
    analytic = np.exp(-0.5 * ((y.t - d - alpha * CENTER) / (alpha * SIGMA)) ** 2)
    assert np.max(np.abs(y.values[0] - analytic)) < 1e-12
    assert metrics.fit_reference(y, x, alpha).nrmse[0] < 1e-12
    assert y.rate == pytest.approx(x.rate / alpha)


def test_conformance():
    found = check_method(timescale.get_method("resample"))
    assert found["identity_nrmse"] < 1e-12


def test_capture_jitter_error_matches_the_jitter_snr_formula():
    # A sampler with rms jitter σ_t makes an error ẋ·δ; its SNR is the jitter-limited
    # ⟨x²⟩/(σ_t²⟨ẋ²⟩) (Analog Devices MT-008 model, applied to a pulse: derived). Dense
    # capture, 24 bits and ideal replay, so jitter is the only error; the error is measured
    # against the jitter-free output (a fit would absorb the part of it that looks like a delay).
    x = gaussian(rate=80e9)
    sigma_t = 2e-12
    kw = dict(capture=True, bits=24, oversampling=6.0, dac="ideal")
    clean = timescale.stretch(x, "resample", 2.0, **kw).pulse.values[0]
    noisy = timescale.stretch(x, "resample", 2.0, jitter=sigma_t, trials=400, seed=7, **kw).pulse.values
    measured = 10 * math.log10(np.sum(clean ** 2) / np.mean(np.sum((noisy - clean) ** 2, axis=-1)))
    expected = metrics.jitter_snr_db(x, sigma_t)
    assert measured == pytest.approx(expected, abs=0.3)


def test_quantization_noise_follows_lsb_squared_over_12():
    # Uniform quantization error of step q has variance q²/12 (Bennett 1948; standard result),
    # where the signal spans many steps. Compared sample by sample with a 24-bit capture.
    x = timescale.Pulse.gaussian(sigma=600e-12, center=3e-9, duration=6e-9, rate=40e9)
    bits, fs = 8, 1.25  # full scale above the peak: no clipping
    kw = dict(capture=True, full_scale=fs, oversampling=40.0, dac="ideal")
    y = timescale.stretch(x, "resample", 1.0, bits=bits, **kw).pulse.values[0]
    fine = timescale.stretch(x, "resample", 1.0, bits=24, **kw).pulse.values[0]
    q = 2 * fs / 2 ** bits
    busy = np.abs(fine) > 8 * q
    assert busy.sum() > 80
    assert np.var(y[busy] - fine[busy]) == pytest.approx(q * q / 12, rel=0.25)
    assert np.max(np.abs(y - fine)) <= q / 2 + 1e-12


def test_zero_order_hold_replay_is_close_but_not_exact():
    x = gaussian(rate=80e9)
    out = timescale.stretch(x, "resample", 4.0, capture=True, bits=14, oversampling=4.0)
    fit = metrics.fit_reference(out.pulse, x, 4.0)
    assert 1e-4 < fit.nrmse[0] < 0.2
    # the replay filter and hold add delay beyond the record latency
    assert fit.latency[0] > out.design.latency


def test_bill_uses_walden_power_at_capture_rate():
    x = gaussian()
    out = timescale.stretch(x, "resample", 2.0, bits=10)
    tech = timescale.preset("example-balanced")
    adc = out.bill.items[0]
    assert adc.power == pytest.approx(costs.walden_power(tech.adc_fom, 10, out.design.capture_rate))
    # capture rate = 2 × oversampling × the input's 99 % bandwidth (design rule of the method)
    assert out.design.capture_rate == pytest.approx(2 * 1.25 * x.occupied_bandwidth())
    assert out.bill.counts["memory_bits"] == 10 * out.design.samples


def test_warnings_for_aliasing_and_clipping():
    x = gaussian()
    with pytest.warns(SamplingWarning, match="aliases"):
        out = timescale.stretch(x, "resample", 2.0, oversampling=0.7)
    assert any("aliases" in w for w in out.warnings)  # also kept on the outcome
    with pytest.warns(DesignWarning, match="clips"):
        timescale.stretch(x, "resample", 2.0, capture=True, full_scale=0.5)
