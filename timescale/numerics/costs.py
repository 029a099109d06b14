"""Published cost and noise formulas that every method's bill uses (one home for each).

All quantities are SI. Each function states its source in Notes.
"""

from __future__ import annotations

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
    "GM_BIAS_OVERHEAD",
    "gm_cell_pole",
    "transconductor_power",
    "gm_c_area",
    "ct_filter_fom",
    "vittoz_min_power",
    "spiral_track_length",
    "spiral_self_resonance",
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


def spiral_track_length(turns: float, d_out: float, d_in: float) -> float:
    """Track length of a square spiral, ``l = 4 · n · d_avg``, m (Mohan et al. 1999).

    n = 3, d_out = 200 µm, d_in = 102 µm → 1.812 mm.
    """
    d_out = _checks.positive("d_out", d_out)
    d_in = _checks.nonnegative("d_in", d_in)
    return 4.0 * _checks.positive("turns", turns) * 0.5 * (d_out + d_in)


def spiral_self_resonance(inductance: float, track_area: float, substrate_cap: float,
                          series_cap: float = 0.0) -> float:
    """Self-resonance of a spiral from its track capacitance, Hz.

    ``f_SR = 1 / (2π √(L · (C_s + C_ox)))``, ``C_ox = ½ · l · w · c_sub`` (the Yue–Wong
    oxide capacitance at one port; taking the whole of it is the low-resistivity-substrate
    bound, which gives the lowest f_SR).

    Parameters
    ----------
    inductance : float
        H.
    track_area : float
        Track length times width l·w, m².
    substrate_cap : float
        Track-to-substrate capacitance per area, F/m² (``Technology.inductor_substrate_cap``).
    series_cap : float
        Underpass (interwinding) capacitance C_s, F; cards do not give it, and leaving it out
        raises f_SR by √(1 + C_s/C_ox) (about 12 % in the worked example below).

    Notes
    -----
    C. P. Yue, S. S. Wong, IEEE JSSC 33(5), 1998 (from memory). Square, n = 3, d_out = 200 µm,
    w = 15 µm, 5 µm of oxide, 1 µm under the underpass: L = 2.112 nH, C_ox = 93.9 fF,
    C_s = 23.3 fF → 10.1 GHz.
    """
    cp = 0.5 * _checks.positive("track_area", track_area) * _checks.positive("substrate_cap", substrate_cap)
    c = cp + _checks.nonnegative("series_cap", series_cap)
    return 1.0 / (2.0 * math.pi * math.sqrt(_checks.positive("inductance", inductance) * c))


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
