"""Published cost and noise formulas that every method's bill uses (one home for each).

All quantities are SI. Each function states its source in Notes.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np

from timescale.data import checks as _checks

__all__ = [
    "BOLTZMANN",
    "MU0",
    "walden_fom",
    "walden_power",
    "schreier_fom",
    "enob_from_sndr",
    "ktc_noise",
    "capacitance_for_noise",
    "gyrator_inductance",
    "bias_current",
    "gm_noise_density",
    "spiral_inductance",
    "spiral_for_inductance",
    "Spiral",
    # converters, oscillators and receivers
    "T0_NOISE_FIGURE",
    "sndr_from_enob",
    "adc_frontier_fom",
    "adc_power",
    "schreier_frontier",
    "aperture_jitter_snr_db",
    "jitter_error_variance",
    "quantizer_step",
    "quantization_noise",
    "noise_from_figure",
    "friis_noise_figure",
    "vco_fom",
    "vco_phase_noise",
    "phase_noise_jitter",
    "oscillator_jitter",
    "lc_line_loss_db",
    "spiral_track_length",
    "spiral_self_resonance",
    # filters, transconductors and passives
    "GM_BIAS_OVERHEAD",
    "gm_cell_pole",
    "transconductor_power",
    "gm_c_area",
    "ct_filter_fom",
    "vittoz_min_power",
    "spiral_series_resistance",
    "SpiralPi",
    "spiral_pi_model",
]

BOLTZMANN = 1.380649e-23  #: J/K (exact, SI 2019)
MU0 = 4e-7 * math.pi  #: H/m (vacuum permeability; the 2019 value differs by 1e-10)


def enob_from_sndr(sndr_db: float) -> float:
    """Effective number of bits, ENOB = (SNDR − 1.76 dB)/6.02 dB.

    Notes
    -----
    Ideal N-bit quantizer on a full-scale sine: SNDR = 6.02·N + 1.76 dB (Walden 1999).
    """
    return (_checks.finite("sndr_db", sndr_db) - 1.76) / 6.02


def walden_fom(power: float, rate: float, sndr_db: float) -> float:
    """Walden figure of merit P / (2^ENOB · f_s), J per conversion step.

    Parameters
    ----------
    power : float
        Converter power, W.
    rate : float
        Sample rate f_s, Hz.
    sndr_db : float
        SNDR, dB.

    Notes
    -----
    R. H. Walden, "Analog-to-digital converter survey and analysis", IEEE JSAC 17(4), 1999.
    Example: 10 mW, 1 GS/s, 50 dB → 38.70 fJ/step.
    """
    p = _checks.positive("power", power)
    fs = _checks.positive("rate", rate)
    return p / (2.0 ** enob_from_sndr(sndr_db) * fs)


def walden_power(fom: float, enob: float, rate: float) -> float:
    """Converter power from the Walden figure of merit, P = FOM · 2^ENOB · f_s, W.

    Parameters
    ----------
    fom : float
        J per conversion step.
    enob : float
        Effective number of bits.
    rate : float
        Sample rate, Hz.
    """
    return _checks.positive("fom", fom) * 2.0 ** _checks.finite("enob", enob) * _checks.positive("rate", rate)


def schreier_fom(power: float, bandwidth: float, sndr_db: float) -> float:
    """Schreier figure of merit SNDR + 10·log10(BW / P), dB.

    Parameters
    ----------
    power : float
        W.
    bandwidth : float
        Signal bandwidth (f_s/2 for a Nyquist converter), Hz.
    sndr_db : float
        dB.

    Notes
    -----
    R. Schreier, G. C. Temes, *Understanding Delta-Sigma Data Converters*, 2005.
    Example: 10 mW, 500 MHz, 50 dB → 156.99 dB.
    """
    return _checks.finite("sndr_db", sndr_db) + 10.0 * math.log10(
        _checks.positive("bandwidth", bandwidth) / _checks.positive("power", power)
    )


def ktc_noise(capacitance: float, temperature: float = 300.0) -> float:
    """RMS thermal noise voltage sampled on a capacitor, √(kT/C), V.

    Notes
    -----
    Standard result; 1 pF at 300 K → 64.36 µV rms.
    """
    return math.sqrt(BOLTZMANN * _checks.positive("temperature", temperature) / _checks.positive("capacitance", capacitance))


def capacitance_for_noise(v_rms: float, temperature: float = 300.0) -> float:
    """Smallest capacitance whose kT/C noise is `v_rms`, C = kT / v², F."""
    v = _checks.positive("v_rms", v_rms)
    return BOLTZMANN * _checks.positive("temperature", temperature) / (v * v)


def gyrator_inductance(capacitance: float, gm1: float, gm2: float | None = None) -> float:
    """Inductance simulated by a gyrator loaded with C: L = C / (gm1 · gm2), H.

    Notes
    -----
    Standard gm-C result; C = 100 fF, gm = 5 mS → 4 nH.
    """
    gm2 = gm1 if gm2 is None else gm2
    return _checks.positive("capacitance", capacitance) / (_checks.positive("gm1", gm1) * _checks.positive("gm2", gm2))


def bias_current(gm: float, gm_over_id: float) -> float:
    """Bias current I_D = gm / (gm/I_D), A."""
    return _checks.positive("gm", gm) / _checks.positive("gm_over_id", gm_over_id)


def gm_noise_density(gm: float, temperature: float = 300.0, gamma: float = 1.0) -> float:
    """One-sided drain-current noise density of a transconductor, 4kTγ·gm, A²/Hz."""
    return 4.0 * BOLTZMANN * _checks.positive("temperature", temperature) * _checks.positive("gamma", gamma) * _checks.positive("gm", gm)


_WHEELER = {"square": (2.34, 2.75), "hexagonal": (2.33, 3.82), "octagonal": (2.25, 3.55)}


def spiral_inductance(turns: float, d_out: float, d_in: float, shape: str = "square") -> float:
    """Planar spiral inductance by the modified Wheeler formula, H.

    ``L = K1 · µ0 · n² · d_avg / (1 + K2 · ρ)``, d_avg = (d_out + d_in)/2,
    ρ = (d_out − d_in)/(d_out + d_in); square K1 = 2.34, K2 = 2.75.

    Parameters
    ----------
    turns : float
        Number of turns n.
    d_out, d_in : float
        Outer and inner diameters, m.
    shape : {"square", "hexagonal", "octagonal"}

    Notes
    -----
    S. S. Mohan, M. del Mar Hershenson, S. P. Boyd, T. H. Lee, "Simple accurate expressions
    for planar spiral inductances", IEEE JSSC 34(10), 1999. Square, n = 3, d_out = 200 µm,
    d_in = 100 µm → 2.07 nH.
    """
    _checks.choice("shape", shape, _WHEELER)
    n = _checks.positive("turns", turns)
    d_out = _checks.positive("d_out", d_out)
    d_in = _checks.nonnegative("d_in", d_in)
    if d_in >= d_out:
        raise ValueError(f"d_in ({d_in} m) must be smaller than d_out ({d_out} m)")
    k1, k2 = _WHEELER[shape]
    d_avg = 0.5 * (d_out + d_in)
    rho = (d_out - d_in) / (d_out + d_in)
    return k1 * MU0 * n * n * d_avg / (1.0 + k2 * rho)


class Spiral(tuple):
    """``(turns, d_out, d_in, inductance, area)`` of a sized square spiral (SI)."""

    __slots__ = ()

    turns = property(lambda s: s[0])
    d_out = property(lambda s: s[1])
    d_in = property(lambda s: s[2])
    inductance = property(lambda s: s[3])
    area = property(lambda s: s[4])


def spiral_for_inductance(inductance: float, width: float, spacing: float, *,
                          max_turns: int = 12) -> Spiral:
    """Size the smallest-area square spiral that reaches `inductance`.

    For each whole number of turns, the inner diameter is found (bisection) so that the
    modified Wheeler formula gives `inductance`; the inner diameter is kept at least a quarter
    of the winding width, a hollow-spiral rule that keeps the Q usable (common practice, no
    source). The candidate with the least outer area d_out² wins.

    Parameters
    ----------
    inductance : float
        Target, H.
    width, spacing : float
        Track width and spacing, m.

    Returns
    -------
    Spiral
        turns, d_out (m), d_in (m), inductance (H), area = d_out² (m²).
    """
    target = _checks.positive("inductance", inductance)
    w = _checks.positive("width", width)
    s = _checks.positive("spacing", spacing)
    best = None
    for n in range(1, max_turns + 1):
        ring = 2 * n * w + 2 * (n - 1) * s  # d_out − d_in
        lo, hi = max(ring / 4.0, 2 * w), 1.0  # d_in bounds, m (hollow spiral: d_in ≥ ring/4)
        if spiral_inductance(n, hi + ring, hi) < target:
            continue
        if spiral_inductance(n, lo + ring, lo) >= target:
            d_in = lo
        else:
            for _ in range(100):  # bisection on d_in (L grows monotonically with d_in)
                mid = 0.5 * (lo + hi)
                if spiral_inductance(n, mid + ring, mid) < target:
                    lo = mid
                else:
                    hi = mid
            d_in = hi
        d_out = d_in + ring
        cand = Spiral((n, d_out, d_in, spiral_inductance(n, d_out, d_in), d_out * d_out))
        if best is None or cand.area < best.area:
            best = cand
    if best is None:
        raise ValueError(f"no square spiral up to {max_turns} turns and 1 m across reaches {target} H")
    return best


# ------------------------------------------------------------------------------------------
# Converters, oscillators and receivers (issue 13: resample, chirp-dispersive, analog memory)
# ------------------------------------------------------------------------------------------
#: Reference temperature of a noise figure, K (IEEE definition).
T0_NOISE_FIGURE = 290.0


def sndr_from_enob(enob: float) -> float:
    """SNDR of a converter of `enob` effective bits on a full-scale sine, 6.02·ENOB + 1.76 dB.

    Notes
    -----
    The inverse of :func:`enob_from_sndr` (Walden 1999).
    """
    return 6.02 * _checks.finite("enob", enob) + 1.76


def adc_frontier_fom(rate: float, fom: float, corner_rate: float) -> float:
    """Walden figure of merit on a rate-dependent frontier, J per conversion step.

    ``FOM(f_s) = fom · √(1 + (f_s/f_corner)²)``: flat (`fom`) well below the corner, worse by
    10 dB per decade of rate above it.

    Parameters
    ----------
    rate : float
        Sample rate f_s, Hz.
    fom : float
        Walden figure of merit below the corner, J.
    corner_rate : float
        Corner rate f_corner, Hz.

    Notes
    -----
    The shape is the envelope B. Murmann draws through his ADC performance survey (1997–
    present, github.com/bmurmann/ADC-survey): the Schreier figure of merit flat below a corner
    and falling 10·log10(√(1 + (f/f_c)²)) dB above it. At a fixed ENOB, P = BW·10^((SNDR −
    FOM_S)/10) on that envelope is exactly P = FOM(f_s)·2^ENOB·f_s with this FOM(f_s), so the
    Walden form here and the Schreier envelope are one frontier (see :func:`schreier_frontier`).
    """
    f = _checks.positive("rate", rate)
    return _checks.positive("fom", fom) * math.sqrt(1.0 + (f / _checks.positive("corner_rate", corner_rate)) ** 2)


def adc_power(enob: float, rate: float, fom: float, corner_rate: float) -> float:
    """Converter power on the rate-dependent frontier, P = FOM(f_s) · 2^ENOB · f_s, W.

    Parameters
    ----------
    enob : float
        Effective number of bits (from the converter's SNDR, not its resolution).
    rate : float
        Sample rate, Hz.
    fom, corner_rate : float
        Frontier (see :func:`adc_frontier_fom`), J and Hz.
    """
    return walden_power(adc_frontier_fom(rate, fom, corner_rate), enob, rate)


def schreier_frontier(rate: float, asymptote_db: float, corner_rate: float) -> float:
    """Schreier figure-of-merit envelope of an ADC survey at a Nyquist rate, dB.

    ``FOM_S(f) = FOM_asym − 10·log10(√(1 + (f/f_c)²))`` (−10 dB/decade above f_c).

    Notes
    -----
    B. Murmann, "ADC Performance Survey 1997–20xx", github.com/bmurmann/ADC-survey,
    plots/foms_plot.ipynb (envelope from the mean of the five best designs); its
    plots/foms_plot.json gives FOM_asym = 186.72 dB and f_c = 46.73 MHz. Example: 1 GS/s →
    173.41 dB.
    """
    f = _checks.positive("rate", rate)
    fc = _checks.positive("corner_rate", corner_rate)
    return _checks.finite("asymptote_db", asymptote_db) - 10.0 * math.log10(math.sqrt(1.0 + (f / fc) ** 2))


def aperture_jitter_snr_db(frequency: float, jitter: float) -> float:
    """SNR of a full-scale sine at `frequency` sampled with rms jitter `jitter`, dB.

    ``SNR = −20·log10(2π·f·σ_t)``.

    Notes
    -----
    W. Kester, "Converting oscillator phase noise to time jitter", Analog Devices MT-008;
    the same line bounds the surveyed ADCs in Walden (IEEE JSAC 1999). 1 GHz, 100 fs →
    64.04 dB.
    """
    return -20.0 * math.log10(2.0 * math.pi * _checks.positive("frequency", frequency)
                              * _checks.positive("jitter", jitter))


def jitter_error_variance(jitter: float, slope, curvature):
    """Variance of the error of sampling x at t + δ, δ ~ N(0, σ²): σ²·ẋ² + σ⁴·ẍ²/2, V².

    From x(t + δ) ≈ x + δ·ẋ + δ²·ẍ/2 (E[δ²] = σ², Var[δ²] = 2σ⁴). Works on arrays.

    Parameters
    ----------
    jitter : float
        RMS timing error σ, s.
    slope, curvature : float or ndarray
        ẋ (V/s) and ẍ (V/s²) at the sampling instants.

    Notes
    -----
    First-order term as in W. Kester, Analog Devices MT-008 (a sine at f gives
    SNR = −20·log10(2πfσ)); the second-order term keeps it non-zero at a peak.
    """
    s2 = _checks.nonnegative("jitter", jitter) ** 2
    return s2 * np.square(slope) + 0.5 * s2 * s2 * np.square(curvature)


def quantizer_step(full_scale: float, bits: float) -> float:
    """Step of a mid-tread quantizer spanning ±`full_scale` with `bits` bits, q = 2·FS/2^N, V."""
    return 2.0 * _checks.positive("full_scale", full_scale) / 2.0 ** _checks.positive("bits", bits)


def quantization_noise(step: float) -> float:
    """RMS quantization error of a busy uniform quantizer, q/√12, V.

    Notes
    -----
    W. R. Bennett, "Spectra of quantized signals", Bell Syst. Tech. J. 27, 1948: the error is
    uniform over ±q/2 when the signal spans many steps.
    """
    return _checks.positive("step", step) / math.sqrt(12.0)


def noise_from_figure(nf_db: float, bandwidth: float, resistance: float, *,
                      temperature: float = T0_NOISE_FIGURE, added_only: bool = False) -> float:
    """RMS noise voltage of a stage of noise figure `nf_db` across `resistance`, V.

    ``v² = k·T0·B·F·R`` (source noise included), or ``k·T0·B·(F − 1)·R`` with `added_only`
    (the stage's own contribution, referred to its input).

    Parameters
    ----------
    nf_db : float
        Noise figure, dB.
    bandwidth : float
        Noise bandwidth, Hz.
    resistance : float
        Source (matched) resistance, Ω.
    temperature : float
        Reference temperature of the figure, K (290 K by definition).

    Notes
    -----
    H. T. Friis, "Noise figures of radio receivers", Proc. IRE 32(7), 1944 (definition of the
    noise factor as available noise powers). NF 3 dB, 1 GHz, 50 Ω → −80.98 dBm, 19.99 µV.
    """
    f = 10.0 ** (_checks.nonnegative("nf_db", nf_db) / 10.0)
    excess = f - 1.0 if added_only else f
    return math.sqrt(BOLTZMANN * _checks.positive("temperature", temperature) * excess
                     * _checks.positive("bandwidth", bandwidth) * _checks.positive("resistance", resistance))


def friis_noise_figure(noise_figures_db, gains_db) -> float:
    """Noise figure of a cascade, dB: F = F1 + (F2 − 1)/G1 + (F3 − 1)/(G1·G2) + ….

    Parameters
    ----------
    noise_figures_db : sequence of float
        Each stage's noise figure, dB (a passive loss L has NF = L).
    gains_db : sequence of float
        Each stage's available power gain, dB (a loss is negative); same length.

    Notes
    -----
    H. T. Friis, Proc. IRE 32(7), 1944. LNA (3 dB, 15 dB) then a 12 dB mixer → 3.92 dB.
    """
    nfs = [10.0 ** (_checks.finite("noise_figures_db", v) / 10.0) for v in noise_figures_db]
    gains = [10.0 ** (_checks.finite("gains_db", v) / 10.0) for v in gains_db]
    if len(nfs) != len(gains) or not nfs:
        raise ValueError(f"noise_figures_db and gains_db must be equal, non-empty lists, "
                         f"got {len(nfs)} and {len(gains)} entries")
    total, g = nfs[0], gains[0]
    for f, gi in zip(nfs[1:], gains[1:]):
        total += (f - 1.0) / g
        g *= gi
    return 10.0 * math.log10(total)


def vco_fom(phase_noise_dbc: float, frequency: float, offset: float, power: float) -> float:
    """Oscillator figure of merit −L(Δf) + 20·log10(f0/Δf) − 10·log10(P/1 mW), dB.

    Notes
    -----
    Standard definition (positive convention). P = 6 mW, f0 = 1.8 GHz, L = −116 dBc/Hz at
    600 kHz → 177.76 dB.
    """
    return (-_checks.finite("phase_noise_dbc", phase_noise_dbc)
            + 20.0 * math.log10(_checks.positive("frequency", frequency) / _checks.positive("offset", offset))
            - 10.0 * math.log10(_checks.positive("power", power) / 1e-3))


def vco_phase_noise(fom_db: float, frequency: float, offset: float, power: float) -> float:
    """Phase noise L(Δf) of an oscillator of figure of merit `fom_db`, dBc/Hz (the inverse of
    :func:`vco_fom`; valid in the 1/f² region)."""
    return (-_checks.finite("fom_db", fom_db)
            + 20.0 * math.log10(_checks.positive("frequency", frequency) / _checks.positive("offset", offset))
            - 10.0 * math.log10(_checks.positive("power", power) / 1e-3))


def phase_noise_jitter(frequency: float, offsets, phase_noise_dbc) -> float:
    """RMS timing jitter from a phase-noise profile, σ_t = √(2∫L(f)df) / (2π·f0), s.

    L(f) is taken as straight between the given points on log-log axes (a power law on each
    segment, integrated exactly) and zero outside them.

    Parameters
    ----------
    frequency : float
        Carrier f0, Hz.
    offsets : sequence of float
        Offset frequencies, Hz, increasing.
    phase_noise_dbc : sequence of float
        L at each offset, dBc/Hz.

    Notes
    -----
    W. Kester, Analog Devices MT-008 (integrate L(f), σ_φ = √(2·10^(A/10)), σ_t = σ_φ/(2πf0)).
    600 MHz, −60/−75/−85/−95 dBc/Hz at 10 Hz/100 Hz/1 kHz/10 kHz → 1.99 ps.
    """
    f0 = _checks.positive("frequency", frequency)
    f = [_checks.positive("offsets", v) for v in offsets]
    ell = [10.0 ** (_checks.finite("phase_noise_dbc", v) / 10.0) for v in phase_noise_dbc]
    if len(f) != len(ell) or len(f) < 2 or any(b <= a for a, b in itertools.pairwise(f)):
        raise ValueError("offsets must be >= 2 increasing frequencies, one per phase_noise_dbc value")
    area = 0.0
    for f1, f2, l1, l2 in zip(f, f[1:], ell, ell[1:]):
        k = math.log(l2 / l1) / math.log(f2 / f1)  # L ∝ f^k on this segment
        if abs(k + 1.0) < 1e-12:
            area += l1 * f1 * math.log(f2 / f1)
        else:
            area += l1 * f1 / (k + 1.0) * ((f2 / f1) ** (k + 1.0) - 1.0)
    return math.sqrt(2.0 * area) / (2.0 * math.pi * f0)


def oscillator_jitter(fom_db: float, power: float, f_low: float, f_high: float) -> float:
    """RMS timing jitter of an oscillator in its 1/f² region, integrated from f_low to f_high, s.

    With L(Δf) = L1·(1 Hz/Δf)²·f0² (:func:`vco_phase_noise`), 2∫L df = 2·10^((−FOM − 10·log10
    (P/1 mW))/10)·f0²·(1/f_low − 1/f_high), so σ_t = σ_φ/(2πf0) does not depend on f0.

    Parameters
    ----------
    fom_db : float
        Oscillator figure of merit, dB.
    power : float
        Oscillator power, W.
    f_low, f_high : float
        Integration band, Hz.

    Notes
    -----
    Integrating L(f) as in W. Kester, Analog Devices MT-008. FOM 170 dB, 10 mW, 1–100 MHz is
    the 10 GHz, −100 dBc/Hz at 1 MHz case: 0.224 ps.
    """
    lo = _checks.positive("f_low", f_low)
    hi = _checks.positive("f_high", f_high)
    if hi <= lo:
        raise ValueError(f"f_high ({hi} Hz) must exceed f_low ({lo} Hz)")
    l_1hz = 10.0 ** ((-_checks.finite("fom_db", fom_db)
                      - 10.0 * math.log10(_checks.positive("power", power) / 1e-3)) / 10.0)
    return math.sqrt(2.0 * l_1hz * (1.0 / lo - 1.0 / hi)) / (2.0 * math.pi)


# ---- passives shared by the line models ---------------------------------------------------

def lc_line_loss_db(frequency: float, delay: float, q_inductor: float,
                    q_capacitor: float = math.inf) -> float:
    """Insertion loss of a lumped LC delay line, 8.686·π·f·τ·(1/Q_L + 1/Q_C), dB.

    Parameters
    ----------
    frequency : float
        Frequency, Hz.
    delay : float
        Group delay the line gives at that frequency, s.
    q_inductor, q_capacitor : float
        Quality factors of the inductors and capacitors.

    Notes
    -----
    Lossy-line attenuation α ≈ R/(2Z0) + G·Z0/2 with R = ωL/Q_L, G = ωC/Q_C per section
    (D. M. Pozar, *Microwave Engineering*, lossy lines; from memory): the loss per second of
    delay is ω/2·(1/Q_L + 1/Q_C) nepers. Q_L = 10 at 1 GHz → 2.73 dB/ns.
    """
    q_c = q_capacitor if q_capacitor == math.inf else _checks.positive("q_capacitor", q_capacitor)
    inv_q = 1.0 / _checks.positive("q_inductor", q_inductor) + 1.0 / q_c
    return (20.0 / math.log(10.0)) * math.pi * _checks.nonnegative("frequency", frequency) \
        * _checks.nonnegative("delay", delay) * inv_q


def spiral_track_length(turns: float, d_out: float, d_in: float) -> float:
    """Track length of a square spiral, l ≈ 4·n·d_avg, m (d_avg = (d_out + d_in)/2).

    Notes
    -----
    n = 3, d_out = 200 µm, d_in = 102 µm → 1.812 mm (the Yue–Wong example geometry).
    """
    return 4.0 * _checks.positive("turns", turns) * 0.5 * (_checks.positive("d_out", d_out)
                                                          + _checks.nonnegative("d_in", d_in))


def spiral_self_resonance(inductance: float, track_length: float, width: float,
                          substrate_cap: float, series_cap: float = 0.0) -> float:
    """Self-resonant frequency of a spiral, f_SR = 1/(2π·√(L·(C_s + C_ox))), Hz.

    C_ox = ½·l·w·C_sub is the oxide capacitance of one port of the Yue–Wong π model (track
    area l·w over the substrate, half at each port); `series_cap` C_s is the underpass
    overlap (0 when the card does not give it, which makes f_SR optimistic).

    Parameters
    ----------
    inductance : float
        H.
    track_length, width : float
        m.
    substrate_cap : float
        Track-to-substrate capacitance per area, F/m².
    series_cap : float
        F.

    Notes
    -----
    C. P. Yue, S. S. Wong, "On-chip spiral inductors with patterned ground shields for Si-based
    RF ICs", IEEE JSSC 33(5), 1998 (element forms from memory). n = 3, 200 µm, w = 15 µm,
    2.112 nH, C_ox = 93.9 fF, C_s = 23.3 fF → 10.1 GHz.
    """
    c_ox = 0.5 * _checks.positive("track_length", track_length) * _checks.positive("width", width) \
        * _checks.positive("substrate_cap", substrate_cap)
    c = c_ox + _checks.nonnegative("series_cap", series_cap)
    return 1.0 / (2.0 * math.pi * math.sqrt(_checks.positive("inductance", inductance) * c))


# ---- filters, transconductors and passives ---------------------------------------------------
#
# The gm-C filter and passive LC line cost models (switched-bandwidth and any method that builds
# continuous-time filters or spiral lines). docs/theory/switched-bandwidth.md explains each model,
# its published anchor and its limits.

#: Supply current of a transconductor's bias and common-mode feedback over that of its input
#: pair (×1.3 to ×2 in practice; common practice, no source).
GM_BIAS_OVERHEAD = 1.5


def gm_cell_pole(parasitic_cap: float) -> float:
    """Own pole of a transconductor loaded only by its own capacitance, f_p = 1/(2π·c_par), Hz.

    Parameters
    ----------
    parasitic_cap : float
        The cell's own capacitance (devices and wiring) per siemens of its gm, F/S
        (``Technology.gm_parasitic_cap``).

    Notes
    -----
    A cell of transconductance gm carries c_par·gm of its own capacitance, so no node it drives
    can have a pole above gm/(2π·c_par·gm) = 1/(2π·c_par), whatever gm is: it bounds the
    highest usable filter pole (the integrator's excess phase grows as f/f_p). For a single
    device C_gg/g_m = 1/(2π f_T); a differential cell with its load and wiring carries about
    2–3× that (common practice, no source), e.g. 10 fF/mS → 15.9 GHz.
    """
    return 1.0 / (2.0 * math.pi * _checks.positive("parasitic_cap", parasitic_cap))


def transconductor_power(gm: float, gm_over_id: float, supply: float, *,
                         overhead: float = GM_BIAS_OVERHEAD) -> float:
    """Supply power of one differential transconductor of transconductance `gm`, W.

    ``P = 2 · (gm / (gm/I_D)) · V_DD · overhead``: a differential pair whose devices each carry
    I_D = gm/(gm/I_D) (tail current 2·I_D), times the bias and common-mode feedback overhead.

    Parameters
    ----------
    gm : float
        Transconductance, S.
    gm_over_id : float
        Device efficiency gm/I_D, S/A.
    supply : float
        Supply voltage, V.
    overhead : float
        Total supply current over the input pair's (default :data:`GM_BIAS_OVERHEAD`).

    Notes
    -----
    gm = 5 mS at 10 S/A: 0.5 mA per device, 1 mA per pair, 1.2 mW at 1.2 V before the
    overhead (common practice, no source).
    """
    if not _checks.finite("overhead", overhead) >= 1.0:
        raise ValueError(f"overhead must be >= 1 (total over input-pair current), got {overhead!r}")
    return 2.0 * bias_current(gm, gm_over_id) * _checks.positive("supply", supply) * overhead


def gm_c_area(capacitance: float, cap_density: float, cells: int, cell_area: float,
              layout_overhead: float, *, switches: int = 0, switch_area: float = 0.0) -> float:
    """Active area of a gm-C filter, m².

    ``area = layout_overhead · (C / cap_density + cells · cell_area + switches · switch_area)``

    Parameters
    ----------
    capacitance : float
        Capacitance drawn as linear capacitors, F (node capacitance less the cells' own).
    cap_density : float
        F/m².
    cells : int
        Transconductor cells.
    cell_area : float
        Area of one cell, m².
    layout_overhead : float
        Active area over the summed device area (wiring, bias, decoupling, switch drivers;
        ``Technology.layout_overhead``, 2–4 for analog blocks: common practice, no source).
    switches : int
        Switches with their drivers.
    switch_area : float
        Area of one switch, m².
    """
    c = _checks.nonnegative("capacitance", capacitance)
    if isinstance(cells, bool) or not isinstance(cells, (int, np.integer)) or cells < 0:
        raise ValueError(f"cells must be a whole number >= 0, got {cells!r}")
    if isinstance(switches, bool) or not isinstance(switches, (int, np.integer)) or switches < 0:
        raise ValueError(f"switches must be a whole number >= 0, got {switches!r}")
    devices = (c / _checks.positive("cap_density", cap_density)
               + cells * _checks.nonnegative("cell_area", cell_area)
               + switches * _checks.nonnegative("switch_area", switch_area))
    return _checks.positive("layout_overhead", layout_overhead) * devices


def ct_filter_fom(power: float, poles: int, bandwidth: float, dynamic_range_db: float | None = None) -> float:
    """Continuous-time filter figure of merit, J (lower is better).

    Without `dynamic_range_db`: energy per pole per cycle, ``FOM = P / (N · f)``. With it:
    ``FOM = P / (N · f · DR)``, DR as a power ratio 10^(DR_dB/10) — the form whose floor is the
    class-A thermal-noise bound 8kT (:func:`vittoz_min_power`).

    Parameters
    ----------
    power : float
        W.
    poles : int
        Filter order N (number of poles, i.e. of integrators).
    bandwidth : float
        Cutoff or highest pole frequency f, Hz.
    dynamic_range_db : float, optional
        Dynamic range (or peak SNR), dB.

    Notes
    -----
    The literature is not uniform (some authors use SFDR, or DR as an amplitude ratio); say
    which form a comparison uses. A 5th-order 400 MHz gm-C low-pass in 0.13 µm CMOS at 5.5 mW
    and 60 dB ("A 5.5mW 80-400MHz Gm-C low pass filter with a unique auto-tuning system"):
    P/(N f) = 2.75 pJ, P/(N f DR) = 2.75 aJ ≈ 83 × 8kT.
    """
    n = _checks.positive("poles", poles)
    fom = _checks.positive("power", power) / (n * _checks.positive("bandwidth", bandwidth))
    if dynamic_range_db is None:
        return fom
    return fom / 10.0 ** (_checks.finite("dynamic_range_db", dynamic_range_db) / 10.0)


def vittoz_min_power(bandwidth: float, snr_db: float, poles: int = 1, temperature: float = 300.0) -> float:
    """Least power of class-A continuous-time filtering, ``P = 8kT · f · SNR`` per pole, W.

    Parameters
    ----------
    bandwidth : float
        Pole frequency f, Hz.
    snr_db : float
        Signal-to-noise ratio, dB (a power ratio 10^(SNR/10)).
    poles : int
        Number of poles N (the bound is N times that of one).
    temperature : float
        K.

    Notes
    -----
    E. A. Vittoz, "Future of analog in the VLSI environment", Proc. ISCAS 1990, pp. 1372–1375
    (from memory): a class-A integrator swinging the whole supply with noise kT/C needs at least
    8kT·f·SNR. 1 GHz, 60 dB, 300 K → 33.1 µW per pole. Published GHz filters sit 10² to 10⁴ above.
    """
    return (8.0 * BOLTZMANN * _checks.positive("temperature", temperature) * _checks.positive("bandwidth", bandwidth)
            * 10.0 ** (_checks.finite("snr_db", snr_db) / 10.0) * _checks.positive("poles", poles))


def spiral_series_resistance(inductance: float, q: float, frequency: float) -> float:
    """Series resistance that gives a spiral the quality factor `q` at `frequency`,
    ``R = 2π f L / Q``, Ω."""
    return (2.0 * math.pi * _checks.positive("frequency", frequency) * _checks.positive("inductance", inductance)
            / _checks.positive("q", q))


@dataclass(frozen=True)
class SpiralPi:
    """Elements of a spiral's Yue–Wong π model at one frequency (SI).

    Attributes
    ----------
    frequency : float
        Hz.
    ls, rs, cs : float
        Series inductance (H), resistance with skin effect (Ω), underpass capacitance (F).
    cox, csi, rsi : float
        Per port: oxide capacitance (F), then substrate capacitance (F) and resistance (Ω).
    q : float
        Quality factor (zero or negative above self-resonance).
    """

    frequency: float
    ls: float
    rs: float
    cs: float
    cox: float
    csi: float
    rsi: float
    q: float


def spiral_pi_model(frequency: float, turns: int, d_out: float, width: float, spacing: float, *,
                    thickness: float, conductivity: float, oxide_cap: float, underpass_cap: float,
                    substrate_cap: float, substrate_conductance: float) -> SpiralPi:
    """The Yue–Wong π model of a square spiral and its quality factor at `frequency`.

    Parameters
    ----------
    frequency : float
        Hz.
    turns : int
        n.
    d_out, width, spacing : float
        Outer diameter, track width and spacing, m (d_in = d_out − 2(n·w + (n−1)·s)).
    thickness : float
        Track thickness t, m.
    conductivity : float
        Track conductivity σ, S/m.
    oxide_cap, underpass_cap : float
        ε_ox/t_ox to the substrate and under the underpass, F/m².
    substrate_cap, substrate_conductance : float
        Fitted substrate capacitance (F/m²) and conductance (S/m²) per track area.

    Notes
    -----
    C. P. Yue, S. S. Wong, IEEE JSSC 33(5):743–752, 1998 and IEEE TED 47(3):560–568, 2000
    (formulas from memory): Rs = l/(σ w δ (1 − e^(−t/δ))), δ = √(2/(ω µ0 σ)); Cs = n w² ε/t_M;
    Cox = ½ l w ε/t_ox; Csi = ½ l w C_sub; Rsi = 2/(l w G_sub);
    Q = (ωLs/Rs) · Rp/(Rp + ((ωLs/Rs)² + 1) Rs) · (1 − Rs²(Cs + Cp)/Ls − ω² Ls (Cs + Cp)),
    Rp = 1/(ω² Cox² Rsi) + Rsi (Cox + Csi)²/Cox²,
    Cp = Cox (1 + ω² (Cox + Csi) Csi Rsi²)/(1 + ω² (Cox + Csi)² Rsi²).
    Ls by the modified Wheeler formula (:func:`spiral_inductance`).
    """
    f = _checks.positive("frequency", frequency)
    n = _checks.positive("turns", turns)
    w = _checks.positive("width", width)
    d_in = _checks.positive("d_out", d_out) - 2.0 * (n * w + (n - 1) * _checks.nonnegative("spacing", spacing))
    if d_in <= 0:
        raise ValueError(f"{n:g} turns of {w:g} m track do not fit in d_out = {d_out!r} m")
    ls = spiral_inductance(n, d_out, d_in)
    length = spiral_track_length(n, d_out, d_in)
    sigma = _checks.positive("conductivity", conductivity)
    t = _checks.positive("thickness", thickness)
    om = 2.0 * math.pi * f
    delta = math.sqrt(2.0 / (om * MU0 * sigma))
    rs = length / (sigma * w * delta * (1.0 - math.exp(-t / delta)))
    cs = n * w * w * _checks.positive("underpass_cap", underpass_cap)
    cox = 0.5 * length * w * _checks.positive("oxide_cap", oxide_cap)
    csi = 0.5 * length * w * _checks.nonnegative("substrate_cap", substrate_cap)
    rsi = 2.0 / (length * w * _checks.positive("substrate_conductance", substrate_conductance))
    rp = 1.0 / (om * om * cox * cox * rsi) + rsi * (cox + csi) ** 2 / (cox * cox)
    cp = cox * (1.0 + om * om * (cox + csi) * csi * rsi * rsi) / (1.0 + om * om * (cox + csi) ** 2 * rsi * rsi)
    x = om * ls / rs
    q = x * rp / (rp + (x * x + 1.0) * rs) * (1.0 - rs * rs * (cs + cp) / ls - om * om * ls * (cs + cp))
    return SpiralPi(f, ls, rs, cs, cox, csi, rsi, q)
