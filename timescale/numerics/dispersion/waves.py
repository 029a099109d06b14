"""Waveform records for the dispersive path (real passband or complex envelope), chirp and GDD
conversions, and the choice of simulation path.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from timescale.data import checks as _checks


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
