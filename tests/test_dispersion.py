"""Checks of timescale.dispersion against published formulas, scipy and scikit-rf."""

import math
import os
import sys

import numpy as np
import pytest
from scipy import signal as ss

from timescale.numerics import dispersion as dsp

PS = 1e-12
PS2 = 1e-24


def _rms_width(wave):
    p = np.abs(wave.values) ** 2
    tb = np.sum(p * wave.t) / np.sum(p)
    return math.sqrt(np.sum(p * (wave.t - tb) ** 2) / np.sum(p))


def _gaussian(t0, chirp, rate=2e12, span=400e-12):
    t = np.arange(-span / 2, span / 2, 1 / rate)
    # Agrawal writes A = exp(-(1 + iC)T²/(2T0²)) with e^{-iωt}; in our e^{+jωt} convention the
    # same physical pulse is its complex conjugate.
    return dsp.Wave(np.exp(-(1 - 1j * chirp) * t * t / (2 * t0 * t0)), rate, t[0], carrier=0.0)


def test_gaussian_broadening_unchirped():
    # Agrawal, Nonlinear Fiber Optics, ch. 3: T1/T0 = sqrt(1 + (β2z/T0²)²); T0 = 10 ps,
    # Φ = β2z = 300 ps² ⇒ sqrt(10) = 3.1623
    x = _gaussian(10 * PS, 0.0)
    y = dsp.disperse(x, 300 * PS2)
    assert _rms_width(y) / _rms_width(x) == pytest.approx(3.1623, abs=1e-3)


@pytest.mark.parametrize("chirp", [2.0, -2.0])
def test_gaussian_broadening_chirped(chirp):
    # Agrawal, ch. 3: T1/T0 = sqrt((1 + Cβ2z/T0²)² + (β2z/T0²)²) (C = +2: 7.6158, C = -2: 5.8310)
    t0, phi = 10 * PS, 300 * PS2
    x = _gaussian(t0, chirp)
    y = dsp.disperse(x, phi)
    expect = math.sqrt((1 + chirp * phi / t0 ** 2) ** 2 + (phi / t0 ** 2) ** 2)
    assert _rms_width(y) / _rms_width(x) == pytest.approx(expect, rel=1e-4)


def test_disperse_pads_instead_of_wrapping():
    # a pulse at the very edge of a short record, dispersed far beyond the record: the output
    # must grow to hold it (all-pass ⇒ energy conserved, Parseval) and be empty at both ends
    rate = 2e12
    t = np.arange(0, 60e-12, 1 / rate)
    x = dsp.Wave(np.exp(-((t - 5e-12) / 2e-12) ** 2), rate, 0.0, carrier=0.0)
    y = dsp.disperse(x, 400 * PS2)
    assert y.n > 5 * x.n
    assert y.energy() == pytest.approx(x.energy(), rel=1e-9)
    edge = np.abs(y.values[[0, -1]]).max() / np.abs(y.values).max()
    assert edge < 1e-4


def test_fft_sizes_are_fast_lengths():
    import scipy.fft as sfft

    x = dsp.Wave(np.ones(1001, complex), 1e12, 0.0, carrier=0.0)
    y = dsp.disperse(x, 50 * PS2)
    assert sfft.next_fast_len(y.n) == y.n


def test_temporal_imaging_kolner():
    # Kolner & Nazarathy, Opt. Lett. 14 (1989); Kolner, IEEE JQE 30 (1994): 1/Φ1 + 1/Φ2 = 1/Φf,
    # M = −Φ2/Φ1. Φ1 = 50 ps², Φ2 = 500 ps² ⇒ Φf = 45.45 ps², M = −10.
    phi1, phi2 = 50 * PS2, 500 * PS2
    phif = 1 / (1 / phi1 + 1 / phi2)
    assert phif / PS2 == pytest.approx(45.45, abs=0.005)
    m = -phi2 / phi1
    rate = 4e12
    t = np.arange(-150e-12, 150e-12, 1 / rate)
    w = 2e-12
    big, small = -10e-12, 15e-12  # two unequal pulses
    v = np.exp(-((t - big) / w) ** 2 / 2) + 0.5 * np.exp(-((t - small) / w) ** 2 / 2)
    x = dsp.Wave(v, rate, t[0], carrier=0.0)
    y = dsp.disperse(dsp.time_lens(dsp.disperse(x, phi1), phif), phi2)
    inten = np.abs(y.values) ** 2
    assert y.energy() == pytest.approx(x.energy(), rel=1e-6)
    assert _rms_width(y) / _rms_width(x) == pytest.approx(abs(m), rel=1e-3)
    assert inten.max() / np.max(np.abs(v) ** 2) == pytest.approx(1 / abs(m), rel=1e-3)
    # reversed: the big pulse (earlier at the input) comes out later, at M·t
    assert y.t[np.argmax(inten)] == pytest.approx(m * big, abs=1 / rate)
    k_small = np.argmin(np.abs(y.t - m * small))
    assert inten[k_small] / inten.max() == pytest.approx(0.25, rel=1e-2)


def test_time_stretch_penalty_follows_cosine():
    # dispersion time stretch (Han & Jalali, J. Lightwave Technol. 2003, from memory): a tone
    # at ω on a chirp of GDD Φ1 through Φ2 comes out at ω/M, M = 1 + Φ2/Φ1, with amplitude
    # ∝ cos(Φ2ω²/(2M)); first null where Φ2ω²/(2M) = π/2.
    phi1, phi2 = 100 * PS2, 900 * PS2
    m = 1 + phi2 / phi1
    null = dsp.penalty_null(phi2, m)
    assert null == pytest.approx(math.sqrt(math.pi * m / phi2) / (2 * math.pi))
    rate = 6e12
    t = np.arange(-450e-12, 450e-12, 1 / rate)
    gate = np.exp(-(t / 350e-12) ** 8)
    chirp = dsp.linear_chirp(t, dsp.chirp_rate_from_gdd(phi1))
    bias, a = 1.0, 1e-3
    x0 = dsp.Wave(gate * bias * chirp, rate, t[0], carrier=0.0)
    y0 = dsp.disperse(x0, phi2)
    e0 = dsp.envelope(y0)

    def amplitude(f):
        x = dsp.Wave(gate * (bias + a * np.cos(2 * math.pi * f * t)) * chirp, rate, t[0], carrier=0.0)
        d = dsp.envelope(dsp.disperse(x, phi2)) - e0
        core = np.abs(y0.t) < m * 200e-12
        tt = y0.t[core]
        # least-squares fit of the stretched tone at f/M; carrier envelope there is 1/√M
        basis = np.stack([np.cos(2 * math.pi * f / m * tt), np.sin(2 * math.pi * f / m * tt)], axis=1)
        c, *_ = np.linalg.lstsq(basis, d[core], rcond=None)
        return math.hypot(*c) * math.sqrt(m) / a

    for f in (10e9, 20e9, 25e9):
        assert amplitude(f) == pytest.approx(abs(dsp.dispersion_penalty(f, phi2, m)), abs=0.02)
    freqs = null * np.array([0.9, 1.0, 1.1])
    amps = [amplitude(f) for f in freqs]
    assert amps[1] < 0.02 and amps[0] > 0.1 and amps[2] > 0.1


def test_first_order_allpass_delay():
    # standard result: (a − s)/(a + s) has τ(0) = 2/a; a = 2π·1 GHz ⇒ 318.3 ps
    a = 2 * math.pi * 1e9
    assert dsp.allpass1_delay(a, 0.0) / PS == pytest.approx(318.31, abs=0.01)
    line = dsp.AllpassLine(first=(a,))
    w = np.linspace(0, 4 * a, 4001)
    b, den = line.polynomials()
    _, h = ss.freqs(b, den, worN=w)  # scipy's own evaluation of the rational response
    assert np.allclose(dsp.group_delay_of(w, h)[1:-1], line.group_delay(w)[1:-1], rtol=1e-4)


def test_second_order_allpass_delay():
    # standard result: τ(ω0) = 4Q/ω0; 5 GHz, Q = 2 ⇒ 254.65 ps
    w0 = 2 * math.pi * 5e9
    assert dsp.allpass2_delay(w0, 2.0, w0) / PS == pytest.approx(254.65, abs=0.01)
    line = dsp.AllpassLine(second=((w0, 2.0),))
    w = np.linspace(0.1 * w0, 3 * w0, 4001)
    b, den = line.polynomials()
    _, h = ss.freqs(b, den, worN=w)
    assert np.allclose(np.abs(h), 1.0, atol=1e-12)  # all-pass
    assert np.allclose(dsp.group_delay_of(w, h)[1:-1], line.group_delay(w)[1:-1], rtol=1e-4)
    assert np.allclose(np.angle(line.response(w)), np.angle(h), atol=1e-9)


def test_allpass_cascade_fits_linear_delay():
    # the fitted cascade, evaluated independently by scipy.signal.freqs, has the requested slope
    # and the ripple the design reports
    gdd, lo, hi = 1e-21, 15e9, 25e9
    fit = dsp.design_allpass(gdd, lo, hi)
    w = 2 * math.pi * np.linspace(lo, hi, 2001)
    b, den = fit.line.polynomials()
    _, h = ss.freqs(b, den, worN=w)
    tau = dsp.group_delay_of(w, h)[1:-1]
    g, d, _, rms = dsp.fit_gdd(w[1:-1] / (2 * math.pi), tau, center=0.5 * (lo + hi))
    assert g == pytest.approx(gdd, rel=0.01)
    assert rms == pytest.approx(fit.ripple_rms, rel=0.2, abs=1e-14)
    assert fit.ripple_rms < 0.01 * gdd * (w[-1] - w[0])


def _bridged_t_s21(w, z1, z2, z3, r0):
    """S21 of a symmetric bridged-T (series arms z1, shunt z2 from their junction, bridge z3)
    between r0 terminations, by nodal analysis with the middle node eliminated."""
    y1, y2, y3 = 1 / z1, 1 / z2, 1 / z3
    y33 = 2 * y1 + y2
    y11 = y1 + y3 - y1 * y1 / y33
    y21 = -y3 - y1 * y1 / y33
    return -2 * y21 * r0 / ((1 + y11 * r0) ** 2 - (y21 * r0) ** 2)


@pytest.mark.parametrize("q", [1.0, 1.7, 6.0, 40.0])
def test_bridged_t_section_is_the_second_order_allpass(q):
    # Bartlett's bisection theorem (from memory): a symmetric bridged-T with series arms Z1,
    # bridge Z3 and shunt Z2 is the lattice Z_a = Z1 ∥ Z3/2, Z_b = Z1 + 2·Z2; the elements the
    # bill uses (series C_a, bridge 2·L_a, shunt L_b/2 + C2) are checked here by plain nodal
    # analysis against H(s) = (s² − (ω0/Q)s + ω0²)/(s² + (ω0/Q)s + ω0²) (standard result)
    r0, w0 = 25.0, 2 * math.pi * 6e9
    w = 2 * math.pi * np.linspace(0.2e9, 20e9, 3001)
    s = 1j * w
    la, ca, lb, cb = dsp.lattice_arms(w0, q, r0)
    assert la * ca == pytest.approx(1 / w0 ** 2) and lb * cb == pytest.approx(1 / w0 ** 2)
    assert (la / ca) * (lb / cb) == pytest.approx(r0 ** 4)  # Z_a·Z_b = R0² (constant resistance)
    el = dsp.allpass_elements([w0], [q], r0)
    assert el.bridged == 1 and el.lattice == 0
    c_series = el.capacitors[0]
    l_bridge, l_shunt = el.inductors
    c_shunt = el.capacitors[2] if el.capacitors.size > 2 else math.inf  # Q = 1: the shunt C is a wire
    assert c_series == pytest.approx(ca) and l_bridge == pytest.approx(2 * la) and l_shunt == pytest.approx(lb / 2)
    z1 = 1 / (s * c_series)
    z2 = s * l_shunt + (1 / (s * c_shunt) if math.isfinite(c_shunt) else 0.0)
    z3 = s * l_bridge
    h = _bridged_t_s21(w, z1, z2, z3, r0)
    want = (s * s - (w0 / q) * s + w0 * w0) / (s * s + (w0 / q) * s + w0 * w0)
    assert np.max(np.abs(h - want)) < 1e-9
    # and its group delay (central differences on this grid: a per cent at the sharpest peak)
    tau = dsp.group_delay_of(w, h)[1:-1]
    assert np.allclose(tau, dsp.allpass2_delay(w0, q, w[1:-1]), rtol=1e-2, atol=1e-15)


def test_low_q_sections_are_billed_as_lattice():
    # below Q = 1 the bridged-T's shunt capacitor 2/(R0ω0(Q − 1/Q)) would be negative: the
    # section is a balanced lattice, two of each arm (four spirals, four capacitors)
    el = dsp.allpass_elements([2e10, 2e10], [0.7, 3.0], 50.0)
    assert (el.bridged, el.lattice) == (1, 1)
    assert el.inductors.size == 2 + 4 and el.capacitors.size == 3 + 4
    assert np.all(el.inductors > 0) and np.all(el.capacitors > 0)


@pytest.mark.ngspice
@pytest.mark.skipif(__import__("shutil").which("ngspice") is None, reason="the ngspice binary is not installed")
def test_bridged_t_cascade_against_ngspice(tmp_path):
    # independent solver: three bridged-T sections of a fitted cascade as an ngspice netlist
    # (AC analysis, 50 Ω-class terminations); the group delay of v(out)/v(in) against the
    # cascade's closed-form delay Σ τ_k (standard result)
    import subprocess

    fit = dsp.design_allpass(2e-20, 4e9, 8e9)  # three sections, Q 1.9 to 5.3
    r0 = 20.0
    el = dsp.allpass_elements([w for w, _ in fit.line.second], [q for _, q in fit.line.second], r0)
    assert el.bridged == 3
    lines = ["* bridged-T all-pass cascade", "vs src 0 ac 2", f"rs src n0 {r0}"]
    for k, (w0, q) in enumerate(fit.line.second):
        la, ca, lb, _ = dsp.lattice_arms(w0, q, r0)
        c2 = 2 / (r0 * w0 * (q - 1 / q))
        a, b, m = f"n{k}", f"n{k + 1}", f"m{k}"
        lines += [f"c{k}a {a} {m} {ca:.12e}", f"c{k}b {m} {b} {ca:.12e}", f"l{k}br {a} {b} {2 * la:.12e}",
                  f"l{k}sh {m} s{k} {lb / 2:.12e}", f"c{k}sh s{k} 0 {c2:.12e}",
                  f"r{k}dc s{k} 0 1e12"]  # a DC path for the capacitor-bound nodes, nil at GHz
    lines += [f"rl n3 0 {r0}", ".control", "ac lin 801 3e9 9e9",
              f"wrdata {tmp_path / 'ac.txt'} v(n3) v(n0)", "quit", ".endc", ".end"]
    (tmp_path / "ap.cir").write_text("\n".join(lines) + "\n")
    subprocess.run(["ngspice", "-b", str(tmp_path / "ap.cir")], cwd=tmp_path, check=True,
                   capture_output=True, timeout=120)
    data = np.loadtxt(tmp_path / "ac.txt")
    f = data[:, 0]
    h = (data[:, 1] + 1j * data[:, 2]) / (data[:, 4] + 1j * data[:, 5])
    w = 2 * math.pi * f
    assert np.allclose(np.abs(h), 1.0, atol=1e-6)  # matched all-pass: |v_out/v_in| = 1
    tau = dsp.group_delay_of(w, h)[1:-1]
    want = fit.line.group_delay(w[1:-1])
    assert np.max(np.abs(tau / want - 1)) < 1e-3


def test_placement_holds_the_phase_of_the_band():
    # each second-order section carries 2π of phase (the area under its group delay), so the
    # n sections placed for a band hold at least ∫τ dω of the wanted delay τ0 + Φ(ω − ω_c) over
    # it (standard all-pass result); the count grows with the delay-bandwidth product
    for gdd, lo, hi in ((1e-21, 15e9, 25e9), (7e-20, 1.4e9, 9.8e9), (-2e-20, 2e9, 6e9)):
        w0, q, we, target = dsp.allpass_placement(gdd, lo, hi)
        band = (we >= 2 * math.pi * lo) & (we <= 2 * math.pi * hi)
        assert 2 * math.pi * w0.size >= np.trapezoid(target[band], we[band])
        dbp = abs(gdd) * 2 * math.pi * (hi - lo) ** 2
        assert w0.size >= 0.5 * dbp  # the delay must stay ≥ 0: ∫τ dω ≥ (spread/2)·Δω
        assert np.all(np.diff(w0) > 0) and np.all(q > 0)


def test_allpass_refuses_beyond_max_sections():
    with pytest.raises(ValueError, match="max_sections"):
        dsp.design_allpass(5e-20, 10e9, 60e9, max_sections=10)


def test_quadratic_line_group_delay_and_phase_agree():
    line = dsp.QuadraticLine(gdd=200 * PS2, center=20e9, delay=1e-9, ripple=2 * PS, ripple_period=1e9)
    w = 2 * math.pi * np.linspace(15e9, 25e9, 20001)
    num = dsp.group_delay_of(w, line.response(w))[1:-1]
    assert np.allclose(num, line.group_delay(w)[1:-1], rtol=0, atol=1e-15)


def test_band_limited_loss_per_delay():
    line = dsp.BandLimitedLine(gdd=100 * PS2, center=20e9, delay=1e-9, bandwidth=4e9, loss=2e9)
    w = np.array([2 * math.pi * 20e9])
    # 2 dB/ns at 1 ns of delay, centre of the band (edge factor 1): 2 dB
    assert -20 * math.log10(abs(line.response(w)[0])) == pytest.approx(2.0, rel=1e-9)
    # Butterworth edge: −3 dB at f_c ± B/2 on top of the delay loss
    we = np.array([2 * math.pi * 22e9])
    loss_edge = -20 * math.log10(abs(line.response(we)[0]))
    tau = line.group_delay(we)[0]
    assert loss_edge - 2e9 * tau == pytest.approx(10 * math.log10(2), rel=1e-6)


def test_choose_path():
    assert dsp.choose_path(10e9, 2e9)[0] == "complex baseband"
    assert dsp.choose_path(3e9, 2e9)[0] == "real passband"


def test_real_passband_matches_envelope():
    # the same quadratic line on a real band-pass record and on its complex envelope gives the
    # same envelope (the envelope path is exact when the band is far from DC)
    rate, fc = 400e9, 40e9
    t = np.arange(0, 2e-9, 1 / rate)
    env = np.exp(-((t - 0.5e-9) / 40e-12) ** 2)
    line = dsp.QuadraticLine(gdd=300 * PS2, center=fc, delay=0.3e-9)
    yr = dsp.apply_line(dsp.Wave(env * np.cos(2 * math.pi * fc * t), rate, 0.0), line)
    ye = dsp.apply_line(dsp.Wave(env.astype(complex), rate, 0.0, carrier=fc), line)
    er = dsp.envelope(yr)
    ee = np.interp(yr.t, ye.t, np.abs(ye.values))
    assert np.max(np.abs(er - ee)) < 1e-3 * ee.max()


def test_square_law_lowpass_of_constant_envelope():
    # LP(|v|²/2) of a constant envelope A is A²/2 (the low-pass has unit DC gain)
    w = dsp.Wave(np.full(4096, 2.0 + 0j), 1e11, 0.0, carrier=10e9)
    assert np.allclose(dsp.square_law(w, 1e9), 2.0, rtol=1e-9)


def _skrf_file(name):
    skrf = pytest.importorskip("skrf")
    return skrf, os.path.join(os.path.dirname(skrf.data.__file__), name)


def test_touchstone_group_delay_matches_scikit_rf():
    # a two-port shipped with scikit-rf: our group delay equals scikit-rf's Network.group_delay
    skrf, path = _skrf_file("ntwk1.s2p")
    line = dsp.read_touchstone(path)
    ref = skrf.Network(path).group_delay[:, 1, 0].real
    assert np.allclose(line.group_delay_samples(), ref, rtol=1e-9, atol=1e-18)


def test_touchstone_waveguide_dispersion_sign():
    # a hollow waveguide above cut-off has group delay falling with frequency (common
    # practice, no source): the fitted GDD is negative
    _, path = _skrf_file("wr2p2,line.s2p")
    line = dsp.read_touchstone(path)
    gdd, delay, fc, rms = dsp.fit_gdd(line.frequency, line.group_delay_samples())
    assert gdd < 0 and delay > 0


def test_touchstone_dc_extrapolation_and_causality():
    _, path = _skrf_file("ntwk1.s2p")
    line = dsp.read_touchstone(path)
    ext = line.with_dc()
    assert ext.frequency[0] == 0.0
    assert abs(ext.s21[0].imag) < 1e-12 * max(abs(ext.s21[0]), 1.0)  # real at DC
    # measured data untouched
    assert np.allclose(ext.response(2 * math.pi * line.frequency), line.s21)
    c = line.causality()
    assert 0.0 <= c.precursor <= 1.0 and c.causal == (c.precursor <= c.threshold)


@pytest.mark.parametrize("delay, causal", [(5e-9, True), (-5e-9, False)])
def test_causality_check_on_a_known_delay(delay, causal):
    # H = exp(−(f/5 GHz)²)·exp(−j2πfτ): a Gaussian impulse response centred at τ (Fourier
    # shift theorem). τ = +5 ns is causal (no energy before t = 0: precursor ~ 0); τ = −5 ns puts
    # all of it before t = 0 (precursor ~ 1). Grid 10 MHz: a 100 ns window, ±50 ns.
    f = np.arange(10e6, 20e9, 10e6)
    line = dsp.SampledLine(f, np.exp(-(f / 5e9) ** 2) * np.exp(-2j * math.pi * f * delay))
    c = line.causality()
    assert c.causal is causal
    assert c.precursor == pytest.approx(0.0 if causal else 1.0, abs=1e-6)


def test_touchstone_missing_scikit_rf_message(monkeypatch):
    monkeypatch.setitem(sys.modules, "skrf", None)
    with pytest.raises(ImportError, match="pip install scikit-rf"):
        dsp.read_touchstone("whatever.s2p")


def test_bad_arguments_name_themselves():
    with pytest.raises(ValueError, match="gdd"):
        dsp.chirp_rate_from_gdd(0.0)
    with pytest.raises(TypeError, match="complex envelope"):
        dsp.disperse(dsp.Wave(np.zeros(8), 1e9), 1e-24)
    with pytest.raises(ValueError, match="f_hi"):
        dsp.design_allpass(1e-21, 20e9, 10e9)


def test_analytic_signal_of_a_tone_burst():
    # Hilbert pair cos → sin (standard result): the analytic signal of a slowly gated cosine is
    # the gate times e^{jωt}, so the ideal envelope detector returns the gate; checked on a
    # length that is not a fast FFT length (the core pads, then trims)
    from timescale.data.signal import analytic

    rate, f0 = 100e9, 10e9
    t = np.arange(5003) / rate
    gate = np.exp(-((t - t.mean()) / 5e-9) ** 2)
    z = analytic(gate * np.cos(2 * math.pi * f0 * t))
    assert z.shape == t.shape
    assert np.allclose(z, gate * np.exp(2j * math.pi * f0 * t), atol=1e-6)
    assert np.allclose(dsp.envelope(dsp.Wave(gate * np.cos(2 * math.pi * f0 * t), rate)), gate, atol=1e-6)
