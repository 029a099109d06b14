"""Built-in method ``switched-bandwidth``: a delay filter whose bandwidth is switched while the
pulse is stored in it.

Principle (scaling theorem, Oppenheim & Willsky, *Signals and Systems*): an LTI delay filter of
group delay τ is driven by a pulse shorter than τ. At an instant t_s after the input has ended
and before the delayed output begins, every conductance and transconductance is divided by α
while the capacitors keep their charge (A → A/α, B → B/α). From then on the stored natural
response plays out α times slower (α > 1) or faster (α < 1): same peak, duration × α.

Prototypes: Padé all-pass approximant of e^{−sτ} (default: flat magnitude, so the only error is
phase), Bessel–Thomson (maximally flat delay, but its impulse response spreads as τ/√(2n−1),
so short pulses need very high orders) and a constant-k LC ladder. Realizations: gm-C (each
inductor a gyrator-C, L = C/(gm1·gm2)) and passive LC (bill only differs; the simulation is the
ideal network, gm non-idealities do not apply).

Simulation uses the exact piecewise-LTI kernel :mod:`timescale.numerics.lti`. With ``gm_limit`` set, the
soft-limited path (RK4) is used: it is one to two orders of magnitude slower.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from timescale.data.signal import resample_to
from timescale.numerics import costs, lti
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

from . import prototypes
from .prototypes import Prototype, build

__all__ = ["SwitchedBandwidth", "SwitchedParams", "SwitchedDesign", "timescale_methods",
           "prototypes", "passive_line", "gm_c_matrices"]

_BOLTZMANN = costs.BOLTZMANN
_MIN_NODE_C = 10e-15  # smallest node capacitance used, F (parasitics; common practice, no source)


@dataclass(frozen=True)
class SwitchedParams:
    """Parameters of the ``switched-bandwidth`` method (every non-ideality defaults to off)."""

    prototype: str = param("pade", doc="delay prototype", choices=("pade", "bessel", "ladder"))
    realization: str = param("gm-c", doc="gm-C with gyrator-C inductors, or passive LC",
                             choices=("gm-c", "lc"))
    order: int = param(0, doc="prototype order (ladder: sections); 0 sizes it from the pulse")
    max_order: int = param(40, doc="largest order (ladder: sections) the sizing may choose")
    delay: float = param(0.0, units="s", doc="DC group delay; 0 sizes it from the pulse")
    fidelity_target: float = param(0.02, doc="largest NRMSE of the unswitched delayed pulse")
    leakage_target: float = param(1e-3, doc="largest input left / output started at the switch, "
                                  "relative to the peaks")
    repetition: float = param(0.0, units="s", doc="pulse repetition interval; 0 for a single pulse")
    # 300 µV rms against a ~0.4 V output peak is 62 dB peak SNR: about 10 dB under the
    # quantization noise of an 8-bit ADC at 0.8 V full scale (LSB/√12 ≈ 0.9 mV), so the
    # stretcher does not limit the slow ADC it feeds (common practice, no source)
    noise_target: float = param(300e-6, units="V", doc="output rms noise the node capacitance is sized for")
    termination: str = param("matched", doc="ladder ends", choices=("matched", "half-section"))
    jitter: float = param(0.0, units="s", doc="rms jitter of the switch instant")
    transition: float = param(0.0, units="s", doc="time over which gm ramps linearly to its new value")
    transition_segments: int = param(16, doc="constant pieces approximating the gm ramp")
    gm_mismatch: float = param(0.0, doc="relative rms mismatch of each transconductor, per trial")
    gm_ro: float = param(0.0, doc="transconductor intrinsic gain gm·r_o; 0 for ideal (no output conductance)")
    noise: bool = param(False, doc="add transconductor thermal noise 4kTγ·gm (exact covariance + samples)")
    noise_gamma: float = param(0.0, doc="excess noise factor γ; 0 takes the technology's")
    gm_limit: float = param(0.0, units="V", doc="soft-limit (tanh) input range of every transconductor; 0 for linear")
    substeps: int = param(8, doc="RK4 steps per sample on the soft-limit path")
    summer_bandwidth: float = param(0.0, doc="gm-C Padé: pole of each section's output summer "
                                    "over the largest section ω0; 0 sizes it from fidelity_target")


@dataclass(frozen=True, kw_only=True)
class SwitchedDesign(Design):
    """A sized switched-bandwidth delay filter (SI units).

    Attributes
    ----------
    prototype : str
        Prototype family.
    order : int
        Order (ladder: sections); the state count is ``states``.
    states : int
        Number of capacitor nodes.
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
    node_capacitance : tuple of float
        Capacitance of each node, F (sized per node for the noise target at least total gm).
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
        Σ of node_noise_factors: output noise variance × C/(kTγ) if every node had the same
        capacitance C (dimensionless).
    busy_time : float
        From the first input instant to the end of the stretched output, s.
    A, B, C : tuple
        Nominal state space (nested tuples; A, B in 1/s).
    D : float
    lc_sections : int
        Sections of the passive LC line with the same delay and fidelity (0 if none fits).
    lc_inductance, lc_capacitance : float
        Its per-section L (H) and C (F), Z0 = 50 Ω.
    lc_area : float
        Its area (spirals by the modified Wheeler formula + capacitors), m².
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
    A: tuple = ()
    B: tuple = ()
    C: tuple = ()
    D: float = 0.0
    elements: dict = field(default_factory=dict)
    node_scale: tuple = ()
    node_roles: tuple = ()
    summer_pole: float = 0.0
    node_noise_factors: tuple = ()
    lc_sections: int = 0
    lc_inductance: float = 0.0
    lc_capacitance: float = 0.0
    lc_area: float = 0.0

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


def _fidelity(proto: Prototype, f, P):
    """NRMSE of the unswitched output against x(t − τ): weighted spectral error (Parseval)."""
    H = proto.response(f)
    err = np.abs(H - np.exp(-2j * np.pi * f * proto.delay)) ** 2
    return float(math.sqrt(np.sum(P * err) / np.sum(P)))


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
        return pr, _fidelity(pr, f, P), 0.0
    K = len(pr.elements["sections"])
    w0 = max(e["w0"] for e in pr.elements["sections"])
    w = 2 * np.pi * f

    def err(ws):
        H = prototypes.summer_response(pr, ws, f)
        e = np.abs(H - np.exp(-1j * w * (delay + K / ws))) ** 2
        return float(math.sqrt(np.sum(P * e) / np.sum(P)))

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
    Returns (prototype, nrmse, ω_s, met)."""
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


def _size_capacitors(A, B, C, ktg: float, v_n: float, c_min: float):
    """Node capacitances for an output noise v_n (V rms) at the least total gm.

    Node i's transconductors (gm = C_i·|A_ij|, Σ_j = C_i·g_i) inject 4kTγ·C_i·g_i into it,
    so the output variance is kTγ·Σ_i F_i/C_i with F_i = 2·g_i·W_ii (W the observability
    Gramian, Aᵀ W + W A + CᵀC = 0), and the total gm is Σ_i C_i·g_i. Minimizing the latter
    with the former fixed (Lagrange) gives C_i ∝ √(F_i/g_i); nodes that would fall below
    `c_min` are held there and the rest share what is left of the budget.

    Returns (C_i in F, F_i).
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
    return np.maximum(c, c_min), F


def passive_line(delay: float, f, P, target: float, technology, max_sections: int = 400,
                 z0: float = 50.0):
    """The constant-k passive LC line (Z0 = `z0`) with DC group delay `delay` that meets the
    fidelity `target`; returns (sections, L, C, area) or None when none up to `max_sections`."""
    # fidelity error of the ladder falls roughly as 1/N²: bisection on the section count
    lo, hi = 1, max_sections
    if _fidelity(prototypes.ladder(hi, delay), f, P) > target:
        return None
    while lo < hi:
        mid = (lo + hi) // 2
        if _fidelity(prototypes.ladder(mid, delay), f, P) <= target:
            hi = mid
        else:
            lo = mid + 1
    pr = prototypes.ladder(lo, delay, z0=z0)
    L, C = pr.elements["L"], pr.elements["C"]
    spiral = costs.spiral_for_inductance(L, technology.inductor_track_width,
                                         technology.inductor_track_spacing)
    area = lo * (spiral.area + C / technology.cap_density)
    return lo, L, C, area


class SwitchedBandwidth(Method):
    """Delay filter with switched bandwidth (see the module docstring)."""

    name = "switched-bandwidth"
    summary = "delay filter whose gm are scaled by 1/α while the pulse is stored in it"
    Params = SwitchedParams
    version = "0.1.0"
    identity_tolerance = 0.03
    factor_tolerance = 0.05

    # -------------------------------------------------------------------------------------
    def design(self, pulse: Pulse, factor: float, params: SwitchedParams, technology) -> SwitchedDesign:
        a = float(factor)
        if not (math.isfinite(a) and a > 0):
            raise ValueError(f"factor must be finite and > 0, got {factor!r}")
        x = pulse.row(0)
        for name in ("fidelity_target", "leakage_target"):
            v = getattr(params, name)
            if not 0 < v < 1:
                raise ValueError(f"{name} must lie strictly between 0 and 1, got {v!r}")
        for name in ("delay", "repetition", "jitter", "transition", "gm_mismatch", "gm_ro",
                     "noise_gamma", "gm_limit"):
            if getattr(params, name) < 0:
                raise ValueError(f"{name} must be >= 0, got {getattr(params, name)!r}")
        if params.noise_target <= 0:
            raise ValueError(f"noise_target must be > 0 V, got {params.noise_target!r}")
        if params.order < 0 or params.max_order < 1:
            raise ValueError(f"order must be >= 0 and max_order >= 1, got {params.order!r}, {params.max_order!r}")
        if params.transition_segments < 1 or params.substeps < 1:
            raise ValueError("transition_segments and substeps must be >= 1")
        v = x.values
        peak = float(np.max(np.abs(v)))
        if peak == 0:
            raise ValueError("pulse is identically zero; nothing to delay")
        thr = params.leakage_target
        on = np.flatnonzero(np.abs(v) > thr * peak)
        t_a, t_b = float(x.t[on[0]]), float(x.t[on[-1]])
        span = max(t_b - t_a, 2 * x.dt)
        bw = float(x.occupied_bandwidth())
        # spectrum weights for the fidelity criterion (zero-padded, one-sided)
        nfft = 1 << int(math.ceil(math.log2(8 * x.n)))
        f, X = x.spectrum(nfft)
        P = np.abs(X) ** 2
        keep = P > 1e-16 * P.max()
        f, P = f[keep], P[keep]

        m = 1 if a >= 1 else int(math.ceil(1.0 / a - 1e-9))  # finer grid for compression
        sim_rate = x.rate * m
        if params.delay > 0 and params.delay < span:
            raise ValueError(
                f"delay {params.delay:.4g} s is shorter than the pulse ({span:.4g} s above "
                f"{thr:g} of its peak): the input would still be on when the output starts; "
                "give a longer delay or 0 to size it")
        tau = params.delay if params.delay > 0 else 1.2 * span
        kind = params.prototype
        hi = params.max_order
        notes = []
        summed = kind == "pade" and params.realization == "gm-c"
        best = None  # the attempt with the least leakage, kept if none meets the target
        for attempt in range(16):
            if params.order > 0:
                proto, fid, ws = _fit(kind, params.order, tau, f, P, params.fidelity_target,
                                      params.termination, summed, params.summer_bandwidth)
                ok = fid <= params.fidelity_target
            else:
                proto, fid, ws, ok = _search_order(kind, tau, f, P, params.fidelity_target, 1, hi,
                                                   params.termination, summed,
                                                   params.summer_bandwidth)
            real_sys, real_delay, roles = _realize(proto, ws)
            t_s, leak, t_tail = _switch_instant(x, real_sys, real_delay, thr)
            if leak <= thr or params.delay > 0:
                break
            if best is None or leak < best[0]:
                best = (leak, proto, fid, ws, ok, real_sys, real_delay, roles, t_s, t_tail)
            tau *= 1.15
        else:
            # a comparison shows the shortfall in its leakage and fidelity metrics: keep the
            # least-leaky design tried (the warning below says by how much it misses)
            leak, proto, fid, ws, ok, real_sys, real_delay, roles, t_s, t_tail = best
            notes.append(f"no delay up to {tau:.4g} s brought the leakage below {thr:g}")
        if fid > params.fidelity_target:
            # a comparison shows the shortfall in its fidelity metrics: design the best order
            # found and say so, rather than leave the cell empty
            what = (f"order {params.order}" if params.order > 0 else
                    f"no order up to max_order={hi} (best: order {proto.order})")
            warnings.warn(
                f"{what} of a {kind} prototype with delay {proto.delay:.4g} s gives NRMSE "
                f"{fid:.3g} of the delayed pulse, above fidelity_target "
                f"{params.fidelity_target:g}; designed as the best found"
                + ("; prototype='pade' does better (a Bessel-Thomson impulse response spreads "
                   "as τ/√(2n−1))" if kind == "bessel" else ""), DesignWarning, stacklevel=2)
            notes.append(f"fidelity {fid:.3g} above target {params.fidelity_target:g}")
        if leak > thr:
            warnings.warn(f"leakage at the switch instant is {leak:.3g} (target {thr:g}): the input "
                          "is still on or the output has begun", DesignWarning, stacklevel=2)
        record_end = t_s + a * (t_tail - t_s) + 0.25 * span
        busy = record_end - t_a
        if params.repetition > 0 and busy > params.repetition:
            amax = (params.repetition - 0.25 * span - (t_s - t_a)) / (t_tail - t_s)
            raise ValueError(
                f"the stretched output ends {busy:.4g} s after the pulse starts, beyond the "
                f"repetition interval {params.repetition:.4g} s; the largest factor that fits is "
                f"about {max(amax, 0):.3g}")
        if bw / a > 0.4 * sim_rate:
            warnings.warn(f"the compressed pulse occupies {bw / a:.4g} Hz, near the Nyquist "
                          f"frequency of {sim_rate:.4g} Hz samples", SamplingWarning, stacklevel=2)
        # dynamic-range scaling: every node's peak (for this pulse) equal to the output's
        sysm, node_scale = _scale_nodes(real_sys, x, real_delay)
        A = np.asarray(sysm.A)
        B = np.asarray(sysm.B)
        # node capacitances from the noise target (Lyapunov of the structure, least total gm)
        gamma = params.noise_gamma or technology.gm_noise_gamma
        T = technology.temperature
        c_node, Fi = _size_capacitors(A, B, np.asarray(sysm.C), _BOLTZMANN * T * gamma,
                                      params.noise_target, _MIN_NODE_C)
        F = float(np.sum(Fi))
        Ag = c_node[:, None] * np.abs(A)
        gms = tuple(float(g) for g in np.concatenate([Ag[A != 0], (c_node * np.abs(B))[B != 0]]))
        if max(gms) * max(1.0, 1.0 / a) > technology.gm_max:
            notes.append(f"largest gm {max(gms) * max(1, 1 / a):.3g} S exceeds one cell "
                         f"({technology.gm_max:.3g} S): cells in parallel")
        lc = passive_line(proto.delay, f, P, params.fidelity_target, technology)
        if lc is None:
            notes.append("no passive LC line up to 400 sections meets the fidelity target")
            lc = (0, 0.0, 0.0, 0.0)
        notes.append(f"{kind} order {proto.order if kind != 'ladder' else proto.order // 2}, "
                     f"delay {real_delay:.4g} s, switch at {t_s:.4g} s"
                     + (f", summer pole {ws:.3g} rad/s" if ws > 0 else ""))
        return SwitchedDesign(
            factor=a, notes=tuple(notes), prototype=kind,
            order=proto.order if kind != "ladder" else proto.order // 2,
            states=A.shape[0], delay=real_delay, t_switch=t_s, record_end=record_end,
            sim_rate=sim_rate, input_span=(t_a, t_b), leakage_design=leak,
            fidelity_design=fid, bw_in=bw, node_capacitance=tuple(float(c) for c in c_node),
            gms=gms, node_roles=tuple(roles), summer_pole=float(ws),
            node_noise_factors=tuple(float(v) for v in Fi),
            output_noise_factor=F, busy_time=busy,
            A=tuple(map(tuple, A)), B=tuple(B), C=tuple(np.asarray(sysm.C)),
            D=float(np.asarray(sysm.D)), elements=dict(proto.elements),
            node_scale=tuple(float(v) for v in node_scale),
            lc_sections=lc[0], lc_inductance=lc[1], lc_capacitance=lc[2], lc_area=lc[3])

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
        passive = params.realization == "lc"
        if passive and (params.gm_mismatch or params.gm_ro or params.gm_limit):
            warnings.warn("gm_mismatch, gm_ro and gm_limit do not apply to a passive LC "
                          "realization; ignored", DesignWarning, stacklevel=2)
        K = int(trials)
        # draws in a fixed order so the same seed gives the same result
        mis_a = rng.standard_normal((K,) + A.shape)
        mis_b = rng.standard_normal((K,) + B.shape)
        jit = rng.standard_normal(K)
        if params.gm_mismatch > 0 and not passive:
            A = A * (1 + params.gm_mismatch * mis_a * (A != 0))
            B = B * (1 + params.gm_mismatch * mis_b * (B != 0))
        if params.gm_ro > 0 and not passive:
            # each transconductor loads its output node with gds = gm/(gm·r_o)
            loss = (np.abs(A).sum(axis=-1) + np.abs(B)) / params.gm_ro
            A = A - loss[..., :, None] * np.eye(A.shape[-1])
        Q = None
        if params.noise:
            gamma = params.noise_gamma or tech.gm_noise_gamma
            Q = gm_c_matrices(A, B, np.asarray(design.node_capacitance), tech.temperature, gamma)
        sysm = lti.StateSpace(A, B, C, design.D, Q)
        t_sw = design.t_switch - x.t0
        if params.jitter > 0:
            t_sw = t_sw + params.jitter * jit
        sched = lti.Schedule.switched(sysm, a, t_sw, ramp=params.transition,
                                      segments=params.transition_segments)
        if params.gm_limit > 0 and not passive:
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
        mets = {
            "leakage": Metric(leak, "", "output at the switch instant relative to its peak"),
            "delay": Metric(design.delay, "s", "DC group delay of the filter"),
            "bandwidth_used": Metric(design.bw_in * max(1.0, 1.0 / a), "Hz",
                                     "highest signal bandwidth the filter passes"),
            "filter_order": Metric(float(design.states), "", "number of filter states"),
            "lc_area": Metric(design.lc_area, "m²", "area of the passive LC line alternative"),
        }
        clean = None
        out = Pulse(values=y, rate=rate, t0=x.t0, units=x.units, name=f"{x.name} switched")
        if params.noise:
            var = np.broadcast_to(lti.output_variance(sched, N, dt), (K, N))
            noise = lti.sample_noise(sched, N, dt, rng, trials=K)
            kpk = np.argmax(np.abs(y), axis=1)
            rms = np.sqrt(var[np.arange(K), kpk])
            mets["noise_rms"] = Metric(rms, "V", "output rms noise at the output peak")
            mets["snr_db"] = Metric(20 * np.log10(peak / rms), "dB", "output peak over rms noise")
            clean = out
            out = out.with_values(y + noise)
        return Simulation(pulse=out, metrics=mets, path=path, clean=clean)

    # -------------------------------------------------------------------------------------
    def bill(self, design: SwitchedDesign, params: SwitchedParams, technology) -> Bill:
        a = design.factor
        n = design.states
        bw = design.bw_in * max(1.0, 1.0 / a)
        if params.realization == "lc":
            items = [BillItem("spiral inductors", area=design.lc_area, count=design.lc_sections,
                              note="constant-k line, Z0 = 50 Ω, modified Wheeler (Mohan 1999)"),
                     BillItem("switch network", area=technology.switch_area * 2 * design.lc_sections,
                              count=2 * design.lc_sections, note="element-bank switches")]
            counts = {"inductors": design.lc_sections, "capacitors": design.lc_sections}
            return Bill.from_items(items, active_time=design.busy_time, bw_internal=bw, counts=counts)
        c = np.asarray(design.node_capacitance)
        speed = max(1.0, 1.0 / a)  # bias for the faster of the two states
        A = np.abs(np.array(design.A))
        B = np.abs(np.array(design.B))
        summer = np.array([r == "summer" for r in design.node_roles]) if design.node_roles \
            else np.zeros(n, bool)
        items = [BillItem("node capacitors", area=float(np.sum(c)) / technology.cap_density, count=n,
                          note=f"{np.min(c):.3g} to {np.max(c):.3g} F, sized for "
                               f"{params.noise_target:.3g} V rms (kT/C, least total gm)")]
        cells = 0
        for name, rows, note in (
                ("integrator transconductors", ~summer, "integrators, damping, section inputs"),
                ("summer transconductors", summer, "section outputs: feed-through, "
                 "feed-forward, load; pole %.3g rad/s" % design.summer_pole)):
            if not rows.any():
                continue
            g = np.concatenate([(c[:, None] * A)[rows][A[rows] != 0], (c * B)[rows][B[rows] != 0]])
            k = int(sum(math.ceil(v * speed / technology.gm_max) for v in g))
            current = sum(costs.bias_current(v * speed, technology.gm_over_id) for v in g)
            cells += k
            items.append(BillItem(name if summer.any() else "transconductors",
                                  area=k * technology.gm_cell_area,
                                  power=current * technology.supply, count=k,
                                  note=f"{note}; {g.size} gm, total {np.sum(g):.3g} S; "
                                       f"gm/I_D = {technology.gm_over_id:g} S/A"))
        items.append(BillItem("bias switch", area=technology.switch_area, count=1,
                              note="scales every bias current (summers too) by 1/α"))
        counts = {"transconductors": cells, "capacitors": n}
        return Bill.from_items(items, active_time=design.busy_time, bw_internal=bw, counts=counts)


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
    n = A.shape[0]
    t_end = x.t_end + 3.0 * delay + 2 * (x.t_end - x.t0)
    N = int(math.ceil((t_end - x.t0) * x.rate)) + 1
    u = np.concatenate([x.values, np.zeros(max(N - x.n, 0))])
    # one run with one read-out per node (a batch of n read-outs of the same system)
    nodes = lti.simulate(lti.StateSpace(A, B, np.eye(n), 0.0), u, x.dt)
    y = nodes.T @ C + float(np.asarray(system.D)) * u
    pk = np.max(np.abs(nodes), axis=1)
    s = pk / np.max(np.abs(y))
    s = np.where(s > 0, s, 1.0)  # a node that never moves keeps its scale
    return lti.StateSpace(A * s[None, :] / s[:, None], B / s, C * s, system.D), s


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
