"""The fixed-clock fidelity metric: one gain and one latency per cell, so timing jitter counts."""

import numpy as np
import pytest

import timescale as ts
from timescale.data.signal import derivative, resample_to

X = ts.Pulse.gaussian(sigma=100e-12, center=0.6e-9, duration=3e-9, rate=40e9, name="g")


def test_identical_trials_give_the_per_trial_fit():
    y = X.dilate(2.0).shift(0.3e-9).scale(0.7)
    batch = y.with_values(np.stack([y.values, y.values, y.values]))
    per = ts.metrics.fit_reference(batch, X, 2.0)
    fixed = ts.metrics.fit_fixed_clock(batch, X, 2.0)
    assert np.allclose(fixed.nrmse, per.nrmse, atol=1e-9) and np.all(fixed.nrmse < 1e-6)
    assert np.allclose(fixed.latency, per.latency) and np.allclose(fixed.gain, 0.7, rtol=1e-6)


def test_shifted_trials_count_their_shift_as_error():
    # a trial shifted by δ against a common reference is off by ẏ·δ to first order: its NRMSE
    # is |δ|·√(⟨ẏ²⟩/⟨y²⟩) (the jitter law of Analog Devices MT-008: SNR = ⟨x²⟩/(σ_t²⟨ẋ²⟩));
    # for a Gaussian of σ, √(⟨ẏ²⟩/⟨y²⟩) = 1/(√2 σ)
    y = X.dilate(2.0)
    shifts = np.array([-4e-12, 0.0, 4e-12])
    batch = y.with_values(np.stack([resample_to(y.shift(s), y.rate, t_start=y.t0, n=y.n).values
                                    for s in shifts]))
    per = ts.metrics.fit_reference(batch, X, 2.0)
    fixed = ts.metrics.nrmse_fixed(batch, X, 2.0)
    assert np.all(per.nrmse < 1e-6)
    sigma = 2.0 * 100e-12
    assert fixed[[0, 2]] == pytest.approx(4e-12 / (np.sqrt(2) * sigma), rel=0.02)
    assert fixed[1] < 1e-3


def test_switch_jitter_shows_in_the_fixed_clock_nrmse():
    # the example: 20 ps rms switch jitter at α = 3 keeps the per-trial NRMSE near the
    # design's 2 % while the error against one fixed latency is several per cent. A switch
    # late by δ shifts the stretched output by (α − 1)·δ (scaling theorem), so the fixed-clock
    # error is √(nrmse² + ((α − 1)σ_j)²·⟨ẏ²⟩/⟨y²⟩) (the jitter law above)
    cube = ts.compare(X, ["switched-bandwidth"], [3.0], trials=24, seed=5, jitter=20e-12)
    per = cube["nrmse"].values.ravel()
    fixed = cube["nrmse_fixed"].values.ravel()
    assert cube["nrmse_fixed"].attrs["units"] == "" and "fixed clock" in cube["nrmse_fixed"].attrs["long_name"]
    assert np.sqrt(np.mean(per ** 2)) < 0.03
    assert np.sqrt(np.mean(fixed ** 2)) > 0.03
    # the per-trial latencies spread by (α − 1)·20 ps (24 draws: within 30 %)
    shift = np.std(cube["latency"].values.ravel())
    assert shift == pytest.approx(2.0 * 20e-12, rel=0.3)
    ideal = X.dilate(3.0)
    ratio = np.sum(derivative(ideal.values, ideal.rate) ** 2) / np.sum(ideal.values ** 2)
    want = np.sqrt(np.mean(per ** 2) + shift ** 2 * ratio)
    assert np.sqrt(np.mean(fixed ** 2)) == pytest.approx(want, rel=0.15)
