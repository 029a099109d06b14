"""Pulse model: constructors, measurements, operations and bad input."""

import math

import numpy as np
import pytest

from timescale import Pulse


def gaussian(sigma=100e-12, rate=100e9):
    return Pulse.gaussian(sigma=sigma, center=2e-9, duration=4e-9, rate=rate)


def test_gabor_uncertainty_of_gaussian():
    # Gabor 1946: a Gaussian reaches the minimum Δt·Δf = 1/(4π) with RMS (second-moment) widths.
    p = gaussian()
    assert p.rms_width() * p.rms_bandwidth() == pytest.approx(1 / (4 * math.pi), rel=1e-9)
    # |x|² of a Gaussian of standard deviation σ has standard deviation σ/√2 (derived).
    assert p.rms_width() == pytest.approx(100e-12 / math.sqrt(2), rel=1e-9)


def test_occupied_bandwidth_of_gaussian():
    # ITU-R SM.328 occupied-bandwidth definition (0.5 % beyond each limit of the two-sided
    # spectrum). |X(f)|² ∝ exp(−4π²σ²f²), a normal law of s = 1/(2√2·πσ); the 99 % band is
    # ±2.5758·s = ±2.899 GHz for σ = 100 ps (value derived).
    p = gaussian()
    assert p.occupied_bandwidth() == pytest.approx(2.899e9, rel=2e-4)
    s = 1 / (2 * math.sqrt(2) * math.pi * 100e-12)
    assert p.occupied_bandwidth(0.9) == pytest.approx(1.6449 * s, rel=1e-3)  # normal quantile


def test_occupied_band_of_modulated_pulse_is_centered_on_carrier():
    p = Pulse.modulated(carrier=6e9, sigma=200e-12, center=2e-9, duration=4e-9, rate=100e9)
    lo, hi = p.occupied_band()
    s = 1 / (2 * math.sqrt(2) * math.pi * 200e-12)  # envelope spectrum spread (derived)
    assert (lo + hi) / 2 == pytest.approx(6e9, rel=1e-3)
    assert hi - lo == pytest.approx(2 * 2.5758 * s, rel=5e-3)


def test_fwhm_of_gaussian():
    # FWHM = 2√(2 ln 2)·σ (standard result)
    p = Pulse.gaussian(fwhm=300e-12, center=1e-9, duration=2e-9, rate=200e9)
    assert p.fwhm() == pytest.approx(300e-12, rel=1e-3)
    assert p.peak() == pytest.approx(1.0)


def test_energy_of_gaussian():
    # ∫exp(−t²/σ²)dt = √π·σ (standard integral)
    assert gaussian().energy() == pytest.approx(math.sqrt(math.pi) * 100e-12, rel=1e-9)


def test_shapes_have_their_defining_features():
    kw = dict(sigma=100e-12, center=1e-9, duration=2e-9, rate=200e9)
    mono = Pulse.monocycle(**kw)
    # first derivative of a Gaussian: extrema at c ± σ, odd symmetry, zero mean
    assert mono.t[np.argmax(mono.values)] == pytest.approx(1.1e-9, abs=mono.dt)
    assert mono.t[np.argmin(mono.values)] == pytest.approx(0.9e-9, abs=mono.dt)
    assert abs(mono.values.sum()) < 1e-9 * np.abs(mono.values).sum()
    dbl = Pulse.doublet(**kw)
    # second derivative: zero crossings at c ± σ
    zc = dbl.t[np.flatnonzero(np.diff(np.sign(dbl.values)))]
    assert zc[0] == pytest.approx(0.9e-9, abs=dbl.dt) and zc[1] == pytest.approx(1.1e-9, abs=dbl.dt)
    rc = Pulse.raised_cosine(width=400e-12, center=1e-9, duration=2e-9, rate=200e9)
    assert rc.fwhm() == pytest.approx(200e-12, rel=1e-2)  # Hann pulse: FWHM = width/2
    tr = Pulse.trapezoid(rise=50e-12, flat=200e-12, start=0.5e-9, duration=2e-9, rate=200e9)
    assert tr.fwhm() == pytest.approx(250e-12, rel=1e-2)  # flat + half of each edge


def test_train_repeats_copies():
    p = Pulse.gaussian(sigma=50e-12, center=0.5e-9, duration=1e-9, rate=100e9)
    tr = p.train(period=1e-9, count=3)
    assert tr.n == p.n + 2 * 100
    assert tr.energy() == pytest.approx(3 * p.energy(), rel=1e-6)
    with pytest.raises(ValueError, match="period"):
        p.train(period=1.005e-9, count=2)


def test_resample_is_band_limited_exact():
    p = gaussian(rate=50e9)
    q = p.resample(37e9)
    ref = np.exp(-0.5 * ((q.t - 2e-9) / 100e-12) ** 2)
    assert np.max(np.abs(q.values - ref)) < 1e-12


def test_operations_return_new_pulses():
    p = gaussian()
    assert p.shift(1e-9).t0 == pytest.approx(1e-9) and p.t0 == 0.0
    padded = p.pad(before=1e-9, after=0.5e-9)
    assert padded.n == p.n + 150 and padded.t0 == pytest.approx(-1e-9)
    assert p.scale(2).peak() == pytest.approx(2.0)
    d = p.dilate(4.0)
    assert d.rms_width() == pytest.approx(4 * p.rms_width())
    with pytest.raises(ValueError):
        p.values[0] = 1.0  # read-only


def test_csv_round_trip(tmp_path):
    p = gaussian(rate=20e9)
    f = tmp_path / "pulse.csv"
    f.write_text("time_s,volts\n" + "\n".join(f"{float(t)!r},{float(v)!r}" for t, v in zip(p.t, p.values)))
    q = Pulse.from_csv(f, time_column="time_s", value_column="volts")
    assert q.rate == pytest.approx(20e9, rel=1e-9)
    np.testing.assert_array_equal(q.values, p.values)


@pytest.mark.parametrize(
    "kwargs, match",
    [
        (dict(values=[0.0, np.nan, 1.0], rate=1e9), "NaN/inf"),
        (dict(values=[0.0, np.inf, 1.0], rate=1e9), "NaN/inf"),
        (dict(values=[1.0], rate=1e9), "at least 2 samples"),
        (dict(values=[], rate=1e9), "at least 2 samples"),
        (dict(values=[0.0, 1.0], rate=0.0), "rate must be > 0"),
        (dict(values=[0.0, 1.0], rate=float("nan")), "rate must be finite"),
        (dict(values=[0.0, 1.0], rate=-1e9), "rate must be > 0"),
    ],
)
def test_bad_samples_are_refused(kwargs, match):
    with pytest.raises(ValueError, match=match):
        Pulse.from_samples(**kwargs)


def test_non_uniform_grid_is_refused():
    t = np.array([0.0, 1e-12, 2e-12, 3.5e-12])
    with pytest.raises(ValueError, match="not a uniform grid"):
        Pulse.from_times(t, np.zeros(4))


def test_gaussian_needs_exactly_one_width():
    with pytest.raises(ValueError, match="exactly one of fwhm= or sigma="):
        Pulse.gaussian(center=0, duration=1e-9, rate=1e11)
    with pytest.raises(ValueError, match="fwhm must be > 0"):
        Pulse.gaussian(fwhm=-1e-12, center=0, duration=1e-9, rate=1e11)
