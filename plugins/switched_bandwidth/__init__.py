"""Built-in method ``switched-bandwidth``: a delay filter whose bandwidth is switched while the
pulse is stored in it.

Principle (scaling theorem, Oppenheim & Willsky, *Signals and Systems*): an LTI delay filter of
group delay τ is driven by a pulse shorter than τ. At an instant t_s after the input has ended
and before the delayed output begins, every conductance and transconductance is divided by α
while the capacitors keep their charge (A → A/α, B → B/α). From then on the stored natural
response plays out α times slower (α > 1) or faster (α < 1): same peak, duration × α.

Structures: a cascade of Padé all-pass sections with output summers (flat magnitude, so the
only error is phase), a Bessel–Thomson cascade (maximally flat delay, but its impulse response
spreads as τ/√(2n−1), so short pulses need very high orders) and a constant-k ladder line.
Realizations: gm-C (every inductor a gyrator-C, L = C/(gm1·gm2); the default sizing builds both
the Padé cascade and the ladder line and keeps the cheaper one that meets the targets and the
card's limits) and passive LC (spiral inductors and capacitors switched in banks that conserve
charge and flux, :mod:`.passive`).

Sizing (docs/theory/switched-bandwidth.md): the order for the fidelity target, the delay for the
leakage target, every node capacitance for the output SNR target (``snr_target``, or the ADC the
output feeds) at the card's linear swing and the least total gm, and at least the gm cells' own
capacitance. Costs come from :mod:`timescale.numerics.costs`; :meth:`SwitchedBandwidth.limits`
checks the design against the card (the gm cell's own pole, gm per cell, die area, spiral
self-resonance). A design sized on one card and run on another (a corner, a
temperature) has every gm and capacitance shifted by the cards' factors.

Simulation uses the exact piecewise-LTI kernel :mod:`timescale.numerics.lti`. With ``gm_limit`` set, the
soft-limited path (RK4) is used: it is one to two orders of magnitude slower.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from dataclasses import dataclass, field

import numpy as np
import scipy.fft as sfft

from timescale.data.signal import resample_to
from timescale.numerics import costs, lti
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

from . import passive, prototypes
from .prototypes import Prototype, build

__all__ = ["SwitchedBandwidth", "SwitchedParams", "SwitchedDesign", "timescale_methods",
           "prototypes", "passive", "passive_line", "gm_c_matrices"]

_BOLTZMANN = costs.BOLTZMANN
_MIN_NODE_C = 10e-15  # smallest node capacitance used, F (parasitics; common practice, no source)


@dataclass(frozen=True)
class SwitchedParams:
    """Parameters of the ``switched-bandwidth`` method (every non-ideality defaults to off)."""

    prototype: str = param("auto", doc="delay prototype; auto sizes a Padé cascade and a ladder "
                           "line and keeps the cheaper (gm-C), or the ladder line (LC)",
                           choices=("auto", "pade", "bessel", "ladder"))
    realization: str = param("gm-c", doc="gm-C with gyrator-C inductors, or passive LC",
                             choices=("gm-c", "lc"))
    order: int = param(0, doc="prototype order (ladder: sections); 0 sizes it from the pulse")
    max_order: int = param(40, doc="largest cascade order the sizing may choose")
    max_sections: int = param(200, doc="largest number of ladder sections the sizing may choose")
    delay: float = param(0.0, units="s", doc="DC group delay; 0 sizes it from the pulse")
    fidelity_target: float = param(0.02, doc="largest NRMSE of the unswitched delayed pulse")
    leakage_target: float = param(1e-3, doc="largest input left / output started at the switch, "
                                  "relative to the peaks")
    repetition: float = param(0.0, units="s", doc="pulse repetition interval; 0 for a single pulse")
    snr_target: float = param(40.0, units="dB", doc="output peak over rms output noise the hardware "
                              "is sized for", bounds=(0.0, 200.0))
    adc_enob: float = param(0.0, units="bit", doc="ENOB of the ADC the output feeds: the noise "
                            "target is then at most that ADC's own; 0 when none is named",
                            bounds=(0.0, 32.0))
    adc_full_scale: float = param(0.0, units="V", doc="peak input of that ADC; 0: the output peak "
                                  "fills it", bounds=(0.0, None))
    noise_target: float = param(0.0, units="V", doc="output rms noise to size for, instead of "
                                "snr_target and the ADC; 0 derives it from them", bounds=(0.0, None))
    termination: str = param("matched", doc="ladder ends", choices=("matched", "half-section"))
    jitter: float = param(0.0, units="s", doc="rms jitter of the switch instant")
    transition: float = param(0.0, units="s", doc="time over which gm ramps linearly to its new value")
    transition_segments: int = param(16, doc="constant pieces approximating the gm ramp")
    gm_mismatch: float = param(0.0, doc="relative rms mismatch of each transconductor, per trial")
    gm_ro: float = param(0.0, doc="transconductor intrinsic gain gm·r_o; 0 for ideal (no output conductance)")
    noise: bool = param(False, doc="add thermal noise samples to the output (noise_rms and snr_db "
                        "are reported either way, from the exact covariance)")
    noise_gamma: float = param(0.0, doc="excess noise factor γ; 0 takes the technology's")
    gm_limit: float = param(0.0, units="V", doc="soft-limit (tanh) input range of every transconductor; 0 for linear")
    substeps: int = param(8, doc="RK4 steps per sample on the soft-limit path")
    summer_bandwidth: float = param(0.0, doc="gm-C Padé: pole of each section's output summer "
                                    "over the largest section ω0; 0 sizes it from fidelity_target")


_STRUCTURES = {"pade": "Padé cascade", "bessel": "Bessel-Thomson cascade", "ladder": "ladder line"}


@dataclass(frozen=True, kw_only=True)
class SwitchedDesign(Design):
    """A sized switched-bandwidth delay filter (SI units).

    Attributes
    ----------
    prototype : str
        Prototype family of the chosen structure ("pade", "bessel" or "ladder").
    realization : str
        "gm-c" or "lc".
    structure : str
        What was built, in words ("Padé cascade", "ladder line", ...).
    candidates : dict
        Every structure the sizing tried: power (W), area (m²), limit margin and whether it met
        the fidelity and leakage targets; the cheapest that meets the targets and the card's
        limits was kept.
    order : int
        Order (ladder: sections); the state count is ``states``.
    states : int
        Number of capacitor nodes (ladder: node voltages and branch currents).
    delay : float
        DC group delay τ, s.
    t_switch : float
        Switch instant on the input's clock, s.
    record_end : float
        End of the simulated output record, s.
    sim_rate : float
        Simulation (and output) sample rate, Hz.
    input_span : tuple of float
        First and last instants where |x| exceeds leakage_target × peak, s.
    leakage_design : float
        max(input left after t_s, output already started before t_s), relative to the peaks.
    fidelity_design : float
        NRMSE of the unswitched delayed pulse against x(t − τ).
    bw_in : float
        99 % occupied bandwidth of the input, Hz.
    signal_peak : float
        Peak of the input pulse, V.
    swing : float
        Peak voltage of every gm-C node: the pulse's peak, at most the card's gm_linear_range
        (the input is scaled into it and the output read back at the pulse's scale), V.
    snr_required : float
        Output peak over rms noise the hardware is sized for, dB.
    noise_design : float
        RMS output noise of the design after the switch, at the pulse's scale, V.
    snr_design : float
        Output peak over noise_design after the switch, dB.
    node_capacitance : tuple of float
        Total capacitance of each node, F (sized for the noise target at the least total gm,
        at least the cells' own capacitance on it).
    node_own_capacitance : tuple of float
        The part of it that the gm cells on the node bring themselves, F.
    own_share : float
        Perron root of the map from node capacitances to the cells' own capacitance: below 1
        every node holds its cells; at or above 1 no capacitance does (the nodes are faster than
        the cells' own pole allows).
    max_pole : float
        Highest pole of the filter in its faster state, Hz.
    max_q : float
        Highest section Q of a cascade (0 for a ladder line).
    node_roles : tuple of str
        What each node is: "band-pass", "low-pass", "first-order", "summer" (gm-C Padé),
        else "state".
    summer_pole : float
        Pole of each section's output summer ω_s, rad/s (0 when there are no summers).
    node_noise_factors : tuple of float
        Output noise variance × C_i/(kTγ) that node i's transconductors contribute.
    node_scale : tuple of float
        Dynamic-range scaling of each node against the prototype's realization
        (peak of the prototype node over the output peak); A, B, C are the scaled ones.
    gms : tuple of float
        Every transconductance before the switch, S.
    output_noise_factor : float
        Σ of node_noise_factors.
    busy_time : float
        From the first input instant to the end of the stretched output, s.
    A, B, C : tuple
        Nominal state space (nested tuples; A, B in 1/s).
    D : float
    design_temperature, gm_factor, cap_factor : float
        Temperature (K) and corner factors of the card the design was sized on; evaluating it on
        another card shifts every gm by that card's gm_factor over this one, every capacitance
        by its cap_factor over this one.
    band_high : float
        Highest signal frequency the filter passes (input band, or the compressed one), Hz.
    lc_sections : int
        Sections of the passive LC line (Z0 = 50 Ω) with the same delay and fidelity (the line
        itself for the LC realization; 0 if none fits).
    lc_inductance, lc_capacitance : float
        Its per-section L (H) and C (F).
    lc_area : float
        Its active area (tapped spirals of max(1, α)·L, capacitor banks, switches, layout
        overhead), m².
    lc_spiral : tuple
        Its spiral: (turns, d_out m, d_in m, inductance H, area m²).
    lc_self_resonance : float
        That spiral's self-resonance from its track capacitance, Hz.
    lc_loss_frequency : float
        Frequency at which the spirals' series resistance gives them the card's Q (the input's
        RMS bandwidth), Hz.
    """

    prototype: str
    order: int
    states: int
    delay: float
    t_switch: float
    record_end: float
    sim_rate: float
    input_span: tuple[float, float]
    leakage_design: float
    fidelity_design: float
    bw_in: float
    node_capacitance: tuple
    gms: tuple[float, ...]
    output_noise_factor: float
    busy_time: float
    realization: str = "gm-c"
    structure: str = ""
    candidates: dict = field(default_factory=dict)
    signal_peak: float = 1.0
    swing: float = 1.0
    snr_required: float = 0.0
    noise_design: float = 0.0
    snr_design: float = 0.0
    node_own_capacitance: tuple = ()
    own_share: float = 0.0
    max_pole: float = 0.0
    max_q: float = 0.0
    A: tuple = ()
    B: tuple = ()
    C: tuple = ()
    D: float = 0.0
    elements: dict = field(default_factory=dict)
    node_scale: tuple = ()
    node_roles: tuple = ()
    summer_pole: float = 0.0
    node_noise_factors: tuple = ()
    design_temperature: float = 300.0
    gm_factor: float = 1.0
    cap_factor: float = 1.0
    band_high: float = 0.0
    lc_sections: int = 0
    lc_inductance: float = 0.0
    lc_capacitance: float = 0.0
    lc_area: float = 0.0
    lc_spiral: tuple = ()
    lc_self_resonance: float = 0.0
    lc_loss_frequency: float = 0.0

    def system(self) -> lti.StateSpace:
        """The nominal state-space model."""
        return lti.StateSpace(np.array(self.A), np.array(self.B), np.array(self.C), self.D)


# ------------------------------------------------------------------------------------------
def gm_c_matrices(A, B, node_c, temperature: float, gamma: float):
    """Noise intensity Q of a gm-C realization: every transconductor (nonzero of A or B) puts a
    current of one-sided density 4kTγ·gm on its output node i; gm = C_i·|entry|. `node_c`
    (F) is one capacitance or one per node (summer nodes and their loads included).

    Returns Q (two-sided, V²/s): diag 2kTγ·(Σ_j|A_ij| + |B_i|)/C_i.
    """
    A = np.asarray(A)
    B = np.asarray(B)
    g = np.abs(A).sum(axis=-1) + np.abs(B)
    d = 2.0 * _BOLTZMANN * temperature * gamma * g / np.asarray(node_c, dtype=float)
    return d[..., :, None] * np.eye(A.shape[-1])


def passive_line(delay: float, f, P, target: float, technology, max_sections: int = 400,
                 z0: float = 50.0, factor: float = 1.0):
    """The constant-k passive LC line (Z0 = `z0`) with DC group delay `delay` that meets the
    fidelity `target`, banked for the stretch `factor`; returns (sections, L, C, area) or None
    when none up to `max_sections` does (see :func:`passive.line_for`)."""
    line = passive.line_for(delay, f, P, target, technology, factor, max_sections=max_sections, z0=z0)
    if line is None:
        return None
    return line.sections, line.inductance, line.capacitance, line.area


_SUMMER_MAX = 16.0  # fastest summer pole the sizing may use, × largest section ω0


def _fit(kind, n, delay, f, P, target, termination, summed, ratio):
    """Prototype of order `n` and the fidelity of its realization.

    With `summed` (gm-C Padé) the realization has one summer pole ω_s per section; ω_s is
    `ratio` × the largest section ω0, or (ratio = 0) the slowest one up to 16× that keeps the
    NRMSE against x(t − τ − K/ω_s) within `target` (the summers' droop costs gm).
    Returns (prototype, nrmse, ω_s) with ω_s = 0 when not summed.
    """
    pr = build(kind, n, delay, termination)
    if not summed:
        return pr, prototypes.delay_error(pr.response(f), f, delay, P), 0.0
    K = len(pr.elements["sections"])
    w0 = max(e["w0"] for e in pr.elements["sections"])

    def err(ws):
        return prototypes.delay_error(prototypes.summer_response(pr, ws, f), f, delay + K / ws, P)

    if ratio > 0:
        return pr, err(ratio * w0), ratio * w0
    hi = _SUMMER_MAX * w0
    e_hi = err(hi)
    if e_hi > target:
        return pr, e_hi, hi
    lo = w0
    if err(lo) <= target:
        return pr, err(lo), lo
    for _ in range(40):  # bisection in log ω_s to 0.1 %
        if hi / lo < 1.001:
            break
        mid = math.sqrt(lo * hi)
        if err(mid) <= target:
            hi = mid
        else:
            lo = mid
    return pr, err(hi), hi


def _search_order(kind, delay, f, P, target, lo, hi, termination, summed=False, ratio=0.0):
    """Lowest order in [lo, hi] that meets `target`, else the one with the least NRMSE.
    Returns (prototype, nrmse, ω_s, met). A ladder's error falls steadily with its section
    count, so its search is a bisection."""
    if kind == "ladder":
        top = _fit(kind, hi, delay, f, P, target, termination, False, 0.0)
        if top[1] > target:
            return top + (False,)
        while lo < hi:
            mid = (lo + hi) // 2
            if _fit(kind, mid, delay, f, P, target, termination, False, 0.0)[1] <= target:
                hi = mid
            else:
                lo = mid + 1
        return _fit(kind, lo, delay, f, P, target, termination, False, 0.0) + (True,)
    best = None
    for n in range(lo, hi + 1):
        pr, e, ws = _fit(kind, n, delay, f, P, target, termination, summed, ratio)
        if best is None or e < best[1]:
            best = (pr, e, ws)
        if e <= target:
            return pr, e, ws, True
    return best[0], best[1], best[2], False


def _realize(proto: Prototype, ws: float):
    """State space, DC group delay and node roles of the realization."""
    if ws > 0:
        sysm, roles = prototypes.summed_cascade(proto, ws)
        return sysm, proto.delay + len(proto.elements["sections"]) / ws, roles
    return proto.system, proto.delay, ("state",) * proto.order


def _size_capacitors(A, B, C, ktg: float, v_n: float, c_min: float, c_par: float = 0.0):
    """Node capacitances for an output noise v_n (V rms) at the least total gm, holding the
    gm cells' own capacitance.

    Node i's transconductors (gm = C_i·|A_ij|, Σ_j = C_i·g_i) inject 4kTγ·C_i·g_i into it,
    so the output variance is kTγ·Σ_i F_i/C_i with F_i = 2·g_i·W_ii (W the observability
    Gramian, Aᵀ W + W A + CᵀC = 0), and the total gm is Σ_i C_i·g_i. Minimizing the latter
    with the former fixed (Lagrange) gives C_i ∝ √(F_i/g_i); nodes that would fall below
    `c_min` are held there and the rest share what is left of the budget.

    Every cell of transconductance gm brings c_par·gm of its own capacitance (`c_par` in F/S,
    the card's gm_parasitic_cap times the speed-up of the faster state), half on the node it
    drives and half on the node it reads: node i carries M·C with
    M = ½·c_par·(diag(g) + |A|ᵀ). The capacitances are raised, where needed, to the least
    C ≥ max(C_noise, M·C) (a monotone iteration that converges when the Perron root ρ of M is
    below 1; at ρ ≥ 1 no capacitance holds the cells, and the noise sizing is kept).

    Returns (C_i in F, F_i, own capacitance M·C in F, ρ).
    """
    A = np.asarray(A)
    g = np.abs(A).sum(axis=-1) + np.abs(np.asarray(B))
    W = lti.stationary_covariance(A.T, np.outer(C, C))
    F = np.maximum(2.0 * g * np.diag(W), 0.0)
    budget = v_n ** 2 / ktg
    fixed = np.zeros(F.size, bool)
    for _ in range(F.size + 1):
        free = ~fixed
        left = budget - np.sum(F[fixed]) / c_min
        S = np.sum(np.sqrt(F[free] * g[free]))
        c = np.full(F.size, c_min)
        if left > 0 and S > 0:
            c[free] = np.sqrt(F[free] / g[free]) * S / left
        else:  # the floor alone exceeds the budget: every node at the same, larger size
            c[:] = max(np.sum(F) / budget, c_min)
            break
        low = free & (c < c_min)
        if not low.any():
            break
        fixed |= low
    c0 = np.maximum(c, c_min)
    M = 0.5 * c_par * (np.diag(g) + np.abs(A).T)
    rho = float(np.max(np.abs(np.linalg.eigvals(M)))) if c_par > 0 else 0.0
    c = c0
    if 0 < rho < 1:
        for _ in range(20000):  # converges geometrically at rate ρ
            new = np.maximum(c0, M @ c)
            if np.all(new <= c * (1 + 1e-12)):
                c = new
                break
            c = new
    return c, F, M @ c, rho


def _noise_goal(params: SwitchedParams, peak: float, technology):
    """(swing V, required output SNR dB, noise target at the node scale V rms).

    The noise target is the output peak over 10^(SNR/20) with SNR the larger of `snr_target`
    and, when an ADC is named, the ADC's own: its noise FS/(2^ENOB·√3) (LSB/√12 of a 2·FS
    range) against the output peak, 20·log10(peak·2^ENOB·√3/FS). The gm-C nodes swing the
    pulse's peak, at most the card's linear range; the target scales with them.
    """
    swing = min(peak, technology.gm_linear_range)
    if params.noise_target > 0:
        snr = 20.0 * math.log10(peak / params.noise_target)
    else:
        snr = params.snr_target
        if params.adc_enob > 0:
            fs = params.adc_full_scale or peak
            snr = max(snr, 20.0 * math.log10(peak / fs * 2.0 ** params.adc_enob * math.sqrt(3.0)))
    return swing, snr, swing / 10.0 ** (snr / 20.0)


def _check_params(params: SwitchedParams, a: float):
    if not (math.isfinite(a) and a > 0):
        raise ValueError(f"factor must be finite and > 0, got {a!r}")
    for name in ("fidelity_target", "leakage_target"):
        v = getattr(params, name)
        if not 0 < v < 1:
            raise ValueError(f"{name} must lie strictly between 0 and 1, got {v!r}")
    for name in ("delay", "repetition", "jitter", "transition", "gm_mismatch", "gm_ro",
                 "noise_gamma", "gm_limit", "noise_target", "adc_enob", "adc_full_scale"):
        if getattr(params, name) < 0:
            raise ValueError(f"{name} must be >= 0, got {getattr(params, name)!r}")
    if params.order < 0 or params.max_order < 1 or params.max_sections < 1:
        raise ValueError(f"order must be >= 0 and max_order, max_sections >= 1, got {params.order!r}, "
                         f"{params.max_order!r}, {params.max_sections!r}")
    if params.transition_segments < 1 or params.substeps < 1:
        raise ValueError("transition_segments and substeps must be >= 1")
    if params.realization == "lc" and params.prototype not in ("auto", "ladder"):
        raise ValueError(f"prototype {params.prototype!r} with realization 'lc': the passive "
                         "realization is a ladder line; give prototype 'ladder' or 'auto'")


@dataclass(frozen=True)
class _Input:
    """What the sizing reads off the input pulse (SI)."""

    x: Pulse
    thr: float
    t_a: float
    t_b: float
    span: float
    bw: float
    f: np.ndarray
    P: np.ndarray
    sim_rate: float
    peak: float
    f_rms: float

    @classmethod
    def read(cls, x: Pulse, a: float, thr: float) -> "_Input":
        v = x.values
        peak = float(np.max(np.abs(v)))
        if peak == 0:
            raise ValueError("pulse is identically zero; nothing to delay")
        on = np.flatnonzero(np.abs(v) > thr * peak)
        t_a, t_b = float(x.t[on[0]]), float(x.t[on[-1]])
        # spectrum weights for the fidelity criterion (zero-padded, one-sided)
        nfft = 1 << int(math.ceil(math.log2(8 * x.n)))
        f, X = x.spectrum(nfft)
        P = np.abs(X) ** 2
        keep = P > 1e-16 * P.max()
        m = 1 if a >= 1 else int(math.ceil(1.0 / a - 1e-9))  # finer grid for compression
        return cls(x, thr, t_a, t_b, max(t_b - t_a, 2 * x.dt), float(x.occupied_bandwidth()),
                   f[keep], P[keep], x.rate * m, peak, float(x.rms_bandwidth()))


class SwitchedBandwidth(Method):
    """Delay filter with switched bandwidth (see the module docstring)."""

    name = "switched-bandwidth"
    summary = "delay filter whose gm are scaled by 1/α while the pulse is stored in it"
    Params = SwitchedParams
    version = "0.2.0"
    identity_tolerance = 0.03
    factor_tolerance = 0.05

    # -------------------------------------------------------------------------------------
    def design(self, pulse: Pulse, factor: float, params: SwitchedParams, technology) -> SwitchedDesign:
        a = float(factor)
        _check_params(params, a)
        inp = _Input.read(pulse.row(0), a, params.leakage_target)
        if params.delay > 0 and params.delay < inp.span:
            raise ValueError(
                f"delay {params.delay:.4g} s is shorter than the pulse ({inp.span:.4g} s above "
                f"{inp.thr:g} of its peak): the input would still be on when the output starts; "
                "give a longer delay or 0 to size it")
        if params.prototype != "auto":
            kinds = (params.prototype,)
        else:
            kinds = ("ladder",) if params.realization == "lc" else ("pade", "ladder")
        tried, errors = [], []
        for kind in kinds:
            # each candidate's warnings are kept with it: only the chosen one's reach the caller
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                try:
                    d = self._size(inp, a, kind, params, technology)
                except ValueError as exc:
                    if len(kinds) == 1:
                        raise
                    errors.append(f"{_STRUCTURES[kind]}: {exc}")
                    continue
            bill = self.bill(d, params, technology)
            lims = self.limits(d, params, technology)
            margin = min((lim.margin for lim in lims), default=math.inf)
            met = d.fidelity_design <= params.fidelity_target and d.leakage_design <= params.leakage_target
            tried.append((d, caught, bill, margin, met))
        if not tried:
            raise ValueError("; ".join(errors))
        # the cheapest (least power, then area) of those that meet the targets and the card's
        # limits; failing that, of those that meet the targets; failing that, the most buildable
        best = min(tried, key=lambda c: (c[3] < 1 or not c[4], not c[4],
                                         c[2].power if (c[3] >= 1 and c[4]) else -c[3], c[2].area))
        d, caught = best[0], best[1]
        for w in caught:
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        cands = {_STRUCTURES[c[0].prototype]: {"power": c[2].power, "area": c[2].area,
                                                "limit_margin": c[3], "targets_met": c[4]}
                 for c in tried}
        notes = list(d.notes)
        if len(tried) > 1:
            others = "; ".join(f"{k}: {v['power'] * 1e3:.3g} mW, {v['area'] * 1e6:.3g} mm², margin "
                               f"{v['limit_margin']:.3g}" for k, v in cands.items())
            notes.append(f"chose the {d.structure} ({others})")
        notes += errors
        return dataclasses.replace(d, candidates=cands, notes=tuple(notes))

    def _size(self, inp: _Input, a: float, kind: str, params: SwitchedParams, technology) -> SwitchedDesign:
        """Size one structure (`kind`) for the input."""
        x, thr, span = inp.x, inp.thr, inp.span
        lc = params.realization == "lc"
        summed = kind == "pade" and not lc
        hi = params.max_sections if kind == "ladder" else params.max_order
        tau = params.delay if params.delay > 0 else 1.2 * span
        notes = []
        best = None  # the attempt with the least leakage, kept if none meets the target
        for _ in range(16):
            if params.order > 0:
                proto, fid, ws = _fit(kind, params.order, tau, inp.f, inp.P, params.fidelity_target,
                                      params.termination, summed, params.summer_bandwidth)
            else:
                proto, fid, ws, _ok = _search_order(kind, tau, inp.f, inp.P, params.fidelity_target,
                                                    1, hi, params.termination, summed,
                                                    params.summer_bandwidth)
            real_sys, real_delay, roles = _realize(proto, ws)
            if lc:
                real_sys = passive.lossy(real_sys, technology.inductor_q, inp.f_rms)
            t_s, leak, t_tail = _switch_instant(x, real_sys, real_delay, thr)
            if leak <= thr or params.delay > 0:
                break
            if best is None or leak < best[0]:
                best = (leak, proto, fid, ws, real_sys, real_delay, roles, t_s, t_tail)
            tau *= 1.15
        else:
            # a comparison shows the shortfall in its leakage and fidelity metrics: keep the
            # least-leaky design tried (the warning below says by how much it misses)
            leak, proto, fid, ws, real_sys, real_delay, roles, t_s, t_tail = best
            notes.append(f"no delay up to {tau:.4g} s brought the leakage below {thr:g}")
        order = proto.order if kind != "ladder" else proto.order // 2
        if fid > params.fidelity_target:
            # a comparison shows the shortfall in its fidelity metrics: design the best order
            # found and say so, rather than leave the cell empty
            limit = "max_sections" if kind == "ladder" else "max_order"
            what = (f"order {params.order}" if params.order > 0 else
                    f"no order up to {limit}={hi} (best: order {order})")
            warnings.warn(
                f"{what} of a {kind} prototype with delay {proto.delay:.4g} s gives NRMSE "
                f"{fid:.3g} of the delayed pulse, above fidelity_target "
                f"{params.fidelity_target:g}; designed as the best found"
                + ("; prototype='pade' does better (a Bessel-Thomson impulse response spreads "
                   "as τ/√(2n−1))" if kind == "bessel" else ""), DesignWarning, stacklevel=3)
            notes.append(f"fidelity {fid:.3g} above target {params.fidelity_target:g}")
        if leak > thr:
            warnings.warn(f"leakage at the switch instant is {leak:.3g} (target {thr:g}): the input "
                          "is still on or the output has begun", DesignWarning, stacklevel=3)
        record_end = t_s + a * (t_tail - t_s) + 0.25 * span
        busy = record_end - inp.t_a
        if params.repetition > 0 and busy > params.repetition:
            amax = (params.repetition - 0.25 * span - (t_s - inp.t_a)) / (t_tail - t_s)
            raise ValueError(
                f"the stretched output ends {busy:.4g} s after the pulse starts, beyond the "
                f"repetition interval {params.repetition:.4g} s; the largest factor that fits is "
                f"about {max(amax, 0):.3g}")
        if inp.bw / a > 0.4 * inp.sim_rate:
            warnings.warn(f"the compressed pulse occupies {inp.bw / a:.4g} Hz, near the Nyquist "
                          f"frequency of {inp.sim_rate:.4g} Hz samples", SamplingWarning, stacklevel=3)
        speed = max(1.0, 1.0 / a)  # the hardware is built for the faster of the two states
        swing, snr_req, v_node = _noise_goal(params, inp.peak, technology)
        T = technology.temperature
        common = dict(
            factor=a, prototype=kind, realization=params.realization, structure=_STRUCTURES[kind],
            order=order, delay=real_delay, t_switch=t_s, record_end=record_end,
            sim_rate=inp.sim_rate, input_span=(inp.t_a, inp.t_b), leakage_design=leak,
            fidelity_design=fid, bw_in=inp.bw, busy_time=busy, signal_peak=inp.peak,
            snr_required=snr_req, elements=dict(proto.elements), node_roles=tuple(roles),
            summer_pole=float(ws), design_temperature=T, gm_factor=technology.gm_factor,
            cap_factor=technology.cap_factor, band_high=inp.bw * speed,
            max_q=0.0 if kind == "ladder" else max(e["Q"] for e in proto.elements["sections"]))
        line = passive.line_for(proto.delay, inp.f, inp.P, params.fidelity_target, technology, a,
                                sections=order if lc else 0)
        if line is None:
            notes.append("no passive LC line up to 400 sections meets the fidelity target")
        else:
            common.update(lc_sections=line.sections, lc_inductance=line.inductance,
                          lc_capacitance=line.capacitance, lc_area=line.area,
                          lc_spiral=tuple(float(v) for v in line.spiral),
                          lc_self_resonance=line.self_resonance)
        if lc:
            # the physical line: node voltages and branch currents × Z0, resistive noise only
            A = np.asarray(real_sys.A)
            c_node = passive.node_capacitance(A, proto.elements["Z0"])
            Q = passive.noise_intensity(A, c_node, T)
            var = float(np.asarray(real_sys.C) @ lti.stationary_covariance(A, Q) @ np.asarray(real_sys.C))
            # after the switch: variance kT/(αC)-like (×1/α), signal × bank gain
            noise = math.sqrt(var / a)
            gain = passive.bank_gain(a)
            notes.append(f"ladder line of {order} LC sections, delay {real_delay:.4g} s, switch at "
                         f"{t_s:.4g} s; element banks conserve charge and flux: gain "
                         f"{gain:.3g} after the switch, {passive.bank_energy_loss(a):.0%} of the "
                         f"stored energy lost in the switches")
            return SwitchedDesign(
                **common, notes=tuple(notes), states=A.shape[0],
                node_capacitance=tuple(float(c) for c in c_node), gms=(),
                output_noise_factor=0.0, swing=inp.peak, noise_design=noise,
                snr_design=20 * math.log10(gain * inp.peak / noise),
                max_pole=float(np.max(np.abs(np.linalg.eigvals(A)))) * speed / (2 * math.pi),
                A=tuple(map(tuple, A)), B=tuple(np.asarray(real_sys.B)), C=tuple(np.asarray(real_sys.C)),
                D=float(np.asarray(real_sys.D)), lc_loss_frequency=inp.f_rms)
        # dynamic-range scaling: every node's peak (for this pulse) equal to the output's
        sysm, node_scale = _scale_nodes(real_sys, x, real_delay)
        A = np.asarray(sysm.A)
        B = np.asarray(sysm.B)
        # node capacitances from the noise target (Lyapunov of the structure, least total gm)
        gamma = params.noise_gamma or technology.gm_noise_gamma
        ktg = _BOLTZMANN * T * gamma
        c_node, Fi, own, rho = _size_capacitors(A, B, np.asarray(sysm.C), ktg, v_node, _MIN_NODE_C,
                                                technology.gm_parasitic_cap * speed)
        noise = math.sqrt(ktg * float(np.sum(Fi / c_node))) * inp.peak / swing
        Ag = c_node[:, None] * np.abs(A)
        gms = tuple(float(g) for g in np.concatenate([Ag[A != 0], (c_node * np.abs(B))[B != 0]]))
        notes.append(f"{_STRUCTURES[kind]}, order {order}, delay {real_delay:.4g} s, switch at {t_s:.4g} s"
                     + (f", summer pole {ws:.3g} rad/s" if ws > 0 else "")
                     + f"; nodes swing {swing:.3g} V, sized for {snr_req:.3g} dB")
        return SwitchedDesign(
            **common, notes=tuple(notes), states=A.shape[0],
            node_capacitance=tuple(float(c) for c in c_node),
            node_own_capacitance=tuple(float(c) for c in own), own_share=rho,
            gms=gms, node_noise_factors=tuple(float(v) for v in Fi),
            output_noise_factor=float(np.sum(Fi)), swing=swing, noise_design=noise,
            snr_design=20 * math.log10(inp.peak / noise),
            max_pole=float(np.max(np.abs(np.linalg.eigvals(A)))) * speed / (2 * math.pi),
            A=tuple(map(tuple, A)), B=tuple(B), C=tuple(np.asarray(sysm.C)),
            D=float(np.asarray(sysm.D)), node_scale=tuple(float(v) for v in node_scale))

    # -------------------------------------------------------------------------------------
    def simulate(self, pulse, design: SwitchedDesign, params: SwitchedParams, rng, trials=1,
                 technology=None):
        from timescale.data.technology import DEFAULT_TECHNOLOGY

        tech = technology or DEFAULT_TECHNOLOGY
        a = design.factor
        x = pulse.row(0)
        rate = design.sim_rate
        n_out = int(math.ceil((design.record_end - x.t0) * rate)) + 1
        if rate != x.rate:
            u = resample_to(x, rate, t_start=x.t0, n=x.n * int(round(rate / x.rate))).values
        else:
            u = x.values
        u = np.concatenate([u, np.zeros(max(n_out - u.size, 0))])[:max(n_out, u.size)]
        N = u.size
        dt = 1.0 / rate
        A = np.array(design.A)
        B = np.array(design.B)
        C = np.array(design.C)
        passive_lc = design.realization == "lc"
        if passive_lc and (params.gm_mismatch or params.gm_ro or params.gm_limit or params.transition):
            warnings.warn("gm_mismatch, gm_ro, gm_limit and transition do not apply to a passive "
                          "LC realization; ignored", DesignWarning, stacklevel=2)
        K = int(trials)
        # draws in a fixed order so the same seed gives the same result
        mis_a = rng.standard_normal((K,) + A.shape)
        mis_b = rng.standard_normal((K,) + B.shape)
        jit = rng.standard_normal(K)
        # the card this runs on against the one it was sized on (corners, temperature)
        rg = tech.gm_factor / design.gm_factor
        rc = tech.cap_factor / design.cap_factor
        T = tech.temperature
        if passive_lc:
            volt = np.zeros(A.shape[0], bool)
            volt[1::2] = True  # node voltages: their capacitors follow the corner, spirals do not
            A = np.where(volt[:, None], A / rc, A)
            B = np.where(volt, B / rc, B)
            c_node = np.asarray(design.node_capacitance) * np.where(volt, rc, 1.0)
            nominal = sysm = lti.StateSpace(A, B, C, design.D, passive.noise_intensity(A, c_node, T))
        else:
            gamma = params.noise_gamma or tech.gm_noise_gamma
            c_node = np.asarray(design.node_capacitance) * rc
            # node noise at the node scale, read at the pulse's: × (peak/swing)²
            q_scale = (design.signal_peak / design.swing) ** 2

            def realize(A, B):
                if params.gm_ro > 0:
                    # each transconductor loads its output node with gds = gm/(gm·r_o)
                    loss = (np.abs(A).sum(axis=-1) + np.abs(B)) / params.gm_ro
                    A = A - loss[..., :, None] * np.eye(A.shape[-1])
                A, B = A * (rg / rc), B * (rg / rc)
                return lti.StateSpace(A, B, C, design.D, gm_c_matrices(A, B, c_node, T, gamma) * q_scale)

            nominal = realize(A, B)
            if params.gm_mismatch > 0:
                sysm = realize(A * (1 + params.gm_mismatch * mis_a * (A != 0)),
                               B * (1 + params.gm_mismatch * mis_b * (B != 0)))
            else:
                sysm = nominal
        t_sw = design.t_switch - x.t0

        def schedule(system, t_sw):
            if passive_lc:
                return passive.bank_schedule(system, a, t_sw)
            return lti.Schedule.switched(system, a, t_sw, ramp=params.transition,
                                         segments=params.transition_segments)

        # the reported noise is that of the nominal filter (one covariance for all trials). The
        # gm-C switch (and its ramp) scales A and Q together, which keeps the stationary
        # covariance P0 (A P0 + P0 Aᵀ + Q = 0 holds for A/α, Q/α): the output variance is C P0 Cᵀ
        # throughout. The passive banks change the equilibrium (kT/(αC)): propagate it.
        if passive_lc:
            var = lti.output_variance(nominal_schedule := schedule(nominal, t_sw), N, dt)[0]
        else:
            P0 = lti.stationary_covariance(nominal.A, nominal.Q)
            var = np.full(N, float(C @ P0 @ C))
            nominal_schedule = schedule(nominal, t_sw)
        if params.jitter > 0:
            t_sw = t_sw + params.jitter * jit
        sched = schedule(sysm, t_sw)
        if params.gm_limit > 0 and not passive_lc:
            y = lti.simulate_nonlinear(sched, u, dt, params.gm_limit, substeps=params.substeps)
            path = "soft-limited gm-C, RK4"
        else:
            y = lti.simulate(sched, u, dt)
            path = "exact piecewise-LTI (FOH, lifted)"
        y = np.broadcast_to(y, (K, N)).copy()
        t = x.t0 + np.arange(N) * dt
        peak = np.max(np.abs(y), axis=1)
        ts_k = x.t0 + np.broadcast_to(np.atleast_1d(t_sw), (K,))
        leak = np.array([abs(np.interp(ts_k[k], t, y[k])) for k in range(K)]) / peak
        kpk = np.argmax(np.abs(y), axis=1)
        rms = np.sqrt(var[kpk])
        mets = {
            "leakage": Metric(leak, "", "output at the switch instant relative to its peak"),
            # the delay follows C/gm (gm-C) or √(LC) (passive) on the card this runs on
            "delay": Metric(design.delay * (math.sqrt(rc) if passive_lc else rc / rg), "s",
                            "DC group delay of the filter"),
            "bandwidth_used": Metric(design.band_high, "Hz", "highest signal bandwidth the filter passes"),
            "filter_order": Metric(float(design.states), "", "number of filter states"),
            "lc_area": Metric(design.lc_area, "m²", "area of the passive LC line alternative"),
            "ladder_line": Metric(float(design.prototype == "ladder"), "",
                                  "1 when sized as a ladder line, 0 as a cascade of sections"),
            "noise_rms": Metric(rms, "V", "output rms noise at the output peak (nominal filter)"),
            "snr_db": Metric(20 * np.log10(peak / rms), "dB", "output peak over rms noise"),
        }
        if passive_lc:
            mets["switch_gain"] = Metric(passive.bank_gain(a), "", "gain of the switched element "
                                         "banks (charge and flux conserved)")
            mets["switch_energy_loss"] = Metric(passive.bank_energy_loss(a), "", "fraction of the "
                                                "stored energy lost at the switch")
        clean = None
        out = Pulse(values=y, rate=rate, t0=x.t0, units=x.units, name=f"{x.name} switched")
        if params.noise:
            # sampled from the nominal filter switched at the nominal instant: mismatch of a few
            # per cent and jitter of a few ps change the noise by as little, and one covariance
            # run then serves every trial
            noise = lti.sample_noise(nominal_schedule, N, dt, rng, trials=K)
            clean = out
            out = out.with_values(y + noise)
        return Simulation(pulse=out, metrics=mets, path=path, clean=clean)

    # -------------------------------------------------------------------------------------
    def bill(self, design: SwitchedDesign, params: SwitchedParams, technology) -> Bill:
        a = design.factor
        n = design.states
        bw = design.band_high
        t = technology
        if design.realization == "lc":
            N = design.lc_sections
            L, C = design.lc_inductance, design.lc_capacitance
            bank = max(1.0, a)
            spiral = design.lc_spiral
            items = [BillItem("spiral inductors", area=N * spiral[4], count=N,
                              note=f"tapped square spirals of {bank * L:.3g} H ({spiral[0]:g} turns, "
                                   f"{spiral[1] * 1e6:.3g} µm across; modified Wheeler, Mohan 1999), "
                                   f"self-resonance {design.lc_self_resonance:.3g} Hz"),
                     BillItem("line capacitors", area=N * bank * C / t.cap_density, count=N,
                              note=f"{bank * C:.3g} F per section in banks; constant-k line, Z0 = 50 Ω"),
                     BillItem("element-bank switches", area=t.switch_area * 2 * N, count=2 * N,
                              note="one per spiral tap, one per capacitor bank; drivers not billed")]
            devices = sum(i.area for i in items)
            items.append(BillItem("layout overhead", area=design.lc_area - devices, count=1,
                                  note=f"active area = {t.layout_overhead:g} × the elements "
                                       "(card's layout_overhead)"))
            counts = {"inductors": N, "capacitors": N, "switches": 2 * N}
            return Bill.from_items(items, active_time=design.busy_time, bw_internal=bw, counts=counts)
        c = np.asarray(design.node_capacitance)
        own = np.asarray(design.node_own_capacitance) if design.node_own_capacitance else np.zeros(n)
        drawn = np.maximum(c - own, 0.0)
        speed = max(1.0, 1.0 / a)  # bias for the faster of the two states
        A = np.abs(np.array(design.A))
        B = np.abs(np.array(design.B))
        summer = np.array([r == "summer" for r in design.node_roles]) if design.node_roles \
            else np.zeros(n, bool)
        items = [BillItem("node capacitors", area=float(np.sum(drawn)) / t.cap_density, count=n,
                          note=f"{np.min(c):.3g} to {np.max(c):.3g} F per node (the cells' own "
                               f"{np.sum(c - drawn):.3g} F of it not drawn), for "
                               f"{design.snr_required:.3g} dB at a {design.swing:.3g} V swing "
                               "(kT/C, least total gm)")]
        cells = 0
        for name, rows, note in (
                ("integrator transconductors", ~summer, "integrators, damping, section inputs"),
                ("summer transconductors", summer, "section outputs: feed-through, "
                 "feed-forward, load; pole %.3g rad/s" % design.summer_pole)):
            if not rows.any():
                continue
            g = np.concatenate([(c[:, None] * A)[rows][A[rows] != 0], (c * B)[rows][B[rows] != 0]])
            # a transconductance above one cell's gm_max is cells in parallel (area); the
            # limits say when that is past what the card calls practical
            k = int(sum(math.ceil(v * speed / t.gm_max) for v in g))
            power = sum(costs.transconductor_power(v * speed, t.gm_over_id, t.supply) for v in g)
            cells += k
            items.append(BillItem(name if summer.any() else "transconductors",
                                  area=k * t.gm_cell_area, power=power, count=k,
                                  note=f"{note}; {g.size} gm, total {np.sum(g) * speed:.3g} S; "
                                       f"differential pairs at gm/I_D = {t.gm_over_id:g} S/A, "
                                       f"×{costs.GM_BIAS_OVERHEAD:g} for bias and CMFB"))
        items.append(BillItem("bias switches", area=t.switch_area * cells, count=cells,
                              note="one per cell: its tail current steps by 1/α (summers too)"))
        total = costs.gm_c_area(float(np.sum(drawn)), t.cap_density, cells, t.gm_cell_area,
                                t.layout_overhead, switches=cells, switch_area=t.switch_area)
        items.append(BillItem("layout overhead", area=total - sum(i.area for i in items), count=1,
                              note=f"active area = {t.layout_overhead:g} × the devices (wiring, "
                                   "bias, decoupling, switch drivers; card's layout_overhead)"))
        counts = {"transconductors": cells, "capacitors": n, "switches": cells}
        return Bill.from_items(items, active_time=design.busy_time, bw_internal=bw, counts=counts)

    # -------------------------------------------------------------------------------------
    def limits(self, design: SwitchedDesign, params: SwitchedParams, technology) -> tuple[Limit, ...]:
        t = technology
        rg = t.gm_factor / design.gm_factor
        rc = t.cap_factor / design.cap_factor
        area = self.bill(design, params, t).area
        out = []
        if design.realization == "lc":
            out.append(Limit("spiral self-resonance", need=design.band_high,
                             allowed=design.lc_self_resonance, units="Hz",
                             note="highest signal frequency against the spirals' self-resonance "
                                  "(track capacitance to the substrate, Yue-Wong)"))
        else:
            speed = max(1.0, 1.0 / design.factor)
            out += [
                Limit("highest filter pole", need=design.max_pole * rg / rc,
                      allowed=costs.gm_cell_pole(t.gm_parasitic_cap) * rg, units="Hz",
                      note="the gm cell's own pole 1/(2π·gm_parasitic_cap)"),
                Limit("gm cells' own capacitance", need=design.own_share, allowed=1.0,
                      note="Perron root of the cells' own capacitance over the node capacitance; "
                           "at 1 no node capacitance holds its cells"),
                Limit("gm of one transconductor", need=max(design.gms, default=0.0) * speed,
                      allowed=t.gm_max, units="S", note="largest practical gm of one cell"),
            ]
            if design.max_q > 0:
                out.append(Limit("section Q against the integrators' gain", need=2.0 * design.max_q,
                                 allowed=t.gm_intrinsic_gain,
                                 note="a two-integrator loop reaches Q ≈ gm·r_o/2 at most"))
        # the output SNR is a target the sizing meets, not a process limit: snr_db reports it
        out.append(Limit("die area", need=area, allowed=t.die_area, units="m²",
                         note="one die of the card"))
        return tuple(out)


def _scale_nodes(system: lti.StateSpace, x: Pulse, delay: float):
    """Dynamic-range scaling of a realization: node voltages x_i → x_i/s_i with s_i the peak
    of node i over the peak of the output, both for the design pulse `x`.

    The similarity A → S⁻¹AS, B → S⁻¹B, C → CS (S = diag s) keeps the transfer function and
    (by the scaling theorem) holds after the switch too, since the states only play out
    slower or faster. What changes is each transconductance (C_node·|A_ij|) and so the noise
    each node injects and its gain to the output: no node is left with a small swing that
    the output must amplify, nor with a large swing that overloads it first. This is the
    classical rule of scaling every integrator output to the same maximum (Schaumann & Van
    Valkenburg, *Design of Analog Filters*, from memory).

    Returns the scaled system and s (dimensionless, shape (n,)).
    """
    A = np.asarray(system.A)
    B = np.asarray(system.B)
    C = np.asarray(system.C)
    t_end = x.t_end + 3.0 * delay + 2 * (x.t_end - x.t0)
    N = int(math.ceil((t_end - x.t0) * x.rate)) + 1
    u = np.concatenate([x.values, np.zeros(max(N - x.n, 0))])
    nodes = _node_waveforms(A, B, u, x.dt)
    y = nodes.T @ C + float(np.asarray(system.D)) * u
    pk = np.max(np.abs(nodes), axis=1)
    s = pk / np.max(np.abs(y))
    s = np.where(s > 0, s, 1.0)  # a node that never moves keeps its scale
    return lti.StateSpace(A * s[None, :] / s[:, None], B / s, C * s, system.D), s


def _node_waveforms(A, B, u, dt: float) -> np.ndarray:
    """Every node voltage of dx/dt = A x + B u for samples `u` (FOH, exact), shape (n, N).

    With z = x − G1·u the FOH recursion is z[k+1] = Φ z[k] + B_d u[k] (:mod:`timescale.numerics.lti`),
    so z is the convolution of u with the columns Φ^p B_d (built by doubling) — one FFT
    convolution for all nodes instead of a simulation with one read-out per node.
    """
    Phi, G0, G1 = lti.foh_step(A, B, dt)
    Bd = Phi @ G1 + G0
    N = u.size
    n = A.shape[0]
    V = np.stack([Bd, G1], axis=1)[:, :, None]  # (n, 2, p): Φ^p B_d and Φ^p G1
    Pw = Phi
    while V.shape[2] < N:
        V = np.concatenate([V, np.einsum("ij,jkp->ikp", Pw, V)], axis=2)
        Pw = Pw @ Pw
    V = V[:, :, :N]
    z = sfft.irfft(sfft.rfft(V[:, 0], 2 * N, axis=1) * sfft.rfft(u, 2 * N), 2 * N, axis=1)[:, :N - 1]
    z = np.concatenate([np.zeros((n, 1)), z], axis=1) - V[:, 1] * u[0]  # z[0] = x[0] − G1 u[0], x[0] = 0
    return z + G1[:, None] * u


def _switch_instant(x: Pulse, system: lti.StateSpace, delay: float, thr: float):
    """Best switch instant for the unswitched response: minimizes the larger of the input left
    after it and the output already present before it (both relative to their peaks).

    Returns (t_s, leakage, t_tail) with t_tail the last instant |y| > thr·peak.
    """
    t_end = x.t_end + delay + 2 * (x.t_end - x.t0)
    n = int(math.ceil((t_end - x.t0) * x.rate)) + 1
    u = np.concatenate([x.values, np.zeros(max(n - x.n, 0))])
    y = lti.simulate(system, u, x.dt)[0]
    t = x.t0 + np.arange(u.size) * x.dt
    ax = np.abs(u) / np.max(np.abs(u))
    ay = np.abs(y) / np.max(np.abs(y))
    left = np.maximum.accumulate(ax[::-1])[::-1]  # input still to come at or after t
    started = np.maximum.accumulate(ay)  # output already seen at or before t
    cost = np.maximum(np.concatenate([left[1:], [0.0]]), started)
    k = int(np.argmin(cost))
    k_last = k
    while k_last + 1 < cost.size and cost[k_last + 1] == cost[k]:
        k_last += 1
    ts = t[k] + 0.5 * ((k_last - k) + 1) * x.dt  # middle of the best gap, between samples
    tail = np.flatnonzero(ay > thr)
    return float(ts), float(cost[k]), float(t[tail[-1]])


@hookimpl
def timescale_methods():
    return [SwitchedBandwidth()]
