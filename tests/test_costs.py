"""Published cost and noise formulas against their worked examples."""

import math

import pytest

from timescale.numerics import costs


def test_walden_fom_worked_example():
    # Walden, IEEE JSAC 1999: FOM = P/(2^ENOB·f_s); 10 mW, 1 GS/s, SNDR 50 dB
    # (ENOB = (50 − 1.76)/6.02 = 8.013) → 38.70 fJ/conversion step.
    assert costs.walden_fom(10e-3, 1e9, 50.0) == pytest.approx(38.70e-15, rel=1e-3)
    assert costs.walden_power(38.70e-15, costs.enob_from_sndr(50.0), 1e9) == pytest.approx(10e-3, rel=1e-3)


def test_schreier_fom_worked_example():
    # Schreier & Temes 2005: FOM = SNDR + 10·log10(BW/P); 10 mW, BW = 500 MHz, 50 dB → 156.99 dB.
    assert costs.schreier_fom(10e-3, 500e6, 50.0) == pytest.approx(156.99, abs=0.005)


def test_ktc_noise():
    # kT/C: 1 pF at 300 K → 64.36 µV rms (standard result)
    assert costs.ktc_noise(1e-12, 300.0) == pytest.approx(64.36e-6, rel=1e-4)
    assert costs.capacitance_for_noise(64.36e-6, 300.0) == pytest.approx(1e-12, rel=1e-3)


def test_gyrator_inductance():
    # gyrator-C: L = C/(gm1·gm2); C = 100 fF, gm = 5 mS → 4 nH (standard gm-C result)
    assert costs.gyrator_inductance(100e-15, 5e-3) == pytest.approx(4e-9, rel=1e-12)


def test_modified_wheeler_square_spiral():
    # Mohan et al., IEEE JSSC 1999 (modified Wheeler): square, n = 3, d_out = 200 µm,
    # d_in = 100 µm → 2.07 nH.
    assert costs.spiral_inductance(3, 200e-6, 100e-6) == pytest.approx(2.07e-9, rel=2e-3)


def test_spiral_sizing_reaches_the_target_with_the_least_area():
    s = costs.spiral_for_inductance(2e-9, 8e-6, 2e-6)
    assert s.inductance == pytest.approx(2e-9, rel=1e-6)
    assert s.area == pytest.approx(s.d_out ** 2)
    # no whole number of turns near the chosen one gives a smaller outer size for the same L
    for n in (s.turns - 1, s.turns + 1):
        if n < 1:
            continue
        ring = 2 * n * 8e-6 + 2 * (n - 1) * 2e-6
        lo, hi = ring / 4, 1e-3
        for _ in range(80):
            mid = (lo + hi) / 2
            lo, hi = (mid, hi) if costs.spiral_inductance(n, mid + ring, mid) < 2e-9 else (lo, mid)
        assert (hi + ring) >= s.d_out * (1 - 1e-9)


def test_enob_formula():
    # ideal N-bit quantizer: SNDR = 6.02 N + 1.76 dB (Walden 1999)
    assert costs.enob_from_sndr(6.02 * 10 + 1.76) == pytest.approx(10.0)


def test_bad_arguments_name_themselves():
    with pytest.raises(ValueError, match="capacitance must be > 0"):
        costs.ktc_noise(0.0)
    with pytest.raises(ValueError, match="d_in"):
        costs.spiral_inductance(3, 100e-6, 200e-6)
    with pytest.raises(ValueError, match="shape must be one of"):
        costs.spiral_inductance(3, 200e-6, 100e-6, shape="round")
    with pytest.raises(ValueError, match="gm_over_id"):
        costs.bias_current(1e-3, 0.0)


def test_bias_current_and_transconductor_noise():
    # I_D = gm/(gm/I_D): 1 mS at gm/I_D = 10 /V needs 100 µA (definition of the gm/I_D ratio)
    assert costs.bias_current(1e-3, 10.0) == pytest.approx(100e-6, rel=1e-12)
    # drain-current noise 4kTγ·gm (standard long-channel result): k = 1.380649e-23 J/K (SI exact),
    # 300 K, γ = 2/3, 1 mS → 1.1045e-23 A²/Hz
    assert costs.gm_noise_density(1e-3, 300.0, 2 / 3) == pytest.approx(1.1045e-23, rel=1e-4)
