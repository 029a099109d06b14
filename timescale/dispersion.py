"""Dispersion, chirp and envelope-detection numerics shared by every method that needs them.

Sign convention (DESIGN §3): signals are written with e^{+jωt}. A dispersive element is

    H(ω) = exp(−j Φ ω² / 2),    group delay τ(ω) = −dφ/dω = Φ ω,

so Φ (s²) is the group-delay dispersion (GDD); the delay slope in s/Hz is 2πΦ. A linear chirp
whose instantaneous frequency rises at μ Hz/s has the phase (t − t_c)²/(2Φ) with Φ = 1/(2πμ):
it is what an impulse becomes after a line of GDD Φ.

Waveforms travel as :class:`Wave` records: either a *real passband* record (``carrier=None``)
or the *complex envelope* v(t) of a band-pass signal about a carrier f_c, the real signal being
Re{v(t)·e^{j2πf_c t}}. A line is evaluated at the absolute angular frequency in both cases, so
the same line model serves both paths; :func:`choose_path` picks one from the
carrier-to-bandwidth ratio.

Every operator is applied by FFT on a record padded by the spread of group delays over the
occupied band (plus a guard), so the output grows to hold the dispersed pulse and never wraps
around; FFT sizes come from :func:`scipy.fft.next_fast_len`.

Line models (all frozen dataclasses with ``response(omega)`` and ``group_delay(omega)`` taking
absolute angular frequencies ω ≥ 0 in rad/s):

* :class:`QuadraticLine` — ideal quadratic phase about a centre frequency, optional bulk delay
  and a sinusoidal group-delay ripple.
* :class:`BandLimitedLine` — the same phase, a finite pass band (Butterworth-shaped edges) and an
  insertion loss proportional to the group delay (dB per second of delay).
* :class:`AllpassLine` — a cascade of first- and second-order all-pass sections, optionally with
  the loss that finite-Q reactances add; :func:`design_allpass` fits one to a linear group
  delay over a band and reports its real ripple.
* :class:`SampledLine` — a response sampled on a frequency grid (measured or simulated), e.g.
  read from a Touchstone file by :func:`read_touchstone`; :meth:`SampledLine.with_dc` adds a DC
  point, :meth:`SampledLine.causality` checks the impulse response for precursors and
  :func:`fit_gdd` fits Φ to its group delay.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
import scipy.fft as sfft
from scipy import optimize
from scipy import signal as ss

from . import _checks
from .signal import analytic

__all__ = [
    "Wave",
    "gdd_from_chirp_rate",
    "chirp_rate_from_gdd",
    "quadratic_phase",
    "phase_from_group_delay",
    "group_delay_of",
    "linear_chirp",
    "choose_path",
    "QuadraticLine",
    "BandLimitedLine",
    "AllpassLine",
    "SampledLine",
    "AllpassFit",
    "allpass1_delay",
    "allpass2_delay",
    "allpass_section_count",
    "design_allpass",
    "fit_gdd",
    "read_touchstone",
    "Causality",
    "apply_line",
    "apply_response",
    "disperse",
    "time_lens",
    "envelope",
    "lowpass",
    "square_law",
    "dispersion_penalty",
    "penalty_null",
]


# ------------------------------------------------------------------------------------------
# records and small conversions
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class Wave:
    """A waveform on a uniform grid: real passband, or a complex envelope about a carrier.

    Parameters
    ----------
    values : ndarray
        Samples, time on the last axis (leading axes are a batch). Real for a passband
        record, complex for an envelope.
    rate : float
        Sample rate, Hz.
    t0 : float
        Time of the first sample, s.
    carrier : float or None
        Carrier frequency f_c of a complex envelope, Hz (real signal Re{v·e^{j2πf_c t}});
        None for a real passband record.
    """

    values: np.ndarray
    rate: float
    t0: float = 0.0
    carrier: float | None = None

    def __post_init__(self):
        v = np.asarray(self.values)
        if v.ndim == 0 or v.shape[-1] < 2:
            raise ValueError(f"values must have at least 2 samples on the last axis, got shape {v.shape}")
        if self.carrier is None:
            if np.iscomplexobj(v):
                raise TypeError("a passband Wave (carrier=None) must be real; give carrier= for an envelope")
            v = np.asarray(v, dtype=float)
        else:
            _checks.nonnegative("carrier", self.carrier)
            v = np.asarray(v, dtype=complex)
        object.__setattr__(self, "values", v)
        object.__setattr__(self, "rate", _checks.positive("rate", self.rate))
        object.__setattr__(self, "t0", _checks.finite("t0", self.t0))

    @property
    def n(self) -> int:
        """Number of samples."""
        return self.values.shape[-1]

    @property
    def t(self) -> np.ndarray:
        """Sample times, s."""
        return self.t0 + np.arange(self.n) / self.rate

    @property
    def is_envelope(self) -> bool:
        """True for a complex envelope, False for a real passband record."""
        return self.carrier is not None

    def energy(self) -> np.ndarray | float:
        """Energy of the real signal, V²·s (into 1 Ω), per record.

        For an envelope, Re{v e^{jω_c t}} carries ∫|v|²/2 dt.
        """
        p = np.abs(self.values) ** 2
        if self.is_envelope:
            p = p / 2.0
        e = np.sum(p, axis=-1) / self.rate
        return float(e) if np.ndim(e) == 0 else e

    def with_values(self, values) -> "Wave":
        """A wave on the same grid with new values."""
        return replace(self, values=values)


def gdd_from_chirp_rate(rate: float) -> float:
    """Equivalent GDD of a linear chirp, Φ = 1/(2πμ), s² (μ in Hz/s, signed)."""
    mu = _checks.finite("rate", rate)
    if mu == 0:
        raise ValueError("rate must be non-zero (Hz/s); a CW carrier has no equivalent GDD")
    return 1.0 / (2.0 * math.pi * mu)


def chirp_rate_from_gdd(gdd: float) -> float:
    """Chirp rate μ = 1/(2πΦ), Hz/s, of a GDD Φ (s², signed, non-zero)."""
    phi = _checks.finite("gdd", gdd)
    if phi == 0:
        raise ValueError("gdd must be non-zero (s²)")
    return 1.0 / (2.0 * math.pi * phi)


def quadratic_phase(omega, gdd: float) -> np.ndarray:
    """The ideal dispersive response H(ω) = exp(−jΦω²/2).

    Parameters
    ----------
    omega : array_like
        Angular frequency (offset from the line's centre), rad/s.
    gdd : float
        Φ, s².

    Returns
    -------
    ndarray of complex
        Unit-magnitude response; group delay Φω.
    """
    w = np.asarray(omega, dtype=float)
    return np.exp(-0.5j * _checks.finite("gdd", gdd) * w * w)


def phase_from_group_delay(omega, tau, omega_ref: float | None = None) -> np.ndarray:
    """Phase φ(ω) = −∫τ dω of a sampled group delay (trapezoid rule), zero at `omega_ref`.

    Parameters
    ----------
    omega : array_like
        Increasing angular frequencies, rad/s.
    tau : array_like
        Group delay at `omega`, s.
    omega_ref : float, optional
        Where the phase is zero (default: the first point).
    """
    w = np.asarray(omega, dtype=float)
    tau = np.asarray(tau, dtype=float)
    if w.shape != tau.shape or w.ndim != 1 or w.size < 2:
        raise ValueError(f"omega and tau must be 1-D of the same length >= 2, got {w.shape} and {tau.shape}")
    if np.any(np.diff(w) <= 0):
        raise ValueError("omega must be strictly increasing")
    phi = -np.concatenate([[0.0], np.cumsum(0.5 * (tau[1:] + tau[:-1]) * np.diff(w))])
    if omega_ref is not None:
        phi = phi - np.interp(omega_ref, w, phi)
    return phi


def group_delay_of(omega, response) -> np.ndarray:
    """Group delay −d(unwrapped arg H)/dω of a sampled response (central differences), s.

    This is the definition used by network analysers and by scikit-rf's ``group_delay``.
    """
    w = np.asarray(omega, dtype=float)
    phase = np.unwrap(np.angle(np.asarray(response)))
    return -np.gradient(phase, w)


def linear_chirp(t, rate: float, center: float = 0.0, phase0: float = 0.0) -> np.ndarray:
    """Complex envelope of a linear chirp, exp(j(πμ(t − t_c)² + φ0)).

    Its instantaneous frequency (about the carrier) is μ(t − t_c) Hz; it equals the phase
    (t − t_c)²/(2Φ) of an impulse dispersed by Φ = 1/(2πμ).

    Parameters
    ----------
    t : array_like
        Times, s.
    rate : float
        Chirp rate μ, Hz/s (signed).
    center : float
        Time t_c at which the chirp crosses the carrier, s.
    phase0 : float
        Phase at t_c, rad.
    """
    u = np.asarray(t, dtype=float) - center
    return np.exp(1j * (math.pi * _checks.finite("rate", rate) * u * u + phase0))


def choose_path(carrier: float, bandwidth: float, ratio: float = 2.0) -> tuple[str, str]:
    """Choose complex-baseband or real-passband simulation.

    A complex envelope is exact when the band [f_c − B/2, f_c + B/2] stays clear of its mirror
    image at negative frequency and a square-law detector's 2f_c product can be filtered; with
    margin, when f_c ≥ `ratio`·B.

    Parameters
    ----------
    carrier : float
        Carrier frequency f_c, Hz.
    bandwidth : float
        Two-sided occupied bandwidth B about the carrier, Hz.
    ratio : float
        Threshold on f_c/B.

    Returns
    -------
    path : {"complex baseband", "real passband"}
    reason : str
        A sentence for the record.
    """
    fc = _checks.nonnegative("carrier", carrier)
    b = _checks.positive("bandwidth", bandwidth)
    r = fc / b
    if r >= _checks.positive("ratio", ratio):
        return "complex baseband", f"carrier/bandwidth = {r:.3g} >= {ratio:g}: complex envelope is exact"
    return "real passband", f"carrier/bandwidth = {r:.3g} < {ratio:g}: simulated as a real passband signal"


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


@dataclass(frozen=True, eq=False)
class SampledLine:
    """A two-port transmission response sampled on a frequency grid.

    Between samples, magnitude and unwrapped phase are interpolated linearly; outside the
    sampled band the response is zero (nothing is assumed about it).

    Parameters
    ----------
    frequency : ndarray
        Increasing frequencies, Hz (≥ 0).
    s21 : ndarray
        Complex transmission at `frequency`.
    source : str
        Where the data came from (file name), for records.
    """

    frequency: np.ndarray
    s21: np.ndarray
    source: str = ""
    _phase: np.ndarray = field(init=False, repr=False)

    def __post_init__(self):
        f = np.asarray(self.frequency, dtype=float)
        h = np.asarray(self.s21, dtype=complex)
        if f.ndim != 1 or f.shape != h.shape or f.size < 3:
            raise ValueError(f"frequency and s21 must be 1-D of equal length >= 3, got {f.shape}, {h.shape}")
        if np.any(np.diff(f) <= 0) or f[0] < 0 or not np.all(np.isfinite(f)):
            raise ValueError("frequency must be finite, >= 0 and strictly increasing (Hz)")
        if not np.all(np.isfinite(h)):
            raise ValueError("s21 must be finite")
        f.setflags(write=False)
        h.setflags(write=False)
        object.__setattr__(self, "frequency", f)
        object.__setattr__(self, "s21", h)
        object.__setattr__(self, "_phase", np.unwrap(np.angle(h)))

    @classmethod
    def from_group_delay(cls, frequency, group_delay, magnitude=1.0, source="") -> "SampledLine":
        """Build a response from a sampled group delay (phase = −∫τ dω, zero at the first
        point) and magnitude."""
        f = np.asarray(frequency, dtype=float)
        phi = phase_from_group_delay(2 * math.pi * f, np.asarray(group_delay, dtype=float))
        return cls(f, np.asarray(magnitude, dtype=float) * np.exp(1j * phi), source=source)

    @property
    def band(self) -> tuple[float, float]:
        """(first, last) sampled frequency, Hz."""
        return float(self.frequency[0]), float(self.frequency[-1])

    def group_delay_samples(self) -> np.ndarray:
        """Group delay at the sampled frequencies, −d(unwrapped phase)/dω (central
        differences, as scikit-rf's ``Network.group_delay``), s."""
        return group_delay_of(2.0 * math.pi * self.frequency, self.s21)

    def response(self, omega) -> np.ndarray:
        """Interpolated H at absolute angular frequencies (zero outside the sampled band)."""
        f = np.asarray(omega, dtype=float) / (2.0 * math.pi)
        mag = np.interp(f, self.frequency, np.abs(self.s21), left=0.0, right=0.0)
        ph = np.interp(f, self.frequency, self._phase)
        return mag * np.exp(1j * ph)

    def group_delay(self, omega) -> np.ndarray:
        """Interpolated group delay, s (held constant beyond the band)."""
        f = np.asarray(omega, dtype=float) / (2.0 * math.pi)
        return np.interp(f, self.frequency, self.group_delay_samples())

    def with_dc(self, points: int = 2) -> "SampledLine":
        """Extrapolate the response down to DC.

        The magnitude is held at its lowest sampled value; the phase is extended with the
        group delay fitted to the lowest `points` + 1 samples, then shifted by the smallest
        amount that makes the DC value real (phase 0 or π), spread linearly over the added
        span so the sampled data are untouched. A uniform grid of the measured step is added
        below the first sample.

        Returns
        -------
        SampledLine
            With ``frequency[0] == 0``; self if it already starts at DC.
        """
        f = self.frequency
        if f[0] == 0.0:
            return self
        step = float(f[1] - f[0])
        k = max(2, int(points) + 1)
        slope = np.polyfit(f[:k], self._phase[:k], 1)[0]  # rad/Hz
        n_add = max(1, int(math.ceil(f[0] / step)))
        f_new = np.linspace(0.0, f[0], n_add + 1)[:-1]
        ph_new = self._phase[0] + slope * (f_new - f[0])
        dc = ph_new[0]
        target = math.pi * round(dc / math.pi)
        ph_new = ph_new + (target - dc) * (1.0 - f_new / f[0])  # fix DC, keep continuity at f[0]
        mag_new = np.full(f_new.shape, abs(self.s21[0]))
        return SampledLine(
            np.concatenate([f_new, f]),
            np.concatenate([mag_new * np.exp(1j * ph_new), self.s21]),
            source=self.source,
        )

    def impulse_response(self, n_fft: int | None = None) -> tuple[np.ndarray, np.ndarray]:
        """Real impulse response from a DC-extrapolated, Hermitian-extended copy on a uniform
        grid (inverse FFT).

        Returns
        -------
        t : ndarray
            Times, s (from 0 to 1/Δf; the second half stands for negative times).
        h : ndarray
            Impulse response, 1/s.
        """
        line = self.with_dc()
        f = line.frequency
        step = float(np.min(np.diff(f)))
        n_half = int(math.ceil(f[-1] / step)) + 1
        fg = np.arange(n_half) * step
        h_f = line.response(2 * math.pi * fg)
        h_f[0] = h_f[0].real
        n = 2 * (n_half - 1) if n_fft is None else int(n_fft)
        h = sfft.irfft(h_f, n=n) * (n * step)
        t = np.arange(n) / (n * step)
        return t, h

    def causality(self, threshold: float = 1e-2) -> "Causality":
        """Check causality: energy of the impulse response at negative time (wrapped to the
        end of the record) relative to the total.

        A measured or simulated response of a causal, passive two-port puts almost all its
        impulse-response energy after t = 0; a large precursor fraction points at a
        truncated band, a bad de-embedding or a wrong reference plane.
        """
        t, h = self.impulse_response()
        n = h.size
        e = h * h
        pre = float(np.sum(e[n // 2:]) / max(np.sum(e), 1e-300))
        return Causality(precursor=pre, causal=pre <= threshold, threshold=threshold)


@dataclass(frozen=True)
class Causality:
    """Result of :meth:`SampledLine.causality`.

    Attributes
    ----------
    precursor : float
        Fraction of impulse-response energy at negative time.
    causal : bool
        precursor <= threshold.
    threshold : float
        The limit used.
    """

    precursor: float
    causal: bool
    threshold: float


def read_touchstone(path, ports: tuple[int, int] = (2, 1)) -> SampledLine:
    """Read a transmission response from a Touchstone file (through scikit-rf).

    Parameters
    ----------
    path : str or Path
        A Touchstone file (.s2p, ...).
    ports : (int, int)
        (output, input) port numbers, 1-based: (2, 1) reads S21.

    Returns
    -------
    SampledLine

    Raises
    ------
    ImportError
        When scikit-rf is missing, naming the package to install.
    """
    try:
        import skrf
    except ImportError:  # pragma: no cover - depends on the environment
        raise ImportError(
            "reading Touchstone files needs scikit-rf; install it with "
            "`pip install scikit-rf` or `pip install timescale[touchstone]`"
        ) from None
    try:
        net = skrf.Network(str(path))
    except FileNotFoundError:
        raise ValueError(f"Touchstone file {str(path)!r} does not exist") from None
    m, n = ports
    if not (1 <= m <= net.nports and 1 <= n <= net.nports):
        raise ValueError(f"ports={ports!r} out of range for a {net.nports}-port file {str(path)!r}")
    return SampledLine(net.frequency.f, net.s[:, m - 1, n - 1], source=str(path))


def fit_gdd(frequency, group_delay, weights=None, center: float | None = None):
    """Fit τ(f) ≈ τ0 + Φ·2π(f − f_c) by weighted least squares.

    Parameters
    ----------
    frequency : array_like
        Hz.
    group_delay : array_like
        s.
    weights : array_like, optional
        Non-negative weights (e.g. |S21|²).
    center : float, optional
        f_c, Hz (default: the weighted mean frequency).

    Returns
    -------
    gdd : float
        Φ, s².
    delay : float
        τ0 at f_c, s.
    center : float
        f_c, Hz.
    ripple_rms : float
        RMS deviation from the fitted line (weighted), s.
    """
    f = np.asarray(frequency, dtype=float)
    tau = np.asarray(group_delay, dtype=float)
    w = np.ones_like(f) if weights is None else np.asarray(weights, dtype=float)
    if f.shape != tau.shape or f.shape != w.shape or f.size < 2:
        raise ValueError("frequency, group_delay and weights must have the same length >= 2")
    if np.sum(w) <= 0:
        raise ValueError("weights must not all be zero")
    fc = float(np.sum(w * f) / np.sum(w)) if center is None else float(center)
    x = 2.0 * math.pi * (f - fc)
    sw = np.sqrt(w)
    coef, *_ = np.linalg.lstsq(np.stack([sw, sw * x], axis=1), sw * tau, rcond=None)
    resid = tau - (coef[0] + coef[1] * x)
    rms = float(np.sqrt(np.sum(w * resid ** 2) / np.sum(w)))
    return float(coef[1]), float(coef[0]), fc, rms


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
    phi = _checks.finite("gdd", gdd)
    f_lo = _checks.positive("f_lo", f_lo)
    f_hi = _checks.positive("f_hi", f_hi)
    if f_hi <= f_lo:
        raise ValueError(f"f_hi ({f_hi} Hz) must exceed f_lo ({f_lo} Hz)")
    n = allpass_section_count(phi, f_lo, f_hi) if sections is None else int(sections)
    if n < 1:
        raise ValueError(f"sections must be >= 1, got {sections!r}")
    if n > max_sections:
        raise ValueError(
            f"a linear group delay of {phi:.4g} s² over {f_lo:.4g}-{f_hi:.4g} Hz needs about {n} "
            f"all-pass sections, more than max_sections={max_sections}"
        )
    w_lo, w_hi = 2 * math.pi * f_lo, 2 * math.pi * f_hi
    wc = 0.5 * (w_lo + w_hi)
    dw = w_hi - w_lo
    w = np.linspace(w_lo, w_hi, max(64, points_per_section * n))
    # wanted delay: τ0 chosen so that the band plus half a section spacing beyond each edge
    # holds the n·2π of phase the sections carry (edge sections straddle the band edges)
    tau0 = 2 * math.pi * n / dw
    for _ in range(3):
        pad = 0.5 * 2 * math.pi / tau0
        we = np.linspace(w_lo - pad, w_hi + pad, w.size)
        target = tau0 + phi * (we - wc)
        target = np.maximum(target, 0.1 * tau0)
        tau0 = tau0 * 2 * math.pi * n / np.trapezoid(target, we)
    target = np.maximum(tau0 + phi * (we - wc), 0.1 * tau0)
    cum = np.concatenate([[0.0], np.cumsum(0.5 * (target[1:] + target[:-1]) * np.diff(we))])
    marks = (np.arange(n) + 0.5) / n * cum[-1]
    w0 = np.interp(marks, cum, we)
    spacing = np.gradient(w0) if n > 1 else np.array([dw])
    q0 = np.clip(w0 / (1.2 * np.abs(spacing)), 0.3, 1e4)
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


# ------------------------------------------------------------------------------------------
# applying operators
# ------------------------------------------------------------------------------------------
def _omega_grid(wave: Wave, n: int) -> np.ndarray:
    if wave.is_envelope:
        return 2.0 * math.pi * (wave.carrier + sfft.fftfreq(n, 1.0 / wave.rate))
    return 2.0 * math.pi * sfft.rfftfreq(n, 1.0 / wave.rate)


def _evaluate(fn, omega: np.ndarray) -> np.ndarray:
    """Evaluate a response on absolute ω, mirroring H(−ω) = H(ω)* for negative ω."""
    pos = omega >= 0
    out = np.empty(omega.shape, dtype=complex)
    out[pos] = fn(omega[pos])
    if not pos.all():
        out[~pos] = np.conj(fn(-omega[~pos]))
    return out


def _occupied_mask(wave: Wave, floor: float) -> tuple[np.ndarray, int]:
    n = sfft.next_fast_len(wave.n, real=not wave.is_envelope)
    if wave.is_envelope:
        spec = sfft.fft(wave.values, n=n, axis=-1)
    else:
        spec = sfft.rfft(wave.values, n=n, axis=-1)
    p = np.abs(spec.reshape(-1, spec.shape[-1])) ** 2
    p = p.max(axis=0)
    top = p.max()
    if top == 0:
        return np.zeros(p.shape, bool), n
    return p > floor * top, n


def apply_response(wave: Wave, response, delay_range: tuple[float, float], *,
                   guard: float = 0.05, tail: float = 0.0, about_carrier: bool = False) -> Wave:
    """Apply a frequency response by FFT, padding the record so nothing wraps around.

    Parameters
    ----------
    wave : Wave
        Input.
    response : callable
        ``response(omega) -> H`` at absolute angular frequencies ω ≥ 0, rad/s.
    delay_range : (float, float)
        Smallest and largest group delay the response applies to the wave's content, s; the
        record grows by these (plus a guard) at each end.
    guard : float
        Extra padding as a fraction of the delay spread (each end).
    tail : float
        Extra padding for impulse-response tails, s (each end).
    about_carrier : bool
        For an envelope: evaluate ``response`` at the offset Δω = ω − ω_c (two-sided, no
        mirroring), i.e. the response is defined on the envelope itself. Otherwise it is a
        physical (real) line evaluated at absolute ω with H(−ω) = H(ω)*.

    Returns
    -------
    Wave
        Longer record on the same rate; ``t0`` moves back by the front padding.
    """
    tmin, tmax = (float(v) for v in delay_range)
    if not (math.isfinite(tmin) and math.isfinite(tmax)) or tmax < tmin:
        raise ValueError(f"delay_range must be finite (min, max) with min <= max, got {delay_range!r}")
    fs = wave.rate
    extra = guard * (tmax - tmin) + tail + 16.0 / fs
    n_front = int(math.ceil((max(0.0, -tmin) + extra) * fs))
    n_back = int(math.ceil((max(0.0, tmax) + extra) * fs))
    n = sfft.next_fast_len(wave.n + n_front + n_back, real=not wave.is_envelope)
    n_back = n - wave.n - n_front
    width = [(0, 0)] * (wave.values.ndim - 1) + [(n_front, n_back)]
    x = np.pad(wave.values, width)
    if about_carrier and wave.is_envelope:
        h = np.asarray(response(2.0 * math.pi * sfft.fftfreq(n, 1.0 / fs)), dtype=complex)
    else:
        h = _evaluate(response, _omega_grid(wave, n))
    if wave.is_envelope:
        y = sfft.ifft(sfft.fft(x, axis=-1) * h, axis=-1)
    else:
        y = sfft.irfft(sfft.rfft(x, axis=-1) * h, n=n, axis=-1)
    return Wave(y, fs, wave.t0 - n_front / fs, wave.carrier)


def apply_line(wave: Wave, line, *, floor: float = 1e-12, guard: float = 0.05) -> Wave:
    """Pass `wave` through a line model, with the padding its group-delay spread requires.

    The delay range is taken over the frequencies where the wave's power spectrum exceeds
    `floor` times its peak; content below that floor may wrap around (its error is below
    √floor of the peak).

    Parameters
    ----------
    wave : Wave
        Input (passband or envelope).
    line
        Any line model (``response`` and ``group_delay`` methods).
    floor : float
        Relative power floor that bounds the occupied band.

    Returns
    -------
    Wave
    """
    mask, n = _occupied_mask(wave, floor)
    omega = _omega_grid(wave, n)[mask]
    if omega.size == 0:
        return wave
    tau = _evaluate(lambda w: line.group_delay(w).astype(complex), omega).real
    band = float(np.ptp(omega)) if omega.size > 1 else 2 * math.pi * wave.rate / n
    tail = 8.0 * 2.0 * math.pi / max(band, 2 * math.pi * wave.rate / n) + 8.0 / wave.rate
    return apply_response(wave, line.response, (float(tau.min()), float(tau.max())), guard=guard, tail=tail)


def disperse(wave: Wave, gdd: float, *, floor: float = 1e-12) -> Wave:
    """Apply the ideal quadratic phase exp(−jΦΔω²/2) to a complex envelope (Δω about its
    carrier, both signs), padding the record by the delay spread Φ·Δω of its content.

    Parameters
    ----------
    wave : Wave
        A complex envelope.
    gdd : float
        Φ, s².

    Returns
    -------
    Wave
        Padded to hold the dispersed pulse.
    """
    if not wave.is_envelope:
        raise TypeError("disperse() needs a complex envelope (Wave with carrier=...); for a real "
                        "passband record use apply_line() with a QuadraticLine centred in its band")
    phi = _checks.finite("gdd", gdd)
    mask, n = _occupied_mask(wave, floor)
    dw = 2.0 * math.pi * sfft.fftfreq(n, 1.0 / wave.rate)[mask]
    if dw.size == 0:
        return wave
    tau = phi * dw
    tail = 16.0 / wave.rate
    return apply_response(wave, lambda w: quadratic_phase(w, phi), (float(tau.min()), float(tau.max())),
                          tail=tail, about_carrier=True)


def time_lens(wave: Wave, focal_gdd: float, center: float = 0.0, aperture=None) -> Wave:
    """Quadratic-phase modulation ("time lens"): multiply by exp(−j(t − t_c)²/(2Φ_f)).

    Parameters
    ----------
    wave : Wave
        A complex envelope.
    focal_gdd : float
        Focal GDD Φ_f, s² (non-zero).
    center : float
        Lens centre t_c, s.
    aperture : callable, optional
        ``aperture(t) -> weight`` (the gate of the lens chirp), default all ones.

    Notes
    -----
    With lines Φ1 before and Φ2 after and 1/Φ1 + 1/Φ2 = 1/Φ_f the output is an image
    x(t/M)/√|M| with M = −Φ2/Φ1 times a quadratic phase (Kolner & Nazarathy, Opt. Lett. 14,
    1989; Kolner, IEEE JQE 30, 1994).
    """
    if not wave.is_envelope:
        raise TypeError("time_lens() needs a complex envelope (Wave with carrier=...)")
    phi = _checks.finite("focal_gdd", focal_gdd)
    if phi == 0:
        raise ValueError("focal_gdd must be non-zero (s²)")
    u = wave.t - center
    m = np.exp(-0.5j * u * u / phi)
    if aperture is not None:
        m = m * aperture(wave.t)
    return wave.with_values(wave.values * m)


# ------------------------------------------------------------------------------------------
# detection
# ------------------------------------------------------------------------------------------
def envelope(wave: Wave) -> np.ndarray:
    """Ideal envelope detector: |v| of a complex envelope, or |analytic signal| of a real one.

    Returns
    -------
    ndarray
        Envelope magnitude on the wave's grid, V.
    """
    if wave.is_envelope:
        return np.abs(wave.values)
    return np.abs(analytic(wave.values))


def lowpass(values, rate: float, cutoff: float, order: int = 4) -> np.ndarray:
    """Analog Bessel–Thomson low-pass (normalised at its −3 dB point `cutoff`) applied by FFT.

    The record is treated as periodic; pad it first if the tail must not wrap.

    Parameters
    ----------
    values : ndarray
        Real samples, time on the last axis.
    rate : float
        Sample rate, Hz.
    cutoff : float
        −3 dB frequency, Hz.
    order : int
        Filter order.
    """
    v = np.asarray(values, dtype=float)
    fc = _checks.positive("cutoff", cutoff)
    b, a = ss.bessel(int(order), 2 * math.pi * fc, analog=True, norm="mag")
    n = v.shape[-1]
    w = 2 * math.pi * sfft.rfftfreq(n, 1.0 / _checks.positive("rate", rate))
    _, h = ss.freqs(b, a, worN=w)
    return sfft.irfft(sfft.rfft(v, axis=-1) * h, n=n, axis=-1)


def square_law(wave: Wave, cutoff: float, order: int = 4) -> np.ndarray:
    """Square-law detector followed by a Bessel low-pass: LP(y²) (real) or LP(|v|²/2)
    (envelope, whose 2f_c product is already absent), V².

    Parameters
    ----------
    wave : Wave
        Input.
    cutoff : float
        Low-pass −3 dB frequency, Hz.
    order : int
        Low-pass order.
    """
    p = np.abs(wave.values) ** 2 / 2.0 if wave.is_envelope else wave.values ** 2
    return lowpass(p, wave.rate, cutoff, order)


# ------------------------------------------------------------------------------------------
# time-stretch dispersion penalty
# ------------------------------------------------------------------------------------------
def dispersion_penalty(frequency, gdd_line: float, factor: float) -> np.ndarray:
    """Response of a double-sideband time-stretch link to a tone: cos(Φ2ω²/(2M)).

    Parameters
    ----------
    frequency : array_like
        Input tone frequency, Hz.
    gdd_line : float
        Φ2, s².
    factor : float
        M = 1 + Φ2/Φ1.

    Notes
    -----
    The two sidebands of a tone pick up the same quadratic phase Φ2ω²/(2M) about the
    stretched carrier; a detector that keeps the in-phase part sees their cosine (Han &
    Jalali, J. Lightwave Technol. 21, 2003, from memory).
    """
    w = 2.0 * math.pi * np.asarray(frequency, dtype=float)
    return np.cos(_checks.finite("gdd_line", gdd_line) * w * w / (2.0 * _checks.finite("factor", factor)))


def penalty_null(gdd_line: float, factor: float) -> float:
    """First null of :func:`dispersion_penalty`, Hz: Φ2ω²/(2M) = π/2 ⇒ f = √(πM/Φ2)/(2π)."""
    ratio = _checks.finite("factor", factor) / _checks.finite("gdd_line", gdd_line)
    if ratio <= 0:
        return math.inf
    return math.sqrt(math.pi * ratio) / (2.0 * math.pi)
