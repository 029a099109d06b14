"""Applying dispersion: a line or response to a wave (padded so it never wraps), quadratic-phase
dispersion, the time lens, and the time-stretch dispersion penalty.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.fft as sfft

from timescale.data import checks as _checks
from timescale.numerics.dispersion.waves import Wave, quadratic_phase


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
