"""The ``chirp-dispersive`` method: sizing, simulation and bill (see the package docstring)."""

from __future__ import annotations

import functools
import math
import warnings
from dataclasses import dataclass

import numpy as np
from scipy.signal.windows import tukey

from timescale.data.signal import analytic, resample_to
from timescale.numerics import costs
from timescale.numerics import dispersion as dsp
from timescale.plugin import (
    Bill,
    BillItem,
    Design,
    DesignWarning,
    Limit,
    Method,
    Metric,
    Pulse,
    Simulation,
    param,
)

__all__ = ["ChirpDispersive", "ChirpParams", "ChirpDesign"]

_NP_TO_DB = 20.0 / math.log(10.0)


@dataclass(frozen=True)
class ChirpParams:
    """Parameters of the ``chirp-dispersive`` method."""

    arrangement: str = param("stretch", doc="chirped carrier + one line, or line + time lens + line",
                             choices=("stretch", "lens"))
    line: str = param("ideal", doc="dispersive line model",
                      choices=("ideal", "band-limited", "allpass", "touchstone"))
    touchstone: str = param("", doc="Touchstone file of a measured line (line='touchstone')")
    detector: str = param("magnitude", doc="ideal envelope, square law + Bessel low-pass, or I/Q",
                          choices=("magnitude", "square-law", "coherent"))
    image: str = param("inverted", doc="lens: lines of one sign (reversed image) or of opposite sign",
                       choices=("inverted", "upright"))
    penalty_phase: float = param(0.5, units="rad",
                                 doc="stretch: dispersion-penalty phase Φ2ω²/(2M) allowed at the band edge")
    chirp_rate: float = param(0.0, units="Hz/s", doc="stretch: chirp rate μ; 0 sizes it from penalty_phase")
    lens_spread: float = param(1.0, doc="lens: spread of the pulse by line 1, in pulse windows")
    carrier: float = param(0.0, units="Hz",
                           doc="carrier (line centre) frequency; 0 picks baseband_ratio x the line band")
    path: str = param("auto", doc="simulation path", choices=("auto", "baseband", "passband"))
    baseband_ratio: float = param(1.0, doc="auto path: complex baseband when carrier/line band >= this")
    modulation_index: float = param(0.3, doc="pulse peak over the carrier (bias) amplitude")
    calibrate: bool = param(True, doc="divide by the detected carrier-only record (gain flattening)")
    band_fraction: float = param(0.999, doc="energy fraction of the input band the line must pass")
    band_margin: float = param(0.1, doc="line band beyond the occupied band, as a fraction")
    ripple: float = param(0.0, units="s", doc="added peak group-delay ripple (ideal, band-limited)")
    ripple_period: float = param(2e9, units="Hz", doc="period in frequency of the added ripple")
    loss: float = param(0.0, units="dB/s", doc="extra insertion loss per second of group delay")
    finite_q: bool = param(True, doc="lines lose exp(-ωτ/2Q) with the card's inductor Q")
    impedance: float = param(50.0, units="ohm", doc="line impedance for element values")
    detector_bandwidth: float = param(0.0, units="Hz", doc="square-law low-pass cutoff; 0 picks 3 x output band")
    chirp_jitter: float = param(0.0, units="s", doc="rms timing jitter of the chirp (lens) start per trial; "
                                                    "below the source's own (phase noise) that one is used with noise")
    snr_target: float = param(40.0, units="dB", doc="output peak over rms noise at the peak the make-up "
                                                    "amplifiers are sized for", bounds=(0.0, 200.0))
    noise: bool = param(False, doc="add the chain's thermal noise and the source's phase-noise jitter to "
                                   "the waveform (the noise metrics are reported either way)")
    max_dbp: float = param(2000.0, doc="band-limited line: largest delay-bandwidth product")
    max_loss: float = param(40.0, units="dB", doc="band-limited line: largest insertion loss")
    max_sections: int = param(200, doc="all-pass line: most second-order sections")
    max_samples: int = param(1 << 24, doc="longest simulation record")
    penalty_warn: float = param(0.05, doc="warn when the penalty-only NRMSE estimate exceeds this")


@dataclass(frozen=True, kw_only=True)
class ChirpDesign(Design):
    """Sizing of a chirp-dispersive chain (SI units).

    Attributes
    ----------
    arrangement : str
        "stretch" or "lens".
    line_model : str
        Line model name.
    magnification : float
        Signed M (negative for a time-reversed image).
    bypass : bool
        Factor 1 in a chain that needs no dispersion: the pulse passes unchanged.
    gdd_chirp : float
        Φ1, s²: the chirp's equivalent GDD (stretch) or line 1 (lens).
    gdd_line : float
        Φ2, s².
    gdd_focal : float
        Φf, s² (lens; 0 for stretch).
    chirp_rate, chirp_span : float
        μ (Hz/s) and frequency sweep (Hz) of the chirp (stretch) or lens chirp.
    carrier : float
        Carrier and line centre frequency, Hz.
    signal_band : float
        One-sided input band B the line passes (at `band_fraction`), Hz.
    internal_band : float
        Chirp span + 2B, Hz.
    line_band, line1_band : (float, float)
        Pass band of line 2 (and line 1 for the lens), Hz.
    delay, delay1 : float
        Bulk group delay of line 2 (line 1) at the carrier, s.
    line_delay : float
        Largest group delay of line 2 across its band, s.
    dbp : float
        Delay-bandwidth product of line 2 (delay spread × band).
    sections, sections1 : tuple of (float, float)
        All-pass (ω0 rad/s, Q) of line 2 (line 1), for line="allpass".
    ripple_rms : float
        RMS group-delay ripple of line 2 over its band, s.
    window : (float, float)
        Start and end of the chirp/bias gate, s.
    taper : float
        Gate edge length, s.
    aperture : float
        Lens gate length, s (lens).
    bias : float
        Carrier (bias) amplitude, V.
    sim_rate, out_rate : float
        Simulation and output sample rates, Hz.
    path, path_reason : str
        Simulation path and why.
    penalty_edge : float
        Φ2ω_B²/(2M) at the band edge, rad (stretch).
    penalty_nrmse : float
        NRMSE the penalty alone causes on this pulse (estimate from its spectrum).
    detector_cutoff : float
        Square-law low-pass cutoff, Hz.
    active_time : float
        Time the chain is powered per pulse, s.
    touchstone : str
        Measured line file, if any.
    input_peak : float
        Peak of the input pulse, V.
    line_loss : tuple of float
        Insertion loss of each line (line 1 first for the lens) at the carrier, dB.
    amplifiers : tuple of int
        Make-up amplifiers spread along each line (0: the loss is left to the detector).
    amplifier_gm : tuple of float
        Transconductance of each line's make-up amplifiers, S.
    noise_factor : float
        Noise factor F of the whole chain referred to the mixer's pulse port (Friis).
    noise_bandwidth : float
        Input-referred bandwidth of the noise that reaches the output, Hz.
    input_noise : float
        RMS thermal noise of the chain referred to the pulse port, V.
    sources : int
        Oscillator cores the chirp needs (span over the card's fractional span per core).
    source_jitter : float
        RMS timing jitter of the chirp from its phase noise (card vco_fom), s.
    """

    arrangement: str
    line_model: str
    magnification: float
    bypass: bool = False
    gdd_chirp: float = 0.0
    gdd_line: float = 0.0
    gdd_focal: float = 0.0
    chirp_rate: float = 0.0
    chirp_span: float = 0.0
    carrier: float = 0.0
    signal_band: float = 0.0
    internal_band: float = 0.0
    line_band: tuple = (0.0, 0.0)
    line1_band: tuple = (0.0, 0.0)
    delay: float = 0.0
    delay1: float = 0.0
    line_delay: float = 0.0
    dbp: float = 0.0
    sections: tuple = ()
    sections1: tuple = ()
    ripple_rms: float = 0.0
    window: tuple = (0.0, 0.0)
    taper: float = 0.0
    aperture: float = 0.0
    bias: float = 0.0
    sim_rate: float = 0.0
    out_rate: float = 0.0
    path: str = "bypass"
    path_reason: str = ""
    penalty_edge: float = 0.0
    penalty_nrmse: float = 0.0
    detector_cutoff: float = 0.0
    active_time: float = 0.0
    touchstone: str = ""
    input_peak: float = 0.0
    line_loss: tuple = ()
    amplifiers: tuple = ()
    amplifier_gm: tuple = ()
    noise_factor: float = 1.0
    noise_bandwidth: float = 0.0
    input_noise: float = 0.0
    sources: int = 0
    source_jitter: float = 0.0


# ------------------------------------------------------------------------------------------
# helpers
# ------------------------------------------------------------------------------------------
def _energy_window(pulse: Pulse, tail: float = 1e-7) -> tuple[float, float]:
    """Times between which all but `tail` of the energy lies (half each side), s."""
    e = pulse.values.reshape(-1, pulse.n)[0] ** 2
    c = np.cumsum(e)
    if c[-1] <= 0:
        raise ValueError(f"pulse {pulse.name!r} is all zeros: nothing to time-scale")
    c = c / c[-1]
    t = pulse.t
    i0 = int(np.searchsorted(c, tail / 2))
    i1 = int(np.searchsorted(c, 1 - tail / 2))
    return float(t[max(i0 - 1, 0)]), float(t[min(i1 + 1, pulse.n - 1)])


def _penalty_nrmse(pulse: Pulse, gdd_line: float, m: float) -> float:
    """‖x − x∗cos‖/‖x‖ with the penalty cos(Φ2ω²/(2M)) applied to the input spectrum."""
    f, X = pulse.spectrum(n_fft=4 * pulse.n)
    p = np.abs(X.reshape(-1, f.size)[0]) ** 2
    c = dsp.dispersion_penalty(f, gdd_line, m)
    return float(math.sqrt(np.sum(p * (1 - c) ** 2) / max(np.sum(p), 1e-300)))


@functools.lru_cache(maxsize=64)
def _allpass(gdd, f_lo, f_hi, max_sections, q):
    return dsp.design_allpass(gdd, f_lo, f_hi, max_sections=max_sections, q_unloaded=q)


@functools.lru_cache(maxsize=8)
def _measured(path: str):
    line = dsp.read_touchstone(path)
    return line


@functools.lru_cache(maxsize=512)
def _spiral_area(inductance, width, spacing):
    try:
        return costs.spiral_for_inductance(inductance, width, spacing).area
    except ValueError:
        return math.nan


def _spiral_areas(inductances, tech, per_decade: int = 16) -> np.ndarray:
    """Spiral areas (m²) for many inductances: spirals are sized exactly on a fixed log grid
    (`per_decade` points, shared by every design, cached) and the area is interpolated in
    log-log between them (area grows smoothly with L)."""
    ind = np.asarray(inductances, dtype=float)
    k = np.arange(math.floor(math.log10(ind.min()) * per_decade),
                  math.ceil(math.log10(ind.max()) * per_decade) + 1)
    grid = 10.0 ** (k / per_decade)
    area = np.array([_spiral_area(float(g), tech.inductor_track_width, tech.inductor_track_spacing)
                     for g in grid])
    if grid.size == 1:
        return np.full(ind.shape, area[0])
    return np.exp(np.interp(np.log(ind), np.log(grid), np.log(area)))


def _q_loss(params, tech, f_c) -> float:
    """Insertion loss per second of delay, dB/s: the delay–loss relation exp(−ωτ/(2Q))."""
    q_loss = costs.lc_line_loss_db(f_c, 1.0, tech.inductor_q) if params.finite_q else 0.0
    return params.loss + q_loss


#: Segment losses (dB) between make-up amplifiers the sizing tries; inf: no amplifier.
_SEGMENTS_DB = np.concatenate([[np.inf], np.geomspace(0.25, 60.0, 160)])


def _amplifier_noise_factor(gm: float, r0: float, gamma: float) -> float:
    """Noise factor of a common-source stage with a shunt input termination R0:
    F = 2 + 4γ/(gm·R0) (B. Razavi, *RF Microelectronics*, resistively terminated LNA; from memory)."""
    return 2.0 + 4.0 * gamma / (gm * r0)


def _size_chain(params, tech, f_c, delays, bandwidth, peak) -> dict:
    """Line losses, make-up amplifiers and the chain's noise referred to the pulse port.

    Chain: mixer → line 1 (→ lens mixer → line 2) → envelope detector, each line's loss made up
    by k amplifiers spread along it (equal loss segments; each amplifier restores its segment's
    loss into R0, gm = √L_s/R0). Friis' cascade with the running gain; the detector's
    input noise density counts as the excess noise factor v²/(k·T0·R0) at unity gain. The
    segment loss is the one of least amplifier power whose input-referred noise meets
    ``snr_target`` (or the quietest one when none does).

    Returns
    -------
    dict
        loss (dB per line), amps (per line), gm (S per line), factor (chain F), bandwidth (Hz),
        noise (V rms, input-referred), power (W of all amplifiers).
    """
    r0 = params.impedance
    kt0r = costs.BOLTZMANN * costs.T0_NOISE_FIGURE * r0
    f_mix = 10.0 ** (tech.mixer_noise_figure / 10.0)
    det = tech.detector_noise_density ** 2 / kt0r
    loss_db = [(costs.lc_line_loss_db(f_c, d, tech.inductor_q) if params.finite_q else 0.0) + params.loss * d
               for d in delays]
    allowed = peak / 10.0 ** (params.snr_target / 20.0)
    best = None
    for seg in _SEGMENTS_DB:
        excess, gain, power, amps, gms = 0.0, 1.0, 0.0, [], []
        for l_db in loss_db:
            excess += (f_mix - 1.0) / gain  # the mixer before this line (unity conversion gain)
            k = 0 if (not math.isfinite(seg) or l_db <= 0) else math.ceil(l_db / seg - 1e-12)
            if k == 0:
                if l_db > 1000.0:  # a loss no detector can see through: this candidate is out
                    excess = gain = math.inf
                    break
                excess += (10.0 ** (l_db / 10.0) - 1.0) / gain
                gain /= 10.0 ** (l_db / 10.0)
                amps.append(0)
                gms.append(0.0)
                continue
            ls = 10.0 ** (l_db / k / 10.0)
            gm = math.sqrt(ls) / r0
            fa = _amplifier_noise_factor(gm, r0, tech.gm_noise_gamma)
            excess += k * ((ls - 1.0) + (fa - 1.0) * ls) / gain  # segment, then its amplifier
            power += k * costs.bias_current(gm, tech.gm_over_id) * tech.supply
            amps.append(k)
            gms.append(gm)
        if not math.isfinite(excess):
            continue
        excess += det / gain
        noise = math.sqrt(kt0r * bandwidth * excess)
        cand = {"loss": loss_db, "amps": amps, "gm": gms, "factor": 1.0 + excess, "bandwidth": bandwidth,
                "noise": noise, "power": power}
        if best is None:
            best = cand
            continue
        ok, best_ok = noise <= allowed, best["noise"] <= allowed
        if (ok and (not best_ok or power < best["power"])) or (not ok and not best_ok and noise < best["noise"]):
            best = cand
    return best


class _Line:
    """One line of a design: its model object and figures."""

    def __init__(self, obj, delay, line_delay, dbp, ripple_rms, sections, band):
        self.obj, self.delay, self.line_delay = obj, delay, line_delay
        self.dbp, self.ripple_rms, self.sections, self.band = dbp, ripple_rms, sections, band


def _build_line(model, gdd, f_c, band, params, tech) -> _Line:
    """Realise a line of GDD `gdd` over `band` (Hz) in `model`; refuse with a reason."""
    lo, hi = band
    width = hi - lo
    spread = abs(gdd) * 2 * math.pi * width
    dbp = spread * width
    if model == "allpass":
        q = tech.inductor_q if params.finite_q else None
        try:
            fit = _allpass(float(gdd), float(lo), float(hi), int(params.max_sections), q)
        except ValueError as exc:
            raise ValueError(f"line='allpass' cannot realise this design: {exc}") from None
        w = np.linspace(2 * math.pi * lo, 2 * math.pi * hi, 512)
        return _Line(fit.line, fit.delay, float(np.max(fit.line.group_delay(w))), dbp,
                     fit.ripple_rms, fit.line.second, band)
    # a causal line needs a positive group delay at its low-delay edge
    delay = spread / 2 + 2.0 / (2 * math.pi * width)
    if model == "ideal":
        obj = dsp.QuadraticLine(gdd=gdd, center=f_c, delay=delay, ripple=params.ripple,
                                ripple_period=params.ripple_period)
        return _Line(obj, delay, delay + spread / 2 + params.ripple, dbp, params.ripple / math.sqrt(2), (), band)
    if model == "band-limited":
        if dbp > params.max_dbp:
            raise ValueError(
                f"line='band-limited' refuses: the design needs a delay-bandwidth product of "
                f"{dbp:.4g} (delay spread {spread * 1e9:.4g} ns over {width / 1e9:.4g} GHz), above "
                f"max_dbp={params.max_dbp:g}; lower the factor or the pulse bandwidth, or use the lens")
        loss = _q_loss(params, tech, f_c)
        worst = loss * (delay + spread / 2)
        if worst > params.max_loss:
            raise ValueError(
                f"line='band-limited' refuses: insertion loss would reach {worst:.3g} dB at the "
                f"longest delay ({(delay + spread / 2) * 1e9:.4g} ns at {loss * 1e-9:.3g} dB/ns: "
                f"reactances of Q = {tech.inductor_q:g} at {f_c / 1e9:.4g} GHz plus loss="
                f"{params.loss:g} dB/s), above max_loss={params.max_loss:g} dB")
        obj = dsp.BandLimitedLine(gdd=gdd, center=f_c, delay=delay, ripple=params.ripple,
                                  ripple_period=params.ripple_period, bandwidth=width, loss=loss)
        return _Line(obj, delay, delay + spread / 2 + params.ripple, dbp, params.ripple / math.sqrt(2), (), band)
    raise ValueError(f"line model {model!r} is not buildable here")  # touchstone is handled apart


def _gate(t, start, stop, taper):
    """Tukey gate from `start` to `stop` with cosine edges of `taper` s."""
    n = t.size
    g = np.zeros(n)
    inside = (t >= start) & (t <= stop)
    m = int(inside.sum())
    if m:
        alpha = min(1.0, 2 * taper / max(stop - start, 1e-300))
        g[inside] = tukey(m, alpha) if m > 2 else 1.0
    return g


# ------------------------------------------------------------------------------------------
# the method
# ------------------------------------------------------------------------------------------
class ChirpDispersive(Method):
    """Chirp mixing with dispersive delay lines: time stretch and time lens."""

    name = "chirp-dispersive"
    summary = "chirped carrier + dispersive line (or a time lens): rescale the envelope by dispersion"
    Params = ChirpParams
    version = "0.2.0"
    # factor 1 bypasses the line (exact); the inverted lens at factor 1 images through a full
    # line-lens-line chain whose sampled chirps leave errors near 1e-5
    identity_tolerance = 1e-4
    factor_tolerance = 0.03

    # -- design -------------------------------------------------------------------------------
    def design(self, pulse: Pulse, factor: float, params: ChirpParams, technology) -> ChirpDesign:
        pulse = pulse.row(0)
        a = float(factor)
        if not (a > 0 and math.isfinite(a)):
            raise ValueError(f"factor must be a finite number > 0, got {factor!r}")
        self._check_params(params)
        peak = float(pulse.peak())
        if peak <= 0:
            raise ValueError(f"pulse {pulse.name!r} is all zeros: nothing to time-scale")
        lens = params.arrangement == "lens"
        inverted = lens and params.image == "inverted"
        if abs(a - 1.0) < 1e-12 and not inverted:
            return ChirpDesign(factor=a, arrangement=params.arrangement, line_model=params.line,
                               magnification=1.0, bypass=True, out_rate=pulse.rate,
                               path="bypass", path_reason="factor 1 needs no dispersion",
                               input_peak=peak,
                               notes=("factor 1: no dispersion needed, the pulse passes unchanged",))
        b = float(pulse.occupied_bandwidth(params.band_fraction))
        wb = 2 * math.pi * b
        t_a, t_b = _energy_window(pulse)
        taper = max(0.25 * (t_b - t_a), 4.0 / b)
        win = (t_a - taper, t_b + taper)
        w_len = win[1] - win[0]
        notes = []
        tech = technology
        measured = None
        if params.line == "touchstone":
            measured = self._measured_line(params)
        if not lens:
            m = a
            if measured is not None:
                if abs(a - 1) < 1e-12:
                    raise ValueError("factor 1 with a measured line: the line's GDD is fixed")
                phi2 = measured["gdd"]
                phi1 = phi2 / (a - 1)
                if phi1 < 0:
                    raise ValueError(
                        f"the measured line has GDD {phi2:.4g} s²; factor {a} needs a chirp of GDD "
                        f"{phi1:.4g} s² (negative): use the line with the other chirp sign by "
                        f"asking for a factor on the other side of 1")
                notes.append(f"line GDD fixed by the measured file: {phi2:.4g} s²")
            elif params.chirp_rate:
                phi1 = dsp.gdd_from_chirp_rate(params.chirp_rate)
                phi2 = (a - 1) * phi1
                notes.append(f"chirp rate given: {params.chirp_rate:.4g} Hz/s")
            else:
                # the penalty phase Φ2ω²/(2M) = (α−1)Φ1ω²/(2α) is held to penalty_phase at ω_B
                phi1 = 2 * params.penalty_phase * abs(a) / (abs(a - 1) * wb * wb)
                phi2 = (a - 1) * phi1
                notes.append(f"chirp GDD sized so the penalty phase is {params.penalty_phase:g} rad "
                             f"at the {params.band_fraction:g} band edge {b / 1e9:.4g} GHz")
            phif = 0.0
            mu = dsp.chirp_rate_from_gdd(phi1)
            span = w_len / (2 * math.pi * abs(phi1))
            internal = span + 2 * b
            aperture = 0.0
            pen_edge = phi2 * wb * wb / (2 * m)
            pen = _penalty_nrmse(pulse, phi2, m)
        else:
            spread_t = params.lens_spread * w_len
            phi1 = spread_t / (2 * wb)
            if inverted:
                phi2 = a * phi1
                m = -a
            else:
                phi2 = -a * phi1
                m = a
            phif = phi1 * phi2 / (phi1 + phi2)
            if measured is not None:
                phi2 = measured["gdd"]
                phi1 = phi2 / a if inverted else -phi2 / a
                phif = phi1 * phi2 / (phi1 + phi2)
                spread_t = 2 * abs(phi1) * wb
                notes.append(f"line 2 GDD fixed by the measured file: {phi2:.4g} s²; line 1 ideal")
            aperture = w_len + spread_t + 2 * taper
            mu = dsp.chirp_rate_from_gdd(-phif)  # the lens multiplies by exp(−jt²/(2Φf))
            span = aperture / (2 * math.pi * abs(phif))
            internal = span + 2 * b
            pen_edge, pen = 0.0, 0.0
        if params.carrier:
            f_c = params.carrier
        elif measured is not None:
            f_c = measured["center"]
        else:
            f_c = params.baseband_ratio * internal * (1 + params.band_margin)
        if measured is not None:
            m_lo, m_hi = measured["band"]
            half = 0.5 * internal * (1 + params.band_margin)
            if f_c - half < m_lo or f_c + half > m_hi:
                raise ValueError(
                    f"the measured line passes {m_lo / 1e9:.4g}-{m_hi / 1e9:.4g} GHz but the design needs "
                    f"{(f_c - half) / 1e9:.4g}-{(f_c + half) / 1e9:.4g} GHz: the delay-bandwidth product "
                    f"asked for is beyond this line")
        if f_c < internal / 2:
            raise ValueError(
                f"carrier {f_c / 1e9:.4g} GHz is below half the internal band {internal / 1e9:.4g} GHz: "
                f"the chirp would cross zero frequency; raise carrier or lower the factor")
        half = 0.5 * internal * (1 + params.band_margin)
        band2 = (f_c - half, f_c + half)
        half1 = b * (1 + params.band_margin)
        band1 = (f_c - half1, f_c + half1)
        if measured is not None:
            l2 = _Line(measured["line"], measured["delay"], measured["max_delay"],
                       abs(phi2) * 2 * math.pi * (band2[1] - band2[0]) ** 2, measured["ripple"], (), band2)
        else:
            l2 = _build_line(params.line, phi2, f_c, band2, params, tech)
        l1 = None
        if lens:
            model1 = "ideal" if measured is not None else params.line
            l1 = _build_line(model1, phi1, f_c, band1, params, tech)
        # simulation path and rates
        if params.path == "auto":
            path, reason = dsp.choose_path(f_c, internal * (1 + params.band_margin), params.baseband_ratio)
        elif params.path == "baseband":
            path, reason = "complex baseband", "path='baseband' requested"
        else:
            path, reason = "real passband", "path='passband' requested"
        out_band = b / abs(a)
        if path == "complex baseband":
            fs = 1.25 * max(internal * (1 + params.band_margin), 2 * out_band * 1.5)
        else:
            fs = 2.5 * (f_c + 0.5 * internal * (1 + params.band_margin))
        cutoff = params.detector_bandwidth or min(3 * out_band, 0.4 * fs)
        if path == "real passband" and params.detector == "square-law" and cutoff > 2 * f_c - half:
            warnings.warn(f"square-law low-pass at {cutoff / 1e9:.4g} GHz passes the 2f_c product "
                          f"(carrier {f_c / 1e9:.4g} GHz)", DesignWarning, stacklevel=2)
        # record length: the gate, the image, and the lines' delay spreads
        spread2 = abs(phi2) * 2 * math.pi * (band2[1] - band2[0])
        out_len = abs(m) * (aperture if lens else w_len) + spread2 + (l1.line_delay if l1 else 0.0)
        n_sim = int((w_len + out_len + 2 * spread2 + (aperture if lens else 0.0)) * fs)
        if n_sim > params.max_samples:
            raise ValueError(
                f"the simulation record would need about {n_sim:.3g} samples at {fs / 1e9:.4g} GS/s, "
                f"above max_samples={params.max_samples}; the delay-bandwidth product "
                f"{l2.dbp:.4g} is beyond what the {params.line!r} model is simulated for here")
        if pen > params.penalty_warn:
            warnings.warn(
                f"the dispersion penalty dominates: alone it costs an NRMSE of about {pen:.3g} "
                f"(phase {pen_edge:.3g} rad at {b / 1e9:.4g} GHz); use a faster chirp (smaller "
                f"penalty_phase) or arrangement='lens'", DesignWarning, stacklevel=2)
        if lens:
            notes.append(f"time lens: Φ1 = {phi1:.4g} s², Φf = {phif:.4g} s², Φ2 = {phi2:.4g} s², M = {m:.4g}"
                         + (" (time-reversed image)" if m < 0 else ""))
        else:
            notes.append(f"time stretch: Φ1 = {phi1:.4g} s², Φ2 = {phi2:.4g} s², M = {m:.4g}")
        notes.append(f"internal band {internal / 1e9:.4g} GHz about {f_c / 1e9:.4g} GHz; {reason}")
        active = w_len + (l1.line_delay if l1 else 0.0) + l2.line_delay + abs(m) * w_len
        chain = _size_chain(params, tech, f_c, [ln.delay for ln in (l1, l2) if ln is not None],
                            abs(m) * cutoff, peak)
        sources = max(1, math.ceil(span / (tech.chirp_max_fractional_span * f_c) - 1e-9))
        jitter = costs.oscillator_jitter(tech.vco_fom, tech.chirp_source_power, 1.0 / active, internal / 2)
        notes.append(f"line loss {' + '.join(f'{v:.3g}' for v in chain['loss'])} dB at the carrier, made up by "
                     f"{' + '.join(str(k) for k in chain['amps'])} amplifier(s); chain noise figure "
                     f"{10 * math.log10(chain['factor']):.3g} dB; {sources} chirp source core(s)")
        return ChirpDesign(
            factor=a, notes=tuple(notes), arrangement=params.arrangement, line_model=params.line,
            magnification=m, gdd_chirp=phi1, gdd_line=phi2, gdd_focal=phif, chirp_rate=mu,
            chirp_span=span, carrier=f_c, signal_band=b, internal_band=internal,
            line_band=tuple(band2), line1_band=tuple(band1) if lens else (0.0, 0.0),
            delay=l2.delay, delay1=l1.delay if l1 else 0.0, line_delay=l2.line_delay, dbp=l2.dbp,
            sections=tuple(l2.sections), sections1=tuple(l1.sections) if l1 else (),
            ripple_rms=l2.ripple_rms, window=win, taper=taper, aperture=aperture,
            bias=peak / params.modulation_index, sim_rate=fs, out_rate=pulse.rate / a, path=path,
            path_reason=reason, penalty_edge=pen_edge, penalty_nrmse=pen, detector_cutoff=cutoff,
            active_time=active, touchstone=params.touchstone if measured is not None else "",
            input_peak=peak, line_loss=tuple(chain["loss"]), amplifiers=tuple(chain["amps"]),
            amplifier_gm=tuple(chain["gm"]), noise_factor=chain["factor"],
            noise_bandwidth=chain["bandwidth"], input_noise=chain["noise"], sources=sources,
            source_jitter=jitter,
        )

    @staticmethod
    def _check_params(p: ChirpParams):
        for name in ("penalty_phase", "lens_spread", "modulation_index", "baseband_ratio", "impedance",
                     "ripple_period", "max_dbp", "max_loss"):
            if not getattr(p, name) > 0:
                raise ValueError(f"parameter {name!r} must be > 0, got {getattr(p, name)!r}")
        for name in ("carrier", "ripple", "loss", "detector_bandwidth", "chirp_jitter", "band_margin"):
            if getattr(p, name) < 0:
                raise ValueError(f"parameter {name!r} must be >= 0, got {getattr(p, name)!r}")
        if not 0 < p.band_fraction < 1:
            raise ValueError(f"parameter 'band_fraction' must lie in (0, 1), got {p.band_fraction!r}")
        if p.penalty_phase >= math.pi / 2:
            raise ValueError(f"parameter 'penalty_phase' must be below π/2 (the first null), got {p.penalty_phase!r}")
        if p.line == "touchstone" and not p.touchstone:
            raise ValueError("line='touchstone' needs touchstone='path/to/file.s2p'")
        if p.max_sections < 1 or p.max_samples < 1024:
            raise ValueError("max_sections must be >= 1 and max_samples >= 1024")

    @staticmethod
    def _measured_line(p: ChirpParams) -> dict:
        line = _measured(p.touchstone)
        f = line.frequency
        mag = np.abs(line.s21)
        use = mag >= mag.max() * 10 ** (-10 / 20)  # fit where |S21| is within 10 dB of its best
        gd = line.group_delay_samples()
        phi, delay, fc, rms = dsp.fit_gdd(f[use], gd[use], weights=mag[use] ** 2)
        causal = line.causality()
        if not causal.causal:
            warnings.warn(f"Touchstone file {p.touchstone!r}: {causal.precursor:.3g} of the impulse-response "
                          f"energy precedes t = 0 (causality check); check the band and reference planes",
                          DesignWarning, stacklevel=3)
        return {"line": line, "gdd": phi, "delay": delay, "center": fc, "ripple": rms,
                "band": (float(f[use][0]), float(f[use][-1])), "max_delay": float(gd[use].max())}

    # -- simulate -----------------------------------------------------------------------------
    def simulate(self, pulse: Pulse, design: ChirpDesign, params: ChirpParams, rng, trials=1,
                 technology=None) -> Simulation:
        pulse = pulse.row(0)
        sigma_t = max(params.chirp_jitter, design.source_jitter) if params.noise else params.chirp_jitter
        jit = rng.normal(0.0, 1.0, size=(trials, 1)) * sigma_t
        if params.noise and not design.bypass:
            jit = np.concatenate([[[0.0]], jit])  # one jitter-free record: the clean output
        if design.bypass:
            out = pulse.with_values(np.broadcast_to(pulse.values, (trials, pulse.n)).copy(),
                                    name=f"{pulse.name} (bypass)")
            return Simulation(pulse=out, path="bypass (factor 1)", metrics=self._metrics(design))
        from timescale.data.technology import DEFAULT_TECHNOLOGY

        tech = technology or DEFAULT_TECHNOLOGY
        lines = self._lines(design, params, tech)
        fs = design.sim_rate
        start, stop = design.window
        n = int(math.ceil((stop - start) * fs)) + 1
        pad_b = max(0.0, pulse.t0 - start) + 4 / pulse.rate
        pad_a = max(0.0, stop - pulse.t_end) + 4 / pulse.rate
        x = resample_to(pulse.pad(pad_b, pad_a), fs, t_start=start, n=n).values
        t = start + np.arange(n) / fs
        gate = design.bias * _gate(t, start, stop, design.taper)
        passband = design.path == "real passband"
        f_c = design.carrier
        if design.arrangement == "stretch":
            tc = 0.5 * (start + stop)
            u = t[None, :] - tc - jit
            chirp = np.exp(1j * math.pi * design.chirp_rate * u * u)
            chirp0 = np.exp(1j * math.pi * design.chirp_rate * (t - tc) ** 2)
            env = np.concatenate([(gate * chirp0)[None, :], (gate + x)[None, :] * chirp], axis=0)
            wave = self._wave(env, fs, start, f_c, passband)
            y = dsp.apply_line(wave, lines[1])
        else:
            env = np.concatenate([gate[None, :], np.broadcast_to(gate + x, (jit.shape[0], n))], axis=0)
            wave = self._wave(env, fs, start, f_c, passband)
            a1 = dsp.apply_line(wave, lines[0])
            t_l = 0.5 * (start + stop) + design.delay1
            ap = design.aperture
            lens_gate = _gate(a1.t, t_l - ap / 2, t_l + ap / 2, design.taper)
            shifts = np.concatenate([[[0.0]], jit], axis=0)
            u = a1.t[None, :] - t_l - shifts
            lens = lens_gate * np.exp(-0.5j * u * u / design.gdd_focal)
            if passband:  # single-sideband (image-reject) mixer on the analytic signal
                b1 = dsp.Wave(np.real(analytic(a1.values) * lens), fs, a1.t0, None)
            else:
                b1 = a1.with_values(a1.values * lens)
            y = dsp.apply_line(b1, lines[1])
        out, t0 = self._detect(y, design, params)
        res = Pulse(out, fs, t0, pulse.units, f"{pulse.name} via {self.name}")
        res = resample_to(res, design.out_rate)
        v = np.atleast_2d(res.values)
        clean = None
        if params.noise:
            clean, v = res.with_values(v[:1], name=f"{res.name} (noise-free)"), v[1:]
        metrics = self._metrics(design, lines)
        metrics.update(self._noise_metrics(design, params, clean.values[0] if clean else v.mean(axis=0),
                                           res.rate))
        if params.noise:  # the chain's thermal noise, white samples of the reported variance
            v = v + rng.normal(0.0, metrics["thermal_noise_rms"].value, size=v.shape)
        res = res.with_values(v)
        orientation = -1 if design.magnification < 0 else 1
        path = design.path + (" (time-reversed image)" if orientation < 0 else "")
        return Simulation(pulse=res, orientation=orientation, path=path, metrics=metrics, clean=clean)

    @staticmethod
    def _noise_metrics(design: ChirpDesign, params: ChirpParams, y: np.ndarray, rate: float) -> dict:
        """noise_rms and snr_db at the output peak: the chain's thermal noise (referred to the
        pulse port, times the output gain) and the chirp's timing jitter, which moves the output
        by (1 − M)·δ (a chirp, or a time lens, shifted by δ; imaging relation, derived)."""
        k = int(np.argmax(np.abs(y)))
        peak = float(abs(y[k]))
        thermal = design.input_noise * peak / design.input_peak
        sigma = abs(1.0 - design.magnification) * max(params.chirp_jitter, design.source_jitter)
        d1 = np.gradient(y, 1.0 / rate)
        d2 = np.gradient(d1, 1.0 / rate)
        rms = math.sqrt(thermal ** 2 + costs.jitter_error_variance(sigma, d1[k], d2[k]))
        return {
            "noise_rms": Metric(rms, "V", "output rms noise at the output peak"),
            "snr_db": Metric(20 * math.log10(peak / rms), "dB", "output peak over rms noise"),
            "thermal_noise_rms": Metric(thermal, "V", "output rms thermal noise of mixer, line, amplifiers, detector"),
            "chirp_jitter_rms": Metric(max(params.chirp_jitter, design.source_jitter), "s",
                                       "rms timing jitter of the chirp (phase noise or given)"),
            "noise_figure": Metric(10 * math.log10(design.noise_factor), "dB",
                                   "noise figure of the chain referred to the pulse port"),
            "line_loss": Metric(float(sum(design.line_loss)), "dB", "insertion loss of the line(s) at the carrier"),
        }

    @staticmethod
    def _wave(env, fs, t0, f_c, passband):
        if not passband:
            return dsp.Wave(env, fs, t0, f_c)
        t = t0 + np.arange(env.shape[-1]) / fs
        return dsp.Wave(np.real(env * np.exp(2j * math.pi * f_c * t)), fs, t0, None)

    def _lines(self, design: ChirpDesign, params: ChirpParams, tech):
        def make(model, gdd, band, delay, sections):
            if model == "touchstone":
                return _measured(design.touchstone)
            if model == "allpass":
                q = tech.inductor_q if params.finite_q else None
                return dsp.AllpassLine(second=sections, q_unloaded=q, center=design.carrier, gdd=gdd,
                                       fit_band=band)
            if model == "ideal":
                return dsp.QuadraticLine(gdd=gdd, center=design.carrier, delay=delay, ripple=params.ripple,
                                         ripple_period=params.ripple_period)
            return dsp.BandLimitedLine(gdd=gdd, center=design.carrier, delay=delay, ripple=params.ripple,
                                       ripple_period=params.ripple_period, bandwidth=band[1] - band[0],
                                       loss=_q_loss(params, tech, design.carrier))

        line2 = make(design.line_model, design.gdd_line, design.line_band, design.delay, design.sections)
        line1 = None
        if design.arrangement == "lens":
            m1 = "ideal" if design.line_model == "touchstone" else design.line_model
            line1 = make(m1, design.gdd_chirp, design.line1_band, design.delay1, design.sections1)
        return line1, line2

    @staticmethod
    def _detect(y: dsp.Wave, design: ChirpDesign, params: ChirpParams):
        """Detect every record against the carrier-only record (row 0); returns (values, t0)."""
        det = params.detector
        if det == "square-law":
            p = dsp.square_law(y, design.detector_cutoff)
            p_bg, p_x = p[0], p[1:]
            e_bg = np.sqrt(np.maximum(2 * p_bg, 0.0))
        else:
            v = y.values if y.is_envelope else analytic(y.values)
            v_bg, v_x = v[0], v[1:]
            e_bg = np.abs(v_bg)
            if det == "magnitude":
                e_x = np.abs(v_x)
            else:  # coherent: in-phase part against the carrier-only record
                e_x = np.real(v_x * np.conj(v_bg)) / np.maximum(e_bg, 1e-300)
        ref = float(e_bg.max())
        eps = 0.02 * ref
        if det == "square-law":
            out = (p_x - p_bg) * (ref / (2 * p_bg + eps * eps) if params.calibrate else 1 / max(ref, 1e-300))
        else:
            out = (e_x - e_bg) * (ref * e_bg / (e_bg ** 2 + eps * eps) if params.calibrate else 1.0)
        # keep the gate's image (and a margin) so the record is not mostly empty
        keep = np.flatnonzero(e_bg > 1e-4 * ref)
        i0, i1 = int(keep[0]), int(keep[-1]) + 1
        margin = max(16, (i1 - i0) // 10)
        i0, i1 = max(0, i0 - margin), min(out.shape[-1], i1 + margin)
        return out[:, i0:i1], y.t0 + i0 / y.rate

    @staticmethod
    def _metrics(design: ChirpDesign, lines=None):
        m = {
            "gdd_chirp": Metric(design.gdd_chirp, "s2", "chirp (or line 1) GDD Φ1"),
            "gdd_line": Metric(design.gdd_line, "s2", "line GDD Φ2"),
            "gdd_focal": Metric(design.gdd_focal, "s2", "time-lens focal GDD Φf"),
            "magnification": Metric(design.magnification, "", "signed magnification M"),
            "chirp_span": Metric(design.chirp_span, "Hz", "chirp frequency sweep"),
            "line_delay": Metric(design.line_delay, "s", "largest group delay of the line"),
            "dbp": Metric(design.dbp, "", "delay-bandwidth product of the line"),
            "ripple_rms": Metric(design.ripple_rms, "s", "rms group-delay ripple of the line"),
            "penalty_nrmse": Metric(design.penalty_nrmse, "", "NRMSE from the dispersion penalty alone"),
            "penalty_edge": Metric(design.penalty_edge, "rad", "penalty phase at the band edge"),
        }
        if design.arrangement == "stretch" and design.gdd_line:
            null = dsp.penalty_null(design.gdd_line, design.magnification)
            m["penalty_null"] = Metric(null if math.isfinite(null) else 0.0, "Hz",
                                       "first dispersion-penalty null (0: none)")
        if lines is not None:
            w_c = np.array([2 * math.pi * design.carrier])
            il = -20 * math.log10(max(abs(complex(lines[1].response(w_c)[0])), 1e-300))
            m["insertion_loss"] = Metric(il, "dB", "line insertion loss at the carrier")
        return m

    # -- bill ---------------------------------------------------------------------------------
    def bill(self, design: ChirpDesign, params: ChirpParams, technology) -> Bill:
        tech = technology
        if design.bypass:
            return Bill(area=0.0, power=0.0, energy_per_pulse=0.0, bw_internal=design.out_rate / 2,
                        counts={"sections": 0}, items=(BillItem("bypass", note="factor 1: nothing to build"),))
        items = []
        n_l = n_c = n_s = 0
        over = tech.layout_overhead
        for label, ind, cap in _line_elements(design, params):
            area_l = float(np.sum(_spiral_areas(ind, tech)))
            area_c = float(np.sum(cap)) / tech.cap_density
            k = ind.size // 2
            n_l += 2 * k
            n_c += 2 * k
            n_s += k
            items.append(BillItem(f"{label} inductors", area_l * over, 0.0, 2 * k,
                                  f"square spirals, modified Wheeler (Mohan 1999), x {over:g} layout overhead"))
            items.append(BillItem(f"{label} capacitors", area_c * over, 0.0, 2 * k,
                                  f"card cap_density, x {over:g} layout overhead"))
        n_amp = 0
        for label, k, gm in zip(_line_labels(design), design.amplifiers, design.amplifier_gm):
            if not k:
                continue
            cells = math.ceil(gm / tech.gm_max - 1e-12)
            items.append(BillItem(f"{label} make-up amplifiers", k * cells * tech.gm_cell_area * over,
                                  k * costs.bias_current(gm, tech.gm_over_id) * tech.supply, k,
                                  f"gm = {gm * 1e3:.3g} mS each ({cells} cell(s)) restores its segment's loss"))
            n_amp += k
        lens = design.arrangement == "lens"
        n_src = design.sources
        items.append(BillItem("chirp source", tech.chirp_source_area * n_src, tech.chirp_source_power * n_src,
                              n_src, f"card per-core figure x {n_src} core(s): span "
                                     f"{design.chirp_span / 1e9:.3g} GHz over {tech.chirp_max_fractional_span:g} "
                                     f"of the carrier per core"))
        if lens:
            items.append(BillItem("carrier source", tech.chirp_source_area, tech.chirp_source_power, 1,
                                  "card chirp-source figure used for the CW carrier"))
        n_mix = 2 if lens else 1
        items.append(BillItem("mixer", tech.mixer_area * n_mix, tech.mixer_power * n_mix, n_mix,
                              "card per-block figure"))
        items.append(BillItem("envelope detector", tech.detector_area, tech.detector_power, 1,
                              "card per-block figure"))
        if any(math.isnan(i.area) for i in items):
            raise ValueError("an inductor of the line is beyond a 12-turn, 1 m spiral: the line cannot be "
                             "built on chip; raise the carrier or the impedance")
        return Bill.from_items(items, active_time=design.active_time,
                               bw_internal=design.chirp_span + 2 * design.signal_band,
                               counts={"inductors": n_l, "capacitors": n_c, "sections": n_s,
                                       "mixers": n_mix, "sources": n_src + (1 if lens else 0), "detectors": 1,
                                       "amplifiers": n_amp})

    # -- process limits -----------------------------------------------------------------------
    def limits(self, design: ChirpDesign, params: ChirpParams, technology) -> tuple[Limit, ...]:
        tech = technology
        if design.bypass:
            return ()
        ceiling = tech.carrier_max_fraction * tech.f_t
        top = max(design.line_band[1], design.line1_band[1], design.carrier + design.chirp_span / 2)
        srf = math.inf
        ind = np.concatenate([e[1] for e in _line_elements(design, params)])
        if ind.size:
            try:
                sp = costs.spiral_for_inductance(float(ind.max()), tech.inductor_track_width,
                                                 tech.inductor_track_spacing)
                srf = costs.spiral_self_resonance(sp.inductance, costs.spiral_track_length(sp.turns, sp.d_out, sp.d_in),
                                                  tech.inductor_track_width, tech.inductor_substrate_cap)
            except ValueError:
                srf = 0.0  # no spiral on chip reaches it
        allowed_noise = design.input_peak / 10 ** (params.snr_target / 20)
        lims = [
            Limit("carrier frequency", design.carrier, ceiling, "Hz",
                  note=f"card carrier_max_fraction x f_T = {tech.carrier_max_fraction:g} x {tech.f_t:.3g} Hz"),
            Limit("highest chirp or line frequency", top, ceiling, "Hz",
                  note=f"carrier + half the chirp span and signal band; chirp span {design.chirp_span:.3g} Hz"),
            Limit("area", self.bill(design, params, tech).area, tech.die_area, "m²", note="card die_area"),
            Limit("noise with the line loss made up", design.input_noise, allowed_noise, "V",
                  note=f"input-referred, for snr_target = {params.snr_target:g} dB; line loss "
                       f"{sum(design.line_loss):.4g} dB, {sum(design.amplifiers)} make-up amplifier(s)"),
        ]
        if math.isfinite(srf):
            lims.append(Limit("spiral self-resonance", top, srf, "Hz",
                              note=f"largest spiral {ind.max():.3g} H; f_SR from its track-to-substrate "
                                   f"capacitance (Yue-Wong π model, card inductor_substrate_cap)"))
        return tuple(lims)


def _line_labels(design: ChirpDesign) -> list[str]:
    return ["line 1", "line 2"] if design.arrangement == "lens" else ["line"]


def _line_elements(design: ChirpDesign, params: ChirpParams):
    """Inductances (H) and capacitances (F) of each line realised as all-pass lattice sections:
    ``[(label, inductances, capacitances), ...]``, line 1 first for the lens."""
    r0 = params.impedance
    lines = [(design.gdd_line, design.line_band, design.sections)]
    if design.arrangement == "lens":
        lines.insert(0, (design.gdd_chirp, design.line1_band, design.sections1))
    out = []
    for label, (gdd, band, sections) in zip(_line_labels(design), lines):
        if not sections:
            # what an all-pass realisation of this GDD and band would take
            n = dsp.allpass_section_count(gdd, band[0], band[1])
            w0 = 2 * math.pi * np.linspace(band[0], band[1], n + 2)[1:-1]
            sp = 2 * math.pi * (band[1] - band[0]) / n
            sections = [(w, w / (1.2 * sp)) for w in w0]
        # constant-resistance lattice of (s² − (ω0/Q)s + ω0²)/(s² + (ω0/Q)s + ω0²): series arm a
        # parallel tank L = R0/(Qω0), C = Q/(R0ω0); cross arm a series LC L = R0Q/ω0,
        # C = 1/(R0Qω0) (standard network theory); an unbridged-T form uses one of each.
        sec = np.asarray(sections, dtype=float).reshape(-1, 2)
        w0, q = sec[:, 0], sec[:, 1]
        out.append((label, np.concatenate([r0 / (q * w0), r0 * q / w0]),
                    np.concatenate([q / (r0 * w0), 1 / (r0 * q * w0)])))
    return out
