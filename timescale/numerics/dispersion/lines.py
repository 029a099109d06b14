"""Analytic dispersive line models (ideal quadratic phase, band-limited and lossy, all-pass
cascades) and the fit of an all-pass cascade to a linear group delay.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from timescale.data import checks as _checks
from timescale.numerics.dispersion.measured import fit_gdd


# ------------------------------------------------------------------------------------------
# line models
# ------------------------------------------------------------------------------------------
def _ripple_phase(omega, center, ripple, period):
    """Phase of a sinusoidal group-delay ripple δτ·sin((ω − ω_c)/p'), p' = 2π·period/(2π)."""
    if ripple == 0.0:
        return 0.0, 0.0
    p = 2.0 * math.pi * period  # rad/s per cycle
    x = 2.0 * math.pi * (omega - center) / p
    tau = ripple * np.sin(x)
    phi = ripple * p / (2.0 * math.pi) * np.cos(x)  # −∫δτ sin(2π(ω−ω_c)/p) dω
    return phi - ripple * p / (2.0 * math.pi), tau


@dataclass(frozen=True)
class QuadraticLine:
    """Ideal dispersive line: φ(ω) = −ωτ0 − Φ(ω − ω_c)²/2 (+ ripple), |H| = 1.

    Parameters
    ----------
    gdd : float
        Φ, s².
    center : float
        Centre frequency f_c, Hz (where the group delay equals `delay`).
    delay : float
        Bulk group delay τ0 at the centre, s.
    ripple : float
        Peak of an added sinusoidal group-delay ripple, s.
    ripple_period : float
        Its period in frequency, Hz.
    """

    gdd: float
    center: float
    delay: float = 0.0
    ripple: float = 0.0
    ripple_period: float = 1e9

    def __post_init__(self):
        _checks.finite("gdd", self.gdd)
        _checks.nonnegative("center", self.center)
        _checks.finite("delay", self.delay)
        _checks.nonnegative("ripple", self.ripple)
        _checks.positive("ripple_period", self.ripple_period)

    def _phase(self, omega):
        wc = 2.0 * math.pi * self.center
        d = omega - wc
        rp, _ = _ripple_phase(omega, wc, self.ripple, self.ripple_period)
        return -omega * self.delay - 0.5 * self.gdd * d * d + rp

    def response(self, omega) -> np.ndarray:
        """H at absolute angular frequencies ω ≥ 0 (rad/s)."""
        w = np.asarray(omega, dtype=float)
        return np.exp(1j * self._phase(w))

    def group_delay(self, omega) -> np.ndarray:
        """τ(ω), s."""
        w = np.asarray(omega, dtype=float)
        wc = 2.0 * math.pi * self.center
        _, rt = _ripple_phase(w, wc, self.ripple, self.ripple_period)
        return self.delay + self.gdd * (w - wc) + rt

    @property
    def band(self) -> tuple[float, float]:
        """Pass band (f_lo, f_hi), Hz: unlimited for the ideal line."""
        return (0.0, math.inf)


@dataclass(frozen=True)
class BandLimitedLine(QuadraticLine):
    """Quadratic-phase line with a finite pass band and loss proportional to the delay.

    |H(ω)| = 10^(−L·τ(ω)/20) / √(1 + (2(f − f_c)/B)^(2n)), phase as :class:`QuadraticLine`.

    Parameters
    ----------
    bandwidth : float
        Pass band B (−3 dB edges at f_c ± B/2), Hz.
    loss : float
        Insertion loss per unit of group delay L, dB/s (1e9 dB/s = 1 dB/ns).
    edge_order : int
        Butterworth order n of the band edges.

    Notes
    -----
    The edge magnitude carries no phase of its own (the edge is a magnitude window); loss
    proportional to delay is what a ladder or all-pass line of finite-Q reactances shows
    (each section adds delay and loss together; common practice, no source).
    """

    bandwidth: float = 1e9
    loss: float = 0.0
    edge_order: int = 8

    def __post_init__(self):
        super().__post_init__()
        _checks.positive("bandwidth", self.bandwidth)
        _checks.nonnegative("loss", self.loss)
        if not isinstance(self.edge_order, (int, np.integer)) or self.edge_order < 1:
            raise ValueError(f"edge_order must be an integer >= 1, got {self.edge_order!r}")

    def magnitude(self, omega) -> np.ndarray:
        """|H(ω)|."""
        w = np.asarray(omega, dtype=float)
        f = w / (2.0 * math.pi)
        x = 2.0 * (f - self.center) / self.bandwidth
        edge = 1.0 / np.sqrt(1.0 + x ** (2 * int(self.edge_order)))
        tau = np.maximum(self.group_delay(w), 0.0)
        return edge * 10.0 ** (-self.loss * tau / 20.0)

    def response(self, omega) -> np.ndarray:
        """H at absolute angular frequencies ω ≥ 0 (rad/s)."""
        w = np.asarray(omega, dtype=float)
        return self.magnitude(w) * np.exp(1j * self._phase(w))

    @property
    def band(self) -> tuple[float, float]:
        """(f_c − B/2, f_c + B/2), Hz."""
        return (max(0.0, self.center - self.bandwidth / 2), self.center + self.bandwidth / 2)


def allpass1_delay(a, omega) -> np.ndarray:
    """Group delay of the first-order all-pass (a − s)/(a + s): τ = 2a/(a² + ω²), s.

    Notes
    -----
    Standard result; τ(0) = 2/a (318.3 ps for a = 2π·1 GHz).
    """
    a = np.asarray(a, dtype=float)
    w = np.asarray(omega, dtype=float)
    return 2.0 * a / (a * a + w * w)


def allpass2_delay(omega0, q, omega) -> np.ndarray:
    """Group delay of the second-order all-pass (s² − (ω0/Q)s + ω0²)/(s² + (ω0/Q)s + ω0²), s.

    τ(ω) = (2ω0/Q)(ω0² + ω²) / ((ω0² − ω²)² + (ω0ω/Q)²).

    Notes
    -----
    Standard result; τ(ω0) = 4Q/ω0 (254.65 ps at 5 GHz, Q = 2); each section turns the phase
    by 2π from DC to infinity.
    """
    w0 = np.asarray(omega0, dtype=float)
    q = np.asarray(q, dtype=float)
    w = np.asarray(omega, dtype=float)
    b = w0 / q
    return 2.0 * b * (w0 * w0 + w * w) / ((w0 * w0 - w * w) ** 2 + (b * w) ** 2)


@dataclass(frozen=True)
class AllpassLine:
    """A cascade of all-pass sections, optionally lossy.

    Parameters
    ----------
    second : tuple of (omega0, Q)
        Second-order sections: pole frequency ω0 (rad/s) and pole Q.
    first : tuple of float
        First-order sections (a − s)/(a + s): a in rad/s.
    q_unloaded : float or None
        Unloaded Q of the reactances; each section then attenuates by exp(−ω·τ_k(ω)/(2Q_u))
        (the delay–loss relation of a resonant network; common practice, no source). None
        for lossless sections.
    center : float
        Centre of the band the cascade was designed for, Hz (for records).
    gdd : float
        Φ the cascade approximates, s² (for records).
    """

    second: tuple = ()
    first: tuple = ()
    q_unloaded: float | None = None
    center: float = 0.0
    gdd: float = 0.0
    fit_band: tuple = (0.0, math.inf)

    def __post_init__(self):
        sec = tuple((float(w0), float(q)) for w0, q in self.second)
        for w0, q in sec:
            if not (w0 > 0 and q > 0 and math.isfinite(w0) and math.isfinite(q)):
                raise ValueError(f"second-order section (omega0={w0}, Q={q}) needs omega0 > 0 and Q > 0")
        fst = tuple(float(a) for a in self.first)
        for a in fst:
            if not (a > 0 and math.isfinite(a)):
                raise ValueError(f"first-order section a={a} must be > 0 rad/s")
        object.__setattr__(self, "second", sec)
        object.__setattr__(self, "first", fst)
        if self.q_unloaded is not None:
            _checks.positive("q_unloaded", self.q_unloaded)

    @property
    def sections(self) -> int:
        """Number of sections (first- plus second-order)."""
        return len(self.second) + len(self.first)

    def _arrays(self):
        s = np.array(self.second, dtype=float).reshape(-1, 2)
        return s[:, 0], s[:, 1], np.array(self.first, dtype=float)

    def group_delay(self, omega) -> np.ndarray:
        """τ(ω) of the cascade, s."""
        w = np.asarray(omega, dtype=float)
        w0, q, a = self._arrays()
        tau = np.zeros(w.shape)
        for k in range(w0.size):  # one pass per section keeps memory at O(len(omega))
            tau += allpass2_delay(w0[k], q[k], w)
        for k in range(a.size):
            tau += allpass1_delay(a[k], w)
        return tau

    def phase(self, omega) -> np.ndarray:
        """Phase of the cascade (exact, continuous), rad: each second-order section
        contributes −2·atan2((ω0/Q)ω, ω0² − ω²), each first-order −2·atan(ω/a)."""
        w = np.asarray(omega, dtype=float)
        w0, q, a = self._arrays()
        phi = np.zeros(w.shape)
        for k in range(w0.size):
            phi -= 2.0 * np.arctan2(w0[k] / q[k] * w, w0[k] ** 2 - w * w)
        for k in range(a.size):
            phi -= 2.0 * np.arctan(w / a[k])
        return phi

    def response(self, omega) -> np.ndarray:
        """H at absolute angular frequencies ω ≥ 0 (rad/s)."""
        w = np.asarray(omega, dtype=float)
        h = np.exp(1j * self.phase(w))
        if self.q_unloaded is not None:
            h = h * np.exp(-np.abs(w) * self.group_delay(w) / (2.0 * self.q_unloaded))
        return h

    def polynomials(self) -> tuple[np.ndarray, np.ndarray]:
        """Numerator and denominator of H(s) (highest power first), for scipy.signal.freqs."""
        num, den = np.array([1.0]), np.array([1.0])
        for w0, q in self.second:
            num = np.polymul(num, [1.0, -w0 / q, w0 * w0])
            den = np.polymul(den, [1.0, w0 / q, w0 * w0])
        for a in self.first:
            num = np.polymul(num, [-1.0, a])
            den = np.polymul(den, [1.0, a])
        return num, den

    @property
    def band(self) -> tuple[float, float]:
        """The band the cascade was fitted over, Hz."""
        return self.fit_band



# ------------------------------------------------------------------------------------------
# all-pass design
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class AllpassFit:
    """An all-pass cascade fitted to a linear group delay.

    Attributes
    ----------
    line : AllpassLine
        The cascade.
    delay : float
        Fitted bulk delay at the band centre, s.
    ripple_rms, ripple_peak : float
        RMS and peak deviation of τ(ω) from τ0 + Φ(ω − ω_c) over the band, s.
    gdd_fitted : float
        Slope Φ of a straight-line fit to the cascade's delay over the band, s².
    """

    line: AllpassLine
    delay: float
    ripple_rms: float
    ripple_peak: float
    gdd_fitted: float


def allpass_section_count(gdd: float, f_lo: float, f_hi: float, fill: float = 1.0) -> int:
    """Second-order sections needed for a delay slope Φ over [f_lo, f_hi].

    Each section turns the phase by 2π, so the band needs ∫τ dω ≈ τ_mid·Δω of phase, with
    τ_mid ≥ |Φ|Δω/2 to keep the delay positive at the low-delay edge; `fill` is the share of
    each section's phase that lands in the band.
    """
    dw = 2.0 * math.pi * (f_hi - f_lo)
    tau_mid = 0.6 * abs(gdd) * dw + 2.0 / dw  # a little above |Φ|Δω/2: no section has zero delay
    return max(3, int(math.ceil(tau_mid * dw / (2.0 * math.pi * fill))))


def _checked_band(gdd, f_lo, f_hi, sections):
    """(Φ, f_lo, f_hi, sections) checked; the count defaults to :func:`allpass_section_count`."""
    phi = _checks.finite("gdd", gdd)
    f_lo = _checks.positive("f_lo", f_lo)
    f_hi = _checks.positive("f_hi", f_hi)
    if f_hi <= f_lo:
        raise ValueError(f"f_hi ({f_hi} Hz) must exceed f_lo ({f_lo} Hz)")
    n = allpass_section_count(phi, f_lo, f_hi) if sections is None else int(sections)
    if n < 1:
        raise ValueError(f"sections must be >= 1, got {sections!r}")
    return phi, f_lo, f_hi, n


def allpass_placement(gdd: float, f_lo: float, f_hi: float, sections: int | None = None):
    """Starting placement of second-order sections for a linear group delay over a band.

    Each second-order section carries 2π of phase (the area under its group delay), so the
    sections sit where the wanted cumulative phase ∫τ dω crosses odd multiples of π, over the
    band plus half a section spacing beyond each edge (edge sections straddle the edges); the
    delay τ0 + Φ(ω − ω_c) is scaled so the n sections hold it. Each Q follows the local spacing
    Δω so that neighbouring delay peaks (width ω0/Q) overlap: Q = ω0/(1.2·Δω).

    Parameters
    ----------
    gdd : float
        Φ, s² (either sign).
    f_lo, f_hi : float
        Band, Hz (0 < f_lo < f_hi).
    sections : int, optional
        Number of sections (default :func:`allpass_section_count`).

    Returns
    -------
    omega0, q : ndarray
        Centre frequencies (rad/s) and quality factors of the sections.
    we, target : ndarray
        The extended band (rad/s) and the delay (s) the placement followed.
    """
    phi, f_lo, f_hi, n = _checked_band(gdd, f_lo, f_hi, sections)
    w_lo, w_hi = 2 * math.pi * f_lo, 2 * math.pi * f_hi
    wc = 0.5 * (w_lo + w_hi)
    dw = w_hi - w_lo
    size = max(64, 4 * n)
    # wanted delay: τ0 chosen so that the band plus half a section spacing beyond each edge
    # holds the n·2π of phase the sections carry (edge sections straddle the band edges)
    tau0 = 2 * math.pi * n / dw
    for _ in range(3):
        pad = 0.5 * 2 * math.pi / tau0
        we = np.linspace(w_lo - pad, w_hi + pad, size)
        target = tau0 + phi * (we - wc)
        target = np.maximum(target, 0.1 * tau0)
        tau0 = tau0 * 2 * math.pi * n / np.trapezoid(target, we)
    target = np.maximum(tau0 + phi * (we - wc), 0.1 * tau0)
    cum = np.concatenate([[0.0], np.cumsum(0.5 * (target[1:] + target[:-1]) * np.diff(we))])
    marks = (np.arange(n) + 0.5) / n * cum[-1]
    w0 = np.interp(marks, cum, we)
    spacing = np.gradient(w0) if n > 1 else np.array([dw])
    q0 = np.clip(w0 / (1.2 * np.abs(spacing)), 0.3, 1e4)
    return w0, q0, we, target


def design_allpass(gdd: float, f_lo: float, f_hi: float, *, sections: int | None = None,
                   max_sections: int = 400, q_unloaded: float | None = None,
                   points_per_section: int = 4, ripple_target: float = 1e-3,
                   max_iterations: int = 20) -> AllpassFit:
    """Fit a cascade of second-order all-pass sections to τ(ω) = τ0 + Φ(ω − ω_c) on a band.

    Sections start where the wanted cumulative phase crosses odd multiples of π (each section
    carries 2π), with Q set by the local spacing; a least-squares refinement of every
    (ω0, Q) then minimises the delay error with τ0 free.

    Parameters
    ----------
    gdd : float
        Φ, s² (either sign).
    f_lo, f_hi : float
        Band, Hz (0 < f_lo < f_hi).
    sections : int, optional
        Number of second-order sections (default: :func:`allpass_section_count`).
    max_sections : int
        Refuse beyond this many sections.
    q_unloaded : float, optional
        Unloaded Q of the reactances for the line's loss.
    ripple_target : float
        RMS delay ripple, as a fraction of the delay spread |Φ|Δω, below which the starting
        placement is accepted without refinement.
    max_iterations : int
        Cap on least-squares function evaluations.

    Returns
    -------
    AllpassFit

    Raises
    ------
    ValueError
        When the band is invalid or more than `max_sections` sections are needed.
    """
    phi, f_lo, f_hi, n = _checked_band(gdd, f_lo, f_hi, sections)
    if n > max_sections:
        raise ValueError(
            f"a linear group delay of {phi:.4g} s² over {f_lo:.4g}-{f_hi:.4g} Hz needs about {n} "
            f"all-pass sections, more than max_sections={max_sections}"
        )
    w_lo, w_hi = 2 * math.pi * f_lo, 2 * math.pi * f_hi
    wc = 0.5 * (w_lo + w_hi)
    dw = w_hi - w_lo
    w = np.linspace(w_lo, w_hi, max(64, points_per_section * n))
    w0, q0, _, _ = allpass_placement(phi, f_lo, f_hi, n)
    ref = wc  # fit in units of the band centre for conditioning

    def delays(x):
        a, b = np.exp(x[:n]) * ref, np.exp(x[n:])
        return allpass2_delay(a[:, None], b[:, None], w[None, :])  # (n, points)

    def resid(x):
        tau = delays(x).sum(axis=0) - phi * (w - wc)
        return (tau - tau.mean()) * ref

    def jac(x):
        # each section depends only on its own (ω0, Q): two batched differences give J
        h = 1e-6
        base = delays(x)
        xa = x.copy()
        xa[:n] += h
        ja = (delays(xa) - base) / h
        xb = x.copy()
        xb[n:] += h
        jb = (delays(xb) - base) / h
        j = np.concatenate([ja, jb], axis=0).T * ref
        return j - j.mean(axis=0, keepdims=True)

    x = np.concatenate([np.log(w0 / ref), np.log(q0)])
    spread = abs(phi) * dw + 1e-300
    if np.sqrt(np.mean(resid(x) ** 2)) / ref > ripple_target * spread:
        from scipy import optimize  # imported here: slow to import, needed by fits only

        x = optimize.least_squares(resid, x, jac=jac, method="trf", max_nfev=int(max_iterations)).x
    a, b = np.exp(x[:n]) * ref, np.exp(x[n:])
    line = AllpassLine(second=tuple(zip(a, b)), q_unloaded=q_unloaded, center=wc / (2 * math.pi),
                       gdd=phi, fit_band=(f_lo, f_hi))
    tau = line.group_delay(w)
    g, d, _, _ = fit_gdd(w / (2 * math.pi), tau, center=wc / (2 * math.pi))
    dev = tau - (np.mean(tau - phi * (w - wc)) + phi * (w - wc))
    return AllpassFit(line=line, delay=float(np.mean(tau - phi * (w - wc))),
                      ripple_rms=float(np.sqrt(np.mean(dev ** 2))),
                      ripple_peak=float(np.max(np.abs(dev))), gdd_fitted=g)
