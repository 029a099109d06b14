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

from timescale.data import checks as _checks
from timescale.data.pulse import Pulse
from timescale.data.signal import chirp_z, derivative, fourier_at, resample_to

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
    # bins where the reference spectrum is negligible for this factor add nothing to any sum
    m = min(m, max(2, int(math.floor(_spectrum_edge(x.row(0)) / (a * df))) + 2))
    Y = fourier_at(y, 0.0, df, m)
    X = fourier_at(x.row(0), 0.0, a * df, m) * a
    R = X if orientation == 1 else np.conj(X)
    S = Y * np.conj(R)
    S[..., 0] *= 0.5  # DC counted once in the one-sided sum
    return S, df, span


def _corr_sums(S, df, d, powers=(0,)):
    """2·df·Re Σ_k S_k (jω_k)^p e^{jω_k d} for each p in `powers` (ω_k = 2πk·df): the
    correlation (p = 0) and its derivatives in d, for every row of S at its own d."""
    w = 2.0 * np.pi * df * np.arange(S.shape[-1])
    E = S * np.exp(1j * np.multiply.outer(np.asarray(d, dtype=float), w))
    out = []
    for p in powers:
        out.append(2.0 * df * np.real(np.sum(E * (1j * w) ** p if p else E, axis=-1)))
    return out


def _corr_at(S, df, d):
    return _corr_sums(S, df, d)[0]


def _refine_latency(S, df, d0, step):
    """Sub-sample latency of every row of S: the root of dC/dd near the coarse peak d0 (accurate
    to rounding, where maximising the flat peak itself would only reach √eps).

    Safeguarded Newton (bisection when a step leaves the bracket [d0 − step, d0 + step]),
    vectorized over rows; a row whose slope does not change sign in the bracket falls back to a
    bounded scalar search of the peak."""
    d0 = np.asarray(d0, dtype=float)
    lo, hi = d0 - step, d0 + step
    s_lo, s_hi = _corr_sums(S, df, lo, (1,))[0], _corr_sums(S, df, hi, (1,))[0]
    d = d0.copy()
    root = s_lo * s_hi < 0
    act = np.flatnonzero(root)
    a, b = lo[act], hi[act]  # bracket with slope(a) having the sign of s_lo
    sa = np.sign(s_lo[act])
    # the slope's rounding level: once |slope| is below it, the root is found to rounding
    noise = 16.0 * np.finfo(float).eps * 2.0 * df * (np.abs(S[act]) @ (2.0 * np.pi * df * np.arange(S.shape[-1])))
    x = d0[act]
    for _ in range(100):
        if not act.size:
            break
        f, fp = _corr_sums(S[act], df, x, (1, 2))
        pos = f * sa > 0
        a = np.where(pos, x, a)
        b = np.where(pos, b, x)
        with np.errstate(divide="ignore", invalid="ignore"):
            xn = x - f / fp
        bad = ~np.isfinite(xn) | (xn <= np.minimum(a, b)) | (xn >= np.maximum(a, b))
        xn = np.where(bad, 0.5 * (a + b), xn)
        tol = 1e-15 * np.abs(xn) + 1e-30
        flat = np.abs(f) <= noise
        done = (np.abs(xn - x) <= tol) | flat | (np.abs(b - a) <= tol)
        d[act] = np.where(flat, x, xn)
        keep = ~done
        act, a, b, sa, x, noise = act[keep], a[keep], b[keep], sa[keep], xn[keep], noise[keep]
    d[act] = x
    for i in np.flatnonzero(~root):  # no sign change: the peak by a bounded scalar search
        from scipy import optimize  # imported here: slow to import, rarely needed

        res = optimize.minimize_scalar(lambda v: -abs(_corr_at(S[i], df, v)), bounds=(lo[i], hi[i]),
                                       method="bounded", options={"xatol": step * 1e-9})
        d[i] = float(res.x)
    return d


def _coarse_latency(S, df, d_lo, span, oversample=8):
    m = S.shape[-1]
    L = sfft.next_fast_len(oversample * m)
    # 2·df·Re Σ_k S_k e^{j2πkj/L} as a real inverse FFT (DC, halved in S, counted twice there)
    T = np.zeros(S.shape[:-1] + (L // 2 + 1,), dtype=complex)
    T[..., :m] = S
    T[..., 0] *= 2.0
    c = df * L * sfft.irfft(T, n=L, axis=-1, overwrite_x=True)
    j = np.argmax(np.abs(c), axis=-1)
    step = 1.0 / (L * df)
    d = j * step
    d = d_lo + np.mod(d - d_lo, span)  # unwrap into the window where the records overlap
    return d, step, np.take_along_axis(np.abs(c), j[..., None], axis=-1)[..., 0]


def _best_latency(y: Pulse, x: Pulse, factor: float, orientation: int):
    """Latency maximising |⟨y, r_d⟩| for every record of `y`, with the cross-spectrum it came
    from: ``(S of shape (records, m), df, d of shape (records,))``."""
    S, df, span = _cross_spectrum(y, x, factor, orientation)
    S = S.reshape(-1, S.shape[-1])
    d0, step, _ = _coarse_latency(S, df, y.t0 - reference(x, factor, orientation).t_end, span)
    return S, df, _refine_latency(S, df, d0, step)


def _distinct_rows(y: Pulse):
    """(rows to compute, index of each record's row): a batch of equal records (a cell whose
    trials do not vary) is measured once."""
    ys = y.values.reshape(-1, y.n)
    if ys.shape[0] > 1 and np.array_equal(ys, np.broadcast_to(ys[0], ys.shape)):
        return y.with_values(ys[:1]), np.zeros(ys.shape[0], dtype=int)
    return y.with_values(ys), np.arange(ys.shape[0])


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
    yu, back = _distinct_rows(y)
    rows = yu.values.shape[0]
    out = np.empty((4, rows))
    for r0 in range(0, rows, _ROWS):  # records in chunks: work arrays stay a few MB
        out[:, r0:r0 + _ROWS] = _fit_rows(yu.with_values(yu.values[r0:r0 + _ROWS]), x, a, orientation, ref)
    out = out[:, back]
    shape = y.batch_shape
    return Fit(*(o.reshape(shape) if shape else o[0] for o in out))


#: records measured together by fit_reference and fitted_factor (bounds their work arrays)
_ROWS = 256


def _fit_rows(y: Pulse, x: Pulse, a: float, orientation: int, ref: Pulse) -> np.ndarray:
    """(gain, latency, correlation, nrmse) of every record of `y` (2-D values), shape (4, records)."""
    _, _, lat = _best_latency(y, x, a, orientation)
    ys = y.values
    # the shifted reference on y's own grid, time-domain residual (no cancellation for
    # near-perfect outputs); records that need the same zero padding share one interpolant
    nb = np.ceil((np.maximum(0.0, ref.t0 + lat - y.t0) + ref.dt) * ref.rate - 1e-9).astype(int)
    na = np.ceil((np.maximum(0.0, y.t_end - (ref.t_end + lat)) + ref.dt) * ref.rate - 1e-9).astype(int)
    r = np.empty_like(ys)
    for b_, a_ in set(zip(nb.tolist(), na.tolist())):
        sel = np.flatnonzero((nb == b_) & (na == a_))
        padded = ref.pad(b_ / ref.rate, a_ / ref.rate)
        # shifting by d is resampling the unshifted interpolant from y.t0 − d
        r[sel] = resample_to(padded, y.rate, t_start=y.t0 - lat[sel], n=y.n).values
    rr = np.einsum("ij,ij->i", r, r)
    yr = np.einsum("ij,ij->i", ys, r)
    yy = np.einsum("ij,ij->i", ys, ys)
    with np.errstate(divide="ignore", invalid="ignore"):
        g = np.where(rr > 0, yr / rr, np.nan)
        err = ys - np.where(rr > 0, g, 0.0)[:, None] * r
        ee = np.einsum("ij,ij->i", err, err)
        corr = np.where((rr > 0) & (yy > 0), np.abs(yr) / np.sqrt(rr * yy), 0.0)
        nr = np.where((rr > 0) & (g != 0), np.sqrt(ee / (g * g * rr)), np.inf)
    return np.stack([g, lat, corr, nr])


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
    span = float(span)
    if not span >= 1.0:
        raise ValueError(f"span must be >= 1 (the search runs over [guess/span, guess·span]), got {span!r}")
    x = x.row(0)
    yu, back = _distinct_rows(y)
    rows = yu.values.shape[0]
    out = np.empty(rows)
    for r0 in range(0, rows, _ROWS):  # records in chunks: work arrays stay a few MB
        out[r0:r0 + _ROWS] = _fit_factors(yu.with_values(yu.values[r0:r0 + _ROWS]), x, g, orientation, span)
    out = out[back]
    return out.reshape(y.batch_shape) if y.batch_shape else float(out[0])


#: shared factors of the coarse pass of :func:`fitted_factor` (geometric over the search range)
_DEBUG = False
_FACTOR_GRID = 9
#: reference spectrum below this fraction of its peak is left out of the factor search: its share
#: of the correlation (below 1e-12 of it) moves the best factor far less than the search's
#: tolerance; the level sits above the rounding floor of the computed spectrum (~1e-16 of the peak)
_NEGLIGIBLE_SPECTRUM = 2.0 ** -40


def _spectrum_edge(x: Pulse) -> float:
    """Frequency above which |X(f)| stays below _NEGLIGIBLE_SPECTRUM of its peak, Hz (sampled 8×
    finer than the spectrum's own resolution 1/duration, with one sample of margin); kept on
    the pulse, which is immutable."""
    edge = x._cache.get("metrics_spectrum_edge")
    if edge is None:
        df = 1.0 / (8.0 * x.duration)
        m = int(math.floor(x.rate / 2 / df)) + 1
        mag = np.abs(fourier_at(x, 0.0, df, m))
        above = np.flatnonzero(mag > _NEGLIGIBLE_SPECTRUM * mag.max())
        edge = x._cache["metrics_spectrum_edge"] = \
            min(x.rate / 2, (above[-1] + 2) * df) if above.size else x.rate / 2
    return edge


def _fit_factors(y: Pulse, x: Pulse, g: float, orientation: int, span: float) -> np.ndarray:
    """Least-squares factor of every record of `y` (2-D values), all records at once.

    The correlation C(d, α) = ⟨y, x((t − d)/α)⟩ is summed over one frequency grid, fine enough for
    every α of the range (so y's spectrum is computed once); the reference spectrum αX(αf) and its
    α-derivatives come from one chirp-z transform per record and step. A coarse pass over shared
    factors brackets each record's best; a Newton iteration on (d, α) with a bisection guard then
    maximises ρ = |C|/√(α·‖x‖²·‖y‖²) (equivalently minimises the NRMSE) to rounding."""
    ys = y.values
    K = ys.shape[0]
    lo, hi = g / span, g * span
    if hi == lo:
        return np.full(K, g)
    df = 1.0 / (y.duration + hi * x.duration)

    def bins(a):  # bins below the band limit at factor a, as _cross_spectrum counts them
        return np.maximum(2, np.floor(np.minimum(y.rate, x.rate / np.asarray(a)) / 2.0 / df))

    M = int(bins(lo))
    M = int(min(M, max(2, math.floor(_spectrum_edge(x) / (lo * df)) + 2)))
    k = np.arange(M)
    f = k * df
    w = 2.0 * np.pi * f
    Y = fourier_at(y, 0.0, df, M)
    L = sfft.next_fast_len(8 * M)
    T = np.zeros((K, L // 2 + 1), dtype=complex)  # one-sided spectra for real inverse FFTs

    # 1. coarse: shared factors, peak |C| over d by one inverse FFT per factor
    alphas = g * span ** np.linspace(-1.0, 1.0, _FACTOR_GRID)
    rho = np.empty((_FACTOR_GRID, K))
    dgrid = np.empty((_FACTOR_GRID, K))
    for j, aj in enumerate(alphas):
        R = aj * fourier_at(x, 0.0, aj * df, M)
        R = R if orientation == 1 else np.conj(R)
        np.multiply(Y, np.conj(R) * (k < bins(aj)), out=T[:, :M])
        c = np.abs(df * L * sfft.irfft(T, n=L, axis=-1))
        jm = np.argmax(c, axis=-1)
        # parabola through the peak and its neighbours: the peak value to a fraction of a percent
        c0, cm, cp = (np.take_along_axis(c, ((jm + s) % L)[:, None], axis=-1)[:, 0] for s in (0, -1, 1))
        den = cm - 2.0 * c0 + cp
        with np.errstate(divide="ignore", invalid="ignore"):
            u = np.where(den < 0, 0.5 * (cm - cp) / den, 0.0)
        u = np.clip(u, -0.5, 0.5)
        d_lo = y.t0 - reference(x, aj, orientation).t_end
        d = (jm + u) / (L * df)
        dgrid[j] = d_lo + np.mod(d - d_lo, 1.0 / df)
        rho[j] = (c0 - 0.25 * (cm - cp) * u) / math.sqrt(aj)
    Y[:, 0] *= 0.5  # DC counted once in the one-sided sums below
    jb = np.argmax(rho, axis=0)
    rows = np.arange(K)
    a_lo = alphas[np.maximum(jb - 1, 0)]
    a_hi = alphas[np.minimum(jb + 1, _FACTOR_GRID - 1)]
    la = np.log(alphas)
    jc = np.clip(jb, 1, _FACTOR_GRID - 2)  # parabola in log α through three grid points
    r0, rm, rp = rho[jc, rows], rho[jc - 1, rows], rho[jc + 1, rows]
    den = rm - 2.0 * r0 + rp
    with np.errstate(divide="ignore", invalid="ignore"):
        v = np.where(den < 0, 0.5 * (rm - rp) / den, 0.0)
    alpha = np.clip(np.exp(la[jc] + np.clip(v, -1.0, 1.0) * (la[1] - la[0])), a_lo, a_hi)
    b_lo, b_hi = a_lo.copy(), a_hi.copy()  # Newton steps stay inside the coarse bracket
    slope = -orientation * float(x.mean_time())  # the best d moves by this per unit of α
    d = dgrid[jb, rows] + slope * (alpha - alphas[jb])
    step = 1.0 / (8 * M * df)  # no Newton step in d goes further than the coarse grid's step

    # 2. Newton on (d, α) for every record, with the reference spectrum per record
    t = x.t
    q = np.stack([x.values * (-2j * np.pi * t) ** p for p in range(3)])  # X, dX/df, d²X/df²
    weights = np.stack([np.ones(M), 1j * w, -w * w], axis=1)
    # Newton converges quadratically: once a step is below ~√(tolerance) the step itself leaves an
    # error of its square, far below the search tolerance (1e-7 of the guess), so it is taken
    # without another evaluation
    tol_a, last_a, last_d = 1e-11 * g, 3e-6 * g, 1e-3 * step
    act = np.arange(K)
    for _ in range(60):
        if not act.size:
            break
        al, dd = alpha[act], d[act]
        G = chirp_z(q[None], M, (2.0 * np.pi * df * x.dt * al)[:, None]) * x.dt
        G = G * np.exp(-2j * np.pi * np.multiply.outer(al, f) * x.t0)[:, None, :]
        R = al[:, None] * G[:, 0]
        R1 = G[:, 0] + al[:, None] * f * G[:, 1]
        R2 = 2.0 * f * G[:, 1] + al[:, None] * f * f * G[:, 2]
        if orientation == 1:
            R, R1, R2 = np.conj(R), np.conj(R1), np.conj(R2)
        band = k < bins(al)[:, None]
        Z = Y[act] * np.exp(1j * np.multiply.outer(dd, w)) * band
        # the six sums Σ_k Z R^(q) (jω)^p as three products with the weights [1, jω, −ω²]
        C, Cd, Cdd = np.real((Z * R) @ weights).T
        Ca, Cda = np.real((Z * R1) @ weights[:, :2]).T
        Caa = np.real((Z * R2).sum(-1))
        with np.errstate(divide="ignore", invalid="ignore"):
            pd, pa = Cd / C, Ca / C - 0.5 / al
            pdd = Cdd / C - (Cd / C) ** 2
            paa = Caa / C - (Ca / C) ** 2 + 0.5 / al ** 2
            pda = Cda / C - (Cd / C) * (Ca / C)
            det = pdd * paa - pda * pda
            dn = -(paa * pd - pda * pa) / det
            an = -(pdd * pa - pda * pd) / det
            ridge = np.where(pdd < 0, pa - pda * pd / pdd, pa)  # dρ/dα along the best d
        a_new = al + an
        newton = (pdd < 0) & (det > 0) & np.isfinite(a_new)
        ok = newton & (a_new >= b_lo[act]) & (a_new <= b_hi[act])
        # where Newton fails, bisect the bracket, shrunk by the sign of the slope along the ridge
        lo_a = np.where(~ok & (ridge > 0), np.maximum(a_lo[act], al), a_lo[act])
        hi_a = np.where(~ok & (ridge <= 0), np.minimum(a_hi[act], al), a_hi[act])
        a_new = np.where(ok, a_new, np.where(ridge > 0, 0.5 * (al + hi_a), 0.5 * (lo_a + al)))
        with np.errstate(divide="ignore", invalid="ignore"):
            d_guard = np.where(pdd < 0, -(pd + pda * (a_new - al)) / pdd, 0.0)
        d_new = dd + np.clip(np.where(ok, dn, d_guard), -step, step)
        done = (ok & (np.abs(an) <= last_a) & (np.abs(dn) <= last_d)) | (hi_a - lo_a <= tol_a)
        alpha[act], d[act], a_lo[act], a_hi[act] = a_new, d_new, lo_a, hi_a
        act = act[~done]
        print("iter", act.size, M, act[:1], an[~done][:1], dn[~done][:1]/step, ok[~done][:1], (hi_a-lo_a)[~done][:1]) if _DEBUG else None
    for i in act:  # did not settle (a flat or many-peaked record): a bounded scalar search
        alpha[i] = _fit_factor_scalar(y.row(int(i)), x, g, orientation, span)
    return alpha


def _fit_factor_scalar(y: Pulse, x: Pulse, g: float, orientation: int, span: float) -> float:
    e = float(_norm2(y)) * float(_norm2(x))

    def neg_rho(a):
        S, df, d = _best_latency(y, x, a, orientation)
        return -abs(_corr_at(S[0], df, d[0])) / math.sqrt(e * a)

    from scipy import optimize  # imported here: slow to import, rarely needed

    res = optimize.minimize_scalar(neg_rho, bounds=(g / span, g * span), method="bounded",
                                   options={"xatol": g * 1e-7})
    return float(res.x)


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
    v = pulse.values.reshape(-1, pulse.n)
    ratio = np.empty(v.shape[0])
    for r0 in range(0, v.shape[0], _ROWS):  # records in chunks: the derivative's arrays stay small
        vc = v[r0:r0 + _ROWS]
        xdot = derivative(vc, pulse.rate)
        ratio[r0:r0 + _ROWS] = np.einsum("ij,ij->i", vc, vc) / np.einsum("ij,ij->i", xdot, xdot)
    out = (10.0 * np.log10(ratio / (s * s))).reshape(pulse.batch_shape)
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
