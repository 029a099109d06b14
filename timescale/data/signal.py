"""Band-limited signal operations shared by the core and the plugins.

One home for: exact band-limited resampling onto any uniform grid, and the continuous Fourier
transform of a sampled pulse at arbitrary, equally spaced frequencies (both use the chirp-z
transform, so the cost is O((n + m) log(n + m)) for any rate ratio); the spectral derivative;
and the analytic signal used by envelope detectors and single-sideband mixers.

The chirp-z transform is our own (Bluestein's algorithm, as in ``scipy.signal.czt``) so that its
plans are cached across calls, trials and cells, and so that a batch may use a different
frequency spacing per record (:func:`chirp_z` with array arguments); scipy.signal is imported
only by :func:`analytic`, which keeps start-up light.
"""

from __future__ import annotations

import math
from dataclasses import replace
from functools import lru_cache

import numpy as np
import scipy.fft as sfft

__all__ = ["resample_to", "fourier_at", "chirp_z", "derivative", "analytic"]


def _chirp_parts(n: int, m: int, theta, phi):
    """Bluestein factors of :func:`chirp_z`: (pre (..., n), kernel spectrum (..., L), post (..., m), L).

    n·k = (n² + k² − (k − n)²)/2 turns the sum into a convolution with the chirp e^{jθ j²/2}."""
    L = sfft.next_fast_len(n + m - 1)
    th = np.asarray(theta, dtype=float)[..., None]
    ph = np.asarray(phi, dtype=float)[..., None]
    i = np.arange(max(n, m), dtype=float)
    half = 0.5 * i * i
    pre = np.exp(-1j * (ph * i[:n] + th * half[:n]))
    post = np.exp(-1j * th * half[:m])
    lag = np.concatenate([np.arange(n - 1, 0, -1), np.arange(m)]).astype(float)
    kern = sfft.fft(np.exp(0.5j * th * lag * lag), L, axis=-1)
    return pre, kern, post, L


@lru_cache(maxsize=128)
def _chirp_plan(n: int, m: int, theta: float, phi: float):
    """Cached :func:`_chirp_parts` for one spacing (the plans repeat across trials and cells)."""
    parts = _chirp_parts(n, m, theta, phi)
    for a in parts[:3]:
        a.setflags(write=False)
    return parts


def chirp_z(values, m: int, theta, phi=0.0) -> np.ndarray:
    """``X_k = Σ_n x_n e^{−j n (φ + θ k)}`` for k < m (the DTFT at ω = φ + θk rad/sample), along
    the last axis, by Bluestein's algorithm in O((n + m) log(n + m)).

    Parameters
    ----------
    values : array_like, shape (..., n)
        Samples (real or complex).
    m : int
        Number of output points.
    theta, phi : float or ndarray
        Spacing and start of the angular frequencies, rad/sample. Scalars use a cached plan;
        arrays broadcast against the leading axes of `values` (one spacing per record).

    Returns
    -------
    ndarray, shape (..., m), complex
    """
    v = np.asarray(values)
    n = v.shape[-1]
    m = int(m)
    if np.ndim(theta) == 0 and np.ndim(phi) == 0:
        pre, kern, post, L = _chirp_plan(n, m, float(theta), float(phi))
    else:
        pre, kern, post, L = _chirp_parts(n, m, theta, phi)
    buf = np.zeros(np.broadcast_shapes(v.shape, pre.shape)[:-1] + (L,), dtype=complex)
    np.multiply(v, pre, out=buf[..., :n])  # zero-padded in place (no padding copy in the FFT)
    buf = sfft.fft(buf, axis=-1, overwrite_x=True)
    buf *= kern
    out = sfft.ifft(buf, axis=-1, overwrite_x=True)
    return out[..., n - 1:n - 1 + m] * post


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


def resample_to(pulse, rate: float, *, t_start=None, n: int | None = None):
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
    t_start : float or ndarray of shape (K,), optional
        Time of the first new sample, s (default: the pulse's t0). An array (one-record `pulse`
        only, `n` given) gives K records sharing one interpolant, record k starting at
        t_start[k]; the returned pulse's t0 is t_start[0] (its records are shifted copies).
    n : int, optional
        Number of new samples (default: enough to span the original record).

    Returns
    -------
    Pulse
    """
    many = t_start is not None and np.ndim(t_start) > 0
    if many:
        if pulse.values.ndim != 1:
            raise ValueError(f"t_start as an array (one start per record) needs a one-record pulse, got "
                             f"values of shape {pulse.values.shape}")
        t_start = np.asarray(t_start, dtype=float)
        if n is None:
            raise ValueError("t_start as an array (one start per record) needs n, the samples per record; got n=None")
    else:
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
    if many:
        tau0 = tau0[:, None]
    step = 1.0 / rate
    # Σ_{i} c_i e^{j2π(i−k0)(τ0 + m·step)/T}
    i = np.arange(c.shape[-1])
    pre = c * np.exp(2j * np.pi * i * tau0 / period)
    s = chirp_z(pre, n, -2.0 * np.pi * step / period)
    m = np.arange(n)
    s = s * np.exp(-2j * np.pi * k0 * (tau0 + m * step) / period)
    return replace(pulse, values=np.ascontiguousarray(s.real), rate=float(rate),
                   t0=float(t_start[0]) if many else t_start)


def _lowpass(values, rate, cutoff):
    n = values.shape[-1]
    f = sfft.rfftfreq(n, 1.0 / rate)
    X = sfft.rfft(values, axis=-1)
    X[..., f > cutoff] = 0.0
    return sfft.irfft(X, n=n, axis=-1)


def fourier_at(pulse, f_start: float, df, m: int) -> np.ndarray:
    """Continuous Fourier transform X(f) = ∫x(t)e^{−j2πft}dt of a band-limited sampled pulse at
    ``f = f_start + k·df``, k < m (chirp-z transform), in units·s.

    Valid for |f| below the pulse's Nyquist frequency; the phase is referred to t = 0 (not t0).
    `df` may be an array of shape (K,) (one spacing per output record, Hz; the pulse's records
    broadcast against it); the result then has shape (K, m).
    """
    dt = pulse.dt
    df = np.asarray(df, dtype=float) if np.ndim(df) else float(df)
    X = chirp_z(pulse.values, m, 2.0 * np.pi * df * dt, 2.0 * np.pi * f_start * dt) * dt
    f = f_start + np.multiply.outer(df, np.arange(m))
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
    from scipy import signal as ss  # imported here: scipy.signal is slow to import

    v = np.asarray(values, dtype=float)
    n = v.shape[-1]
    return ss.hilbert(v, N=sfft.next_fast_len(n), axis=-1)[..., :n]
