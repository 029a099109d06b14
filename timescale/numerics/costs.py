"""Published cost and noise formulas that every method's bill uses (one home for each).

All quantities are SI. Each function states its source in Notes.
"""

from __future__ import annotations

import math

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
