"""The ``analog-memory`` example distribution (docs/examples/analog-memory): physics checks.

CI installs it with ``pip install ./docs/examples/analog-memory``; without it this module fails
to import with that instruction (a silent skip would hide a missing install step).
"""

import math
import warnings

import numpy as np
import pytest
from scipy import integrate, signal as ss, special

import timescale as ts
from timescale.numerics import costs

try:
    import timescale_analog_memory  # noqa: F401
except ImportError as exc:  # pragma: no cover
    raise ImportError("run `pip install ./docs/examples/analog-memory` first") from exc
from timescale_analog_memory.method import (  # noqa: E402
    AnalogMemory,
    readout_filter,
    readout_settling_error,
    sample_band_limited,
)

METHOD = AnalogMemory()


def gaussian(center=0.8e-9, sigma=100e-12, duration=4e-9, rate=40e9):
    return ts.Pulse.gaussian(sigma=sigma, center=center, duration=duration, rate=rate)


def run(pulse, factor, trials=1, seed=0, **params):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ts.TimescaleWarning)
        return ts.stretch(pulse, METHOD, factor, trials=trials, seed=seed, **params)


def test_conformance():
    from timescale.testing import check_method

    found = check_method(METHOD)
    assert found["identity_nrmse"] <= METHOD.identity_tolerance


def test_aperture_is_a_sinc_window():
    # A cell with aperture t_a holds (1/t_a)∫ x over [t−t_a/2, t+t_a/2]; checked against direct
    # numerical integration (scipy.integrate.quad) of a tone, which the periodic record holds
    # exactly (a whole number of cycles).
    rate, n = 40e9, 400
    f0 = 37 / (n / rate)  # 3.7 GHz, 37 whole cycles in the record
    t = np.arange(n) / rate
    tone = ts.Pulse(np.cos(2 * np.pi * f0 * t), rate)
    ta = 90e-12
    times = np.array([0.31e-9, 1.77e-9, 5.03e-9])
    got = sample_band_limited(tone, times, aperture=ta)
    want = [integrate.quad(lambda u: math.cos(2 * math.pi * f0 * u), tk - ta / 2, tk + ta / 2)[0] / ta
            for tk in times]
    np.testing.assert_allclose(got, want, atol=1e-9)
    # and the gain of that window is sinc(f·t_a) (standard aperture result)
    assert abs(np.max(np.abs(sample_band_limited(tone, np.linspace(0, 1e-9, 2001), aperture=ta)))
               - abs(np.sinc(f0 * ta))) < 1e-4


def test_first_order_readout_matches_one_pole_recurrence():
    # ZOH discretisation of ω_c/(s + ω_c) sampled at slot ends: y[k] = β·y[k−1] + (1−β)·v[k],
    # β = exp(−2π f_c T) (standard result for a first-order lag driven by a staircase).
    fr, fc = 10e6, 7e6
    b, a = readout_filter("first-order", fc, fr)
    v = np.random.default_rng(3).normal(size=50)
    got = ss.lfilter(b, a, v)
    beta = math.exp(-2 * math.pi * fc / fr)
    want = np.empty_like(v)
    prev = 0.0
    for k, vk in enumerate(v):
        prev = beta * prev + (1 - beta) * vk
        want[k] = prev
    np.testing.assert_allclose(got, want, rtol=1e-10, atol=1e-12)
    assert readout_settling_error("first-order", fc, fr) == pytest.approx(beta, rel=1e-9)


def test_butterworth_readout_matches_ode_solution_of_staircase():
    # Independent solver: scipy.integrate.solve_ivp (Runge-Kutta) on the analog Butterworth's
    # state equations, input held constant over each slot, read at the end of each slot.
    # (rates in units of the read rate keep the companion-form states well scaled for the solver)
    fr, fc, order = 1.0, 1.3, 3
    v = np.random.default_rng(5).normal(size=20)
    b, a = readout_filter("butterworth", fc, fr, order)
    got = ss.lfilter(b, a, v)
    A, B, C, D = ss.tf2ss(*ss.butter(order, 2 * math.pi * fc, analog=True))
    state = np.zeros(order)
    want = []
    for vk in v:
        sol = integrate.solve_ivp(lambda t, s: A @ s + B[:, 0] * vk, (0.0, 1.0 / fr), state,
                                  method="DOP853", rtol=1e-11, atol=1e-13)
        state = sol.y[:, -1]
        want.append(float(C[0] @ state + D[0, 0] * vk))
    np.testing.assert_allclose(got, want, atol=1e-7)


def test_ktc_noise_per_cell():
    # Cells sized for 300 µV have C = kT/v² (standard kT/C result) and carry that rms noise.
    x = gaussian()
    out = run(x, 4.0, trials=400, seed=11, noise=True, noise_target=300e-6)
    assert out.design.cell_capacitance == pytest.approx(costs.BOLTZMANN * 300.0 / 300e-6 ** 2, rel=1e-12)
    noise = out.pulse.values - out.clean.values
    # sample std of ~30 000 Gaussian draws: relative standard error 1/√(2N) ≈ 0.4 %
    assert np.std(noise) == pytest.approx(300e-6, rel=0.02)


def test_gain_mismatch_spread():
    x = gaussian()
    clean = run(x, 4.0).pulse.values[0]
    out = run(x, 4.0, trials=300, seed=2, gain_mismatch=0.02).pulse.values
    big = np.abs(clean) > 0.3 * np.max(np.abs(clean))
    ratio = out[:, big] / clean[big]
    # each cell's gain is 1 + N(0, 2 %) (the parameter's definition); the sample std of
    # ~2400 draws (8 busy cells × 300 trials) has relative standard error 1/√(2N) ≈ 1.4 %, so
    # 5 % is over 3 sigma (derived)
    assert np.std(ratio - 1) == pytest.approx(0.02, rel=0.05)
    assert abs(np.mean(ratio) - 1) < 0.002


def test_aperture_jitter_noise_follows_slope():
    # Jitter σ_t turns into voltage noise σ_t·|ẋ(t_k)| (first-order; Analog Devices MT-008).
    sigma, c = 100e-12, 0.8e-9
    x = gaussian(center=c, sigma=sigma)
    sj = 0.5e-12
    out = run(x, 2.0, trials=2000, seed=4, aperture_jitter=sj)
    d = out.design
    tk = d.window_start + np.arange(d.cells_used) / d.write_rate
    slope = -(tk - c) / sigma ** 2 * np.exp(-0.5 * ((tk - c) / sigma) ** 2)
    ideal = np.exp(-0.5 * ((tk - c) / sigma) ** 2)
    steep = np.abs(slope) > 0.5 * np.max(np.abs(slope))
    measured = np.std(out.pulse.values - ideal, axis=0)[steep]
    np.testing.assert_allclose(measured, sj * np.abs(slope[steep]), rtol=0.1)


def test_droop_of_each_cell():
    # An RC leak multiplies each held voltage by exp(−h/τ), h = hold time (standard result).
    x = gaussian()
    tau = 20e-6
    a = 500.0
    ideal = run(x, a).pulse.values[0]
    out = run(x, a, droop_time=tau)
    d = out.design
    m = d.cells_used
    k = np.arange(m)
    hold = (m - k) / d.write_rate + (k + 1) / d.read_rate  # write of k to the end of read slot k
    np.testing.assert_allclose(out.pulse.values[0], ideal * np.exp(-hold / tau), rtol=1e-12, atol=1e-15)
    assert out.metrics["max_droop"].value == pytest.approx(1 - math.exp(-hold[-1] / tau), rel=1e-12)


def test_truncated_record_is_reported_honestly():
    # Gaussian x of std σ: x² is a Gaussian of std σ/√2, so the energy before T is
    # Φ((T − c)·√2/σ) (normal CDF). With the ideal memory the output is the reference cut at T;
    # at the true latency its best-gain NRMSE is √((1 − f)/f) for a kept energy fraction f
    # (least squares), an upper bound for the fitted NRMSE (the fit may move the latency).
    sigma, c = 100e-12, 1.0e-9
    x = gaussian(center=c, sigma=sigma)
    fw = 20e9
    with pytest.warns(ts.DesignWarning, match="truncated"):
        out = ts.stretch(x, METHOD, 10.0, cells=22, write_rate=fw)
    end = x.t0 + 22 / fw - 0.5 / fw  # the window ends half a cell after the last instant
    f_want = 0.5 * (1 + special.erf((end - c) / sigma))
    f_got = out.metrics["record_energy_fraction"].value
    assert f_got == pytest.approx(f_want, abs=0.01)
    assert 0.5 < f_got < 0.99
    errors = []
    for cells in (22, 24, 40):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ts.DesignWarning)
            # a card whose clock ceiling (0.3·f_T = 45 GHz) admits the 20 GS/s write rate
            cube = ts.compare(x, [METHOD], [10.0], cells=cells, write_rate=fw, technology=ts.preset("example-fast"))
        cell = cube.isel(method_name=0, pulse=0, factor=0)
        f = float(cell.record_energy_fraction)
        assert str(cell.status.values) == ("warned" if 1 - f > 1e-4 else "ok")
        assert float(cell.nrmse) <= 1.05 * math.sqrt((1 - f) / f) + 1e-6
        errors.append(float(cell.nrmse))
    # the metric sees the loss: a shorter record, a larger error
    assert errors[0] > 0.1 > errors[1] > 1e-3 > errors[2]


@pytest.mark.parametrize("factor", [100.0, 1000.0])
def test_large_factors_are_exact_when_ideal(factor):
    x = gaussian()
    out = run(x, factor)
    fitted = float(np.atleast_1d(ts.metrics.fitted_factor(out.pulse, x, factor, span=1.5))[0])
    assert fitted == pytest.approx(factor, rel=1e-4)
    assert out.design.read_rate == pytest.approx(out.design.write_rate / factor)


def test_bill_from_capacitor_density_and_switches():
    x = gaussian()
    tech = ts.preset("example-balanced")
    out = ts.stretch(x, METHOD, 10.0, technology=tech, cells=512, noise_target=64.36e-6)
    # kT/C: 64.36 µV at 300 K ⇔ 1 pF (standard result)
    assert out.design.cell_capacitance == pytest.approx(1e-12, rel=1e-3)
    caps = next(i for i in out.bill.items if i.name == "cell capacitors")
    # device areas times the card's layout overhead (wiring, bias, decoupling; common practice)
    assert caps.area == pytest.approx(512 * 1e-12 / tech.cap_density * tech.layout_overhead, rel=1e-3)
    assert out.bill.counts["switches"] == 1024
    sw = next(i for i in out.bill.items if i.name == "write and read switches")
    assert sw.area == pytest.approx(1024 * tech.switch_area * tech.layout_overhead)
    # halving the noise target quadruples the capacitance (C = kT/v²) and the capacitor area
    out2 = ts.stretch(x, METHOD, 10.0, technology=tech, cells=512, noise_target=32.18e-6)
    caps2 = next(i for i in out2.bill.items if i.name == "cell capacitors")
    assert caps2.area / caps.area == pytest.approx(4.0, rel=1e-9)


@pytest.mark.parametrize("name,value,match", [
    ("cells", 1, "cells"), ("aperture", -1e-12, "aperture"), ("window_start", 1.0, "window_start"),
    ("readout_bandwidth", 0.0, "readout_bandwidth"),
])
def test_bad_parameters_name_themselves(name, value, match):
    with pytest.raises(ValueError, match=match):
        ts.stretch(gaussian(), METHOD, 2.0, **{name: value})


def test_low_write_rate_warns_about_aliasing():
    with pytest.warns(ts.SamplingWarning, match="alias"):
        ts.stretch(gaussian(), METHOD, 2.0, write_rate=3e9)


def test_ktc_anchor_values():
    # kT/C (standard result): 1 pF at 300 K → 64.36 µV; 100 fF → 203.5 µV; 60 fF → 262.7 µV, the
    # "262" of the PSEC design notes ("A few numbers", printed as mV, it is µV; found)
    for c, v in ((1e-12, 64.36e-6), (100e-15, 203.5e-6), (60e-15, 262.7e-6)):
        assert costs.ktc_noise(c, 300.0) == pytest.approx(v, abs=0.05e-6)


def test_noise_reported_by_default_and_sized_to_the_target():
    # snr_target sets the cell: C = kT/v², v = peak/10^(snr/20) (kT/C, standard result); the
    # reported noise at the output peak is √(kT/C), so snr_db lands on the target
    x = gaussian()
    out = run(x, 4.0, snr_target=80.0)
    v = 1.0 / 10 ** (80.0 / 20)
    assert out.design.cell_capacitance == pytest.approx(costs.BOLTZMANN * 300.0 / v ** 2, rel=1e-9)
    assert float(out.metrics["noise_rms"].value) == pytest.approx(v, rel=1e-6)
    # the cells sample near, not at, the peak: the output peak is a little below the input's
    peak = float(np.max(np.abs(out.pulse.values[0])))
    assert float(out.metrics["snr_db"].value) == pytest.approx(20 * math.log10(peak / v), abs=1e-9)
    assert 79.5 < float(out.metrics["snr_db"].value) <= 80.0
    # a lenient target stops at the smallest cell drawn: more SNR than asked, finite
    loose = run(x, 4.0)
    assert loose.design.cell_capacitance == pytest.approx(10e-15)
    assert math.isfinite(float(loose.metrics["snr_db"].value)) and float(loose.metrics["snr_db"].value) > 40.0


def test_reported_noise_through_readout_and_droop_matches_monte_carlo():
    # independent kT/C samples drooped and summed by the readout filter: the reported rms at
    # the output peak against 400 simulated records
    x = gaussian()
    kw = {"noise": True, "noise_target": 1e-3, "readout": "butterworth", "droop_time": 20e-9}
    out = run(x, 4.0, trials=400, seed=2, **kw)
    k = int(np.argmax(np.abs(out.clean.values[0])))
    measured = float(np.std(out.pulse.values[:, k] - out.clean.values[0, k]))
    assert measured == pytest.approx(float(out.metrics["noise_rms"].value), rel=0.1)


def test_write_rate_limit_and_self_sized_rate():
    # the strobe clock against the card's ceiling carrier_max_fraction·f_T; the self-sized write
    # rate stays under it when twice the 99 % bandwidth allows
    tech = ts.preset("example-cmos130")
    x = gaussian()
    ceiling = tech.carrier_max_fraction * tech.f_t
    out = run(x, 4.0, technology=tech)
    assert out.design.write_rate <= ceiling and out.feasible
    fast = run(x, 4.0, technology=tech, write_rate=2 * ceiling)
    lim = {lm.name: lm for lm in fast.limits}["write rate (strobe clock)"]
    assert not fast.feasible and lim.margin == pytest.approx(0.5)
