"""Envelope detection: ideal magnitude, square law with a low-pass, and the low-pass itself.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.fft as sfft

from timescale.data import checks as _checks
from timescale.data.signal import analytic
from timescale.numerics.dispersion.waves import Wave


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
    from scipy import signal as ss  # imported here: scipy.signal is slow to import

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
