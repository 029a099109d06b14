"""The resample reference method: exact scaling, capture non-idealities, bill."""

import math

import numpy as np
import pytest
from scipy import signal as ss

import timescale
from timescale import metrics
from timescale.data.errors import DesignWarning, SamplingWarning
from timescale.numerics import costs
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
    kw = dict(capture=True, bits=24, oversampling=6.0, dac="ideal", converter_noise=False)
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
    kw = dict(capture=True, full_scale=fs, oversampling=40.0, dac="ideal", converter_noise=False)
    y = timescale.stretch(x, "resample", 1.0, bits=bits, **kw).pulse.values[0]
    fine = timescale.stretch(x, "resample", 1.0, bits=24, **kw).pulse.values[0]
    q = 2 * fs / 2 ** bits
    busy = np.abs(fine) > 8 * q
    assert busy.sum() > 80
    assert np.var(y[busy] - fine[busy]) == pytest.approx(q * q / 12, rel=0.25)
    assert np.max(np.abs(y - fine)) <= q / 2 + 1e-12


def test_zero_order_hold_replay_is_close_but_not_exact():
    x = gaussian(rate=80e9)
    out = timescale.stretch(x, "resample", 4.0, capture=True, bits=14, oversampling=4.0, converter_noise=False)
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
    kw = dict(capture=True, bits=14, oversampling=4.0, converter_noise=False)
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


def test_bill_uses_enob_on_the_rate_frontier_at_capture_rate():
    # Walden form P = FOM·2^ENOB·f_s (Walden, IEEE JSAC 1999) with the ENOB the capture reaches
    # (quantization + thermal + jitter), not the resolution, on the card's frontier
    x = gaussian()
    out = timescale.stretch(x, "resample", 2.0, bits=10)
    tech = timescale.preset("example-balanced")
    d = out.design
    adc = out.bill.items[0]
    assert d.enob < d.bits - 0.4  # thermal noise equal to the quantization noise costs ~1/2 bit
    assert adc.power == pytest.approx(costs.adc_power(d.enob, d.capture_rate, tech.adc_fom, tech.adc_corner_rate))
    assert adc.power < costs.walden_power(tech.adc_fom * math.sqrt(1 + (d.capture_rate / tech.adc_corner_rate) ** 2),
                                          10, d.capture_rate)
    # capture rate = 2 × oversampling × the input's 99 % bandwidth (design rule of the method)
    assert d.capture_rate == pytest.approx(2 * 1.25 * x.occupied_bandwidth())
    assert out.bill.counts["memory_bits"] == 10 * d.samples


def test_measured_quantizer_snr_follows_bennett():
    # Bennett (Bell Syst. Tech. J. 1948): a busy quantizer's error has variance q²/12, so a
    # full-scale sine sees 6.02·N + 1.76 dB. The method measures its quantizer SNR in the
    # capture (where the input spans at least one step); a wide pulse keeps the quantizer busy.
    x = timescale.Pulse.gaussian(sigma=600e-12, center=3e-9, duration=6e-9, rate=40e9)
    for bits in (6, 8, 10):
        out = timescale.stretch(x, "resample", 2.0, bits=bits, oversampling=40.0, full_scale=1.25)
        measured = float(out.metrics["quantizer_snr_db"].value)
        assert measured == pytest.approx(6.02 * bits + 1.76, abs=0.6), bits
        # and not a restatement of the formula: a different pulse measures a different value
    short = timescale.stretch(gaussian(), "resample", 2.0, bits=6, full_scale=1.25)
    assert float(short.metrics["quantizer_snr_db"].value) != pytest.approx(6.02 * 6 + 1.76, abs=1e-3)


def test_sized_to_snr_target_with_the_fewest_bits():
    x = gaussian()
    for target in (30.0, 40.0, 55.0):
        out = timescale.stretch(x, "resample", 2.0, snr_target=target)
        bits = out.design.bits
        assert float(out.metrics["snr_db"].value) >= target
        fewer = timescale.stretch(x, "resample", 2.0, bits=bits - 1)
        assert float(fewer.metrics["snr_db"].value) < target
        # each bit halves the step: about 6 dB of SNR (6.02 dB per bit, Walden 1999)
        assert float(out.metrics["snr_db"].value) - float(fewer.metrics["snr_db"].value) == pytest.approx(6.02, abs=1.5)


def test_reported_noise_matches_monte_carlo_at_the_peak():
    # The reported noise_rms (quantization + ADC and DAC thermal noise + jitter through the
    # replay filter) against the spread of 400 simulated captures at the output peak.
    x = gaussian(rate=80e9)
    out = timescale.stretch(x, "resample", 2.0, capture=True, trials=400, seed=3, oversampling=2.0,
                            jitter=1e-12)
    k = int(np.argmax(np.abs(out.clean.values[0])))
    measured = float(np.sqrt(np.mean((out.pulse.values[:, k] - out.clean.values[0, k]) ** 2)))
    assert measured == pytest.approx(float(out.metrics["noise_rms"].value), rel=0.2)
    peak = float(np.max(np.abs(out.clean.values[0])))
    assert float(out.metrics["snr_db"].value) == pytest.approx(20 * math.log10(peak / float(out.metrics["noise_rms"].value)))


def test_limits_name_rate_channels_and_jitter_floor():
    tech = timescale.preset("example-cmos130")
    x = timescale.Pulse.gaussian(sigma=50e-12, center=1e-9, duration=3e-9, rate=100e9)
    out = timescale.stretch(x, "resample", 2.0, technology=tech)
    lim = {lm.name: lm for lm in out.limits}
    rate = lim["ADC sample rate per channel"]
    assert not out.feasible and not rate.met
    n = math.ceil(out.design.capture_rate / tech.adc_max_rate)
    assert f"{n} time-interleaved" in rate.note
    # a 12-bit converter at a several-GHz band edge is above the card's aperture-jitter line
    # (SNR = −20·log10(2π f σ_t): 3.5 GHz, 200 fs → 47.1 dB; Walden 1999, MT-008)
    big = timescale.stretch(x, "resample", 2.0, technology=tech, bits=12)
    assert not {lm.name: lm for lm in big.limits}["ADC ENOB at the input's 99% band edge"].met


def test_warnings_for_aliasing_and_clipping():
    x = gaussian()
    with pytest.warns(SamplingWarning, match="aliases"):
        out = timescale.stretch(x, "resample", 2.0, oversampling=0.7)
    assert any("aliases" in w for w in out.warnings)  # also kept on the outcome
    with pytest.warns(DesignWarning, match="clips"):
        timescale.stretch(x, "resample", 2.0, capture=True, full_scale=0.5, bits=8)
