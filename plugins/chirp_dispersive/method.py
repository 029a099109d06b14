"""The ``chirp-dispersive`` method: sizing, simulation and bill (see the package docstring)."""

from __future__ import annotations

import functools
import math
import warnings
from dataclasses import dataclass, replace

import numpy as np

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

from . import sizing

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
    penalty_phase: float = param(0.0, units="rad",
                                 doc="stretch: dispersion-penalty phase Φ2ω²/(2M) at the band edge; 0 sizes it "
                                     "for fidelity_target")
    chirp_rate: float = param(0.0, units="Hz/s", doc="stretch: chirp rate μ; 0 sizes it (see penalty_phase)")
    fidelity_target: float = param(0.02, doc="NRMSE the self-sizing aims for (penalty, gate edges and "
                                             "truncation, estimated on the ideal line)", bounds=(1e-6, 1.0))
    gate: float = param(0.0, units="s", doc="length of the chirp (bias) gate; 0 sizes it for fidelity_target")
    taper: float = param(0.0, units="s", doc="length of each raised-cosine gate edge; 0 sizes it with the gate")
    lens_spread: float = param(0.0, doc="lens: spread 2|Φ1|ω_B of the band edge by line 1, in gate lengths; 0 "
                                        "sizes it with the gate for fidelity_target")
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
    impedance: float = param(0.0, units="ohm", doc="line impedance the elements are sized at; 0 picks the "
                                                   "cheapest on the card")
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
    nrmse_estimate : float
        Stretch: NRMSE the sizing expects of the ideal-line chain on this pulse (penalty, gate
        edges and truncation together; NaN where not estimated).
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
    impedance : float
        Line (and make-up amplifier) impedance R0 the elements are sized at, Ω.
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
    nrmse_estimate: float = math.nan
    detector_cutoff: float = 0.0
    active_time: float = 0.0
    touchstone: str = ""
    input_peak: float = 0.0
    line_loss: tuple = ()
    amplifiers: tuple = ()
    amplifier_gm: tuple = ()
    impedance: float = 50.0
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
def _allpass(gdd, f_lo, f_hi, max_sections, q, sections=None):
    return dsp.design_allpass(gdd, f_lo, f_hi, sections=sections, max_sections=max_sections, q_unloaded=q)


@functools.lru_cache(maxsize=8)
def _measured(path: str):
    line = dsp.read_touchstone(path)
    return line


@functools.lru_cache(maxsize=2048)
def _spiral_point(inductance, width, spacing, substrate_cap):
    """(area m², self-resonance Hz) of the smallest square spiral reaching `inductance`;
    (nan, 0) when no spiral up to 12 turns does."""
    try:
        sp = costs.spiral_for_inductance(inductance, width, spacing)
    except ValueError:
        return math.nan, 0.0
    srf = costs.spiral_self_resonance(sp.inductance, costs.spiral_track_length(sp.turns, sp.d_out, sp.d_in),
                                      width, substrate_cap)
    return sp.area, srf


@functools.lru_cache(maxsize=256)
def _spiral_grid(k_lo, k_hi, per_decade, width, spacing, substrate_cap):
    grid = 10.0 ** (np.arange(k_lo, k_hi + 1) / per_decade)
    pts = np.array([_spiral_point(float(g), width, spacing, substrate_cap) for g in grid])
    grid.flags.writeable = pts.flags.writeable = False
    return grid, pts


def _spiral_table(inductances, tech, per_decade: int = 16):
    """Spiral areas (m²) and self-resonances (Hz) for many inductances: spirals are sized
    exactly on a fixed log grid (`per_decade` points, shared by every design, cached) and
    both figures are interpolated in log-log between them (they vary smoothly with L)."""
    ind = np.asarray(inductances, dtype=float)
    if ind.size == 0:
        return np.zeros(0), np.zeros(0)
    grid, pts = _spiral_grid(math.floor(math.log10(ind.min()) * per_decade),
                             math.ceil(math.log10(ind.max()) * per_decade), per_decade,
                             tech.inductor_track_width, tech.inductor_track_spacing, tech.inductor_substrate_cap)
    if grid.size == 1:
        return np.full(ind.shape, pts[0, 0]), np.full(ind.shape, pts[0, 1])
    with np.errstate(divide="ignore"):
        area = np.exp(np.interp(np.log(ind), np.log(grid), np.log(pts[:, 0])))
        srf = np.exp(np.interp(np.log(ind), np.log(grid), np.log(pts[:, 1])))
    return area, srf


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


def _size_chain(params, tech, f_c, delays, bandwidth, peak, r0) -> dict:
    """Line losses, make-up amplifiers and the chain's noise referred to the pulse port.

    Chain: mixer → line 1 (→ lens mixer → line 2) → envelope detector, each line's loss made up
    by k amplifiers spread along it (equal loss segments; each amplifier restores its segment's
    loss into the line impedance R0, gm = √L_s/R0). Friis' cascade of noise factors (available
    power ratios, so the impedance levels drop out) with the running gain; the detector's input
    noise density counts as the excess noise factor v²/(k·T0·R0) at unity gain, its source
    being the line. The result is referred to the pulse port (`PORT_IMPEDANCE`). The segment
    loss is the one of least amplifier power whose input-referred noise meets ``snr_target``
    (or the quietest one when none does); all segment losses are tried at once.

    Returns
    -------
    dict
        loss (dB per line), amps (per line), gm (S per line), factor (chain F), bandwidth (Hz),
        noise (V rms, input-referred), power (W of all amplifiers).
    """
    loss_db = tuple((costs.lc_line_loss_db(f_c, d, tech.inductor_q) if params.finite_q else 0.0) + params.loss * d
                    for d in delays)
    k, ls, excess, gain = _chain_segments(loss_db, tech.mixer_noise_figure, tech.gm_noise_gamma)
    kt0 = costs.BOLTZMANN * costs.T0_NOISE_FIGURE
    det = tech.detector_noise_density ** 2 / (kt0 * r0)  # the detector is driven from the line
    gm = np.sqrt(ls) / r0  # each amplifier restores its segment's loss into R0
    # I_D = gm/(gm/I_D) (costs.bias_current) for every candidate at once
    power = np.sum(k * gm, axis=0) / tech.gm_over_id * tech.supply
    with np.errstate(divide="ignore", invalid="ignore"):
        noise = np.sqrt(kt0 * PORT_IMPEDANCE * bandwidth * (excess + det / gain))  # at the pulse port
    allowed = peak / 10.0 ** (params.snr_target / 20.0)
    ok = noise <= allowed
    i = int(np.argmin(np.where(ok, power, np.inf))) if ok.any() else int(np.nanargmin(noise))
    return {"loss": list(loss_db), "amps": [int(v) for v in k[:, i]],
            "gm": [float(v) if n else 0.0 for v, n in zip(gm[:, i], k[:, i])],
            "factor": 1.0 + float(excess[i] + det / gain[i]), "bandwidth": bandwidth, "noise": float(noise[i]),
            "power": float(power[i])}


@functools.lru_cache(maxsize=512)
def _chain_segments(loss_db, mixer_nf, gamma):
    """The impedance-free part of :func:`_size_chain` for every segment loss of `_SEGMENTS_DB`:
    amplifiers per line k, segment loss ratio L_s (per line), the chain's excess noise factor
    before the detector and the gain the detector sees (0: a loss no detector sees through)."""
    f_mix = 10.0 ** (mixer_nf / 10.0)
    seg = _SEGMENTS_DB
    n = seg.size
    excess, gain = np.zeros(n), np.ones(n)
    ks, lss = [], []
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):  # unamplified candidates go to inf
        for l_db in loss_db:
            excess = excess + (f_mix - 1.0) / gain  # the mixer before this line (unity conversion gain)
            k = np.where(np.isfinite(seg) & (l_db > 0), np.ceil(l_db / seg - 1e-12), 0.0)
            ls = np.where(k > 0, 10.0 ** (l_db / np.maximum(k, 1.0) / 10.0), 1.0)
            # a common-source stage terminated in R0 at gm·R0 = √L_s: F = 2 + 4γ/√L_s
            fa = _amplifier_noise_factor(np.sqrt(ls), 1.0, gamma)
            passive = 10.0 ** (l_db / 10.0) if l_db <= 300.0 else math.inf  # beyond: no detector sees it
            excess = excess + np.where(k > 0, k * ((ls - 1.0) + (fa - 1.0) * ls), passive - 1.0) / gain
            gain = np.where(k > 0, gain, gain / passive)
            ks.append(k)
            lss.append(ls)
    out = (np.array(ks).astype(int), np.array(lss), excess, gain)
    for v in out:
        v.flags.writeable = False
    return out


class _Line:
    """One line of a design: its model object and figures."""

    def __init__(self, obj, delay, line_delay, dbp, ripple_rms, sections, band):
        self.obj, self.delay, self.line_delay = obj, delay, line_delay
        self.dbp, self.ripple_rms, self.sections, self.band = dbp, ripple_rms, sections, band


def _build_line(model, gdd, f_c, band, params, tech, ripple_budget=math.inf) -> _Line:
    """Realise a line of GDD `gdd` over `band` (Hz) in `model`; refuse with a reason.

    An all-pass line starts from the phase-area count of sections and takes about 10 % more
    per step (up to four steps, or ``max_sections``) while its fitted group-delay ripple is
    above `ripple_budget` (rms, s): each step cuts the ripple three to four times.
    """
    lo, hi = band
    width = hi - lo
    spread = abs(gdd) * 2 * math.pi * width
    dbp = spread * width
    if model == "allpass":
        q = tech.inductor_q if params.finite_q else None
        n = dsp.allpass_section_count(gdd, lo, hi)
        try:
            for _ in range(5):
                fit = _allpass(float(gdd), float(lo), float(hi), int(params.max_sections), q, n)
                if fit.ripple_rms <= ripple_budget or n >= params.max_sections:
                    break
                n = min(int(params.max_sections), max(n + 1, math.ceil(1.1 * n)))
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


#: Impedance of the pulse port (the mixer's signal input), Ω: the system impedance the chain's
#: noise is referred to, whatever impedance the line inside is sized at.
PORT_IMPEDANCE = 50.0
#: Line impedances the sizing tries, Ω: elements scale as L ∝ R0, C ∝ 1/R0, so a lower
#: impedance trades spiral area and self-resonance for capacitor area and amplifier current.
_IMPEDANCES = 50.0 * 2.0 ** (-0.5 * np.arange(7))
#: Share of fidelity_target an all-pass line's group-delay ripple may take.
_RIPPLE_SHARE = 0.25
#: Lowest carrier tried, in units of half the line band (the line's lower edge then sits at
#: 1/11 of its band above DC), and the number of carriers tried up to the card's ceiling.
_CARRIER_LOW = 1.1
_CARRIER_POINTS = 4
#: Gate lengths the stretch sizing tries, in units of the pulse's energy window (1 − 1e-7).
_GATE_SCALES = np.geomspace(0.5, 4.0, 13)
#: Tapered share 2·taper/T_g of the gates it tries.
_TAPER_SHARES = (0.3, 0.5, 0.7)
#: Penalty phases at the band edge it tries, rad (below the first null π/2).
_PENALTY_PHASES = np.geomspace(0.02, 1.5, 16)


def _stretch_dbp(length, residual, a, b, margin):
    """Delay-bandwidth product of the stretch's line for a gate `length` (s) and residual
    dispersion |Φ2/M| (s²): Φ1 = Φ_r·|M|/|M − 1|, span = T_g/(2π|Φ1|), band (span + 2B)(1 + margin),
    delay spread |Φ2|·2π·band with |Φ2| = |M|·Φ_r."""
    phi1 = residual * abs(a) / abs(a - 1)
    band = (length / (2 * math.pi * phi1) + 2 * b) * (1 + margin)
    return abs(a) * residual * 2 * math.pi * band * band


def _size_stretch(pulse, a, b, centre, width, fixed, params) -> dict:
    """Gate (length, taper) and residual dispersion Φ_r = |Φ2/M| of the stretch.

    Every candidate gate (user-given, or `_GATE_SCALES` × the energy window `width` with the
    `_TAPER_SHARES` tapers) and residual (given as `fixed`, or from `_PENALTY_PHASES` at the
    band edge) is scored by the NRMSE the ideal-line chain leaves on this pulse
    (:func:`sizing.stretch_error_table`: penalty, gate edges and truncation together). Among
    those within ``fidelity_target`` the one whose line has the least delay-bandwidth product
    wins (it sets the sections, spirals, loss and make-up gain); the residual is then refined
    between the grid's phases. With none within the target, the most faithful is kept and the
    caller warns.
    """
    wb = 2 * math.pi * b
    lengths = [params.gate] if params.gate else list(width * _GATE_SCALES)
    gates = np.array([(g, params.taper if params.taper else 0.5 * s * g)
                      for g in lengths for s in ((None,) if params.taper else _TAPER_SHARES)])
    phis = np.array([fixed]) if fixed is not None else 2 * _PENALTY_PHASES / (wb * wb)
    kw = {"modulation_index": params.modulation_index, "detector": params.detector,
          "calibrate": params.calibrate}

    def score(g, p):
        return sizing.stretch_error_table(pulse.values, pulse.rate, pulse.t0, centre, g, p, **kw)

    table = score(gates, phis)
    dbp = _stretch_dbp(gates[:, :1], phis[None, :], a, b, params.band_margin)
    target = params.fidelity_target
    ok = table <= target
    met = bool(ok.any())
    gi, pi = np.unravel_index(int(np.argmin(np.where(ok, dbp, np.inf) if met else table)), table.shape)
    residual, est = float(phis[pi]), float(table[gi, pi])
    if met and fixed is None and pi + 1 < phis.size and table[gi, pi + 1] > target:
        # refine the phase between the grid points (the error grows about as Φ_r²)
        lo, hi = np.log(table[gi, pi:pi + 2])
        frac = (math.log(target) - lo) / (hi - lo) if hi > lo else 0.0
        trial = float(np.exp(np.log(phis[pi]) + 0.98 * frac * np.log(phis[pi + 1] / phis[pi])))
        got = float(score(gates[gi:gi + 1], [trial])[0, 0])
        if got <= target and _stretch_dbp(gates[gi, 0], trial, a, b, params.band_margin) < dbp[gi, pi]:
            residual, est = trial, got
    length, taper = (float(v) for v in gates[gi])
    taper = min(taper, 0.5 * length)
    theta = residual * wb * wb / 2
    what = "estimated NRMSE" if met else f"fidelity_target {target:g} not reached: best estimated NRMSE"
    note = (f"gate {length * 1e9:.4g} ns with {taper * 1e9:.3g} ns edges, penalty phase {theta:.3g} rad at the "
            f"{params.band_fraction:g} band edge {b / 1e9:.4g} GHz: {what} {est:.3g} "
            f"(penalty, gate and truncation, ideal line)")
    return {"window": (centre - 0.5 * length, centre + 0.5 * length), "taper": taper, "residual": residual,
            "estimate": est, "met": met, "note": note}


#: Lens: spreads 2|Φ1|ω_B of line 1 it tries, in units of the pulse's energy window.
_LENS_SPREADS = np.geomspace(0.15, 3.0, 8)


def _lens_dbp(length, taper, phi1, a, b, margin, inverted):
    """Summed delay-bandwidth products of the lens's two lines for a gate (length, taper, s)
    and |Φ1| (s²): the aperture T_g + 2|Φ1|ω_B + 2·taper, |Φf| = |Φ1|·|M|/|1 ± |M||, lens
    span aperture/(2π|Φf|); line 1 passes 2B, line 2 span + 2B (each × (1 + margin))."""
    wb = 2 * math.pi * b
    aperture = length + 2 * phi1 * wb + 2 * taper
    focal = phi1 * a / abs(1 + a if inverted else 1 - a)
    band2 = (aperture / (2 * math.pi * focal) + 2 * b) * (1 + margin)
    band1 = 2 * b * (1 + margin)
    return phi1 * 2 * math.pi * band1 ** 2 + a * phi1 * 2 * math.pi * band2 ** 2


def _size_lens(pulse, a, b, centre, width, fixed, inverted, params) -> dict:
    """Gate (length, taper) and |Φ1| of the time lens, as :func:`_size_stretch` does for the
    stretch: candidates scored by the NRMSE the ideal-line lens leaves on this pulse through its
    pupil (:func:`sizing.lens_error_table`), the one of least summed delay-bandwidth product
    within ``fidelity_target`` kept. |Φ1| is `fixed` (a measured line 2), ``lens_spread`` gate
    lengths of band-edge spread, or sized from `_LENS_SPREADS`."""
    wb = 2 * math.pi * b
    lengths = [params.gate] if params.gate else list(width * _GATE_SCALES)
    gates = np.array([(g, params.taper if params.taper else 0.5 * s * g)
                      for g in lengths for s in ((None,) if params.taper else _TAPER_SHARES)])
    kw = {"band_edge": b, "modulation_index": params.modulation_index, "detector": params.detector,
          "calibrate": params.calibrate}

    def score(g, p):
        return sizing.lens_error_table(pulse.values, pulse.rate, pulse.t0, centre, g, p, **kw)

    if fixed is None and params.lens_spread:
        # Φ1 follows each gate's length: one column per gate
        phi_grid = (params.lens_spread * gates[:, 0] / (2 * wb))[:, None]
        table = np.array([score(gates[i:i + 1], phi_grid[i])[0, 0] for i in range(len(gates))])[:, None]
    else:
        cols = np.array([fixed]) if fixed is not None else width * _LENS_SPREADS / (2 * wb)
        phi_grid = np.broadcast_to(cols[None, :], (len(gates), cols.size))
        table = score(gates, cols)
    dbp = _lens_dbp(gates[:, :1], gates[:, 1:], phi_grid, a, b, params.band_margin, inverted)
    target = params.fidelity_target
    ok = table <= target
    met = bool(ok.any())
    gi, pi = np.unravel_index(int(np.argmin(np.where(ok, dbp, np.inf) if met else table)), table.shape)
    length, taper = (float(v) for v in gates[gi])
    taper = min(taper, 0.5 * length)
    phi1, est = float(phi_grid[gi, pi]), float(table[gi, pi])
    aperture = length + 2 * phi1 * wb + 2 * taper
    what = "estimated NRMSE" if met else f"fidelity_target {target:g} not reached: best estimated NRMSE"
    note = (f"gate {length * 1e9:.4g} ns with {taper * 1e9:.3g} ns edges, line 1 spreads the "
            f"{params.band_fraction:g} band edge {b / 1e9:.4g} GHz over {2 * phi1 * wb * 1e9:.4g} ns, lens "
            f"aperture {aperture * 1e9:.4g} ns: {what} {est:.3g} (pupil, gate and truncation, ideal lines)")
    return {"window": (centre - 0.5 * length, centre + 0.5 * length), "taper": taper, "gdd": phi1,
            "aperture": aperture, "estimate": est, "met": met, "note": note}


def _gate(t, start, stop, taper):
    """Gate from `start` to `stop` with raised-cosine edges of `taper` s (flat in between)."""
    return sizing.tukey_gate(t, start, stop, taper)


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
    # line-lens-line chain sized, like every other design, to fidelity_target (0.02 by default;
    # the sizing's estimate agrees with the simulation within a few per cent of itself)
    identity_tolerance = 0.03
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
        centre, width = 0.5 * (t_a + t_b), t_b - t_a
        notes = []
        tech = technology
        measured = self._measured_line(params) if params.line == "touchstone" else None
        if not lens:
            m = a
            fixed = None  # the residual dispersion |Φ2/M| when something fixes it
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
                fixed = abs(phi2 / a)
            elif params.chirp_rate:
                phi1 = dsp.gdd_from_chirp_rate(params.chirp_rate)
                phi2 = (a - 1) * phi1
                notes.append(f"chirp rate given: {params.chirp_rate:.4g} Hz/s")
                fixed = abs(phi2 / a)
            elif params.penalty_phase:
                # the penalty phase Φ2ω²/(2M) = (α−1)Φ1ω²/(2α) is held to penalty_phase at ω_B
                fixed = 2 * params.penalty_phase / (wb * wb)
                notes.append(f"penalty phase given: {params.penalty_phase:g} rad at the "
                             f"{params.band_fraction:g} band edge {b / 1e9:.4g} GHz")
            sized = _size_stretch(pulse, a, b, centre, width, fixed, params)
            if measured is None and not params.chirp_rate:
                phi1 = sized["residual"] * abs(a) / abs(a - 1)
                phi2 = (a - 1) * phi1
            phif, aperture = 0.0, 0.0
            win, taper = sized["window"], sized["taper"]
            mu = dsp.chirp_rate_from_gdd(phi1)
            span = (win[1] - win[0]) / (2 * math.pi * abs(phi1))
            pen_edge = phi2 * wb * wb / (2 * m)
            pen = _penalty_nrmse(pulse, phi2, m)
        else:
            m = -a if inverted else a
            fixed = None  # |Φ1| when something fixes it
            if measured is not None:
                fixed = abs(measured["gdd"]) / a
                notes.append(f"line 2 GDD fixed by the measured file: {measured['gdd']:.4g} s²; line 1 ideal")
            sized = _size_lens(pulse, a, b, centre, width, fixed, inverted, params)
            phi1 = sized["gdd"]
            phi2 = a * phi1 if inverted else -a * phi1
            if measured is not None:
                phi2 = measured["gdd"]
                phi1 = phi2 / a if inverted else -phi2 / a
            phif = phi1 * phi2 / (phi1 + phi2)
            win, taper, aperture = sized["window"], sized["taper"], sized["aperture"]
            mu = dsp.chirp_rate_from_gdd(-phif)  # the lens multiplies by exp(−jt²/(2Φf))
            span = aperture / (2 * math.pi * abs(phif))
            pen_edge, pen = 0.0, 0.0
        notes.append(sized["note"])
        if not sized["met"]:
            warnings.warn(sized["note"], DesignWarning, stacklevel=2)
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
        core = {"factor": a, "arrangement": params.arrangement, "magnification": m, "gdd_chirp": phi1,
                "gdd_line": phi2, "gdd_focal": phif, "chirp_rate": mu, "chirp_span": span, "signal_band": b,
                "internal_band": span + 2 * b, "window": tuple(win), "taper": taper, "aperture": aperture,
                "bias": peak / params.modulation_index, "out_rate": pulse.rate / a, "penalty_edge": pen_edge,
                "penalty_nrmse": pen, "nrmse_estimate": sized["estimate"], "input_peak": peak,
                "touchstone": params.touchstone if measured is not None else ""}
        # carrier and line impedance: given, fixed by a measured line, or the cheapest on the card
        internal = span + 2 * b
        half = 0.5 * internal * (1 + params.band_margin)
        ceiling = tech.carrier_max_fraction * tech.f_t
        if params.carrier:
            carriers = [params.carrier]
        elif measured is not None:
            carriers = [measured["center"]]
        else:
            lo_c = _CARRIER_LOW * half
            carriers = list(np.geomspace(lo_c, max(lo_c, ceiling - half), _CARRIER_POINTS)) \
                if ceiling - half > 1.01 * lo_c else [lo_c]
        impedances = [params.impedance] if params.impedance else [float(v) for v in _IMPEDANCES]
        choice = ""
        w_rms = 2 * math.pi * float(pulse.rms_bandwidth())
        if len(carriers) * len(impedances) > 1:
            f_c, r0, choice = self._cheapest(core, carriers, impedances, params, tech, measured, w_rms)
            if params.line == "allpass" and len(impedances) > 1:
                # the fitted sections (their edge Q) can move the spirals: choose the impedance
                # again with the line itself at the chosen carrier (one fit, shared)
                f_c, r0, choice = self._cheapest(core, [f_c], impedances, params, tech, measured, w_rms,
                                                 model="allpass")
        else:
            f_c, r0 = carriers[0], impedances[0]
        d = self._assemble(core, f_c, r0, params.line, params, tech, measured, final=True, w_rms=w_rms)
        if choice:
            d = replace(d, notes=d.notes[:-1] + (choice,) + d.notes[-1:])
        return replace(d, notes=tuple(notes) + d.notes)

    def _cheapest(self, core, carriers, impedances, params, tech, measured, w_rms, model="ideal"):
        """The (carrier, impedance) of least cost: every candidate is assembled with the ideal
        line (billed as the all-pass cascade that realises it), billed and checked against the
        card; designs within all limits come first, then least area (within 2 %), then least
        power; with none within the limits, the nearest to them (largest least margin). The
        impedances are tried an octave apart, then the half-octave either side of the best."""
        rows = {}

        def evaluate(f_c, r0):
            if (f_c, r0) in rows:
                return
            try:
                d = self._assemble(core, f_c, r0, model, params, tech, measured, final=False, w_rms=w_rms)
                bill = self.bill(d, params, tech)
                lims = self.limits(d, params, tech, bill=bill)
            except ValueError:
                rows[(f_c, r0)] = None
                return
            rows[(f_c, r0)] = (f_c, r0, bill.area, bill.power, min((lm.margin for lm in lims), default=math.inf))

        def best_of():
            arr = np.array([v for v in rows.values() if v is not None])
            if arr.size == 0:
                return None, ""
            ok = arr[:, 4] >= 1.0
            if ok.any():
                pool = arr[ok]
                pool = pool[pool[:, 2] <= 1.02 * pool[:, 2].min()]
                return pool[int(np.argmin(pool[:, 3]))], "within the card's limits at least area, then power"
            best = arr[int(np.argmax(arr[:, 4]))]
            return best, f"no candidate within the card's limits; the nearest (least margin {best[4]:.3g})"

        coarse = impedances[::2] if len(impedances) > 2 else impedances
        for f_c in carriers:
            for r0 in coarse:
                evaluate(f_c, r0)
        best, _ = best_of()
        if best is None:  # nothing assembles: let the default pick raise its own reason
            return carriers[0], impedances[0], ""
        k = impedances.index(best[1])
        for j in (k - 1, k + 1):
            if 0 <= j < len(impedances):
                evaluate(best[0], impedances[j])
        best, how = best_of()
        note = (f"carrier {best[0] / 1e9:.4g} GHz and line impedance {best[1]:.3g} Ω chosen among "
                f"{len(carriers)} carrier(s) x {len(impedances)} impedance(s) ({len(rows)} tried): {how}")
        return float(best[0]), float(best[1]), note

    def _assemble(self, core, f_c, r0, model, params, tech, measured, final, w_rms) -> ChirpDesign:
        """Lines, path, sample rates, noise chain and sources of a design at carrier `f_c` (Hz)
        and line impedance `r0` (Ω); `core` holds the dispersion and gate already sized, `w_rms` is
        the input's rms angular bandwidth (rad/s, for the all-pass ripple budget)."""
        lens = core["arrangement"] == "lens"
        a, m, b = core["factor"], core["magnification"], core["signal_band"]
        phi1, phi2 = core["gdd_chirp"], core["gdd_line"]
        internal, span = core["internal_band"], core["chirp_span"]
        win, aperture = core["window"], core["aperture"]
        w_len = win[1] - win[0]
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
            # line 2's delay ripple moves the output by itself: an rms δτ costs about
            # δτ·ω_rms/|M| of NRMSE (ω_rms the input's rms bandwidth); a quarter of the target
            l2 = _build_line(model, phi2, f_c, band2, params, tech,
                             _RIPPLE_SHARE * params.fidelity_target * abs(m) / w_rms)
        l1 = None
        if lens:
            model1 = "ideal" if measured is not None else model
            # line 1 acts before the image: δτ costs δτ·ω_rms
            l1 = _build_line(model1, phi1, f_c, band1, params, tech, _RIPPLE_SHARE * params.fidelity_target / w_rms)
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
        if final and path == "real passband" and params.detector == "square-law" and cutoff > 2 * f_c - half:
            warnings.warn(f"square-law low-pass at {cutoff / 1e9:.4g} GHz passes the 2f_c product "
                          f"(carrier {f_c / 1e9:.4g} GHz)", DesignWarning, stacklevel=3)
        # record length: the gate, the image, and the lines' delay spreads
        spread2 = abs(phi2) * 2 * math.pi * (band2[1] - band2[0])
        out_len = abs(m) * (aperture if lens else w_len) + spread2 + (l1.line_delay if l1 else 0.0)
        n_sim = int((w_len + out_len + 2 * spread2 + (aperture if lens else 0.0)) * fs)
        if final and n_sim > params.max_samples:
            raise ValueError(
                f"the simulation record would need about {n_sim:.3g} samples at {fs / 1e9:.4g} GS/s, "
                f"above max_samples={params.max_samples}; the delay-bandwidth product "
                f"{l2.dbp:.4g} is beyond what the {params.line!r} model is simulated for here")
        active = w_len + (l1.line_delay if l1 else 0.0) + l2.line_delay + abs(m) * w_len
        chain = _size_chain(params, tech, f_c, [ln.delay for ln in (l1, l2) if ln is not None],
                            abs(m) * cutoff, core["input_peak"], r0)
        sources = max(1, math.ceil(span / (tech.chirp_max_fractional_span * f_c) - 1e-9))
        jitter = costs.oscillator_jitter(tech.vco_fom, tech.chirp_source_power, 1.0 / active, internal / 2) \
            if final else 0.0
        notes = (f"internal band {internal / 1e9:.4g} GHz about {f_c / 1e9:.4g} GHz; {reason}",
                 (f"line loss {' + '.join(f'{v:.3g}' for v in chain['loss'])} dB at the carrier, made up by "
                  f"{' + '.join(str(k) for k in chain['amps'])} amplifier(s); chain noise figure "
                  f"{10 * math.log10(chain['factor']):.3g} dB; {sources} chirp source core(s)"))
        return ChirpDesign(
            **core, notes=notes, line_model=params.line, carrier=f_c, impedance=r0,
            line_band=tuple(band2), line1_band=tuple(band1) if lens else (0.0, 0.0),
            delay=l2.delay, delay1=l1.delay if l1 else 0.0, line_delay=l2.line_delay, dbp=l2.dbp,
            sections=tuple(l2.sections), sections1=tuple(l1.sections) if l1 else (),
            ripple_rms=l2.ripple_rms, sim_rate=fs, path=path, path_reason=reason, detector_cutoff=cutoff,
            active_time=active, line_loss=tuple(chain["loss"]), amplifiers=tuple(chain["amps"]),
            amplifier_gm=tuple(chain["gm"]), noise_factor=chain["factor"],
            noise_bandwidth=chain["bandwidth"], input_noise=chain["noise"], sources=sources,
            source_jitter=jitter,
        )

    @staticmethod
    def _check_params(p: ChirpParams):
        for name in ("modulation_index", "baseband_ratio", "ripple_period", "max_dbp", "max_loss",
                     "fidelity_target"):
            if not getattr(p, name) > 0:
                raise ValueError(f"parameter {name!r} must be > 0, got {getattr(p, name)!r}")
        for name in ("carrier", "ripple", "loss", "detector_bandwidth", "chirp_jitter", "band_margin",
                     "penalty_phase", "gate", "taper", "impedance", "lens_spread"):
            if getattr(p, name) < 0:
                raise ValueError(f"parameter {name!r} must be >= 0, got {getattr(p, name)!r}")
        if not 0 < p.band_fraction < 1:
            raise ValueError(f"parameter 'band_fraction' must lie in (0, 1), got {p.band_fraction!r}")
        if p.penalty_phase >= math.pi / 2:
            raise ValueError(f"parameter 'penalty_phase' must be below π/2 (the first null; 0 sizes it), "
                             f"got {p.penalty_phase!r}")
        if p.gate and p.taper > 0.5 * p.gate:
            raise ValueError(f"parameter 'taper' must be at most half the gate ({0.5 * p.gate!r} s), got {p.taper!r}")
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
            # the pulse modulates the gated chirp: gate·(bias + x) (an AM modulator's product)
            env = np.concatenate([(gate * chirp0)[None, :], (gate * (1 + x / design.bias))[None, :] * chirp], axis=0)
            wave = self._wave(env, fs, start, f_c, passband)
            y = dsp.apply_line(wave, lines[1])
        else:
            env = np.concatenate([gate[None, :], np.broadcast_to(gate * (1 + x / design.bias), (jit.shape[0], n))],
                                 axis=0)
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
            ref = float(e_bg.max())
            eps = 0.02 * ref
            out = (p_x - p_bg) * (ref / (2 * p_bg + eps * eps) if params.calibrate else 1 / max(ref, 1e-300))
        else:
            v = y.values if y.is_envelope else analytic(y.values)
            e_bg = np.abs(v[0])
            ref = float(e_bg.max())
            out = sizing.detect_against(v[1:], v[0], det, params.calibrate)
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
        n_l = n_c = n_s = n_bt = 0
        over = tech.layout_overhead
        for label, el, area_l, area_c, _ in _line_elements(design, tech):
            n_l += el.inductors.size
            n_c += el.capacitors.size
            n_s += el.sections
            n_bt += el.bridged
            how = (f"{el.bridged} bridged-T + {el.lattice} lattice sections at {design.impedance:.3g} Ω"
                   if el.lattice else f"{el.bridged} bridged-T sections at {design.impedance:.3g} Ω")
            items.append(BillItem(f"{label} inductors", area_l * over, 0.0, el.inductors.size,
                                  f"{how}; square spirals, modified Wheeler (Mohan 1999), x {over:g} layout "
                                  f"overhead; largest {el.shunt_inductors.max() * 1e9:.3g} nH"))
            items.append(BillItem(f"{label} capacitors", area_c * over, 0.0, el.capacitors.size,
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
                               counts={"inductors": n_l, "capacitors": n_c, "sections": n_s, "bridged_t": n_bt,
                                       "mixers": n_mix, "sources": n_src + (1 if lens else 0), "detectors": 1,
                                       "amplifiers": n_amp})

    # -- process limits -----------------------------------------------------------------------
    def limits(self, design: ChirpDesign, params: ChirpParams, technology, bill: Bill | None = None
               ) -> tuple[Limit, ...]:
        tech = technology
        if design.bypass:
            return ()
        ceiling = tech.carrier_max_fraction * tech.f_t
        top = max(design.line_band[1], design.line1_band[1], design.carrier + design.chirp_span / 2)
        lines = _line_elements(design, tech)
        k = int(np.argmax([ln[1].inductors.max() for ln in lines]))
        big, srf = float(lines[k][1].inductors.max()), lines[k][4]
        if not math.isfinite(srf):
            srf = 0.0  # no spiral on chip reaches it
        allowed_noise = design.input_peak / 10 ** (params.snr_target / 20)
        lims = [
            Limit("carrier frequency", design.carrier, ceiling, "Hz",
                  note=f"card carrier_max_fraction x f_T = {tech.carrier_max_fraction:g} x {tech.f_t:.3g} Hz"),
            Limit("highest chirp or line frequency", top, ceiling, "Hz",
                  note=f"carrier + half the chirp span and signal band; chirp span {design.chirp_span:.3g} Hz"),
            Limit("area", (bill or self.bill(design, params, tech)).area, tech.die_area, "m²", note="card die_area"),
            Limit("noise with the line loss made up", design.input_noise, allowed_noise, "V",
                  note=f"input-referred, for snr_target = {params.snr_target:g} dB; line loss "
                       f"{sum(design.line_loss):.4g} dB, {sum(design.amplifiers)} make-up amplifier(s)"),
            Limit("spiral self-resonance", top, srf, "Hz",
                  note=f"largest spiral {big:.3g} H at {design.impedance:.3g} Ω; f_SR from its track-to-substrate "
                       f"capacitance (Yue-Wong π model, card inductor_substrate_cap)"),
        ]
        return tuple(lims)


def _line_labels(design: ChirpDesign) -> list[str]:
    return ["line 1", "line 2"] if design.arrangement == "lens" else ["line"]


def _line_elements(design: ChirpDesign, tech):
    """Element values and their area of each line realised as second-order all-pass sections
    at the design's line impedance: ``[(label, elements, spiral area m², capacitor area m²,
    self-resonance of the largest spiral Hz), ...]``, line 1 first for the lens (before the
    card's layout overhead).

    Lines fitted as all-pass cascades use their own sections; the others (ideal, band-limited,
    measured) are billed as the cascade that would realise them, placed by
    :func:`dsp.allpass_placement` over their band. Each section with Q ≥ 1 is a single-ended
    bridged-T (two series capacitors, a bridging and a shunt inductor), the others a balanced
    lattice (:mod:`timescale.numerics.dispersion.networks`).
    """
    lines = [(design.gdd_line, tuple(design.line_band), tuple(design.sections))]
    if design.arrangement == "lens":
        lines.insert(0, (design.gdd_chirp, tuple(design.line1_band), tuple(design.sections1)))
    return [(label,) + _line_cost(gdd, band, sections, design.impedance, tech)
            for label, (gdd, band, sections) in zip(_line_labels(design), lines)]


@functools.lru_cache(maxsize=256)
def _sections_of(gdd, band, sections):
    if sections:
        sec = np.asarray(sections, dtype=float).reshape(-1, 2)
        return sec[:, 0], sec[:, 1]
    return dsp.allpass_placement(float(gdd), float(band[0]), float(band[1]))[:2]


@functools.lru_cache(maxsize=256)
def _unit_elements(gdd, band, sections):
    """Elements at 1 Ω: L scales with the impedance, C with its inverse, the topology not."""
    return dsp.allpass_elements(*_sections_of(gdd, band, sections), 1.0)


@functools.lru_cache(maxsize=1024)
def _line_cost(gdd, band, sections, r0, tech):
    unit = _unit_elements(gdd, band, sections)
    el = replace(unit, inductors=unit.inductors * r0, capacitors=unit.capacitors / r0,
                 shunt_inductors=unit.shunt_inductors * r0)
    area, srf = _spiral_table(np.append(el.inductors, el.inductors.max()), tech)
    return el, float(np.sum(area[:-1])), float(np.sum(el.capacitors)) / tech.cap_density, float(srf[-1])
