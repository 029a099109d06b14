"""Metric definitions against closed forms and independent computations."""

import math

import numpy as np
import pytest

import timescale
from timescale import Pulse, metrics


def gaussian(sigma=100e-12, center=1e-9, duration=3e-9, rate=80e9):
    return Pulse.gaussian(sigma=sigma, center=center, duration=duration, rate=rate)


def test_jitter_snr_of_full_scale_sine():
    # Analog Devices tutorial MT-008: SNR = −20·log10(2π·f·σ_t); 1 GHz, 100 fs → 64.04 dB
    n = 1000
    s = Pulse.from_samples(np.sin(2 * np.pi * 1e9 * np.arange(n) / 100e9), 100e9)
    assert metrics.jitter_snr_db(s, 100e-15) == pytest.approx(64.04, abs=0.005)
    assert metrics.jitter_snr_db(s, 100e-15) == pytest.approx(-20 * math.log10(2 * math.pi * 1e9 * 100e-15), abs=1e-6)


def test_jitter_snr_of_gaussian():
    # derived: ⟨x²⟩/⟨ẋ²⟩ = 2σ² for a Gaussian of standard deviation σ; σ = 100 ps, σ_t = 1 ps
    # → 10·log10(2·10⁴) = 43.01 dB
    assert metrics.jitter_snr_db(gaussian(), 1e-12) == pytest.approx(43.0103, abs=1e-3)


@pytest.mark.parametrize("alpha", [0.5, 2.0, 8.0])
def test_stretching_raises_jitter_snr_by_20log_alpha(alpha):
    # common practice, no source: a pulse α times slower has α times smaller slopes, so a sampler
    # with the same clock jitter gains 20·log10(α) dB.
    x = gaussian()
    gain = metrics.jitter_snr_db(x.dilate(alpha), 1e-12) - metrics.jitter_snr_db(x, 1e-12)
    assert gain == pytest.approx(20 * math.log10(alpha), abs=1e-9)


@pytest.mark.parametrize("alpha", [0.5, 2.0, 8.0])
def test_jitter_snr_gain_through_the_resample_method(alpha):
    # the same claim through a real scaling path: the resample method's output, re-gridded to
    # the input's own rate (band-limited), so the gain cannot come from a relabelled time step.
    # Closed form (derived, as above): a Gaussian of σ·α has SNR = 10·log10(2α²σ²/σ_t²).
    x = gaussian()
    y = timescale.stretch(x, "resample", alpha).pulse.row(0).resample(x.rate)
    got = float(metrics.jitter_snr_db(y, 1e-12))
    assert got == pytest.approx(10 * math.log10(2 * (alpha * 100e-12) ** 2 / 1e-12 ** 2), abs=1e-3)
    assert got - metrics.jitter_snr_db(x, 1e-12) == pytest.approx(20 * math.log10(alpha), abs=1e-3)


@pytest.mark.parametrize("alpha, out_rate", [(2.0, 30e9), (0.5, 160e9), (3.3, 41e9)])
def test_fit_recovers_gain_and_subsample_latency(alpha, out_rate):
    x = gaussian()
    d, g = 0.7391e-9, -0.35
    # the analytic reference g·x((t − d)/α) on an unrelated output grid
    t = np.arange(int(12e-9 * out_rate)) / out_rate - 1e-9
    y = Pulse.from_samples(g * np.exp(-0.5 * ((t - d) / alpha - 1e-9) ** 2 / 100e-12 ** 2), out_rate, t[0])
    fit = metrics.fit_reference(y, x, alpha)
    assert fit.latency == pytest.approx(d, abs=1e-16)
    assert fit.gain == pytest.approx(g, rel=1e-9)
    assert fit.nrmse < 1e-9
    assert fit.correlation == pytest.approx(1.0, abs=1e-12)
    assert metrics.fitted_factor(y, x, alpha * 1.1) == pytest.approx(alpha, rel=1e-5)


def test_nrmse_equals_known_error_energy():
    # y = r + e with e orthogonal to every shift of r's band: nrmse = ‖e‖/‖r‖ exactly
    # (definition in DESIGN §6). e is a tone far above the reference's band.
    x = gaussian()
    r = x.dilate(2.0)
    e = 0.1 * np.sin(2 * np.pi * 15e9 * r.t)
    y = r.with_values(r.values + e)
    ratio = math.sqrt(np.sum(e ** 2) / np.sum(r.values ** 2))
    fit = metrics.fit_reference(y, x, 2.0)
    assert fit.nrmse == pytest.approx(ratio, rel=1e-4)
    assert fit.sndr_db == pytest.approx(-20 * math.log10(ratio), abs=1e-3)


def test_time_reversed_reference():
    x = Pulse.from_samples(np.r_[np.zeros(20), np.hanning(30), 0.4 * np.hanning(10), np.zeros(40)], 50e9)
    y = metrics.reference(x, 3.0, orientation=-1).shift(2e-9)
    assert metrics.nrmse(y, x, 3.0, orientation=-1) < 1e-9
    assert metrics.nrmse(y, x, 3.0, orientation=1) > 0.1  # asymmetric pulse: upright fit fails


def test_achieved_factor_is_rms_duration_ratio():
    x = gaussian()
    assert metrics.achieved_factor(x.dilate(5.0), x) == pytest.approx(5.0, rel=1e-12)


def test_leakage():
    # DESIGN §6 definition: |y| at the switch instant over the output peak max|y|, per record
    p = Pulse.from_samples(np.r_[np.zeros(10), 0.1, 1.0, 0.5, np.zeros(10)], 1e9)
    assert metrics.leakage(p, p.t[10]) == pytest.approx(0.1, rel=1e-12)
    # magnitudes on both sides: a negative sample at the instant, a negative peak, one per trial
    q = p.with_values(np.stack([p.values, -2.0 * p.values, np.r_[np.zeros(10), -0.3, -1.5, np.zeros(11)]]))
    np.testing.assert_allclose(metrics.leakage(q, p.t[10]), [0.1, 0.1, 0.2], rtol=1e-12)
    with pytest.raises(ValueError, match="outside the output record"):
        metrics.leakage(p, 1.0)


def test_batched_fit_gives_one_value_per_trial():
    x = gaussian()
    r = x.dilate(2.0)
    y = r.with_values(np.stack([r.values, 2 * r.values, -r.values]))
    fit = metrics.fit_reference(y, x, 2.0)
    np.testing.assert_allclose(fit.gain, [1, 2, -1], rtol=1e-9)
    assert fit.nrmse.shape == (3,)
