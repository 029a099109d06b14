"""The resample reference method: exact scaling, capture non-idealities, bill."""

import math

import numpy as np
import pytest
from scipy import signal as ss

import timescale
from timescale import metrics
from timescale.numerics import costs
from timescale.data.errors import DesignWarning, SamplingWarning
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


def test_zoh_replay_matches_scipy_lsim_of_the_staircase():
    # Independent solver: the replayed codes (the same capture replayed ideally) held for one
    # replay period and driven through the analog Butterworth reconstruction filter, solved by
    # scipy.signal.lsim. The method filters the 16-point staircase by FFT, lsim interpolates
    # linearly between the same points: both resolve the hold finely (measured gap ~8e-5 of the
    # peak); a wrong filter order, cutoff or hold length moves the output by percents.
    x = gaussian(rate=80e9)
    kw = dict(capture=True, bits=14, oversampling=4.0)
    zoh = timescale.stretch(x, "resample", 4.0, **kw)
    codes = timescale.stretch(x, "resample", 4.0, dac="ideal", **kw).pulse.values[0]
    y = zoh.pulse
    hold = 16  # hold_points default
    f_r = zoh.design.replay_rate
    assert y.rate == pytest.approx(hold * f_r, rel=1e-12)
    fc = 0.8 * f_r / 2  # filter_cutoff default: 0.8 of the replay Nyquist
    b, a = ss.butter(4, 2 * math.pi * fc, analog=True)  # filter_order default 4
    u = np.repeat(codes, hold)
    u = np.r_[u, np.zeros(max(0, y.n - u.size))][: y.n]
    _, want, _ = ss.lsim((b, a), u, np.arange(y.n) / y.rate)
    assert np.max(np.abs(y.values[0] - want)) < 5e-4 * np.max(np.abs(want))
    # latency beyond the record: half a replay period for the hold (sinc(f/f_r)·e^{−jπf/f_r},
    # standard ZOH result) plus the filter's group delay at DC (phase slope from scipy.signal.freqs);
    # measured 1.6 % short of that sum (the delay falls off over the pulse's band)
    dw = 1e-4 * 2 * math.pi * fc
    _, h = ss.freqs(b, a, worN=[dw])
    expected = 0.5 / f_r + -np.angle(h[0]) / dw
    fit = metrics.fit_reference(y, x, 4.0)
    assert fit.latency[0] - zoh.design.latency == pytest.approx(expected, rel=0.05)


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
