"""Converter, oscillator, receiver and passive-line formulas of timescale.numerics.costs, each
against a published formula, a worked example or an independent integration (source named at
each check; "(from memory)" where the value is recalled)."""

import math

import numpy as np
import pytest
from scipy import integrate

from timescale.data.technology import preset
from timescale.numerics import costs

# ---- Walden and Schreier forms with ENOB ----------------------------------------------------


def test_walden_and_schreier_with_enob():
    # Walden, IEEE JSAC 17(4) 1999 (from memory): FOM_W = P/(2^ENOB·f_s), ENOB = (SNDR − 1.76)/6.02;
    # Schreier & Temes 2005 (from memory): FOM_S = SNDR + 10·log10(BW/P). 10 mW, 1 GS/s, 50 dB
    # → 38.70 fJ/step and 156.99 dB (derived in the project's anchor notes).
    assert costs.walden_fom(10e-3, 1e9, 50.0) == pytest.approx(38.70e-15, rel=2e-4)
    assert costs.schreier_fom(10e-3, 0.5e9, 50.0) == pytest.approx(156.99, abs=0.005)
    enob = costs.enob_from_sndr(50.0)
    assert enob == pytest.approx(8.0133, abs=1e-4)
    assert costs.sndr_from_enob(enob) == pytest.approx(50.0, abs=1e-12)
    assert costs.walden_power(costs.walden_fom(10e-3, 1e9, 50.0), enob, 1e9) == pytest.approx(10e-3)


# ---- the rate-dependent ADC frontier ---------------------------------------------------------

MURMANN_ASYM, MURMANN_FC = 186.72, 46.73e6  # B. Murmann, ADC survey, plots/foms_plot.json (found)


@pytest.mark.parametrize(("rate", "expected"), [(100e6, 182.99), (1e9, 173.41), (2e9, 170.41),
                                                (10e9, 163.42), (20e9, 160.41)])
def test_schreier_envelope_follows_murmanns_recipe(rate, expected):
    # Murmann's envelope: FOM_asym − 10·log10(√(1 + (f/f_c)²)) (plots/foms_plot.ipynb, "Compute
    # envelope"); the values are derived from his published asymptote and corner.
    assert costs.schreier_frontier(rate, MURMANN_ASYM, MURMANN_FC) == pytest.approx(expected, abs=0.01)


def test_walden_frontier_is_the_schreier_envelope_at_fixed_enob():
    # On the envelope P = BW·10^((SNDR − FOM_S)/10); 6-bit (SNDR 37.88 dB) at 2 GS/s → 0.056 mW
    # (derived from Murmann's values). The Walden-form frontier fitted at a rate far below the
    # corner gives the same power at every rate: one frontier, two forms; −10 dB/decade above.
    sndr = costs.sndr_from_enob(6.0)
    p_env = 1e9 * 10 ** ((sndr - costs.schreier_frontier(2e9, MURMANN_ASYM, MURMANN_FC)) / 10)
    assert p_env == pytest.approx(0.056e-3, rel=0.01)
    low = 1e3
    p_low = low / 2 * 10 ** ((sndr - costs.schreier_frontier(low, MURMANN_ASYM, MURMANN_FC)) / 10)
    fom_low = costs.walden_fom(p_low, low, sndr)
    for rate in np.logspace(6, 10.5, 10):
        p_walden = costs.adc_power(6.0, rate, fom_low, MURMANN_FC)
        p_schreier = rate / 2 * 10 ** ((sndr - costs.schreier_frontier(rate, MURMANN_ASYM, MURMANN_FC)) / 10)
        assert p_walden == pytest.approx(p_schreier, rel=1e-9)
    fom = [costs.schreier_fom(costs.adc_power(6.0, r, fom_low, MURMANN_FC), r / 2, sndr) for r in (1e10, 1e11)]
    assert fom[0] - fom[1] == pytest.approx(10.0, abs=0.01)


def test_card_frontiers_stay_below_the_survey_envelope():
    # The envelope is the best ever published (Murmann's survey), mostly from ≤ 28 nm nodes: no
    # card may beat it at any rate.
    sndr = costs.sndr_from_enob(6.0)
    for name in ("example-balanced", "example-fast", "example-coarse", "example-cmos130"):
        t = preset(name)
        for rate in np.logspace(7, 10.5, 15):
            p = costs.adc_power(6.0, rate, t.adc_fom, t.adc_corner_rate)
            assert costs.schreier_fom(p, rate / 2, sndr) < costs.schreier_frontier(rate, MURMANN_ASYM, MURMANN_FC), name


def test_cmos130_frontier_is_of_the_order_of_130nm_converters():
    # 130 nm-era GS/s points (from memory, ENOB taken as 5 to 6 bits, also from memory):
    # Chen & Brodersen, JSSC 41(12) 2006, 6-bit 600 MS/s, 5.3 mW; Sandner et al., JSSC 40(7) 2005,
    # 6-bit 1.2 GS/s flash, ≈160 mW. The card's frontier must sit within 10x of both (the card is
    # a generic 130 nm-class process, not either chip).
    t = preset("example-cmos130")
    for power, rate in ((5.3e-3, 600e6), (160e-3, 1.2e9)):
        card = costs.adc_frontier_fom(rate, t.adc_fom, t.adc_corner_rate)
        for enob in (5.0, 6.0):
            published = power / (2 ** enob * rate)
            assert 0.1 < card / published < 10, (rate, enob, card, published)


@pytest.mark.parametrize(("f", "sigma", "snr"), [(1e9, 100e-15, 64.04), (1e9, 60e-15, 68.47), (1e9, 50e-15, 70.06),
                                                 (5e9, 100e-15, 50.06), (10e9, 1e-12, 24.04)])
def test_aperture_jitter_lines(f, sigma, snr):
    # SNR = −20·log10(2π f σ_t): Kester, Analog Devices MT-008 (found); the jitter lines of Walden's
    # 1999 survey (from memory) have this form. MT-008 quotes 60 fs for the best sampling clocks.
    assert costs.aperture_jitter_snr_db(f, sigma) == pytest.approx(snr, abs=0.005)


def test_jitter_line_loses_one_bit_per_octave():
    # Walden 1999 (from memory): above a few MS/s the surveyed SNR-bits fall ≈1 bit per octave,
    # as aperture jitter predicts: doubling f costs 20·log10(2) = 6.02 dB = one bit.
    drop = costs.aperture_jitter_snr_db(1e9, 1e-12) - costs.aperture_jitter_snr_db(2e9, 1e-12)
    assert costs.enob_from_sndr(drop + 1.76) == pytest.approx(1.0, abs=1e-3)


# ---- oscillators: figure of merit, phase noise to jitter --------------------------------------

def test_vco_figure_of_merit_worked_examples():
    # designers-guide.org forum, "Figure of Merit (FOM), VCO" (2006, found): 6 mW, 1.8 GHz,
    # −116 dBc/Hz at 600 kHz → 177.76 dB; derived: −100 dBc/Hz at 1 MHz, 10 GHz, 10 mW → 170.0 dB.
    assert costs.vco_fom(-116.0, 1.8e9, 600e3, 6e-3) == pytest.approx(177.76, abs=0.005)
    assert costs.vco_fom(-100.0, 10e9, 1e6, 10e-3) == pytest.approx(170.0, abs=1e-9)
    assert costs.vco_phase_noise(185.0, 10e9, 1e6, 10e-3) == pytest.approx(-115.0, abs=1e-9)


def test_phase_noise_to_jitter_mt008_worked_numbers():
    # Kester, Analog Devices MT-008 (found): σ_t = √(2∫L df)/(2π f0).
    # Maxim AN3359-based spreadsheet (found): 600 MHz, −60/−75/−85/−95 dBc/Hz at 10 Hz–10 kHz → 1.99 ps.
    assert costs.phase_noise_jitter(600e6, [10, 100, 1e3, 1e4], [-60, -75, -85, -95]) == pytest.approx(1.99e-12, abs=0.01e-12)
    # teletopix.org (found): 10 MHz carrier, integrated −80 dBc → 2.25 ps; a flat −130 dBc/Hz over
    # 100 kHz integrates to −80 dBc.
    assert costs.phase_noise_jitter(10e6, [1e3, 1e3 + 1e5], [-130, -130]) == pytest.approx(2.25e-12, abs=0.005e-12)
    # derived (anchor notes): 10 GHz, −100 dBc/Hz at 1 MHz falling 20 dB/decade, 1–100 MHz → 0.224 ps
    assert costs.phase_noise_jitter(10e9, [1e6, 1e8], [-100, -140]) == pytest.approx(0.224e-12, abs=0.001e-12)


def test_phase_noise_integration_agrees_with_scipy_quad():
    # independent solver: scipy.integrate.quad of the same log-log interpolated profile
    f = np.array([1e3, 1e4, 1e5, 1e6, 1e7])
    ell = np.array([-70.0, -95.0, -110.0, -125.0, -135.0])

    def l_lin(x):
        return 10 ** (np.interp(math.log10(x), np.log10(f), ell) / 10)

    area = sum(integrate.quad(l_lin, a, b, limit=200)[0] for a, b in zip(f, f[1:]))
    want = math.sqrt(2 * area) / (2 * math.pi * 2e9)
    assert costs.phase_noise_jitter(2e9, f, ell) == pytest.approx(want, rel=1e-6)


def test_oscillator_jitter_closed_form():
    # the 1/f² closed form equals the integration of L(f) from the figure of merit, and the timing
    # jitter does not depend on f0 at fixed FOM and power (L ∝ f0², σ_t = σ_φ/(2πf0); derived)
    for f0 in (1e9, 10e9):
        ell = [costs.vco_phase_noise(170.0, f0, fo, 10e-3) for fo in (1e6, 1e8)]
        assert costs.oscillator_jitter(170.0, 10e-3, 1e6, 1e8) == pytest.approx(
            costs.phase_noise_jitter(f0, [1e6, 1e8], ell), rel=1e-9)
    assert costs.oscillator_jitter(170.0, 10e-3, 1e6, 1e8) == pytest.approx(0.224e-12, abs=0.001e-12)
    assert costs.oscillator_jitter(170.0, 10e-3, 1e4, 1e8) == pytest.approx(2.25e-12, abs=0.01e-12)


# ---- receivers: Friis and noise from a noise figure --------------------------------------------

def test_friis_worked_numbers():
    # Friis, Proc. IRE 32(7) 1944 (from memory); worked numbers derived in the anchor notes:
    # LNA NF 3 dB, G 15 dB, then a 12 dB mixer → 3.92 dB; a 12 dB mixer of −6 dB gain then a
    # 10 dB IF stage → 17.13 dB. A passive loss L has NF = L: two 3 dB pads → 6 dB.
    assert costs.friis_noise_figure([3.0, 12.0], [15.0, 0.0]) == pytest.approx(3.92, abs=0.005)
    assert costs.friis_noise_figure([12.0, 10.0], [-6.0, 0.0]) == pytest.approx(17.13, abs=0.005)
    assert costs.friis_noise_figure([3.0, 3.0], [-3.0, -3.0]) == pytest.approx(6.0, abs=1e-9)
    with pytest.raises(ValueError, match="equal"):
        costs.friis_noise_figure([3.0], [1.0, 2.0])


def test_noise_voltage_from_a_noise_figure():
    # kT0·B·F across 50 Ω, T0 = 290 K, B = 1 GHz (derived, anchor notes): NF 3 dB → −80.98 dBm,
    # 19.99 µV; NF 10 dB → 44.74 µV; its added part kT0B(F − 1) → 42.45 µV.
    v3 = costs.noise_from_figure(3.0, 1e9, 50.0)
    assert v3 == pytest.approx(19.99e-6, abs=0.01e-6)
    assert 10 * math.log10(v3 ** 2 / 50.0 / 1e-3) == pytest.approx(-80.98, abs=0.01)
    assert costs.noise_from_figure(10.0, 1e9, 50.0) == pytest.approx(44.74e-6, abs=0.01e-6)
    assert costs.noise_from_figure(10.0, 1e9, 50.0, added_only=True) == pytest.approx(42.45e-6, abs=0.01e-6)


# ---- passives: LC-line loss, spiral self-resonance ---------------------------------------------

@pytest.mark.parametrize(("f", "db"), [(1e9, 2.73), (2e9, 5.46), (5e9, 13.64)])
def test_lc_line_loss_per_ns(f, db):
    # α ≈ R/(2Z0) + G·Z0/2 (Pozar, Microwave Engineering, from memory): Q_L = 10, ideal C,
    # 8.686·π·f/Q_L dB per ns of delay (derived, anchor notes)
    assert costs.lc_line_loss_db(f, 1e-9, 10.0) == pytest.approx(db, abs=0.01)
    assert costs.lc_line_loss_db(f, 1e-9, 10.0, 10.0) == pytest.approx(2 * db, abs=0.02)


def test_spiral_self_resonance_yue_wong_example():
    # Yue & Wong, IEEE JSSC 33(5) 1998 π model (element forms from memory); invented geometry
    # derived in the anchor notes: square, n = 3, d_out = 200 µm, w = 15, s = 2 µm → l = 1.812 mm,
    # C_ox = ½·l·w·ε_ox/t_ox = 93.9 fF (5 µm oxide), C_s = 23.3 fF, L_s = 2.112 nH → f_SR = 10.1 GHz;
    # 13.1 GHz with half the oxide capacitance.
    d_in = 200e-6 - 2 * 3 * 15e-6 - 2 * 2 * 2e-6
    length = costs.spiral_track_length(3, 200e-6, d_in)
    assert length == pytest.approx(1.812e-3, rel=1e-9)
    c_sub = 3.9 * 8.8541878128e-12 / 5e-6
    assert 0.5 * length * 15e-6 * c_sub == pytest.approx(93.9e-15, abs=0.1e-15)
    assert costs.spiral_self_resonance(2.112e-9, length, 15e-6, c_sub, 23.3e-15) == pytest.approx(10.1e9, rel=0.01)
    assert costs.spiral_self_resonance(2.112e-9, length, 15e-6, c_sub / 2, 23.3e-15) == pytest.approx(13.1e9, rel=0.01)


def test_jitter_error_variance_reproduces_the_sine_jitter_line():
    # a full-scale sine sampled with rms jitter σ: ⟨σ²ẋ²⟩ = σ²(2πfA)²/2 against A²/2 gives
    # SNR = −20·log10(2πfσ) (Kester, Analog Devices MT-008); the σ⁴ẍ²/2 term is 2nd order
    f, a, sigma = 1e9, 0.7, 100e-15
    t = np.arange(4000) / 4000 / f
    w = 2 * math.pi * f
    var = costs.jitter_error_variance(sigma, a * w * np.cos(w * t), -a * w * w * np.sin(w * t))
    snr = 10 * math.log10(0.5 * a * a / np.mean(var))
    assert snr == pytest.approx(costs.aperture_jitter_snr_db(f, sigma), abs=1e-4)
