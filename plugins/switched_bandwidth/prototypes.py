"""Delay prototypes as well-conditioned state-space models with their element values.

Every prototype is a cascade of first- and second-order gm-C sections (Bessel–Thomson, Padé
all-pass; the Padé gm-C realization with one output summer per section is
:func:`summed_cascade`) or a constant-k LC ladder whose inductor currents are carried as gyrator-C node
voltages (i·Z0). In each, a state is a node voltage on a capacitor, a nonzero entry of A or B
is one transconductor (diagonal entries are damping / termination conductances) and C, D are
the read-out. With equal node capacitance C_node, every transconductance is C_node·|A_ij|.

Sign convention: H(s) = C (sI − A)⁻¹ B + D, signals e^{+jωt}; the ideal delay is e^{−sτ}.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from timescale.numerics.lti import StateSpace

__all__ = ["Prototype", "bessel", "pade", "ladder", "build", "pade_group_delay", "summed_cascade",
           "summer_response", "delay_error"]


@dataclass(frozen=True, eq=False)
class Prototype:
    """A delay prototype.

    Attributes
    ----------
    kind : str
        "bessel", "pade" or "ladder".
    order : int
        Number of states (for the ladder: 2 × sections).
    delay : float
        DC group delay, s.
    system : StateSpace
        The realization (A, B in 1/s).
    poles : ndarray
        Poles, rad/s (empty for the ladder).
    elements : dict
        Physical element values (SI): per-section ω0 (rad/s) and Q, or ladder L, C, Z0.
    """

    kind: str
    order: int
    delay: float
    system: StateSpace
    poles: np.ndarray
    elements: dict

    def response(self, f) -> np.ndarray:
        """H(j2πf) at frequencies f (Hz)."""
        s = 2j * np.pi * np.asarray(f, dtype=float)
        if self.kind == "bessel":
            p = self.poles
            return np.prod((-p)[None, :] / (s[:, None] - p[None, :]), axis=1)
        if self.kind == "pade":
            p = self.poles
            return np.prod((-s[:, None] - p[None, :]) / (s[:, None] - p[None, :]), axis=1)
        e = self.elements
        return _ladder_response(s, e["sections"], e["L"], e["C"], e["Z0"], e["termination"])


def delay_error(H, f, delay: float, P) -> float:
    """NRMSE of a response H(f) against the pure delay e^{−j2πf·delay}, weighted by the input's
    energy spectrum P(f) (Parseval: the time-domain NRMSE of the unswitched output)."""
    err = np.abs(np.asarray(H) - np.exp(-2j * np.pi * np.asarray(f) * delay)) ** 2
    return float(math.sqrt(np.sum(P * err) / np.sum(P)))


def _cascade(sections):
    """Series connection of SISO sections (A, B, C, D): the output of one drives the next."""
    A, B, C, D = sections[0]
    for A2, B2, C2, D2 in sections[1:]:
        n1, n2 = A.shape[0], A2.shape[0]
        An = np.zeros((n1 + n2, n1 + n2))
        An[:n1, :n1] = A
        An[n1:, :n1] = np.outer(B2, C)
        An[n1:, n1:] = A2
        B = np.concatenate([B, B2 * D])
        C = np.concatenate([D2 * C, C2])
        A, D = An, D2 * D
    return A, B, C, D


def _sections_from_poles(poles, allpass: bool):
    """First/second-order sections, ordered by rising Q (common practice, no source)."""
    real = sorted(p.real for p in poles if abs(p.imag) < 1e-9 * abs(p))
    pairs = sorted((p for p in poles if p.imag > 1e-9 * abs(p)), key=lambda p: abs(p) / (-2 * p.real))
    secs, elems = [], []
    for p in real:
        a = -p
        if allpass:  # (a − s)/(a + s) = −1 + 2a/(s + a)
            secs.append((np.array([[-a]]), np.array([a]), np.array([2.0]), -1.0))
        else:
            secs.append((np.array([[-a]]), np.array([a]), np.array([1.0]), 0.0))
        elems.append({"w0": a, "Q": 0.5, "order": 1})
    for p in pairs:
        w0 = abs(p)
        q = w0 / (-2 * p.real)
        # two-integrator loop: v1 band-pass node, v2 low-pass node, balanced gm = ω0·C
        A = np.array([[-w0 / q, -w0], [w0, 0.0]])
        B = np.array([w0, 0.0])
        if allpass:  # 1 − 2(ω0/Q)s/D(s) = 1 − (2/Q)·v1
            secs.append((A, B, np.array([-2.0 / q, 0.0]), 1.0))
        else:
            secs.append((A, B, np.array([0.0, 1.0]), 0.0))
        elems.append({"w0": w0, "Q": q, "order": 2})
    return secs, elems


@functools.lru_cache(maxsize=128)
def _unit_bessel_poles(order: int) -> np.ndarray:
    """Poles of the unit-DC-delay Bessel–Thomson filter (scipy, norm='delay')."""
    from scipy import signal as ss  # imported here: scipy.signal is slow to import

    _, p, _ = ss.bessel(order, 1.0, analog=True, norm="delay", output="zpk")
    p = np.asarray(p)
    p.setflags(write=False)
    return p


def _check_order(order, delay):
    if isinstance(order, bool) or not isinstance(order, (int, np.integer)) or order < 1:
        raise ValueError(f"order must be a whole number >= 1, got {order!r}")
    if not (isinstance(delay, (int, float, np.floating)) and math.isfinite(delay) and delay > 0):
        raise ValueError(f"delay must be finite and > 0 s, got {delay!r}")


def bessel(order: int, delay: float) -> Prototype:
    """Bessel–Thomson low-pass of `order` with DC group delay `delay` (s).

    Poles from ``scipy.signal.bessel(order, 1, analog=True, norm='delay')`` (unit DC group
    delay; Thomson 1949) divided by `delay`.
    """
    _check_order(order, delay)
    p = _unit_bessel_poles(int(order)) / delay
    secs, elems = _sections_from_poles(p, allpass=False)
    A, B, C, D = _cascade(secs)
    return Prototype("bessel", order, float(delay), StateSpace(A, B, C, D), p, {"sections": elems})


def pade(order: int, delay: float) -> Prototype:
    """Padé [n/n] all-pass approximant of e^{−sτ}, τ = `delay`.

    The [n/n] Padé denominator of e^{−sτ} is the reverse Bessel polynomial θ_n(sτ/2), so its
    poles are 2/τ times the unit-delay Bessel poles; the zeros mirror them (|H| = 1).
    """
    _check_order(order, delay)
    p = 2.0 * _unit_bessel_poles(int(order)) / delay
    secs, elems = _sections_from_poles(p, allpass=True)
    A, B, C, D = _cascade(secs)
    return Prototype("pade", order, float(delay), StateSpace(A, B, C, D), p, {"sections": elems})


def pade_group_delay(order: int, delay: float, w) -> np.ndarray:
    """Group delay (s) of the Padé all-pass at angular frequencies `w` (rad/s): the sum over
    poles p of 2·(−Re p)/((ω − Im p)² + Re p²)."""
    from scipy import signal as ss  # imported here: scipy.signal is slow to import

    _, p, _ = ss.bessel(order, 1.0, analog=True, norm="delay", output="zpk")
    p = 2.0 * np.asarray(p) / delay
    w = np.asarray(w, dtype=float)[..., None]
    return np.sum(2 * (-p.real) / ((w - p.imag) ** 2 + p.real ** 2), axis=-1)


def _ladder_matrices(sections: int, termination: str):
    """Normalized ladder (per-section delay 1 s, Z0 = 1): states [i1·Z0, v1, …, iN·Z0, vN].

    Series L then shunt C per section, source resistance Z0 before the first inductor, load
    Z0 across the last capacitor. "half-section" makes the first inductor L/2 and the last
    capacitor C/2 (mid-series / mid-shunt ends, a closer match to the image impedance).
    """
    N = sections
    n = 2 * N
    A = np.zeros((n, n))
    B = np.zeros(n)
    lk = np.ones(N)
    ck = np.ones(N)
    if termination == "half-section":
        lk[0] = 0.5
        ck[-1] = 0.5
    for k in range(N):
        i, v = 2 * k, 2 * k + 1
        # L di/dt = v_prev − v_k   (scaled: d(iZ0)/dt = (v_prev − v_k)/t_sec for L = Z0·t_sec)
        A[i, v] = -1.0 / lk[k]
        if k == 0:
            A[i, i] = -1.0 / lk[k]  # source resistance Z0: v_prev = u − Z0·i1
            B[i] = 1.0 / lk[k]
        else:
            A[i, v - 2] = 1.0 / lk[k]
        # C dv/dt = i_k − i_{k+1}
        A[v, i] = 1.0 / ck[k]
        if k < N - 1:
            A[v, i + 2] = -1.0 / ck[k]
        else:
            A[v, v] = -1.0 / ck[k]  # load Z0
    C = np.zeros(n)
    C[-1] = 2.0  # read-out gain 2: matched DC gain 1/2 → 1
    return A, B, C


def _ladder_response(s, N, L, C, Z0, termination):
    lk = np.full(N, L)
    ck = np.full(N, C)
    if termination == "half-section":
        lk[0] *= 0.5
        ck[-1] *= 0.5
    a = np.ones_like(s)
    b = np.zeros_like(s)
    c = np.zeros_like(s)
    d = np.ones_like(s)
    for k in range(N):  # chain (ABCD) matrices: series L then shunt C
        z = s * lk[k]
        a, b, c, d = a, a * z + b, c, c * z + d
        y = s * ck[k]
        a, b, c, d = a + b * y, b, c + d * y, d
    RL = Rs = Z0
    return 2.0 * RL / (a * RL + b + Rs * (c * RL + d))


def ladder(sections: int, delay: float, termination: str = "matched", z0: float = 50.0) -> Prototype:
    """Constant-k LC ladder of `sections` (series L, shunt C) with DC group delay `delay`.

    Per section L = Z0·t_s, C = t_s/Z0 with t_s = √(LC) the section delay; cutoff
    f_c = 1/(π√(LC)) (Pozar, *Microwave Engineering*, from memory). t_s is set so that the
    whole terminated line, read out with gain 2, has DC group delay `delay`.
    """
    _check_order(sections, delay)
    if termination not in ("matched", "half-section"):
        raise ValueError(f"termination must be 'matched' or 'half-section', got {termination!r}")
    A, B, C = _ladder_matrices(sections, termination)
    # DC group delay of the unit line from its chain matrices: −arg H(jω)/ω at ω·N ≪ 1
    # (error of relative order (ωN)², below 1e-12 here); a dense solve would be O(N³)
    w = 1e-7 / sections
    unit = float(-np.angle(_ladder_response(np.array([1j * w]), sections, 1.0, 1.0, 1.0,
                                             termination))[0] / w)
    t_sec = delay / unit
    sysm = StateSpace(A / t_sec, B / t_sec, C, 0.0)
    elems = {"sections": int(sections), "L": z0 * t_sec, "C": t_sec / z0, "Z0": float(z0),
             "section_delay": t_sec, "cutoff": 1.0 / (math.pi * t_sec), "termination": termination}
    return Prototype("ladder", 2 * sections, float(delay), sysm, np.array([]), elems)


def build(kind: str, order: int, delay: float, termination: str = "matched") -> Prototype:
    """Build a prototype by family; for the ladder `order` counts sections."""
    if kind == "bessel":
        return bessel(order, delay)
    if kind == "pade":
        return pade(order, delay)
    if kind == "ladder":
        return ladder(order, delay, termination)
    raise ValueError(f"prototype must be 'bessel', 'pade' or 'ladder', got {kind!r}")


def summed_cascade(proto: Prototype, summer_pole: float):
    """The gm-C realization of a Padé all-pass as sections each driven only by the previous
    section's output node, through one summer per section.

    Per section (ω0, Q from the prototype; u_k the previous summer node, or the input):

    * second order, two-integrator loop: band-pass node v1, low-pass node v2,
      dv1/dt = ω0·(u_k − v2) − (ω0/Q)·v1,  dv2/dt = ω0·v1;
    * first order: dv/dt = a·(u_k − v);
    * summer node s_k, a transconductor from u_k and one from the section's node into a node
      loaded by a diode-connected transconductor (gm_L = ω_s·C_s) with its capacitance:
      ds/dt = ω_s·(u_k − (2/Q)·v1 − s) (all-pass 1 − 2(ω0/Q)s/D(s)), or
      ds/dt = ω_s·(2v − u_k − s) ((a − s)/(a + s) = −1 + 2a/(s + a)).

    The summer is a node with a finite pole ω_s = `summer_pole` (rad/s), not a memoryless sum:
    its transconductor noise is white, and only a capacitance on its node keeps the variance
    of that noise finite. So H(s) = H_Padé(s) · Π_k ω_s/(s + ω_s) (see :func:`summer_response`)
    and the DC group delay is τ + K/ω_s for K sections. Every nonzero of A or B is one
    transconductor reading one node voltage; no section reads any node but its own and the
    previous summer.

    Returns
    -------
    system : StateSpace
        The realization; output = the last summer node (D = 0).
    roles : tuple of str
        Per node: "band-pass", "low-pass", "first-order" or "summer".
    """
    if proto.kind != "pade":
        raise ValueError(f"summed_cascade realizes a 'pade' prototype, got {proto.kind!r}")
    if not (math.isfinite(summer_pole) and summer_pole > 0):
        raise ValueError(f"summer_pole must be finite and > 0 rad/s, got {summer_pole!r}")
    secs = _section_order(proto.elements["sections"])
    n = sum(e["order"] + 1 for e in secs)
    A = np.zeros((n, n))
    B = np.zeros(n)
    roles = []
    ws = float(summer_pole)
    prev = None

    def feed(i, g):  # transconductor from this section's input u_k into node i
        if prev is None:
            B[i] += g
        else:
            A[i, prev] += g

    k = 0
    for e in secs:
        if e["order"] == 1:
            a = e["w0"]
            v, s = k, k + 1
            A[v, v] = -a
            feed(v, a)
            A[s, s] = -ws
            A[s, v] = 2.0 * ws
            feed(s, -ws)
            roles += ["first-order", "summer"]
        else:
            w, q = e["w0"], e["Q"]
            v1, v2, s = k, k + 1, k + 2
            A[v1, v1] = -w / q
            A[v1, v2] = -w
            A[v2, v1] = w
            feed(v1, w)
            A[s, s] = -ws
            A[s, v1] = -2.0 / q * ws
            feed(s, ws)
            roles += ["band-pass", "low-pass", "summer"]
        prev = s
        k = s + 1
    C = np.zeros(n)
    C[-1] = 1.0
    return StateSpace(A, B, C, 0.0), tuple(roles)


def _section_order(elems):
    """Sections in the order of :func:`_sections_from_poles` (first-order, then rising Q)."""
    return [e for e in elems if e["order"] == 1] + [e for e in elems if e["order"] == 2]


def summer_response(proto: Prototype, summer_pole: float, f) -> np.ndarray:
    """H(j2πf) of :func:`summed_cascade`: the Padé all-pass times one pole ω_s per section."""
    K = len(proto.elements["sections"])
    s = 2j * np.pi * np.asarray(f, dtype=float)
    return proto.response(f) * (summer_pole / (s + summer_pole)) ** K


def ngspice_netlist(system: StateSpace, node_c, t_switch: float, factor: float, *,
                    ramp: float, source: str, t_stop: float, t_step: float, out_file: str,
                    limit: float = 0.0, roles=None) -> str:
    """An ngspice netlist of the gm-C realization of `system` with its switch.

    Node i has capacitance `node_c` (F; a scalar, or one value per node) to ground. Every
    nonzero A_ij (and B_i) is one transconductor, written as its own behavioural current
    source gm·v_j·g(t) into node i with gm = C_i·A_ij, where g(t) is a piecewise-linear control
    voltage that ramps from 1 to 1/α over [t_switch, t_switch + ramp] — so every
    transconductance (integrators, damping, summers and their loads) is scaled together.
    The input is the closed-form behavioural expression `source` (a function of ``time``);
    the run starts from zero state (``uic``) and writes the node voltages with one time
    column to `out_file`. With `limit` = V_L > 0 every transconductor input v is soft-limited
    to V_L·tanh(v/V_L) (gm compression, as :func:`timescale.numerics.lti.simulate_nonlinear`).
    `roles` (one name per node) only labels the nodes in comments.
    """
    def vin(name):
        return f"{limit:.12e}*tanh(V({name})/{limit:.12e})" if limit > 0 else f"V({name})"

    A = np.asarray(system.A)
    B = np.asarray(system.B)
    n = A.shape[0]
    cn = np.broadcast_to(np.asarray(node_c, dtype=float), (n,))
    lines = ["* switched gm-C delay filter (generated)",
             f"Bin in 0 V = {source}",
             f"Vg g 0 PWL(0 1 {t_switch:.12e} 1 {t_switch + ramp:.12e} {1.0 / factor:.12e})"]
    for i in range(n):
        lines.append(f"* node n{i}" + (f": {roles[i]}" if roles is not None else ""))
        lines.append(f"C{i} n{i} 0 {cn[i]:.9e} IC=0")
        srcs = [(f"n{j}", A[i, j], f"G{i}_{j}") for j in range(n) if A[i, j] != 0]
        if B[i] != 0:
            srcs.append(("in", B[i], f"G{i}_in"))
        for node, a, name in srcs:
            lines.append(f"B{name[1:]} 0 n{i} I = V(g)*({cn[i] * a:.15e})*{vin(node)}")
    nodes = " ".join(f"v(n{i})" for i in range(n))
    lines += [".control", "set wr_singlescale", "set wr_vecnames",
              f"tran {t_step:.6e} {t_stop:.6e} uic", f"wrdata {out_file} {nodes} v(in)",
              "quit", ".endc", ".end"]
    return "\n".join(lines) + "\n"
