"""Measured lines: a response sampled on a frequency grid, Touchstone reading (scikit-rf), a
causality check and a GDD fit.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.fft as sfft

from timescale.numerics.dispersion.waves import group_delay_of, phase_from_group_delay


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
