"""Method ``analog-memory``: a sampled analog memory (switched-capacitor array).

The pulse is written at a fast rate f_w into a bank of N capacitors through time-interleaved
sampling switches (cell k samples at t_k = t_s + k/f_w), then every cell is read out in write
order at a slow rate f_r = f_w/α by a buffer that a slow ADC samples once per cell. The factor
is the rate ratio, so it reaches 100× or 1000× as easily as 2×; what it gives up is the record:
only N/f_w seconds of input fit in the bank, and anything later is lost.

Model (each effect off by default, so the default is the ideal sampled memory):

* finite record: N cells at f_w hold N/f_w of input; the metric ``record_energy_fraction``
  says how much of the input's energy was inside the window;
* sampling aperture t_a: each cell holds the average of the input over a window t_a centred on
  its instant, a filter H(f) = sinc(f·t_a);
* aperture jitter: the instants move by independent Gaussian errors of rms σ_t;
* kT/C noise: each cell of capacitance C holds a sample of rms √(kT/C) (reported as
  ``noise_rms``/``snr_db`` at the output peak always; added to the waveform with ``noise``);
* cell-to-cell gain mismatch: cell k has gain 1 + ε_k, ε_k Gaussian of rms σ_g (per trial);
* droop: the held charge leaks with a time constant τ, so cell k is multiplied by
  exp(−h_k/τ), h_k being its hold time from write to read;
* readout bandwidth: the buffer (first-order or Butterworth low-pass) sees the cell voltages as
  a staircase and is sampled at the end of each read slot, so incomplete settling spreads a
  part of each cell into the next ones (exact zero-order-hold discretisation).

Bill: cell capacitors sized for ``snr_target`` (C = kT/v², v = pulse peak / 10^(snr/20); no
smaller than ``min_cell_capacitance``) at the technology's capacitor density; two switches per
cell (write and read) at ``technology.switch_area``; write-strobe power C_s·V_dd²·f_w; input and
readout buffers sized as single-stage transconductors, gm = 2π·B·C_load, I = gm/(gm/I_D),
P = I·V_dd; every area times the card's layout overhead.

Limits: the write rate (a strobe clock) against the card's clock ceiling
``carrier_max_fraction · f_T``; the area against ``die_area``. With ``write_rate = 0`` the
design keeps the write rate under that ceiling when twice the input's bandwidth allows.

References
----------
S. Kleinfelder, "A 4096-cell switched-capacitor analog waveform storage integrated circuit",
IEEE Trans. Nucl. Sci. 37(3), 1990. — S. Ritt, R. Dinapoli, U. Hartmann, "Application of the
DRS chip for fast waveform digitizing", Nucl. Instrum. Methods A 623, 2010. — B. Razavi,
*Principles of Data Conversion System Design*, IEEE Press 1995 (kT/C, aperture, droop).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
import scipy.fft as sfft

from timescale.numerics import costs
from timescale.plugin import (
    Bill,
    BillItem,
    Design,
    DesignWarning,
    Limit,
    Method,
    Metric,
    Pulse,
    SamplingWarning,
    Simulation,
    param,
)
from timescale.data.signal import resample_to

__all__ = ["AnalogMemory", "AnalogMemoryParams", "AnalogMemoryDesign", "sample_band_limited",
           "readout_filter", "LOST_ENERGY_WARN"]

#: Fraction of the input energy outside the record above which the design warns.
LOST_ENERGY_WARN = 1e-4
#: Relative droop of the last cell read above which the design warns.
DROOP_WARN = 0.01
# Largest complex matrix evaluated at once when sampling (elements); bounds memory.
_CHUNK = 4_000_000


@dataclass(frozen=True)
class AnalogMemoryParams:
    """Parameters of the ``analog-memory`` method."""

    cells: int = param(256, doc="number of storage cells N (record = N / write rate)")
    write_rate: float = param(0.0, units="Hz",
                              doc="write (sampling) rate f_w; 0 picks oversampling x twice the 99% bandwidth")
    oversampling: float = param(4.0, doc="with write_rate = 0: f_w over twice the input's 99% bandwidth")
    window_start: float = param(0.0, units="s",
                                doc="time of the first cell's sample after the start of the input record")
    aperture: float = param(0.0, units="s", doc="sampling aperture t_a (averaging window); 0 = instantaneous")
    aperture_jitter: float = param(0.0, units="s", doc="rms jitter of the sampling instants")
    noise_target: float = param(0.0, units="V", doc="kT/C noise per cell the cell capacitor is sized for; "
                                                    "0 sizes it for snr_target")
    snr_target: float = param(40.0, units="dB", doc="output peak over rms noise at the peak the cells are "
                                                    "sized for (noise_target = 0)", bounds=(0.0, 200.0))
    min_cell_capacitance: float = param(10e-15, units="F", doc="smallest cell capacitor drawn (charge injection "
                                                               "and switch parasitics; common practice, no source)")
    noise: bool = param(False, doc="add the kT/C noise of each cell to the output (reported either way)")
    gain_mismatch: float = param(0.0, doc="rms relative gain error from cell to cell")
    droop_time: float = param(0.0, units="s", doc="charge-leakage time constant tau of a cell; 0 = no leakage")
    readout: str = param("ideal", doc="readout buffer response",
                         choices=("ideal", "first-order", "butterworth"))
    readout_bandwidth: float = param(2.0, doc="readout buffer -3 dB bandwidth as a multiple of the read rate")
    readout_order: int = param(3, doc="order of the Butterworth readout buffer")
    readout_load: float = param(1e-12, units="F", doc="capacitance the readout buffer drives (slow ADC input)")
    strobe_capacitance: float = param(10e-15, units="F",
                                      doc="capacitance switched per written cell (switch gate and strobe stage)")


@dataclass(frozen=True, kw_only=True)
class AnalogMemoryDesign(Design):
    """Sizing of a switched-capacitor analog memory.

    Attributes
    ----------
    write_rate : float
        Sampling rate f_w, Hz.
    read_rate : float
        Readout rate f_r = f_w/α, Hz.
    cells : int
        Cells in the bank, N.
    cells_used : int
        Cells written and read for this pulse (≤ N; fewer when the input record ends first).
    window_start : float
        Absolute time of the first cell's sample, s.
    record_length : float
        Input time the bank can hold, N/f_w, s.
    record_energy_fraction : float
        Fraction of the input energy inside the written window (1 = nothing lost).
    cell_capacitance : float
        Capacitance of one cell, F.
    readout_cutoff : float
        −3 dB bandwidth of the readout buffer, Hz.
    latency : float
        From the first cell's sample to the first output sample, s.
    max_hold : float
        Longest hold time of a cell (the last one read), s.
    lost_before, lost_after : int
        Cell slots of input before and after the written window; the output carries that many
        baseline (zero) samples so that the metrics see what the record lost.
    """

    write_rate: float
    read_rate: float
    cells: int
    cells_used: int
    window_start: float
    record_length: float
    record_energy_fraction: float
    cell_capacitance: float
    readout_cutoff: float
    latency: float
    max_hold: float
    lost_before: int = 0
    lost_after: int = 0


class AnalogMemory(Method):
    """Sampled analog memory: write fast into N capacitors, read out slowly (or the reverse)."""

    name = "analog-memory"
    summary = "sampled analog memory: write a capacitor bank fast, read it slowly (finite record)"
    Params = AnalogMemoryParams
    version = "0.1.0"
    identity_tolerance = 1e-6
    factor_tolerance = 1e-3

    # -- design -------------------------------------------------------------------------------
    def design(self, pulse: Pulse, factor: float, params: AnalogMemoryParams, technology) -> AnalogMemoryDesign:
        p = params
        if p.cells < 2:
            raise ValueError(f"cells must be >= 2, got {p.cells}")
        for name in ("write_rate", "aperture", "aperture_jitter", "gain_mismatch", "droop_time"):
            if getattr(p, name) < 0:
                raise ValueError(f"{name} must be >= 0, got {getattr(p, name)!r}")
        for name in ("oversampling", "readout_bandwidth", "readout_load", "min_cell_capacitance"):
            if not getattr(p, name) > 0:
                raise ValueError(f"{name} must be > 0, got {getattr(p, name)!r}")
        if p.noise_target < 0:
            raise ValueError(f"noise_target must be >= 0 (0 sizes for snr_target), got {p.noise_target!r}")
        if p.strobe_capacitance < 0:
            raise ValueError(f"strobe_capacitance must be >= 0, got {p.strobe_capacitance!r}")
        if p.readout_order < 1:
            raise ValueError(f"readout_order must be >= 1, got {p.readout_order}")
        if not 0 <= p.window_start < pulse.duration:
            raise ValueError(
                f"window_start must lie in [0, {pulse.duration:.6g}) s (inside the input record), "
                f"got {p.window_start!r}")
        f99 = float(pulse.occupied_bandwidth())
        ceiling = technology.carrier_max_fraction * technology.f_t
        # self-sized: oversample, but stay under the card's clock ceiling while Nyquist allows
        f_w = p.write_rate or min(2.0 * p.oversampling * f99, max(ceiling, 2.0 * f99))
        if f_w < 2.0 * f99:
            warnings.warn(
                f"write rate {f_w / 1e9:.4g} GS/s is below twice the input's 99% bandwidth "
                f"({f99 / 1e9:.4g} GHz): the cells alias", SamplingWarning, stacklevel=2)
        t_s = pulse.t0 + p.window_start
        # cells whose instant falls inside the input record (the rest are not read)
        available = int(math.floor((pulse.t_end - t_s) * f_w - 1e-9)) + 1
        used = max(2, min(p.cells, available))
        # input periods (in cell slots) that fall before and after the written window
        lost_before = int(math.floor(p.window_start * f_w + 1e-9))
        lost_after = max(0, available - used)
        fraction = _energy_fraction(pulse, t_s - 0.5 / f_w, t_s + (used - 0.5) / f_w)
        f_r = f_w / factor
        v_target = p.noise_target or float(pulse.peak()) / 10.0 ** (p.snr_target / 20.0)
        cap = max(costs.capacitance_for_noise(v_target, technology.temperature), p.min_cell_capacitance)
        # read starts once the last cell is written; sample k is taken at the end of its slot
        latency = used / f_w + 1.0 / f_r
        max_hold = 1.0 / f_w + used / f_r  # last cell: written last, read last
        if 1.0 - fraction > LOST_ENERGY_WARN:
            warnings.warn(
                f"the record of {p.cells} cells at {f_w / 1e9:.4g} GS/s spans "
                f"{p.cells / f_w * 1e9:.4g} ns and holds only {100 * fraction:.3f}% of the input "
                f"energy: the rest of the pulse is truncated", DesignWarning, stacklevel=2)
        if p.droop_time > 0 and -math.expm1(-max_hold / p.droop_time) > DROOP_WARN:
            warnings.warn(
                f"the last cell is read {max_hold * 1e6:.4g} us after it was written and droops by "
                f"{-100 * math.expm1(-max_hold / p.droop_time):.3g}% (droop_time "
                f"{p.droop_time * 1e6:.4g} us)", DesignWarning, stacklevel=2)
        notes = (
            f"write {used} of {p.cells} cells at {f_w / 1e9:.4g} GS/s, read at {f_r / 1e6:.4g} MS/s",
            f"cell capacitance {cap * 1e15:.4g} fF for {v_target * 1e6:.4g} uV rms kT/C noise"
            + (" (the smallest cell drawn)" if cap == p.min_cell_capacitance else ""),
        )
        return AnalogMemoryDesign(
            factor=factor, notes=notes, write_rate=f_w, read_rate=f_r, cells=p.cells, cells_used=used,
            window_start=t_s, record_length=p.cells / f_w, record_energy_fraction=fraction,
            cell_capacitance=cap, readout_cutoff=p.readout_bandwidth * f_r, latency=latency,
            max_hold=max_hold, lost_before=lost_before, lost_after=lost_after)

    # -- simulate -----------------------------------------------------------------------------
    def simulate(self, pulse, design: AnalogMemoryDesign, params: AnalogMemoryParams, rng,
                 trials=1, technology=None) -> Simulation:
        p, d = params, design
        m = d.cells_used
        k = np.arange(m)
        t_cell = d.window_start + k / d.write_rate  # nominal sampling instants, s
        if p.aperture_jitter > 0:
            times = t_cell + rng.normal(0.0, p.aperture_jitter, size=(trials, m))
        else:
            times = t_cell
        v = sample_band_limited(pulse, times, aperture=p.aperture)
        v = np.broadcast_to(v, (trials, m)).copy()
        if p.gain_mismatch > 0:
            v *= 1.0 + rng.normal(0.0, p.gain_mismatch, size=(trials, m))
        clean = None
        temperature = technology.temperature if technology is not None else 300.0
        v_noise = costs.ktc_noise(d.cell_capacitance, temperature)
        # hold time of cell k: written at t_k, sampled at the end of read slot k
        t_read = d.window_start + m / d.write_rate + (k + 1) / d.read_rate
        hold = t_read - t_cell
        droop = np.exp(-hold / p.droop_time) if p.droop_time > 0 else np.ones(m)
        filt = readout_filter(p.readout, d.readout_cutoff, d.read_rate, p.readout_order)

        def finish(values):
            values = values * droop
            if filt is not None:
                values = _signal().lfilter(filt[0], filt[1], values, axis=-1)
            return values

        if p.noise:
            clean_values = finish(v)
            v = v + rng.normal(0.0, v_noise, size=(trials, m))
            clean = Pulse(clean_values, d.read_rate, t_read[0], pulse.units, f"{pulse.name} (noise-free)")
        # Input outside the record never reaches a cell: the readout shows the baseline there.
        # The output keeps those zeros so that every metric sees the lost part of the pulse.
        before, after = d.lost_before, d.lost_after
        t_out0 = t_read[0] - before / d.read_rate

        def pad(values):
            return np.pad(values, ((0, 0), (before, after))) if before or after else values

        if clean is not None:
            clean = clean.with_values(pad(clean.values), t0=t_out0)
        out = Pulse(pad(finish(v)), d.read_rate, t_out0, pulse.units, f"{pulse.name} from analog memory")
        settle = readout_settling_error(p.readout, d.readout_cutoff, d.read_rate, p.readout_order)
        ref = clean.values[0] if clean is not None else out.values[0]
        k_pk = int(np.argmax(np.abs(ref)))
        rms = _output_noise(v_noise, droop, filt, k_pk - before) if 0 <= k_pk - before < m else 0.0
        metrics = {
            "noise_rms": Metric(rms, "V", "output rms noise at the output peak (kT/C of the cells)"),
            "snr_db": Metric(20.0 * math.log10(abs(ref[k_pk]) / rms) if rms > 0 else math.nan, "dB",
                             "output peak over rms noise"),
            "record_length": Metric(d.record_length, "s", "input time the cell bank holds"),
            "record_energy_fraction": Metric(d.record_energy_fraction, "",
                                             "fraction of input energy inside the record"),
            "cells_used": Metric(float(m), "", "cells written and read"),
            "max_droop": Metric(float(1.0 - droop[-1]), "", "relative droop of the last cell read"),
            "cell_noise": Metric(v_noise, "V", "kT/C noise per cell (rms)"),
            "readout_settling_error": Metric(settle, "", "readout step error at the end of a slot"),
        }
        path = "sampled cells, exact band-limited sampling, zero-order-hold readout discretisation"
        return Simulation(pulse=out, metrics=metrics, path=path, clean=clean)

    # -- bill ---------------------------------------------------------------------------------
    def bill(self, design: AnalogMemoryDesign, params: AnalogMemoryParams, technology) -> Bill:
        d, p, tech = design, params, technology
        n = d.cells
        cap_area = n * d.cell_capacitance / tech.cap_density
        switches = 2 * n  # one write and one read switch per cell
        p_strobe = p.strobe_capacitance * tech.supply ** 2 * d.write_rate
        bw_in = d.write_rate / 2
        p_in = _buffer_power(bw_in, d.cell_capacitance, tech)
        p_out = _buffer_power(d.readout_cutoff, p.readout_load, tech)
        t_write = d.cells_used / d.write_rate
        t_read = d.cells_used / d.read_rate
        items = (
            BillItem("cell capacitors", cap_area, 0.0, n,
                     f"C = kT/v^2 = {d.cell_capacitance * 1e15:.4g} fF each at the capacitor density"),
            BillItem("write and read switches", switches * tech.switch_area, 0.0, switches,
                     "two switches per cell at the technology's switch area"),
            BillItem("write strobes", tech.gm_cell_area, p_strobe, 1,
                     "C_strobe * Vdd^2 * f_w (one cell switched per write period)"),
            BillItem("input buffer", tech.gm_cell_area, p_in, 1,
                     "gm = 2 pi (f_w/2) C_cell, I = gm/(gm/I_D), P = I * Vdd"),
            BillItem("readout buffer", tech.gm_cell_area, p_out, 1,
                     "gm = 2 pi f_readout C_load, I = gm/(gm/I_D), P = I * Vdd"),
        )
        over = tech.layout_overhead
        items = tuple(BillItem(i.name, i.area * over, i.power, i.count, f"{i.note}; x {over:g} layout overhead")
                      for i in items)
        energy = (p_strobe + p_in) * t_write + p_out * t_read
        return Bill(area=sum(i.area for i in items), power=sum(i.power for i in items),
                    energy_per_pulse=energy, bw_internal=max(bw_in, d.readout_cutoff),
                    counts={"capacitors": n, "switches": switches, "buffers": 2}, items=items)


    # -- process limits -----------------------------------------------------------------------
    def limits(self, design: AnalogMemoryDesign, params: AnalogMemoryParams, technology) -> tuple[Limit, ...]:
        tech = technology
        return (
            Limit("write rate (strobe clock)", design.write_rate, tech.carrier_max_fraction * tech.f_t, "Hz",
                  note=f"card clock ceiling carrier_max_fraction x f_T = {tech.carrier_max_fraction:g} x "
                       f"{tech.f_t:.3g} Hz: the strobe chain steps once per write period"),
            Limit("area", self.bill(design, params, tech).area, tech.die_area, "m²", note="card die_area"),
        )


# ---- helpers (pure functions, tested on their own) ----------------------------------------------

def _signal():
    """scipy.signal, imported on first use (it is slow to import; listing methods needs none)."""
    from scipy import signal

    return signal


def _output_noise(cell_noise: float, droop: np.ndarray, filt, k: int) -> float:
    """RMS output noise at read sample `k`: independent kT/C samples of rms `cell_noise`, each
    drooped with its cell and summed through the readout filter's response, V."""
    if filt is None:
        return float(cell_noise * droop[k])
    impulse = np.zeros(k + 1)
    impulse[0] = 1.0
    h = _signal().lfilter(filt[0], filt[1], impulse)
    return float(cell_noise * math.sqrt(np.sum(h[::-1] ** 2 * droop[: k + 1] ** 2)))


def _energy_fraction(pulse: Pulse, start: float, stop: float) -> float:
    """Fraction of the pulse's energy ∫x² dt that lies in [start, stop).

    The band-limited pulse is first interpolated onto a grid 16 times finer (exact
    trigonometric interpolation), so the window edges need not fall on input samples.
    """
    fine = resample_to(pulse, 16.0 * pulse.rate, n=16 * pulse.n)
    e = fine.values ** 2
    total = float(np.sum(e))
    if total <= 0:
        return 1.0
    inside = (fine.t >= start) & (fine.t < stop)
    return min(1.0, float(np.sum(e[inside]) / total))


def _buffer_power(bandwidth: float, load: float, tech) -> float:
    """Supply power of a single-stage buffer of bandwidth `bandwidth` (Hz) into `load` (F), W."""
    gm = 2.0 * math.pi * bandwidth * load
    return costs.bias_current(gm, tech.gm_over_id) * tech.supply


def sample_band_limited(pulse: Pulse, times, *, aperture: float = 0.0) -> np.ndarray:
    """Sample the band-limited interpolant of `pulse` at arbitrary `times`, through an aperture.

    The record is one period of its trigonometric interpolant (exact for a band-limited pulse
    that is negligible at both ends). Content above the cells' Nyquist frequency is *not*
    removed first: it aliases, as it would in the hardware.

    Parameters
    ----------
    pulse : Pulse
        Input, one record of n samples.
    times : array_like
        Sampling instants, s, any shape.
    aperture : float
        Width t_a of the averaging window centred on each instant, s; the cells see
        X(f)·sinc(f·t_a) (sinc(u) = sin(πu)/(πu)). 0 samples instantaneously.

    Returns
    -------
    ndarray
        Samples, same shape as `times`, in the pulse's units.
    """
    x = np.asarray(pulse.values, dtype=float)
    n = x.shape[-1]
    period = pulse.duration
    X = sfft.rfft(x) / n
    f = np.arange(X.size) / period
    if aperture > 0:
        X = X * np.sinc(f * aperture)
    weights = np.full(X.size, 2.0)
    weights[0] = 1.0
    if n % 2 == 0:
        weights[-1] = 1.0  # Nyquist bin: its two halves sum to a real cosine
    c = X * weights
    tau = np.asarray(times, dtype=float) - pulse.t0
    flat = tau.reshape(-1)
    out = np.empty(flat.size)
    step = max(1, _CHUNK // max(1, c.size))
    for i in range(0, flat.size, step):  # bounded memory; vectorised inside each chunk
        ph = np.exp(2j * np.pi * np.outer(flat[i:i + step], f))
        out[i:i + step] = (ph @ c).real
    return out.reshape(tau.shape)


def _readout_system(kind: str, cutoff: float, order: int):
    if kind == "first-order":
        return _signal().butter(1, 2 * math.pi * cutoff, analog=True)
    return _signal().butter(order, 2 * math.pi * cutoff, analog=True)


def readout_filter(kind: str, cutoff: float, read_rate: float, order: int = 3):
    """Discrete filter mapping cell voltages to the samples the slow ADC takes.

    The buffer (a continuous low-pass of −3 dB frequency `cutoff`) is driven by the staircase
    of cell voltages, one per read slot of 1/`read_rate`; the ADC samples at the end of each
    slot. The zero-order-hold discretisation of the buffer is exact for a staircase input.

    Parameters
    ----------
    kind : {"ideal", "first-order", "butterworth"}
    cutoff : float
        −3 dB bandwidth, Hz.
    read_rate : float
        Read slots per second, Hz.
    order : int
        Butterworth order.

    Returns
    -------
    (b, a) or None
        ``scipy.signal.lfilter`` coefficients giving the sample at the end of slot k from cells
        0…k; None for the ideal readout (the sample is the cell voltage).
    """
    if kind == "ideal":
        return None
    b, a = _readout_system(kind, cutoff, order)
    A, B, C, D = _signal().tf2ss(b, a)
    Ad, Bd, Cd, Dd, _ = _signal().cont2discrete((A, B, C, D), 1.0 / read_rate, method="zoh")
    num, den = _signal().ss2tf(Ad, Bd, Cd, Dd)
    # y[k+1] (end of slot k) = Σ num[1:]·u[k…]: dropping the leading (zero, D = 0) term of the
    # numerator advances the output by one slot, so index k is the end of slot k
    return np.asarray(num[0][1:], dtype=float), np.asarray(den, dtype=float)


def readout_settling_error(kind: str, cutoff: float, read_rate: float, order: int = 3) -> float:
    """|1 − s(T)|: the step-response error of the readout buffer at the end of one slot T."""
    if kind == "ideal":
        return 0.0
    b, a = _readout_system(kind, cutoff, order)
    T = 1.0 / read_rate
    _, s = _signal().step((b, a), T=np.array([0.0, T]))
    return float(abs(1.0 - s[-1]))
