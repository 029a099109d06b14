"""Band-limited signal operations shared by the core and the plugins.

One home for: exact band-limited resampling onto any uniform grid, and the continuous Fourier
transform of a sampled pulse at arbitrary, equally spaced frequencies (both use the chirp-z
transform, so the cost is O((n + m) log(n + m)) for any rate ratio); the spectral derivative;
and the analytic signal used by envelope detectors and single-sideband mixers.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import scipy.fft as sfft
from scipy import signal as ss

__all__ = ["resample_to", "fourier_at", "derivative", "analytic"]


def _trig_coefficients(values: np.ndarray):
    """Centred DFT coefficients of the periodic trigonometric interpolant of `values`.

    Returns ``(c, k0)`` with c of length n (or n+1 for even n, the Nyquist bin split in two
    halves so the interpolant stays real) for harmonics −k0 … .
    """
    n = values.shape[-1]
    X = sfft.fft(values, axis=-1) / n
    if n % 2:
        k0 = n // 2
        c = np.concatenate([X[..., k0 + 1:], X[..., :k0 + 1]], axis=-1)
    else:
        k0 = n // 2
        nyq = X[..., k0:k0 + 1] / 2
        c = np.concatenate([nyq, X[..., k0 + 1:], X[..., :k0], nyq], axis=-1)
    return c, k0


def resample_to(pulse, rate: float, *, t_start: float | None = None, n: int | None = None):
    """Band-limited resampling of `pulse` onto the grid ``t_start + m / rate``, m < n.

    The record is treated as one period of a periodic, band-limited signal (its trigonometric
    interpolant), which is exact for a pulse that is band-limited below the original Nyquist
    frequency and negligible at both ends of its record. Where the new rate is lower, content
    above the new Nyquist frequency is removed first (ideal anti-alias filter).

    Parameters
    ----------
    pulse : Pulse
        Input.
    rate : float
        New sample rate, Hz.
    t_start : float, optional
        Time of the first new sample, s (default: the pulse's t0).
    n : int, optional
        Number of new samples (default: enough to span the original record).

    Returns
    -------
    Pulse
    """
    t_start = pulse.t0 if t_start is None else float(t_start)
    if n is None:
        n = max(2, int(math.floor((pulse.t_end - t_start) * rate + 1e-9)))
    values = pulse.values
    if rate < pulse.rate:
        values = _lowpass(values, pulse.rate, rate / 2)
    period = pulse.duration
    c, k0 = _trig_coefficients(values)
    # x(τ) = Σ_k c_k e^{j2πkτ/T} with τ = t − t0 measured from the first original sample
    tau0 = t_start - pulse.t0
    step = 1.0 / rate
    w = np.exp(2j * np.pi * step / period)
    # Σ_{i} c_i e^{j2π(i−k0)(τ0 + m·step)/T}
    i = np.arange(c.shape[-1])
    pre = c * np.exp(2j * np.pi * i * tau0 / period)
    s = ss.czt(pre, m=n, w=w, a=1.0, axis=-1)
    m = np.arange(n)
    s = s * np.exp(-2j * np.pi * k0 * (tau0 + m * step) / period)
    return replace(pulse, values=np.ascontiguousarray(s.real), rate=float(rate), t0=t_start)


def _lowpass(values, rate, cutoff):
    n = values.shape[-1]
    f = sfft.rfftfreq(n, 1.0 / rate)
    X = sfft.rfft(values, axis=-1)
    X[..., f > cutoff] = 0.0
    return sfft.irfft(X, n=n, axis=-1)


def fourier_at(pulse, f_start: float, df: float, m: int) -> np.ndarray:
    """Continuous Fourier transform X(f) = ∫x(t)e^{−j2πft}dt of a band-limited sampled pulse at
    ``f = f_start + k·df``, k < m (chirp-z transform), in units·s.

    Valid for |f| below the pulse's Nyquist frequency; the phase is referred to t = 0 (not t0).
    """
    dt = pulse.dt
    w = np.exp(-2j * np.pi * df * dt)
    a = np.exp(2j * np.pi * f_start * dt)
    X = ss.czt(pulse.values, m=m, w=w, a=a, axis=-1) * dt
    f = f_start + df * np.arange(m)
    return X * np.exp(-2j * np.pi * f * pulse.t0)


def derivative(values: np.ndarray, rate: float, order: int = 1) -> np.ndarray:
    """Spectral (band-limited) time derivative of order `order`, units/sᵒʳᵈᵉʳ.

    The record is treated as periodic; the Nyquist bin is dropped for odd orders.
    """
    n = values.shape[-1]
    f = sfft.rfftfreq(n, 1.0 / rate)
    X = sfft.rfft(values, axis=-1) * (2j * np.pi * f) ** order
    if n % 2 == 0 and order % 2:
        X[..., -1] = 0.0
    return sfft.irfft(X, n=n, axis=-1)


def analytic(values) -> np.ndarray:
    """Analytic signal x + j·H{x} of real samples (time on the last axis), same length.

    Computed by FFT (``scipy.signal.hilbert``) at the next fast length, zero-padded, so the
    record is treated as periodic only beyond that padding; when the length is already a
    fast length nothing is added. |analytic(x)| is the ideal envelope of a band-pass x.
    """
    v = np.asarray(values, dtype=float)
    n = v.shape[-1]
    return ss.hilbert(v, N=sfft.next_fast_len(n), axis=-1)[..., :n]
