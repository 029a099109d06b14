"""Built-in method ``resample``: digitize fast, store, replay slow (or the reverse).

The reference method. With capture modelling off it is exact band-limited time scaling: the
samples of the input replayed at rate/α reproduce x(t/α) to rounding, so it is the fidelity
ceiling the other methods are judged against. With capture modelling on, the pulse is sampled
by an ADC (resolution, full scale, rms sampling-clock jitter, thermal noise), stored, and
replayed by a DAC (its own thermal noise; zero-order hold and an analog Butterworth
reconstruction filter, or ideal band-limited replay).

Sizing: the capture rate follows the input's occupied bandwidth; the resolution is the fewest
bits whose output noise (quantization, the converters' thermal noise, sampling-clock jitter)
meets ``snr_target``. The noise metrics (``noise_rms``, ``snr_db``, ``quantizer_snr_db``,
``enob``) describe the sized hardware whether or not its effects are put in the waveform.

Bill: the capture ADC on the card's rate-dependent frontier, P = FOM(f_s) · 2^ENOB · f_s
(Walden form below ``adc_corner_rate``, 10 dB/decade worse above it, the slope of the Schreier
envelope of published ADC surveys), with the ENOB the simulated capture reaches; memory from
energy and area per stored bit; the replay DAC in the same form at the replay rate.
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
    Limit,
    Method,
    Metric,
    Pulse,
    SamplingWarning,
    Simulation,
    hookimpl,
    param,
)

__all__ = ["Resample", "ResampleParams", "ResampleDesign", "timescale_methods"]

#: Largest resolution the sizing considers, bit.
MAX_BITS = 24


@dataclass(frozen=True)
class ResampleParams:
    """Parameters of the ``resample`` method."""

    capture: bool = param(False, doc="put the capture ADC and replay DAC into the output waveform "
                                     "(off: ideal scaling; the noise metrics and bill hold either way)")
    oversampling: float = param(1.25, doc="capture rate over twice the input's 99% bandwidth")
    bits: int = param(0, units="bit", doc="ADC and DAC resolution; 0 picks the fewest bits that meet snr_target",
                      bounds=(0, MAX_BITS))
    snr_target: float = param(40.0, units="dB", doc="output peak over rms noise at the peak the "
                                                    "converters are sized for", bounds=(0.0, 200.0))
    full_scale: float = param(0.0, units="V", doc="ADC peak input; 0 picks 1.25 x the pulse peak")
    jitter: float = param(0.0, units="s", doc="rms sampling-clock jitter; below the card's floor "
                                              "adc_jitter the floor is used")
    converter_noise: bool = param(True, doc="with capture: add the converters' thermal noise and the card's "
                                            "jitter floor to the waveform (off: quantization and the given "
                                            "jitter only)")
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
        Resolution of the ADC and the DAC, bit.
    full_scale : float
        ADC peak input, V.
    latency : float
        Delay from the first input sample to the first output sample, s (the whole record is
        captured before replay starts).
    capture_time : float
        Record length captured, s.
    jitter : float
        RMS sampling-clock jitter of the capture: the larger of the asked one and the card's
        floor, s.
    adc_noise, dac_noise : float
        RMS thermal noise of the ADC (input-referred) and of the DAC (at its output), V.
    quantization_noise : float
        RMS quantization error measured in the capture where the quantizer is busy, V.
    jitter_noise : float
        RMS jitter error of the capture where the quantizer is busy, V.
    enob : float
        Effective bits of the capture ADC on this pulse (quantization, thermal noise, jitter), bit.
    noise_rms : float
        RMS output noise at the time of the output peak, V.
    signal_band : float
        The input's 99 % bandwidth, Hz.
    """

    capture_rate: float
    replay_rate: float
    samples: int
    bits: int
    full_scale: float
    latency: float
    capture_time: float
    jitter: float = 0.0
    adc_noise: float = 0.0
    dac_noise: float = 0.0
    quantization_noise: float = 0.0
    jitter_noise: float = 0.0
    enob: float = 0.0
    noise_rms: float = 0.0
    signal_band: float = 0.0


class Resample(Method):
    """Digitize-and-replay (band-limited resampling) reference method."""

    name = "resample"
    summary = "digitize fast, store, replay slow (or the reverse): the fidelity reference"
    Params = ResampleParams
    version = "0.2.0"
    identity_tolerance = 1e-9
    factor_tolerance = 1e-3

    def design(self, pulse: Pulse, factor: float, params: ResampleParams, technology) -> ResampleDesign:
        if params.oversampling <= 0:
            raise ValueError(f"oversampling must be > 0, got {params.oversampling}")
        if params.jitter < 0 or params.full_scale < 0:
            raise ValueError("jitter and full_scale must be >= 0")
        if not 0 < params.filter_cutoff <= 1:
            raise ValueError(f"filter_cutoff must lie in (0, 1], got {params.filter_cutoff}")
        if params.filter_order < 1 or params.hold_points < 2:
            raise ValueError("filter_order must be >= 1 and hold_points >= 2")
        tech = technology
        f99 = float(pulse.occupied_bandwidth())
        f_c = 2.0 * params.oversampling * f99
        if params.oversampling < 1.0:
            warnings.warn(
                f"capture rate {f_c / 1e9:.3g} GS/s is below twice the input's 99% bandwidth "
                f"({f99 / 1e9:.3g} GHz): the capture aliases", SamplingWarning, stacklevel=2)
        f_c = min(f_c, pulse.rate)  # the simulation cannot sample faster than the input grid
        samples = max(2, int(math.floor(pulse.duration * f_c)))
        peak = float(pulse.peak())
        fs = params.full_scale or 1.25 * peak
        if params.capture and fs < peak:
            warnings.warn(f"full_scale {fs:.3g} V is below the pulse peak {peak:.3g} V: the ADC clips",
                          DesignWarning, stacklevel=2)
        f_r = f_c / factor
        jitter = max(params.jitter, tech.adc_jitter)
        cap = _Capture(pulse, f_c, samples, jitter)
        gain2 = _replay_gain2(params, f_r, samples)
        if params.bits:
            bits = params.bits
            noise = _noise(cap, bits, fs, gain2)
        else:
            for bits in range(1, MAX_BITS + 1):
                noise = _noise(cap, bits, fs, gain2)
                if 20 * math.log10(peak / noise["rms"]) >= params.snr_target:
                    break
            else:
                warnings.warn(f"even {MAX_BITS} bits do not reach snr_target={params.snr_target:g} dB "
                              f"({20 * math.log10(peak / noise['rms']):.3g} dB): clipping at full_scale "
                              f"({fs:.3g} V) or the clock jitter ({jitter:.3g} s) dominates",
                              DesignWarning, stacklevel=2)
        notes = (f"capture at {f_c / 1e9:.4g} GS/s ({params.oversampling:g} x twice the 99% bandwidth)",
                 f"replay at {f_r / 1e9:.4g} GS/s",
                 (f"{bits} bits ({'given' if params.bits else f'fewest for {params.snr_target:g} dB'}); "
                  f"ENOB {noise['enob']:.3g} on this pulse; clock jitter {jitter:.3g} s"))
        return ResampleDesign(factor=factor, notes=notes, capture_rate=f_c, replay_rate=f_r,
                              samples=samples, bits=bits, full_scale=fs,
                              latency=pulse.duration, capture_time=pulse.duration, jitter=jitter,
                              adc_noise=noise["adc"], dac_noise=noise["dac"],
                              quantization_noise=noise["quant"], jitter_noise=noise["jitter"],
                              enob=noise["enob"], noise_rms=noise["rms"], signal_band=f99)

    def simulate(self, pulse, design: ResampleDesign, params: ResampleParams, rng, trials=1,
                 technology=None) -> Simulation:
        a = design.factor
        t_out0 = a * pulse.t0 + design.latency
        if not params.capture:
            metrics = _noise_metrics(design, float(pulse.peak()))
            out = Pulse(pulse.values, pulse.rate / a, t_out0, pulse.units, f"{pulse.name} resampled")
            return Simulation(pulse=out, path="exact band-limited scaling", metrics=metrics)
        f_c, n = design.capture_rate, design.samples
        sigma_t = design.jitter if params.converter_noise else params.jitter
        cap = _Capture(pulse, f_c, n, sigma_t)
        v = cap.v
        codes = np.broadcast_to(v, (trials, n)).copy()
        if sigma_t > 0:
            # x(t + δ) ≈ x + δ·ẋ + δ²·ẍ/2 (band-limited derivatives; δ ≪ 1/bandwidth)
            delta = rng.normal(0.0, sigma_t, size=(trials, n))
            codes = codes + delta * cap.d1 + 0.5 * delta * delta * cap.d2
        if params.converter_noise:
            codes = codes + rng.normal(0.0, design.adc_noise, size=(trials, n))
        codes = _quantize(codes, design.full_scale, design.bits)
        if params.converter_noise:  # the DAC's own noise rides on every replayed sample
            codes = codes + rng.normal(0.0, design.dac_noise, size=(trials, n))
        clean = v[None, :]
        f_r = design.replay_rate
        if params.dac == "ideal":
            metrics = _noise_metrics(design, float(np.max(np.abs(clean))))
            out = Pulse(codes, f_r, t_out0, pulse.units, f"{pulse.name} replayed")
            ref = Pulse(clean, f_r, t_out0, pulse.units, f"{pulse.name} replayed (noise-free)")
            return Simulation(pulse=out, path="ADC capture, ideal replay", metrics=metrics, clean=ref)
        y, rate = _zoh_replay(np.concatenate([codes, clean]), f_r, params)
        metrics = _noise_metrics(design, float(np.max(np.abs(y[-1]))))
        out = Pulse(y[:-1], rate, t_out0, pulse.units, f"{pulse.name} replayed")
        ref = Pulse(y[-1:], rate, t_out0, pulse.units, f"{pulse.name} replayed (noise-free)")
        return Simulation(pulse=out, path="ADC capture, zero-order-hold replay, analog filter",
                          metrics=metrics, clean=ref)

    def bill(self, design: ResampleDesign, params: ResampleParams, technology) -> Bill:
        tech = technology
        bits = design.bits
        dac_enob = costs.enob_from_sndr(_converter_sndr(bits))
        p_adc = costs.adc_power(design.enob, design.capture_rate, tech.adc_fom, tech.adc_corner_rate)
        p_dac = costs.adc_power(dac_enob, design.replay_rate, tech.dac_fom, tech.adc_corner_rate)
        stored = bits * design.samples
        e_mem = tech.memory_energy_per_bit * stored
        replay_time = design.samples / design.replay_rate
        items = (
            BillItem("capture ADC", tech.adc_area_per_rate * design.capture_rate, p_adc, 1,
                     f"FOM(f_s) x 2^ENOB x f_s: ENOB {design.enob:.3g} from the capture, frontier "
                     f"corner {tech.adc_corner_rate:.3g} Hz"),
            BillItem("sample memory", tech.memory_area_per_bit * stored,
                     e_mem / (design.capture_time + replay_time), stored, "per stored bit"),
            BillItem("replay DAC", tech.adc_area_per_rate * design.replay_rate, p_dac, 1,
                     f"DAC FOM on the same frontier at the replay rate, ENOB {dac_enob:.3g}; "
                     f"area as an ADC of that rate"),
        )
        energy = p_adc * design.capture_time + p_dac * replay_time + e_mem
        return Bill(area=sum(i.area for i in items), power=sum(i.power for i in items),
                    energy_per_pulse=energy, bw_internal=design.capture_rate / 2,
                    counts={"adcs": 1, "dacs": 1, "memory_bits": stored}, items=items)

    def limits(self, design: ResampleDesign, params: ResampleParams, technology) -> tuple[Limit, ...]:
        tech = technology
        channels = math.ceil(design.capture_rate / tech.adc_max_rate)
        jitter_bound = costs.aperture_jitter_snr_db(design.signal_band, tech.adc_jitter)
        return (
            Limit("ADC sample rate per channel", design.capture_rate, tech.adc_max_rate, "Hz",
                  note=f"card adc_max_rate; this rate needs {channels} time-interleaved channel(s)"),
            Limit("replay DAC sample rate", design.replay_rate, tech.adc_max_rate, "Hz",
                  note="card adc_max_rate, taken for the DAC too"),
            Limit("ADC ENOB at the input's 99% band edge", costs.enob_from_sndr(_converter_sndr(design.bits)),
                  max(costs.enob_from_sndr(jitter_bound), 0.0), "bit",
                  note=f"aperture-jitter bound -20log10(2pi f sigma) at {design.signal_band:.3g} Hz with "
                       f"the card's floor adc_jitter = {tech.adc_jitter:.3g} s (Walden 1999; MT-008)"),
            Limit("area", self.bill(design, params, tech).area, tech.die_area, "m²", note="card die_area"),
        )


# ---- noise of the sized chain (pure helpers) ---------------------------------------------------

def _converter_sndr(bits: int) -> float:
    """SNDR of one converter of `bits` bits whose thermal noise equals its quantization noise
    (the design rule this method uses: common practice, no source), dB."""
    return costs.sndr_from_enob(bits) - 10.0 * math.log10(2.0)


def _quantize(v, full_scale: float, bits: int):
    """Mid-tread quantizer of `bits` bits over ±`full_scale`, codes clipped to its range."""
    q = costs.quantizer_step(full_scale, bits)
    top = 2 ** (bits - 1)
    return np.clip(np.round(v / q), -top, top - 1) * q


class _Capture:
    """The ideal capture of a pulse and its jitter sensitivity (computed once per design)."""

    def __init__(self, pulse: Pulse, f_c: float, n: int, jitter: float):
        self.v = resample_to(pulse, f_c, n=n).values
        if jitter > 0:
            self.d1 = resample_to(pulse.with_values(derivative(pulse.values, pulse.rate)), f_c, n=n).values
            self.d2 = resample_to(pulse.with_values(derivative(pulse.values, pulse.rate, 2)), f_c, n=n).values
            self.jitter_var = costs.jitter_error_variance(jitter, self.d1, self.d2)
        else:
            self.jitter_var = np.zeros(n)
        self.peak_index = int(np.argmax(np.abs(self.v)))


def _noise(cap: _Capture, bits: int, full_scale: float, gain2) -> dict:
    """Noise of the chain at `bits`: the quantization error measured on the capture, thermal
    noise of ADC and DAC (each equal to q/√12), jitter; the output variance at the peak through
    the replay (`gain2`: squared response of one held sample on the replay grid)."""
    q = costs.quantizer_step(full_scale, bits)
    err = _quantize(cap.v, full_scale, bits) - cap.v
    busy = np.abs(cap.v) >= q  # where the quantizer is exercised (Bennett's condition)
    quant2 = float(np.mean(err[busy] ** 2)) if busy.any() else float(np.mean(err ** 2))
    thermal2 = q * q / 12.0
    jitter2 = float(np.mean(cap.jitter_var[busy])) if busy.any() else float(np.mean(cap.jitter_var))
    sndr = 10.0 * math.log10(0.5 * full_scale ** 2 / max(quant2 + thermal2 + jitter2, 1e-300))
    per_sample = quant2 + 2.0 * thermal2 + cap.jitter_var  # quantization, ADC and DAC thermal, jitter
    k = cap.peak_index
    if gain2 is None:  # ideal replay: the output samples are the stored ones
        var = per_sample[k]
    else:
        hold, g2 = gain2
        # variance at the output sample where the held peak sample's response is largest
        i = k * hold + int(np.argmax(g2))
        shifts = i - np.arange(per_sample.size) * hold
        ok = (shifts >= 0) & (shifts < g2.size)
        var = float(np.sum(per_sample[ok] * g2[shifts[ok]]))
    return {"quant": math.sqrt(quant2), "adc": math.sqrt(thermal2), "dac": math.sqrt(thermal2),
            "jitter": math.sqrt(jitter2), "enob": costs.enob_from_sndr(sndr), "rms": math.sqrt(var)}


def _replay_gain2(params: ResampleParams, f_r: float, samples: int):
    """Squared response of the replay to one held unit sample, on the output grid, with the
    hold length in grid points; None for ideal replay."""
    if params.dac == "ideal":
        return None
    one = np.zeros((1, samples))
    one[0, 0] = 1.0
    y, _ = _zoh_replay(one, f_r, params)
    return params.hold_points, y[0] ** 2


def _zoh_replay(codes: np.ndarray, f_r: float, params: ResampleParams):
    """Hold each code for one replay period and filter the staircase (Butterworth, by FFT);
    returns (values, rate)."""
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
    return sfft.irfft(sfft.rfft(stair, n=nfft, axis=-1) * h, n=nfft, axis=-1), rate


def _noise_metrics(design: ResampleDesign, peak: float) -> dict:
    fs = design.full_scale
    return {
        "noise_rms": Metric(design.noise_rms, "V", "output rms noise at the output peak"),
        "snr_db": Metric(20.0 * math.log10(peak / design.noise_rms), "dB", "output peak over rms noise"),
        "quantizer_snr_db": Metric(10.0 * math.log10(0.5 * fs * fs / design.quantization_noise ** 2), "dB",
                                   "quantizer SNR measured in the capture (full-scale sine over the error power)"),
        "enob": Metric(design.enob, "bit", "effective bits of the capture ADC on this pulse"),
        "adc_bits": Metric(float(design.bits), "bit", "converter resolution"),
        "sampling_jitter": Metric(design.jitter, "s", "rms sampling-clock jitter of the capture"),
    }


@hookimpl
def timescale_methods():
    """Provide the built-in ``resample`` method."""
    return [Resample()]
