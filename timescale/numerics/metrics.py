"""Metrics of a time-scaled pulse (pure functions; the definitions are part of the contract).

For an output y and an input x, the ideal reference is ``r(t) = x((t − d)/α)`` (or
``x(−(t − d)/α)`` for a time-reversed image, ``orientation = −1``) for a gain g and latency d.

* ``nrmse`` = min over g, d of ‖y − g·r_d‖ / ‖g·r_d‖, d continuous (sub-sample).
* ``correlation`` = max over d of |⟨y, r_d⟩| / (‖y‖ ‖r‖).
* ``sndr_db`` = 10·log10(‖g·r_d‖² / ‖y − g·r_d‖²) = −20·log10(nrmse).
* ``latency`` = the fitted d, s.
* ``achieved_factor`` = RMS (Gabor) duration of y over that of x.
* ``fitted_factor`` = the α that minimises the NRMSE (least squares over g, d and α).
* ``jitter_snr_db`` = ⟨x²⟩ / (σ_t² ⟨ẋ²⟩): jitter-limited SNR of a sampler with rms jitter σ_t.

Norms are continuous-time (‖y‖² = ∫y² dt), so pulses on different grids compare fairly; all
grids are treated as band-limited interpolants.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.fft as sfft
from scipy import optimize

from timescale.data import checks as _checks
from timescale.data.pulse import Pulse
from timescale.data.signal import derivative, fourier_at, resample_to

__all__ = [
    "Fit",
    "fit_reference",
    "nrmse",
    "correlation",
    "sndr_db",
    "latency",
    "achieved_factor",
    "fitted_factor",
    "jitter_snr_db",
    "leakage",
    "reference",
    "METRICS",
    "HIGHER_IS_BETTER",
]

#: Metric name → (units, long name): the cube's core variables.
METRICS: dict[str, tuple[str, str]] = {
    "nrmse": ("", "NRMSE against the ideal scaled pulse"),
    "correlation": ("", "peak normalized correlation with the ideal"),
    "sndr_db": ("dB", "signal to noise-and-distortion ratio"),
    "latency": ("s", "fitted latency"),
    "gain": ("", "fitted gain"),
    "achieved_factor": ("", "achieved factor (RMS duration ratio)"),
    "fitted_factor": ("", "fitted factor (least squares)"),
    "bw_in": ("Hz", "input 99% occupied bandwidth"),
    "bw_out": ("Hz", "output 99% occupied bandwidth"),
    "rms_bw_in": ("Hz", "input RMS bandwidth"),
    "rms_bw_out": ("Hz", "output RMS bandwidth"),
    "jitter_snr_in_db": ("dB", "jitter-limited SNR sampling the input"),
    "jitter_snr_out_db": ("dB", "jitter-limited SNR sampling the output"),
    "bw_internal": ("Hz", "internal bandwidth the hardware must pass"),
    "area": ("m2", "silicon area"),
    "power": ("W", "active power"),
    "energy_per_pulse": ("J", "energy per pulse"),
    "limit_margin": ("", "margin to the nearest process limit (>= 1 buildable)"),
}

#: Metrics where a larger value is better; for every other metric smaller is better.
HIGHER_IS_BETTER = ("sndr_db", "correlation", "jitter_snr_out_db", "jitter_snr_in_db")


@dataclass(frozen=True)
class Fit:
    """Best fit of ``g·r_d`` to an output (arrays over the output's batch).

    Attributes
    ----------
    gain : ndarray
        g (output units per input unit).
    latency : ndarray
        d, s.
    correlation : ndarray
        Peak normalized correlation (0 … 1).
    nrmse : ndarray
        ‖y − g r_d‖/‖g r_d‖.
    """

    gain: np.ndarray
    latency: np.ndarray
    correlation: np.ndarray
    nrmse: np.ndarray

    @property
    def sndr_db(self) -> np.ndarray:
        """−20·log10(nrmse), dB."""
        with np.errstate(divide="ignore"):
            return -20.0 * np.log10(self.nrmse)


def reference(x: Pulse, factor: float, orientation: int = 1) -> Pulse:
    """The ideal scaled pulse x(t/α) (or x(−t/α)) on its natural grid (rate/α), latency 0."""
    a = _checks.positive("factor", factor)
    if orientation == 1:
        return x.dilate(a)
    if orientation == -1:
        return Pulse(x.values[..., ::-1], x.rate / a, -a * (x.t0 + (x.n - 1) * x.dt), x.units, x.name)
    raise ValueError(f"orientation must be +1 or -1, got {orientation!r}")


def _norm2(p: Pulse) -> np.ndarray:
    return np.sum(p.values ** 2, axis=-1) * p.dt


def _cross_spectrum(y: Pulse, x: Pulse, factor: float, orientation: int):
    """Y(f)·conj(R(f)) on a grid fine enough that the correlation is unambiguous."""
    a = factor
    span = y.duration + a * x.duration
    df = 1.0 / span
    f_max = min(y.rate, x.rate / a) / 2.0
    m = max(2, int(math.floor(f_max / df)))
    Y = fourier_at(y, 0.0, df, m)
    X = fourier_at(x.row(0), 0.0, a * df, m) * a
    R = X if orientation == 1 else np.conj(X)
    S = Y * np.conj(R)
    S[..., 0] *= 0.5  # DC counted once in the one-sided sum
    return S, df, span


def _corr_at(S, df, d):
    k = np.arange(S.shape[-1])
    return 2.0 * df * np.real(np.sum(S * np.exp(2j * np.pi * k * df * d), axis=-1))


def _corr_slope(S, df, d):
    k = np.arange(S.shape[-1])
    w = 2j * np.pi * k * df
    return 2.0 * df * np.real(np.sum(S * w * np.exp(w * d), axis=-1))


def _refine_latency(S, df, d0, step):
    """Sub-sample latency: the root of dC/dd near the coarse peak (accurate to rounding, where
    maximising the flat peak itself would only reach √eps)."""
    lo, hi = d0 - step, d0 + step
    s_lo, s_hi = _corr_slope(S, df, lo), _corr_slope(S, df, hi)
    if s_lo * s_hi < 0:
        return optimize.brentq(lambda d: _corr_slope(S, df, d), lo, hi, xtol=1e-30, rtol=1e-15)
    res = optimize.minimize_scalar(lambda d: -abs(_corr_at(S, df, d)), bounds=(lo, hi),
                                   method="bounded", options={"xatol": step * 1e-9})
    return float(res.x)


def _coarse_latency(S, df, d_lo, span, oversample=8):
    m = S.shape[-1]
    L = sfft.next_fast_len(oversample * m)
    c = 2.0 * df * np.real(sfft.ifft(S, n=L, axis=-1)) * L
    j = np.argmax(np.abs(c), axis=-1)
    step = 1.0 / (L * df)
    d = j * step
    d = d_lo + np.mod(d - d_lo, span)  # unwrap into the window where the records overlap
    return d, step


def _best_latency(y: Pulse, x: Pulse, factor: float, orientation: int):
    """Latency maximising |⟨y, r_d⟩| for every record of `y`, with the cross-spectrum it came
    from: ``(S of shape (records, m), df, d of shape (records,))``."""
    S, df, span = _cross_spectrum(y, x, factor, orientation)
    S = S.reshape(-1, S.shape[-1])
    d0, step = _coarse_latency(S, df, y.t0 - reference(x, factor, orientation).t_end, span)
    return S, df, np.array([_refine_latency(S[i], df, d0[i], step) for i in range(S.shape[0])])


def fit_reference(y: Pulse, x: Pulse, factor: float, orientation: int = 1) -> Fit:
    """Fit g·x((t − d)/α) to every record of `y` (least squares, continuous d).

    Parameters
    ----------
    y : Pulse
        Output, possibly batched over trials.
    x : Pulse
        Input (one record).
    factor : float
        α.
    orientation : {+1, −1}
        −1 compares with the time-reversed reference.

    Returns
    -------
    Fit
    """
    a = _checks.positive("factor", factor)
    x = x.row(0)
    ref = reference(x, a, orientation)
    _, _, lat = _best_latency(y, x, a, orientation)
    ys = y.values.reshape(-1, y.n)
    out = np.empty((4, ys.shape[0]))
    for i in range(ys.shape[0]):  # one residual per trial
        d = float(lat[i])
        # time-domain residual on y's own grid (no cancellation for near-perfect outputs)
        need_before = max(0.0, ref.t0 + d - y.t0)
        need_after = max(0.0, y.t_end - (ref.t_end + d))
        shifted = ref.shift(d).pad(need_before + ref.dt, need_after + ref.dt)
        r = resample_to(shifted, y.rate, t_start=y.t0, n=y.n).values
        yi = ys[i]
        rr = float(np.dot(r, r))
        if rr <= 0.0:
            out[:, i] = (np.nan, d, 0.0, np.inf)
            continue
        g = float(np.dot(yi, r)) / rr
        err = yi - g * r
        yy = float(np.dot(yi, yi))
        corr = abs(float(np.dot(yi, r))) / math.sqrt(rr * yy) if yy > 0 else 0.0
        nr = math.sqrt(float(np.dot(err, err)) / (g * g * rr)) if g != 0 else math.inf
        out[:, i] = (g, d, corr, nr)
    shape = y.batch_shape
    return Fit(*(o.reshape(shape) if shape else o[0] for o in out))


def nrmse(y: Pulse, x: Pulse, factor: float, orientation: int = 1):
    """min over g, d of ‖y − g·x((t−d)/α)‖/‖g·x((t−d)/α)‖ (per record)."""
    return fit_reference(y, x, factor, orientation).nrmse


def correlation(y: Pulse, x: Pulse, factor: float, orientation: int = 1):
    """Peak normalized cross-correlation of y with x((t−d)/α) (per record)."""
    return fit_reference(y, x, factor, orientation).correlation


def sndr_db(y: Pulse, x: Pulse, factor: float, orientation: int = 1):
    """Signal (fitted ideal) energy over error-plus-noise energy, dB (per record)."""
    return fit_reference(y, x, factor, orientation).sndr_db


def latency(y: Pulse, x: Pulse, factor: float, orientation: int = 1):
    """Fitted latency d, s (per record)."""
    return fit_reference(y, x, factor, orientation).latency


def achieved_factor(y: Pulse, x: Pulse):
    """RMS (Gabor) duration of y over that of x (per record of y)."""
    return y.rms_width() / x.row(0).rms_width()


def fitted_factor(y: Pulse, x: Pulse, guess: float, orientation: int = 1, span: float = 1.25):
    """The α minimising the NRMSE of y against g·x((t − d)/α), searched in
    [guess/span, guess·span] (per record of y)."""
    g = _checks.positive("guess", guess)
    x = x.row(0)
    ys = y.values.reshape(-1, y.n)
    e_x = float(_norm2(x))
    out = np.empty(ys.shape[0])
    for i in range(ys.shape[0]):  # one scalar optimisation per trial
        yi = y.with_values(ys[i])
        e_y = float(_norm2(yi))

        def neg_rho(a):
            S, df, d = _best_latency(yi, x, a, orientation)
            return -abs(_corr_at(S[0], df, d[0])) / math.sqrt(e_y * a * e_x)

        res = optimize.minimize_scalar(neg_rho, bounds=(g / span, g * span), method="bounded",
                                       options={"xatol": g * 1e-7})
        out[i] = res.x
    return out.reshape(y.batch_shape) if y.batch_shape else float(out[0])


def jitter_snr_db(pulse: Pulse, sigma_t: float):
    """Clock-jitter-limited SNR of a sampler reading `pulse`, dB.

    ``SNR = ⟨x²⟩ / (σ_t² ⟨ẋ²⟩)`` (sample-time error δ turns into a voltage error ẋ·δ). For a
    full-scale sine at f it equals −20·log10(2πfσ_t) (Analog Devices MT-008); for a Gaussian of
    standard deviation σ it is 10·log10(2σ²/σ_t²).

    Parameters
    ----------
    pulse : Pulse
        The waveform at the sampler's input (band-limited; the derivative is spectral).
    sigma_t : float
        RMS sampling-clock jitter, s.
    """
    s = _checks.positive("sigma_t", sigma_t)
    v = pulse.values
    xdot = derivative(v, pulse.rate)
    ratio = np.sum(v * v, axis=-1) / np.sum(xdot * xdot, axis=-1)
    out = 10.0 * np.log10(ratio / (s * s))
    return float(out) if np.ndim(out) == 0 else out


def leakage(y: Pulse, t_switch: float):
    """|y(t_switch)| relative to the output peak max|y| (per record): how much of the output
    had already appeared when the switch happened."""
    t = _checks.finite("t_switch", t_switch)
    if not y.t0 <= t <= y.t[-1]:
        raise ValueError(f"t_switch={t!r} s lies outside the output record [{y.t0}, {y.t[-1]}] s")
    v = y.values.reshape(-1, y.n)
    at = np.array([np.interp(t, y.t, row) for row in v])
    out = np.abs(at) / np.max(np.abs(v), axis=-1)
    return out.reshape(y.batch_shape) if y.batch_shape else float(out[0])


# ---- fixed-clock fidelity ---------------------------------------------------------------------

def fit_fixed_clock(y: Pulse, x: Pulse, factor: float, orientation: int = 1) -> Fit:
    """Fit one g·x((t − d)/α) to every record of `y` at once: one gain and one latency for all
    trials, as a receiver sampling on its own clock sees them.

    The least-squares g, d over all records minimise Σ_k ‖y_k − g·r_d‖², which is
    K·‖ȳ − g·r_d‖² + Σ_k ‖y_k − ȳ‖²: the fit of the trial mean ȳ (:func:`fit_reference`).
    Each record's error is then taken against that one reference, so a trial whose output is
    shifted (switch-instant jitter, clock jitter) counts the shift as error, where the
    per-trial fit would absorb it into its own latency. Parameters as :func:`fit_reference`.

    Returns
    -------
    Fit
        ``gain`` and ``latency`` the same for every record; ``correlation`` and ``nrmse``
        (‖y_k − g r_d‖/‖g r_d‖) per record.
    """
    a = _checks.positive("factor", factor)
    x = x.row(0)
    ys = y.values.reshape(-1, y.n)
    common = fit_reference(y.with_values(ys.mean(axis=0)), x, a, orientation)
    g, d = float(common.gain), float(common.latency)
    ref = reference(x, a, orientation)
    shifted = ref.shift(d).pad(max(0.0, ref.t0 + d - y.t0) + ref.dt,
                               max(0.0, y.t_end - (ref.t_end + d)) + ref.dt)
    r = resample_to(shifted, y.rate, t_start=y.t0, n=y.n).values
    rr = float(np.dot(r, r))
    yy = np.einsum("kn,kn->k", ys, ys)
    yr = ys @ r
    with np.errstate(divide="ignore", invalid="ignore"):
        err = np.einsum("kn,kn->k", ys - g * r, ys - g * r)
        nr = np.sqrt(err / (g * g * rr)) if g != 0 and rr > 0 else np.full(ys.shape[0], np.inf)
        corr = np.where(yy > 0, np.abs(yr) / np.sqrt(rr * yy), 0.0)
    shape = y.batch_shape
    gain = np.full(ys.shape[0], g)
    lat = np.full(ys.shape[0], d)
    out = (gain, lat, corr, nr)
    return Fit(*(o.reshape(shape) if shape else o[0] for o in out))


def nrmse_fixed(y: Pulse, x: Pulse, factor: float, orientation: int = 1):
    """NRMSE of each record of y against one g·x((t − d)/α) shared by all records (one latency
    per cell, as a fixed-clock receiver sees it; see :func:`fit_fixed_clock`)."""
    return fit_fixed_clock(y, x, factor, orientation).nrmse


METRICS["nrmse_fixed"] = ("", "NRMSE against the ideal with one gain and latency for all trials "
                               "(fixed clock)")
__all__ += ["fit_fixed_clock", "nrmse_fixed"]
