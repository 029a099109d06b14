"""Pulse: a sampled waveform on a uniform time grid, its constructors and measurements.

Times are in seconds, rates in hertz, values in the pulse's ``units`` (volts by default).
Values are float64 with time on the last axis; leading axes are a batch (Monte Carlo trials).
A Pulse is immutable: every operation returns a new one.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import scipy.fft as sfft

from timescale.data import checks as _checks

__all__ = ["Pulse"]

_FWHM_PER_SIGMA = 2.0 * math.sqrt(2.0 * math.log(2.0))


@dataclass(frozen=True, eq=False)
class Pulse:
    """A sampled waveform on a uniform grid ``t = t0 + k / rate``.

    Parameters
    ----------
    values : array_like
        Samples, float64, time on the last axis; leading axes are a batch of records.
    rate : float
        Sample rate, Hz.
    t0 : float
        Time of the first sample, s.
    units : str
        Unit of the values ("V").
    name : str
        A label for tables and legends.

    Examples
    --------
    >>> p = Pulse.gaussian(sigma=100e-12, center=1e-9, duration=2e-9, rate=100e9)
    >>> round(p.rms_width() / 100e-12 * math.sqrt(2), 6)
    1.0
    """

    values: np.ndarray
    rate: float
    t0: float = 0.0
    units: str = "V"
    name: str = "pulse"
    _cache: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    def __post_init__(self):
        values = _checks.finite_array("values", self.values)
        values.setflags(write=False)
        object.__setattr__(self, "values", values)
        object.__setattr__(self, "rate", _checks.positive("rate", self.rate))
        object.__setattr__(self, "t0", _checks.finite("t0", self.t0))
        if not isinstance(self.units, str) or not isinstance(self.name, str):
            raise TypeError("units and name must be strings")

    def __repr__(self) -> str:
        return (
            f"Pulse(name={self.name!r}, shape={self.values.shape}, rate={self.rate:.6g} Hz, "
            f"t0={self.t0:.6g} s, units={self.units!r})"
        )

    # ---- grid ------------------------------------------------------------------------------
    @property
    def n(self) -> int:
        """Number of samples on the time axis."""
        return self.values.shape[-1]

    @property
    def dt(self) -> float:
        """Sample interval, s."""
        return 1.0 / self.rate

    @property
    def t(self) -> np.ndarray:
        """Sample times, s."""
        return self.t0 + np.arange(self.n) / self.rate

    @property
    def duration(self) -> float:
        """Record length n/rate, s."""
        return self.n / self.rate

    @property
    def t_end(self) -> float:
        """Time just after the last sample (t0 + duration), s."""
        return self.t0 + self.duration

    @property
    def batch_shape(self) -> tuple[int, ...]:
        """Shape of the leading (batch) axes."""
        return self.values.shape[:-1]

    # ---- constructors ----------------------------------------------------------------------
    @classmethod
    def from_samples(cls, values, rate, t0=0.0, *, units="V", name="pulse") -> "Pulse":
        """Build a pulse from samples on a uniform grid.

        Parameters
        ----------
        values : array_like
            Samples, time on the last axis.
        rate : float
            Sample rate, Hz.
        t0 : float
            Time of the first sample, s.
        """
        return cls(values=values, rate=rate, t0=t0, units=units, name=name)

    @classmethod
    def from_times(cls, t, values, *, units="V", name="pulse", rtol=1e-6) -> "Pulse":
        """Build a pulse from sample times and values, checking the grid is uniform.

        Parameters
        ----------
        t : array_like
            Sample times, s, strictly increasing and uniform to `rtol` of the step.
        values : array_like
            Samples, same length as `t` on the last axis.
        """
        t = _checks.finite_array("t", t)
        if t.ndim != 1:
            raise ValueError(f"t must be one-dimensional, got shape {t.shape}")
        values = np.asarray(values, dtype=float)
        if values.shape[-1] != t.size:
            raise ValueError(f"values has {values.shape[-1]} samples but t has {t.size}")
        steps = np.diff(t)
        step = float(np.mean(steps))
        if step <= 0 or np.any(steps <= 0):
            raise ValueError("t must be strictly increasing")
        worst = float(np.max(np.abs(steps - step)))
        if worst > rtol * step:
            k = int(np.argmax(np.abs(steps - step)))
            raise ValueError(
                f"t is not a uniform grid: step {k} is {steps[k]:.6g} s against a mean of "
                f"{step:.6g} s (relative tolerance {rtol}); resample onto a uniform grid first"
            )
        return cls(values=values, rate=1.0 / step, t0=float(t[0]), units=units, name=name)

    @classmethod
    def from_csv(cls, path, *, time_column=0, value_column=1, units="V", name=None) -> "Pulse":
        """Read a pulse from a CSV file with a time column (s) and a value column.

        A first row that is not numeric is taken as a header. Columns are chosen by index or,
        when there is a header, by name.
        """
        path = Path(path)
        if not path.is_file():
            raise ValueError(f"path {str(path)!r} is not a readable file")
        with path.open(newline="") as fh:
            rows = [r for r in csv.reader(fh) if r and not r[0].lstrip().startswith("#")]
        if not rows:
            raise ValueError(f"CSV file {str(path)!r} holds no rows")
        header = None
        try:
            float(rows[0][0])
        except ValueError:
            header, rows = rows[0], rows[1:]
        cols = []
        for arg, col in (("time_column", time_column), ("value_column", value_column)):
            if isinstance(col, str):
                if header is None or col not in header:
                    raise ValueError(f"{arg}={col!r} is not a column of {str(path)!r}; header: {header}")
                col = header.index(col)
            cols.append(col)
        try:
            data = np.array([[float(r[cols[0]]), float(r[cols[1]])] for r in rows])
        except (ValueError, IndexError) as exc:
            raise ValueError(f"CSV file {str(path)!r}: every row needs numeric time and value ({exc})") from None
        return cls.from_times(data[:, 0], data[:, 1], units=units, name=name or path.stem)

    @staticmethod
    def _grid(center, duration, rate):
        _checks.finite("center", center)
        _checks.positive("duration", duration)
        _checks.positive("rate", rate)
        n = int(round(duration * rate))
        if n < 2:
            raise ValueError(f"duration*rate must give at least 2 samples, got {duration}*{rate}")
        return np.arange(n) / rate

    @staticmethod
    def _sigma(fwhm, sigma):
        if (fwhm is None) == (sigma is None):
            raise ValueError("give exactly one of fwhm= or sigma= (both in seconds)")
        if fwhm is not None:
            return _checks.positive("fwhm", fwhm) / _FWHM_PER_SIGMA
        return _checks.positive("sigma", sigma)

    @classmethod
    def gaussian(cls, *, fwhm=None, sigma=None, center, duration, rate, amplitude=1.0, name="gaussian"):
        """Gaussian pulse ``A·exp(−(t−c)²/(2σ²))``; FWHM = 2√(2 ln 2)·σ.

        Parameters
        ----------
        fwhm, sigma : float
            Width, s (give one).
        center : float
            Time of the peak, s (from the record start at t = 0).
        duration : float
            Record length, s.
        rate : float
            Sample rate, Hz.
        amplitude : float
            Peak value.
        """
        s = cls._sigma(fwhm, sigma)
        t = cls._grid(center, duration, rate)
        return cls(amplitude * np.exp(-0.5 * ((t - center) / s) ** 2), rate, name=name)

    @classmethod
    def monocycle(cls, *, fwhm=None, sigma=None, center, duration, rate, amplitude=1.0, name="monocycle"):
        """Gaussian monocycle (first derivative of a Gaussian), scaled to peak `amplitude`.

        ``A·√e·(t−c)/σ·exp(−(t−c)²/(2σ²))``; its extrema are at c ± σ. `fwhm`/`sigma` are those
        of the parent Gaussian.
        """
        s = cls._sigma(fwhm, sigma)
        u = (cls._grid(center, duration, rate) - center) / s
        return cls(amplitude * math.sqrt(math.e) * u * np.exp(-0.5 * u * u), rate, name=name)

    @classmethod
    def doublet(cls, *, fwhm=None, sigma=None, center, duration, rate, amplitude=1.0, name="doublet"):
        """Gaussian doublet (negative second derivative of a Gaussian, "Mexican hat"), peak
        `amplitude` at `center`: ``A·(1 − u²)·exp(−u²/2)``, u = (t−c)/σ."""
        s = cls._sigma(fwhm, sigma)
        u = (cls._grid(center, duration, rate) - center) / s
        return cls(amplitude * (1.0 - u * u) * np.exp(-0.5 * u * u), rate, name=name)

    @classmethod
    def modulated(cls, *, carrier, fwhm=None, sigma=None, center, duration, rate, amplitude=1.0,
                  phase=0.0, name="modulated"):
        """Carrier-modulated Gaussian ``A·exp(−(t−c)²/(2σ²))·cos(2πf_c(t−c) + φ)``.

        Parameters
        ----------
        carrier : float
            Carrier frequency f_c, Hz.
        phase : float
            Carrier phase φ at the envelope peak, rad.
        """
        f = _checks.positive("carrier", carrier)
        s = cls._sigma(fwhm, sigma)
        t = cls._grid(center, duration, rate) - center
        env = np.exp(-0.5 * (t / s) ** 2)
        return cls(amplitude * env * np.cos(2 * np.pi * f * t + phase), rate, name=name)

    @classmethod
    def raised_cosine(cls, *, width, center, duration, rate, amplitude=1.0, name="raised-cosine"):
        """Raised-cosine (Hann-shaped) pulse of total width `width` s (FWHM = width/2)."""
        w = _checks.positive("width", width)
        t = cls._grid(center, duration, rate) - center
        v = np.where(np.abs(t) < w / 2, 0.5 * (1 + np.cos(2 * np.pi * t / w)), 0.0)
        return cls(amplitude * v, rate, name=name)

    @classmethod
    def trapezoid(cls, *, rise, flat, fall=None, start, duration, rate, amplitude=1.0, name="trapezoid"):
        """Trapezoid with linear edges: rises over `rise` s from `start`, holds `flat` s, falls
        over `fall` s (default: `rise`). Sampled as the exact average over each sample interval
        would be too fussy here; the edges must span several samples (checked)."""
        rise = _checks.positive("rise", rise)
        fall = rise if fall is None else _checks.positive("fall", fall)
        flat = _checks.nonnegative("flat", flat)
        t = cls._grid(start, duration, rate) - start
        if min(rise, fall) * rate < 2:
            raise ValueError(
                f"rise/fall ({rise:.3g} s, {fall:.3g} s) must span at least 2 samples at rate "
                f"{rate:.3g} Hz; raise the rate or lengthen the edges"
            )
        v = np.interp(t, [0.0, rise, rise + flat, rise + flat + fall], [0.0, 1.0, 1.0, 0.0],
                      left=0.0, right=0.0)
        return cls(amplitude * v, rate, name=name)

    def train(self, period, count) -> "Pulse":
        """Return `count` copies of this pulse repeated every `period` s (added, so overlapping
        tails sum). The record grows to hold them all."""
        period = _checks.positive("period", period)
        if not isinstance(count, (int, np.integer)) or count < 1:
            raise ValueError(f"count must be a whole number >= 1, got {count!r}")
        step = period * self.rate
        if abs(step - round(step)) > 1e-6:
            raise ValueError(
                f"period*rate must be a whole number of samples, got {step:.6g}; choose period "
                f"as a multiple of 1/rate = {self.dt:.6g} s"
            )
        step = int(round(step))
        n = self.n + step * (count - 1)
        out = np.zeros(self.batch_shape + (n,))
        for k in range(count):  # count copies, not samples: a short loop
            out[..., k * step:k * step + self.n] += self.values
        return replace(self, values=out, name=f"{self.name} x{count}")

    # ---- operations (each returns a new pulse) ----------------------------------------------
    def with_values(self, values, **changes) -> "Pulse":
        """Return a pulse on the same grid (unless changed) with new values."""
        return replace(self, values=values, **changes)

    def shift(self, delay) -> "Pulse":
        """Delay the pulse by `delay` s (moves the grid, values unchanged)."""
        return replace(self, t0=self.t0 + _checks.finite("delay", delay))

    def scale(self, gain) -> "Pulse":
        """Multiply the values by `gain`."""
        return replace(self, values=self.values * _checks.finite("gain", gain))

    def pad(self, before=0.0, after=0.0) -> "Pulse":
        """Add zeros: `before` s ahead of the first sample and `after` s past the last (rounded
        up to whole samples)."""
        nb = int(math.ceil(_checks.nonnegative("before", before) * self.rate - 1e-9))
        na = int(math.ceil(_checks.nonnegative("after", after) * self.rate - 1e-9))
        width = [(0, 0)] * (self.values.ndim - 1) + [(nb, na)]
        return replace(self, values=np.pad(self.values, width), t0=self.t0 - nb / self.rate)

    def resample(self, rate) -> "Pulse":
        """Band-limited resampling to `rate` Hz over the same time span (FFT method; the record
        is treated as periodic, so the pulse should be near zero at both ends)."""
        from timescale.data.signal import resample_to

        return resample_to(self, _checks.positive("rate", rate))

    def dilate(self, factor) -> "Pulse":
        """The ideally time-scaled pulse x(t/α): same samples, rate/α, t0·α."""
        a = _checks.positive("factor", factor)
        return replace(self, rate=self.rate / a, t0=self.t0 * a)

    def row(self, index=0) -> "Pulse":
        """Return one record of a batched pulse (values of shape (n,))."""
        if self.values.ndim == 1:
            return self
        return replace(self, values=self.values.reshape(-1, self.n)[index])

    # ---- measurements ---------------------------------------------------------------------
    def energy(self) -> np.ndarray | float:
        """∫x(t)² dt, in units²·s (V²·s: energy into 1 Ω), per record."""
        return _scalar(np.sum(self.values ** 2, axis=-1) * self.dt)

    def peak(self) -> np.ndarray | float:
        """max |x|, per record."""
        return _scalar(np.max(np.abs(self.values), axis=-1))

    def mean_time(self) -> np.ndarray | float:
        """Energy centroid ∫t x² dt / ∫x² dt, s."""
        w = self.values ** 2
        return _scalar(np.sum(w * self.t, axis=-1) / _nonzero(np.sum(w, axis=-1)))

    def rms_width(self) -> np.ndarray | float:
        """Gabor RMS duration √(∫(t−t̄)² x² dt / ∫x² dt), s."""
        w = self.values ** 2
        e = _nonzero(np.sum(w, axis=-1))
        tbar = np.sum(w * self.t, axis=-1) / e
        return _scalar(np.sqrt(np.sum(w * (self.t - tbar[..., None]) ** 2, axis=-1) / e))

    def spectrum(self, n_fft=None):
        """One-sided spectrum.

        Returns
        -------
        f : ndarray
            Frequencies, Hz.
        X : ndarray
            Fourier transform ∫x(t)e^{−j2πft}dt on the grid, in units·s (phase referred to t0).
        """
        n = self.n if n_fft is None else int(n_fft)
        return sfft.rfftfreq(n, self.dt), sfft.rfft(self.values, n=n, axis=-1) * self.dt

    def _spectrum_freqs(self):
        # zero-pad ×4 so that narrow-band measurements are resolved
        return sfft.rfftfreq(sfft.next_fast_len(4 * self.n), self.dt)

    def _power_of(self, values):
        X = sfft.rfft(values, n=sfft.next_fast_len(4 * self.n), axis=-1) * self.dt
        p = X.real ** 2 + X.imag ** 2
        p[..., 1:] *= 2.0  # one-sided: fold the negative frequencies in
        return p

    def _per_chunk(self, fn, lead=0, rows=256):
        """fn applied to the records in chunks of `rows` (the ×4 padded spectra of a large batch
        would otherwise be several times the batch itself); results have the batch shape, after
        `lead` leading entries when given."""
        v = self.values.reshape(-1, self.n)
        parts = [fn(v[i:i + rows]) for i in range(0, v.shape[0], rows)]
        out = np.concatenate(parts, axis=-1)
        shape = ((lead,) if lead else ()) + self.batch_shape
        return out.reshape(shape)

    def rms_bandwidth(self) -> np.ndarray | float:
        """Gabor RMS bandwidth √(∫f²|X|²df / ∫|X|²df) over the two-sided spectrum, Hz.

        For a real signal the two-sided mean frequency is zero; for a Gaussian,
        rms_width·rms_bandwidth = 1/(4π) (Gabor 1946).
        """
        def rms(p):
            return np.sqrt(np.sum(p * f * f, axis=-1) / _nonzero(np.sum(p, axis=-1)))

        f = self._spectrum_freqs()
        return _scalar(self._per_chunk(lambda v: rms(self._power_of(v))))

    def occupied_bandwidth(self, fraction=0.99) -> np.ndarray | float:
        """Occupied bandwidth: the frequency f_b such that the two-sided band [−f_b, f_b] holds
        `fraction` of the energy, with (1 − fraction)/2 of it beyond each limit (ITU-R SM.328
        definition applied to the two-sided spectrum of a real signal), Hz.

        This is the one-sided extent from DC a sampler or a baseband channel must pass; for a
        band-pass pulse see :meth:`occupied_band`.
        """
        return self._energy_quantiles(_checks.fraction("fraction", fraction))[0]

    def occupied_band(self, fraction=0.99):
        """Lower and upper limits (Hz) of the one-sided band with (1 − fraction)/2 of the
        energy below the lower and above the upper limit (ITU-R SM.328), for band-pass pulses."""
        frac = _checks.fraction("fraction", fraction)
        return self._energy_quantiles((1 - frac) / 2, 1 - (1 - frac) / 2)

    def _energy_quantiles(self, *qs):
        """Frequencies (Hz) below which the fractions `qs` of the one-sided energy lie."""
        f = self._spectrum_freqs()

        def quantiles(v):
            cum = np.cumsum(self._power_of(v), axis=-1)
            cum = cum / _nonzero(cum[..., -1:])
            # first index with cum >= q (cum is nondecreasing): the count of entries below q
            return np.stack([_interp_edge(f, cum, np.sum(cum < q, axis=-1), q) for q in qs])

        out = self._per_chunk(quantiles, len(qs))
        return tuple(_scalar(o) for o in out)

    def fwhm(self) -> np.ndarray | float:
        """Full width at half maximum of |x| around its highest peak (linear interpolation of the
        half-level crossings), s."""
        v = np.abs(self.values.reshape(-1, self.n))
        out = np.empty(v.shape[0])
        for i, row in enumerate(v):  # one pass per record
            k = int(np.argmax(row))
            half = row[k] / 2
            left = k
            while left > 0 and row[left] > half:
                left -= 1
            right = k
            while right < self.n - 1 and row[right] > half:
                right += 1
            tl = left + (half - row[left]) / (row[left + 1] - row[left]) if row[left] <= half else 0.0
            tr = right - 1 + (row[right - 1] - half) / (row[right - 1] - row[right]) if row[right] <= half else self.n - 1
            out[i] = (tr - tl) / self.rate
        return _scalar(out.reshape(self.batch_shape))


def _interp_edge(f, cum, idx, q):
    idx = np.clip(idx, 1, f.size - 1)
    c0 = np.take_along_axis(cum, (idx - 1)[..., None], -1)[..., 0]
    c1 = np.take_along_axis(cum, idx[..., None], -1)[..., 0]
    w = np.where(c1 > c0, (q - c0) / np.where(c1 > c0, c1 - c0, 1.0), 0.0)
    df = f[1] - f[0]
    # cum[k] holds bins 0..k; bin k spans [f_k - df/2, f_k + df/2]
    return f[idx - 1] + df / 2 + w * df


def _nonzero(x):
    x = np.asarray(x, dtype=float)
    return np.where(x > 0, x, np.nan)


def _scalar(x):
    x = np.asarray(x)
    return float(x) if x.ndim == 0 else x

