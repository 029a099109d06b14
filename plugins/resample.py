"""Built-in method ``resample``: digitize fast, store, replay slow (or the reverse).

The reference method. With capture modelling off it is exact band-limited time scaling: the
samples of the input replayed at rate/α reproduce x(t/α) to rounding, so it is the fidelity
ceiling the other methods are judged against. With capture modelling on, the pulse is sampled
by an ADC (resolution, full scale, rms sampling-clock jitter), stored, and replayed by a DAC
(zero-order hold and an analog Butterworth reconstruction filter, or ideal band-limited replay).

Bill: the capture ADC from the Walden figure of merit, P = FOM · 2^ENOB · f_s (Walden, IEEE
JSAC 1999), at the rate the input's occupied bandwidth demands; memory from energy and area per
stored bit; the replay DAC from the same form at the replay rate.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
import scipy.fft as sfft

from timescale.data.signal import derivative, resample_to
from timescale.numerics import costs
from timescale.plugin import (
    Bill,
    BillItem,
    Design,
    DesignWarning,
    Method,
    Metric,
    Pulse,
    SamplingWarning,
    Simulation,
    hookimpl,
    param,
)

__all__ = ["Resample", "ResampleParams", "ResampleDesign", "timescale_methods"]


@dataclass(frozen=True)
class ResampleParams:
    """Parameters of the ``resample`` method."""

    capture: bool = param(False, doc="model the capture ADC and replay DAC (off: ideal scaling)")
    oversampling: float = param(1.25, doc="capture rate over twice the input's 99% bandwidth")
    bits: int = param(10, units="bit", doc="ADC and DAC resolution (also sizes the bill)")
    full_scale: float = param(0.0, units="V", doc="ADC peak input; 0 picks 1.25 x the pulse peak")
    jitter: float = param(0.0, units="s", doc="rms sampling-clock jitter of the capture ADC")
    dac: str = param("zoh", doc="replay: zero-order hold + filter, or ideal band-limited",
                     choices=("zoh", "ideal"))
    filter_order: int = param(4, doc="order of the Butterworth reconstruction filter")
    filter_cutoff: float = param(0.8, doc="reconstruction cutoff as a fraction of replay Nyquist")
    hold_points: int = param(16, doc="output grid points per replay sample (zoh simulation)")


@dataclass(frozen=True, kw_only=True)
class ResampleDesign(Design):
    """Sizing of a digitize-and-replay chain.

    Attributes
    ----------
    capture_rate : float
        ADC sample rate f_c, Hz.
    replay_rate : float
        DAC sample rate f_c/α, Hz.
    samples : int
        Samples stored per pulse.
    bits : int
        Resolution, bit.
    full_scale : float
        ADC peak input, V.
    latency : float
        Delay from the first input sample to the first output sample, s (the whole record is
        captured before replay starts).
    capture_time : float
        Record length captured, s.
    """

    capture_rate: float
    replay_rate: float
    samples: int
    bits: int
    full_scale: float
    latency: float
    capture_time: float


class Resample(Method):
    """Digitize-and-replay (band-limited resampling) reference method."""

    name = "resample"
    summary = "digitize fast, store, replay slow (or the reverse): the fidelity reference"
    Params = ResampleParams
    version = "0.1.0"
    identity_tolerance = 1e-9
    factor_tolerance = 1e-3

    def design(self, pulse: Pulse, factor: float, params: ResampleParams, technology) -> ResampleDesign:
        if not 1 <= params.bits <= 24:
            raise ValueError(f"bits must lie in 1..24, got {params.bits}")
        if params.oversampling <= 0:
            raise ValueError(f"oversampling must be > 0, got {params.oversampling}")
        if params.jitter < 0 or params.full_scale < 0:
            raise ValueError("jitter and full_scale must be >= 0")
        if not 0 < params.filter_cutoff <= 1:
            raise ValueError(f"filter_cutoff must lie in (0, 1], got {params.filter_cutoff}")
        if params.filter_order < 1 or params.hold_points < 2:
            raise ValueError("filter_order must be >= 1 and hold_points >= 2")
        f99 = float(pulse.occupied_bandwidth())
        f_c = 2.0 * params.oversampling * f99
        if params.oversampling < 1.0:
            warnings.warn(
                f"capture rate {f_c / 1e9:.3g} GS/s is below twice the input's 99% bandwidth "
                f"({f99 / 1e9:.3g} GHz): the capture aliases", SamplingWarning, stacklevel=2)
        if params.capture and f_c > pulse.rate:
            f_c = pulse.rate  # the simulation cannot sample faster than the input grid
        samples = max(2, int(math.floor(pulse.duration * f_c)))
        peak = float(pulse.peak())
        fs = params.full_scale or 1.25 * peak
        if params.capture and fs < peak:
            warnings.warn(f"full_scale {fs:.3g} V is below the pulse peak {peak:.3g} V: the ADC clips",
                          DesignWarning, stacklevel=2)
        notes = (f"capture at {f_c / 1e9:.4g} GS/s ({params.oversampling:g} x twice the 99% bandwidth)",
                 f"replay at {f_c / factor / 1e9:.4g} GS/s")
        return ResampleDesign(factor=factor, notes=notes, capture_rate=f_c, replay_rate=f_c / factor,
                              samples=samples, bits=params.bits, full_scale=fs,
                              latency=pulse.duration, capture_time=pulse.duration)

    def simulate(self, pulse, design: ResampleDesign, params: ResampleParams, rng, trials=1,
                 technology=None) -> Simulation:
        a = design.factor
        t_out0 = a * pulse.t0 + design.latency
        if not params.capture:
            out = Pulse(pulse.values, pulse.rate / a, t_out0, pulse.units, f"{pulse.name} resampled")
            return Simulation(pulse=out, path="exact band-limited scaling")
        f_c, n = design.capture_rate, design.samples
        v = resample_to(pulse, f_c, n=n).values
        codes = np.broadcast_to(v, (trials, n)).copy()
        if params.jitter > 0:
            # x(t + δ) ≈ x + δ·ẋ + δ²·ẍ/2 (band-limited derivatives; δ ≪ 1/bandwidth)
            d1 = resample_to(pulse.with_values(derivative(pulse.values, pulse.rate)), f_c, n=n).values
            d2 = resample_to(pulse.with_values(derivative(pulse.values, pulse.rate, 2)), f_c, n=n).values
            delta = rng.normal(0.0, params.jitter, size=(trials, n))
            codes = codes + delta * d1 + 0.5 * delta * delta * d2
        q = 2.0 * design.full_scale / 2 ** design.bits
        top = 2 ** (design.bits - 1)
        codes = np.clip(np.round(codes / q), -top, top - 1) * q
        f_r = design.replay_rate
        if params.dac == "ideal":
            out = Pulse(codes, f_r, t_out0, pulse.units, f"{pulse.name} replayed")
            return Simulation(pulse=out, path="ADC capture, ideal replay",
                              metrics=_quant_metric(design))
        k = params.hold_points
        stair = np.repeat(codes, k, axis=-1)
        rate = k * f_r
        # room for the filter's tail: ~ 20 time constants of the cutoff
        fc = params.filter_cutoff * f_r / 2
        tail = int(math.ceil(20.0 / (2 * math.pi * fc) * rate))
        nfft = sfft.next_fast_len(stair.shape[-1] + tail)
        f = sfft.rfftfreq(nfft, 1.0 / rate)
        from scipy import signal as ss  # imported here: scipy.signal is slow to import

        b, a_ = ss.butter(params.filter_order, 2 * math.pi * fc, analog=True)
        _, h = ss.freqs(b, a_, worN=2 * math.pi * f)
        y = sfft.irfft(sfft.rfft(stair, n=nfft, axis=-1) * h, n=nfft, axis=-1)
        out = Pulse(y, rate, t_out0, pulse.units, f"{pulse.name} replayed")
        return Simulation(pulse=out, path="ADC capture, zero-order-hold replay, analog filter",
                          metrics=_quant_metric(design))

    def bill(self, design: ResampleDesign, params: ResampleParams, technology) -> Bill:
        tech = technology
        bits = design.bits
        p_adc = costs.walden_power(tech.adc_fom, bits, design.capture_rate)
        p_dac = costs.walden_power(tech.dac_fom, bits, design.replay_rate)
        stored = bits * design.samples
        e_mem = tech.memory_energy_per_bit * stored
        replay_time = design.samples / design.replay_rate
        items = (
            BillItem("capture ADC", tech.adc_area_per_rate * design.capture_rate, p_adc, 1,
                     "Walden FOM x 2^bits x capture rate"),
            BillItem("sample memory", tech.memory_area_per_bit * stored,
                     e_mem / (design.capture_time + replay_time), stored, "per stored bit"),
            BillItem("replay DAC", tech.adc_area_per_rate * design.replay_rate, p_dac, 1,
                     "Walden form at the replay rate; area as an ADC of that rate"),
        )
        energy = p_adc * design.capture_time + p_dac * replay_time + e_mem
        return Bill(area=sum(i.area for i in items), power=sum(i.power for i in items),
                    energy_per_pulse=energy, bw_internal=design.capture_rate / 2,
                    counts={"adcs": 1, "dacs": 1, "memory_bits": stored}, items=items)


def _quant_metric(design: ResampleDesign):
    # ideal quantizer noise on a full-scale sine: SNR = 6.02·N + 1.76 dB (Walden 1999)
    return {"quantizer_snr_db": Metric(6.02 * design.bits + 1.76, "dB", "ideal quantizer SNR (full-scale sine)")}


@hookimpl
def timescale_methods():
    """Provide the built-in ``resample`` method."""
    return [Resample()]
