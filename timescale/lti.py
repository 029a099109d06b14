"""Exact piecewise-LTI simulation kernel (state space), with noise covariance.

One home for the numerics of every method that runs a pulse through a linear filter whose
elements change at given instants (switched-bandwidth delay filters, gm-C ladders, ...).

The model, per trial k (SI units; time on the last axis, trials on the leading axis)::

    dx/dt = A_m x + B_m u(t) + w(t),      y = C_m x + D_m u,     E[w(t) w(s)ᵀ] = Q_m δ(t − s)

where the segment index m changes at the *boundaries* τ_1 < τ_2 < … (which may differ per
trial, e.g. a jittered switch instant, and may fall between samples). The state x is
continuous across a boundary (capacitor charges are kept).

Discretization
    The input is taken as piecewise linear between samples (first-order hold, FOH), and each
    sample interval is integrated exactly with the Van Loan block matrix exponential

        expm([[A h, B h, 0], [0, 0, 1], [0, 0, 0]]) = [[Φ, Γ1, Γ2], …]
        x(h) = Φ x(0) + Γ1 u(0) + Γ2 (u(h) − u(0)),

    so the result is exact (to rounding) for a piecewise-linear input, whatever the step.
    An interval that holds a boundary is split into exact sub-steps, per trial.

Lifting
    Where every trial is in the same segment, the discrete system is stepped in blocks of L
    samples (default 64) with matrix products: with z = x − Γ2 u the recursion is
    ``z[k+1] = Φ z[k] + B_d u[k]``, ``y = C z + D_d u``, and a block of outputs is
    ``Y_b = O z_b + T U_b`` (O the L×n observability block, T the L×L lower-triangular
    Toeplitz matrix of Markov parameters); only the block-boundary states are recursed.
    There is no Python loop over samples × trials; the only loops are over blocks and over
    the few sample intervals that hold a boundary (vectorized over trials).

Repeating schedules
    Equal systems (same A, B, C, D, Q, even as distinct objects) share one discretization.
    The stretches of one system are grouped: the input-driven products of all of them are
    done at once, and for a system shared by all trials the whole stretch is one affine map
    of the state. When all trials also share the boundaries, every piece of the record (a
    stretch, or a sample interval that holds boundaries, integrated by exact sub-steps) is
    an affine map ``x_end = M x_start + W u[start:end+1]`` that depends only on its kind
    (system, length, sub-sample offsets, edges taken to 1e-9 of the sample interval): a
    periodic schedule has a few kinds, each kind's M and W are computed once, the offsets
    W u of all pieces of a kind are one matrix product over their stacked inputs, and the
    maps are then chained with one small product per piece; the outputs inside the
    stretches follow per system in lifted form. A pulse train switched in every period thus
    costs a few microseconds per switch. Blocks of input below 2⁻⁶⁴ of the record's peak are
    skipped in the lifted products (their share is below rounding).

Noise
    The state covariance before the first boundary is the stationary solution of the
    continuous Lyapunov equation A P + P Aᵀ + Q = 0 (computed by exact discrete doubling,
    batched over trials); across intervals it is propagated with the Van Loan form
    ``expm([[−A, Q], [0, Aᵀ]] h)`` (Van Loan, IEEE TAC 23(3), 1978), so the output noise
    variance at every sample is exact, through the switch.

Nonlinear path
    :func:`simulate_nonlinear` integrates ``dx/dt = A φ(x) + B φ(u)`` with a soft limit
    φ(v) = V_L·tanh(v/V_L) applied to every transconductor input (gm compression) with a
    fixed-step classical Runge–Kutta (RK4) integrator. It loops over sub-steps in Python
    (vectorized over trials) and is therefore one to two orders of magnitude slower than the
    exact linear path.

The modal (eigenvector) form is deliberately not used: for high-order delay filters the
eigenvector matrix is ill-conditioned (condition numbers above 1e10 for a 32nd-order
Bessel–Thomson filter), while the matrix exponential and lifting stay accurate.
"""

from __future__ import annotations

import bisect
import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg as sla

__all__ = [
    "StateSpace",
    "expm",
    "Schedule",
    "foh_step",
    "noise_step",
    "stationary_covariance",
    "simulate",
    "output_variance",
    "sample_noise",
    "simulate_nonlinear",
    "dc_gain",
    "dc_group_delay",
    "frequency_response",
]


# ------------------------------------------------------------------------------------------
# records
# ------------------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class StateSpace:
    """A single-input, single-output continuous-time system, optionally batched over trials.

    Parameters
    ----------
    A : array_like, shape (n, n) or (K, n, n)
        State matrix, 1/s.
    B : array_like, shape (n,) or (K, n)
        Input vector, 1/s (state units per input unit per second).
    C : array_like, shape (n,) or (K, n)
        Output vector (output units per state unit).
    D : float or array_like, shape () or (K,)
        Feed-through (output units per input unit).
    Q : array_like, shape (n, n) or (K, n, n), optional
        Two-sided intensity of the white state noise w(t), E[w(t)w(s)ᵀ] = Q δ(t−s),
        state units²/s. A current noise of one-sided density S (A²/Hz) into a node of
        capacitance C contributes S/(2C²) on that node's diagonal.
    """

    A: np.ndarray
    B: np.ndarray
    C: np.ndarray
    D: np.ndarray | float = 0.0
    Q: np.ndarray | None = None

    def __post_init__(self):
        A = np.array(self.A, dtype=float)
        if A.ndim not in (2, 3) or A.shape[-1] != A.shape[-2]:
            raise ValueError(f"A must have shape (n, n) or (K, n, n), got {A.shape}")
        n = A.shape[-1]
        B = np.array(self.B, dtype=float)
        C = np.array(self.C, dtype=float)
        D = np.array(self.D, dtype=float)
        if B.ndim not in (1, 2) or B.shape[-1] != n:
            raise ValueError(f"B must have shape (n,) or (K, n) with n = {n}, got {B.shape}")
        if C.ndim not in (1, 2) or C.shape[-1] != n:
            raise ValueError(f"C must have shape (n,) or (K, n) with n = {n}, got {C.shape}")
        if D.ndim > 1:
            raise ValueError(f"D must be a scalar or have shape (K,), got {D.shape}")
        Q = None
        if self.Q is not None:
            Q = np.array(self.Q, dtype=float)
            if Q.ndim not in (2, 3) or Q.shape[-2:] != (n, n):
                raise ValueError(f"Q must have shape (n, n) or (K, n, n) with n = {n}, got {Q.shape}")
        for name, arr in (("A", A), ("B", B), ("C", C), ("D", D), ("Q", Q)):
            if arr is not None and not np.all(np.isfinite(arr)):
                raise ValueError(f"{name} must be finite")
        sizes = {a.shape[0] for a, nd in ((A, 3), (B, 2), (C, 2), (D, 1), (Q, 3))
                 if a is not None and a.ndim == nd}
        if len(sizes) > 1:
            raise ValueError(f"batched A, B, C, D, Q disagree on the number of trials: {sorted(sizes)}")
        for name, arr in (("A", A), ("B", B), ("C", C), ("D", D), ("Q", Q)):
            object.__setattr__(self, name, arr)

    @property
    def order(self) -> int:
        """Number of states n."""
        return self.A.shape[-1]

    @property
    def trials(self) -> int:
        """Batch size (1 when the system is shared by all trials)."""
        for a, nd in ((self.A, 3), (self.B, 2), (self.C, 2), (self.D, 1), (self.Q, 3)):
            if a is not None and a.ndim == nd:
                return a.shape[0]
        return 1

    def scaled(self, s) -> "StateSpace":
        """Return the system with A, B and Q multiplied by `s` (C, D kept).

        With s = 1/α this is the time-scaled system H(αs), impulse response (1/α)·h(t/α)
        (scaling theorem), i.e. every conductance and transconductance divided by α while
        the capacitors are kept. `s` may be a scalar or an array of shape (K,).
        """
        s = np.asarray(s, dtype=float)
        if s.ndim == 0:
            sA = sB = s
        else:
            sA, sB = s[:, None, None], s[:, None]
        return StateSpace(self.A * sA, self.B * sB, self.C, self.D,
                          None if self.Q is None else self.Q * sA)

    def batched(self, K: int):
        """Arrays (A, B, C, D, Q) with a leading axis of length 1 or `K`."""
        def lead(a, nd):
            if a is None:
                return None
            return a if a.ndim == nd else a[None]
        return (lead(self.A, 3), lead(self.B, 2), lead(self.C, 2), lead(self.D, 1),
                lead(self.Q, 3))


@dataclass(frozen=True, eq=False)
class Schedule:
    """Systems that follow each other in time: segment m runs from boundary m−1 to boundary m.

    Parameters
    ----------
    systems : sequence of StateSpace
        M + 1 systems, all of the same order.
    boundaries : array_like, shape (M,) or (K, M)
        Instants (s, measured from the first sample) where segment m hands over to m + 1;
        nondecreasing along the last axis. A row per trial allows per-trial instants (jitter).
    """

    systems: tuple
    boundaries: np.ndarray

    def __post_init__(self):
        systems = tuple(self.systems)
        if not systems or not all(isinstance(s, StateSpace) for s in systems):
            raise TypeError("systems must be a non-empty sequence of StateSpace")
        n = systems[0].order
        if any(s.order != n for s in systems):
            raise ValueError("every system of a schedule must have the same order")
        b = np.array(self.boundaries, dtype=float)
        if b.ndim == 1:
            b = b[None]
        if b.ndim != 2 or b.shape[1] != len(systems) - 1:
            raise ValueError(
                f"boundaries must have shape ({len(systems) - 1},) or (K, {len(systems) - 1}) for "
                f"{len(systems)} systems, got {np.shape(self.boundaries)}"
            )
        if not np.all(np.isfinite(b)):
            raise ValueError("boundaries must be finite")
        if b.shape[1] and np.any(np.diff(b, axis=1) < 0):
            raise ValueError("boundaries must be nondecreasing along the last axis")
        object.__setattr__(self, "systems", systems)
        object.__setattr__(self, "boundaries", b)

    @classmethod
    def single(cls, system: StateSpace) -> "Schedule":
        """A schedule with one system and no boundary."""
        return cls((system,), np.zeros((1, 0)))

    @classmethod
    def switched(cls, system: StateSpace, factor: float, t_switch, *, ramp: float = 0.0,
                 segments: int = 16) -> "Schedule":
        """Scale A, B, Q by 1/`factor` at `t_switch` (bandwidth switch, states continuous).

        Parameters
        ----------
        system : StateSpace
            The system before the switch.
        factor : float
            Stretch factor α > 0; after the switch the system is H(αs).
        t_switch : float or array_like of shape (K,)
            Switch instant(s), s from the first sample (per trial for jitter).
        ramp : float
            Transition time, s: the scale goes linearly from 1 to 1/α over
            [t_switch − ramp/2, t_switch + ramp/2], approximated by `segments` constant pieces
            each at the value of the ramp at its midpoint. 0 gives an abrupt switch.
        segments : int
            Number of constant pieces of the ramp.
        """
        a = float(factor)
        if not (math.isfinite(a) and a > 0):
            raise ValueError(f"factor must be finite and > 0, got {factor!r}")
        ts = np.atleast_1d(np.asarray(t_switch, dtype=float))
        if ramp < 0 or not math.isfinite(ramp):
            raise ValueError(f"ramp must be finite and >= 0 s, got {ramp!r}")
        if ramp == 0:
            return cls((system, system.scaled(1.0 / a)), ts[:, None])
        if not isinstance(segments, (int, np.integer)) or segments < 1:
            raise ValueError(f"segments must be a whole number >= 1, got {segments!r}")
        frac = (np.arange(segments) + 0.5) / segments
        scales = 1.0 + (1.0 / a - 1.0) * frac
        systems = [system] + [system.scaled(s) for s in scales] + [system.scaled(1.0 / a)]
        edges = ts[:, None] + ramp * (np.arange(segments + 1) / segments - 0.5)[None, :]
        return cls(tuple(systems), edges)


# Padé-13 coefficients and θ13 of the scaling-and-squaring matrix exponential (Higham,
# SIAM J. Matrix Anal. Appl. 26(4), 2005); batched here because scipy's expm loops over a
# stack one matrix at a time.
_PADE13 = (64764752532480000.0, 32382376266240000.0, 7771770303897600.0, 1187353796428800.0,
           129060195264000.0, 10559470521600.0, 670442572800.0, 33522128640.0, 1323241920.0,
           40840800.0, 960960.0, 16380.0, 182.0, 1.0)
_THETA13 = 5.371920351148152


def expm(M):
    """Matrix exponential of a stack of square matrices, shape (..., n, n).

    Scaling and squaring with the degree-13 Padé approximant (Higham 2005), vectorized over
    the stack; each matrix gets its own scaling.
    """
    M = np.asarray(M, dtype=float)
    shape = M.shape
    n = shape[-1]
    X = M.reshape((-1, n, n))
    norm = np.abs(X).sum(axis=-2).max(axis=-1)  # 1-norm per matrix
    s = np.maximum(0, np.ceil(np.log2(np.maximum(norm, 1e-300) / _THETA13))).astype(int)
    X = X * (0.5 ** s)[:, None, None]
    b = _PADE13
    eye = np.broadcast_to(np.eye(n), X.shape)
    X2 = X @ X
    X4 = X2 @ X2
    X6 = X4 @ X2
    U = X @ (X6 @ (b[13] * X6 + b[11] * X4 + b[9] * X2) + b[7] * X6 + b[5] * X4 + b[3] * X2 + b[1] * eye)
    V = X6 @ (b[12] * X6 + b[10] * X4 + b[8] * X2) + b[6] * X6 + b[4] * X4 + b[2] * X2 + b[0] * eye
    E = np.linalg.solve(V - U, V + U)
    for i in range(int(s.max(initial=0))):  # square each matrix as often as it was scaled
        sel = s > i
        E[sel] = E[sel] @ E[sel]
    return E.reshape(shape)


# ------------------------------------------------------------------------------------------
# exact one-interval steps
# ------------------------------------------------------------------------------------------
def foh_step(A, B, h):
    """Exact first-order-hold step of dx/dt = A x + B u over a time `h`.

    Parameters
    ----------
    A : ndarray, shape (..., n, n)
        1/s.
    B : ndarray, shape (..., n)
        1/s.
    h : float or ndarray of shape (...)
        Step, s (0 gives the identity).

    Returns
    -------
    Phi, G0, G1 : ndarrays, shapes (..., n, n), (..., n), (..., n)
        ``x(h) = Phi x(0) + G0 u(0) + G1 u(h)`` for u linear over the step.

    Notes
    -----
    Van Loan block exponential expm([[A h, B h, 0], [0, 0, 1], [0, 0, 0]]); the last column
    integrates the input slope (C. F. Van Loan, IEEE TAC 23(3), 1978; the FOH form as in
    Franklin, Powell & Workman, *Digital Control of Dynamic Systems*).
    """
    A = np.asarray(A, dtype=float)
    B = np.asarray(B, dtype=float)
    n = A.shape[-1]
    h = np.asarray(h, dtype=float)
    shape = np.broadcast_shapes(A.shape[:-2], B.shape[:-1], h.shape)
    M = np.zeros(shape + (n + 2, n + 2))
    M[..., :n, :n] = A * h[..., None, None]
    M[..., :n, n] = B * h[..., None]
    M[..., n, n + 1] = 1.0
    E = expm(M)
    Phi = E[..., :n, :n]
    g1 = E[..., :n, n]
    g2 = E[..., :n, n + 1]
    return Phi, g1 - g2, g2


def noise_step(A, Q, h):
    """Exact covariance step of dx = A x dt + dw over a time `h`.

    Returns
    -------
    Phi, Qd : ndarrays, shape (..., n, n)
        ``P(h) = Phi P(0) Phiᵀ + Qd``; Qd = ∫₀ʰ e^{As} Q e^{Aᵀs} ds.

    Notes
    -----
    Van Loan, IEEE TAC 23(3), 1978: expm([[−A, Q], [0, Aᵀ]] h) = [[·, F12], [0, F22]],
    Phi = F22ᵀ, Qd = Phi F12.
    """
    A = np.asarray(A, dtype=float)
    Q = np.asarray(Q, dtype=float)
    n = A.shape[-1]
    h = np.asarray(h, dtype=float)
    shape = np.broadcast_shapes(A.shape[:-2], Q.shape[:-2], h.shape)
    M = np.zeros(shape + (2 * n, 2 * n))
    hh = h[..., None, None]
    M[..., :n, :n] = -A * hh
    M[..., :n, n:] = Q * hh
    M[..., n:, n:] = np.swapaxes(A, -1, -2) * hh
    E = expm(M)
    Phi = np.swapaxes(E[..., n:, n:], -1, -2)
    Qd = Phi @ E[..., :n, n:]
    return Phi, 0.5 * (Qd + np.swapaxes(Qd, -1, -2))


def stationary_covariance(A, Q, dt: float | None = None, *, max_doublings: int = 200):
    """Stationary state covariance P of dx = A x dt + dw: A P + P Aᵀ + Q = 0.

    Computed by exact doubling of the discrete step (P_{2h} = Φ_h P_h Φ_hᵀ + P_h) so it is
    batched over trials and stays symmetric positive semi-definite.

    Parameters
    ----------
    A, Q : ndarray, shape (..., n, n)
    dt : float, optional
        Starting step, s (default: a tenth of the fastest time constant).

    Raises
    ------
    ValueError
        If A is not stable (some eigenvalue with real part >= 0).
    """
    A = np.asarray(A, dtype=float)
    Q = np.asarray(Q, dtype=float)
    ev = np.linalg.eigvals(A)
    if np.any(ev.real >= 0):
        raise ValueError(
            f"A is not stable (largest eigenvalue real part {ev.real.max():.3g} 1/s >= 0); "
            "no stationary covariance exists"
        )
    if dt is None:
        dt = 0.1 / float(np.abs(ev).max())
    Phi, P = noise_step(A, Q, dt)
    for _ in range(max_doublings):
        P = P + Phi @ P @ np.swapaxes(Phi, -1, -2)
        Phi = Phi @ Phi
        if np.max(np.abs(Phi)) < 1e-17:
            return 0.5 * (P + np.swapaxes(P, -1, -2))
    raise ValueError("stationary covariance did not converge (A too close to instability)")


# ------------------------------------------------------------------------------------------
# planning: which sample intervals hold a boundary
# ------------------------------------------------------------------------------------------
class _Plan:
    """Split the record into stretches (all trials in one segment) and mixed windows."""

    def __init__(self, schedule: Schedule, N: int, dt: float, K: int):
        self.schedule = schedule
        self.N, self.dt, self.K = N, dt, K
        b = schedule.boundaries
        self.shared = b.shape[0] == 1  # every trial switches at the same instants
        self.blist = [float(v) for v in b[0]] if self.shared else None
        self.bounds = np.broadcast_to(b, (K, b.shape[1])) if b.shape[0] == 1 else b
        M = b.shape[1]
        self.M = M
        pad = np.full((K, 1), -np.inf)
        self.starts = np.concatenate([pad, self.bounds], axis=1)  # start of segment m
        self.ends = np.concatenate([self.bounds, -pad], axis=1)  # end of segment m
        jm = np.floor(self.bounds / dt)  # interval holding each boundary
        # per boundary, the first and last interval holding it over the trials
        los = np.maximum(jm.min(axis=0, initial=np.inf), 0).tolist()
        his = np.minimum(jm.max(axis=0, initial=-np.inf), N - 2).tolist()
        wins = [[int(lo), int(hi)] for lo, hi in zip(los, his) if lo <= hi]
        wins.sort()
        merged = []
        for w in wins:
            if merged and w[0] <= merged[-1][1] + 1:
                merged[-1][1] = max(merged[-1][1], w[1])
            else:
                merged.append(w)
        self.pieces = []  # ("stretch", a, b, m) or ("window", a, b)
        pos = 0
        for lo, hi in merged:
            if lo > pos:
                self.pieces.append(("stretch", pos, lo, self.segment_all(pos)))
            self.pieces.append(("window", lo, hi + 1))
            pos = hi + 1
        if pos < N:
            self.pieces.append(("stretch", pos, N, self.segment_all(pos)))

    def segment_at(self, t):
        """Per-trial segment index at time t (boundary exactly at t counts as passed)."""
        if self.shared:
            return np.full(self.K, bisect.bisect_right(self.blist, t))
        return np.sum(self.bounds <= t, axis=1)

    def substeps_shared(self, j):
        """Sub-steps of interval j when every trial has the same boundaries: (m_lo, [(m, a, b)])
        with plain ints and floats, a, b in [0, dt]; zero-length sub-steps are left out."""
        t0 = j * self.dt
        bl, dt = self.blist, self.dt
        m_lo = bisect.bisect_right(bl, t0)
        m_hi = bisect.bisect_left(bl, t0 + dt)
        out = []
        for m in range(m_lo, m_hi + 1):
            a = 0.0 if m == 0 else min(max(bl[m - 1] - t0, 0.0), dt)
            b = dt if m == len(bl) else min(max(bl[m] - t0, 0.0), dt)
            if b > a:
                out.append((m, a, b))
        return m_lo, out

    def segment_all(self, j):
        if self.shared:
            return bisect.bisect_right(self.blist, j * self.dt)
        seg = self.segment_at(j * self.dt)
        if np.any(seg != seg[0]):  # pragma: no cover - guarded by the window merge
            raise RuntimeError("internal error: trials in different segments outside a window")
        return int(seg[0])

    def substeps(self, j):
        """Sub-steps of interval j: list of (m, a, b) arrays of shape (K,), a, b in [0, dt]."""
        if self.shared:
            m_lo, subs = self.substeps_shared(j)
            full = lambda v: np.full(self.K, v)  # noqa: E731
            return full(m_lo), [(full(m), full(a), full(b)) for m, a, b in subs]
        t0 = j * self.dt
        m_lo = self.segment_at(t0)
        m_hi = np.sum(self.bounds < t0 + self.dt, axis=1)
        r = int(np.max(m_hi - m_lo)) + 1
        rows = np.arange(self.K)
        out = []
        for q in range(r):
            m = np.minimum(m_lo + q, m_hi)
            a = np.clip(self.starts[rows, m] - t0, 0.0, self.dt)
            b = np.clip(self.ends[rows, m] - t0, 0.0, self.dt)
            b = np.where(m_lo + q > m_hi, a, b)
            out.append((m, a, b))
        return m_lo, out


def _unique(schedule: Schedule):
    """Distinct systems of a schedule and, per segment, the index of its system.

    Equal systems (same A, B, C, D, Q) share one discretization: a periodic schedule then
    needs only as many matrix exponentials as it has distinct systems and sub-step lengths.
    """
    by_id, by_key, uniq, umap = {}, {}, [], []
    for s in schedule.systems:
        i = by_id.get(id(s))
        if i is None:
            k = _key(s)
            i = by_key.get(k)
            if i is None:
                i = by_key[k] = len(uniq)
                uniq.append(s)
            by_id[id(s)] = i
        umap.append(i)
    return uniq, np.array(umap, dtype=int)


def _stack_systems(systems, K: int):
    """Arrays (U, Ks, ...) over `systems`, Ks = 1 when every system is shared, else K, and the
    row index that picks each trial's system."""
    n = systems[0].order
    Ks = 1 if all(s.trials == 1 for s in systems) else K
    As, Bs, Cs, Ds, Qs = [], [], [], [], []
    for s in systems:
        A, B, C, D, Q = s.batched(Ks)
        As.append(np.broadcast_to(A, (Ks, n, n)))
        Bs.append(np.broadcast_to(B, (Ks, n)))
        Cs.append(np.broadcast_to(C, (Ks, n)))
        Ds.append(np.broadcast_to(D, (Ks,)))
        Qs.append(np.zeros((Ks, n, n)) if Q is None else np.broadcast_to(Q, (Ks, n, n)))
    rows = np.arange(K) if Ks == K else np.zeros(K, dtype=int)
    return np.stack(As), np.stack(Bs), np.stack(Cs), np.stack(Ds), np.stack(Qs), rows


def _stack(schedule: Schedule, K: int):
    """Per-segment arrays (M+1, Ks, ...) with Ks = 1 when every system is shared, else K,
    and the row index that picks each trial's system."""
    uniq, umap = _unique(schedule)
    As, Bs, Cs, Ds, Qs, rows = _stack_systems(uniq, K)
    return As[umap], Bs[umap], Cs[umap], Ds[umap], Qs[umap], rows


def _trials(schedule: Schedule, *others) -> int:
    sizes = {s.trials for s in schedule.systems} | {schedule.boundaries.shape[0]} | set(others)
    sizes.discard(1)
    if len(sizes) > 1:
        raise ValueError(f"the systems, switch instants and input disagree on the number of trials: {sorted(sizes)}")
    return sizes.pop() if sizes else 1


# ------------------------------------------------------------------------------------------
# lifting
# ------------------------------------------------------------------------------------------
class _Lifted:
    """Block (lifted) form of one segment's FOH discretization, L samples per block.

    With z = x − G1·u the recursion is z[k+1] = Φ z[k] + B_d u[k], y[k] = C z[k] + D_d u[k];
    a block of L outputs from the block-start state z_b is ``O z_b + T U_b`` and the next
    block-start state is ``Φ^L z_b + R U_b``.
    """

    def __init__(self, system: StateSpace, dt: float, L: int):
        A, B, C, D, _ = system.batched(1)
        Phi, G0, G1 = foh_step(A, B, dt)
        Bd = np.einsum("kij,kj->ki", Phi, G1) + G0
        Dd = np.einsum("ki,ki->k", *np.broadcast_arrays(C, G1)) + D  # C may be per trial
        self.Phi, self.G0, self.G1, self.C, self.Dd, self.Bd = Phi, G0, G1, C, Dd, Bd
        Ks = max(Phi.shape[0], C.shape[0])
        n = A.shape[-1]
        # O[:, p] = C Φ^p and V[:, :, p] = Φ^p B_d for p < L by doubling (log2 L products)
        O = np.broadcast_to(C, (Ks, n)).copy()[:, None, :]
        V = np.broadcast_to(Bd, (Ks, n)).copy()[:, :, None]
        Pw = np.broadcast_to(Phi, (Ks, n, n)).copy()
        while O.shape[1] < L:
            O = np.concatenate([O, O @ Pw], axis=1)
            V = np.concatenate([V, Pw @ V], axis=2)
            Pw = Pw @ Pw
        self.O = np.ascontiguousarray(O[:, :L])  # (Ks, L, n)
        self.R = np.ascontiguousarray(V[:, :, :L][:, :, ::-1])  # (Ks, n, L): col i = Φ^(L-1-i) B_d
        self.L, self.Ks, self.n = L, Ks, n
        self.AL = Pw if O.shape[1] == L else np.linalg.matrix_power(self.Phi_b(Ks), L)
        self._T = None
        self._pow = {}

    def Phi_b(self, Ks):
        return np.broadcast_to(self.Phi, (Ks, self.n, self.n))

    @property
    def T(self):
        """(Ks, L, L) lower-triangular Toeplitz matrix of Markov parameters (built on demand:
        a segment with no input never needs it)."""
        if self._T is None:
            L, Ks = self.L, self.Ks
            h = np.empty((Ks, L))
            h[:, 0] = np.broadcast_to(self.Dd, (Ks,))
            h[:, 1:] = np.einsum("kpi,ki->kp", self.O[:, :L - 1], np.broadcast_to(self.Bd, (Ks, self.n)))
            # T[i, j] = h[i − j] (0 above the diagonal): a sliding window over [0…0, h], reversed
            hp = np.concatenate([np.zeros((Ks, L - 1)), h], axis=1)
            W = np.lib.stride_tricks.sliding_window_view(hp, L, axis=1)  # W[i, j] = hp[i + j]
            self._T = np.ascontiguousarray(W[:, :, ::-1])
        return self._T

    def power(self, r):
        """Φ^r, (Ks, n, n), cached (periodic schedules reuse the same few r)."""
        P = self._pow.get(r)
        if P is None:
            P = self._pow[r] = np.linalg.matrix_power(self.Phi_b(self.Ks), r)
        return P

    def krylov(self, P):
        """(Φ^p G0, Φ^p G1) for p < P as two (P, n) arrays, shared system only (by doubling:
        log2 P products)."""
        V = np.stack([self.G0[0], self.G1[0]], axis=1)  # (n, 2p): columns Φ^p G0, Φ^p G1
        Pw = self.Phi[0]
        while V.shape[1] < 2 * P:
            V = np.concatenate([V, Pw @ V], axis=1)
            Pw = Pw @ Pw
        return V[:, 0:2 * P:2].T, V[:, 1:2 * P:2].T

    @staticmethod
    def apply(M, z):
        """M z for M (1 or K, n, n) and z (K, n)."""
        if M.shape[0] == 1:
            return z @ M[0].T
        return np.matmul(M, z[..., None])[..., 0]


def _times_transpose(U, M):
    """U @ Mᵀ for U (Ku, nb, L) and M (Ks, P, L) → (max(Ku, Ks), nb, P), as one product when
    either side is shared."""
    Ku, nb, L = U.shape
    Ks, P, _ = M.shape
    if Ks == 1:
        return (U.reshape(Ku * nb, L) @ M[0].T).reshape(Ku, nb, P)
    if Ku == 1:
        out = U[0] @ M.transpose(2, 0, 1).reshape(L, Ks * P)  # one GEMM for all trials
        return out.reshape(nb, Ks, P).transpose(1, 0, 2)
    return U @ np.swapaxes(M, -1, -2)


# input samples below this fraction of the record's peak are treated as zero in the lifted
# products: their contribution (≤ 2⁻⁶⁴·peak·‖h‖₁) lies below double-precision rounding
_ZERO_INPUT = 2.0 ** -64


# ------------------------------------------------------------------------------------------
# public simulation functions
# ------------------------------------------------------------------------------------------
def _key(system: StateSpace):
    return tuple(np.ascontiguousarray(a).tobytes() for a in (system.A, system.B, system.C, system.D))


def _prepare(schedule, u, x0):
    if not isinstance(schedule, Schedule):
        if isinstance(schedule, StateSpace):
            schedule = Schedule.single(schedule)
        else:
            raise TypeError(f"schedule must be a Schedule or StateSpace, got {type(schedule).__name__}")
    u = np.asarray(u, dtype=float)
    if u.ndim not in (1, 2) or u.shape[-1] < 2:
        raise ValueError(f"u must have shape (N,) or (K, N) with N >= 2, got {u.shape}")
    if not np.all(np.isfinite(u)):
        raise ValueError("u must be finite")
    u2 = u.reshape(-1, u.shape[-1])
    n = schedule.systems[0].order
    extra = [u2.shape[0]]
    if x0 is not None:
        x0 = np.asarray(x0, dtype=float)
        x0 = x0.reshape(-1, n)
        extra.append(x0.shape[0])
    K = _trials(schedule, *extra)
    if x0 is None:
        x0 = np.zeros((1, n))
    return schedule, u2, np.broadcast_to(x0, (K, n)).copy(), K


def simulate(schedule, u, dt: float, *, x0=None, block: int | None = None,
             return_state: bool = False):
    """Exact response of a piecewise-LTI system to a sampled, piecewise-linear input.

    Parameters
    ----------
    schedule : Schedule or StateSpace
        The system(s) and switch instants (s, from the first sample).
    u : array_like, shape (N,) or (K, N)
        Input samples at t = k·dt, linear between samples.
    dt : float
        Sample interval, s.
    x0 : array_like, shape (n,) or (K, n), optional
        State at the first sample (default zero).
    block : int, optional
        Lifting block length L, samples. Default: 64 when every trial shares its systems;
        16 (32 above 24 states) when each trial has its own, which keeps the per-trial
        L×L Toeplitz matrices small.
    return_state : bool
        Also return the state at the last sample.

    Returns
    -------
    y : ndarray, shape (K, N)
        Output at every sample (K = 1 when nothing varies per trial).
    x_end : ndarray, shape (K, n)
        Only with ``return_state=True``.

    Examples
    --------
    First-order RC (τ = 1 ns) whose resistance doubles at 2 ns:

    >>> rc = StateSpace([[-1e9]], [1e9], [1.0])
    >>> sch = Schedule.switched(rc, 2.0, 2e-9)
    >>> y = simulate(sch, np.ones(1001), 5e-12)
    """
    dt = float(dt)
    if not (math.isfinite(dt) and dt > 0):
        raise ValueError(f"dt must be finite and > 0 s, got {dt!r}")
    if block is not None and (isinstance(block, bool) or not isinstance(block, (int, np.integer))
                              or block < 1):
        raise ValueError(f"block must be a whole number >= 1, got {block!r}")
    schedule, u2, x, K = _prepare(schedule, u, x0)
    N = u2.shape[1]
    n = x.shape[1]
    plan = _Plan(schedule, N, dt, K)
    uniq, umap = _unique(schedule)
    As, Bs, Cs, Ds, _, rows = _stack_systems(uniq, K)
    if block is None:
        L = 64 if As.shape[1] == 1 else (16 if n <= 24 else 32)
    else:
        L = int(block)
    Ku = u2.shape[0]
    uK = np.broadcast_to(u2, (K, N))
    y = np.empty((K, N))
    thr = _ZERO_INPUT * float(np.max(np.abs(u2)))
    if plan.shared and As.shape[1] == 1:
        y, x = _simulate_shared(plan, uniq, umap, As, Bs, Cs, Ds, u2, x, L, thr)
        return (y, x) if return_state else y

    # 1. group the stretches by system; everything the input drives is computed per group
    #    in a few large products (the schedule repeats, so the groups are few)
    lifted, groups, recs = {}, {}, []
    for piece in plan.pieces:
        if piece[0] != "stretch":
            recs.append(None)
            continue
        _, a, b, m = piece
        um = int(umap[m])
        if um not in lifted:
            lifted[um] = _Lifted(uniq[um], dt, L)
        g = groups.setdefault(um, {"nb": 0, "recs": []})
        Ns = b - a
        nb = -(-Ns // L)
        e = Ns if b < N else Ns - 1  # sample index (in the stretch) of the state carried on
        rec = {"a": a, "b": b, "um": um, "off": g["nb"], "nb": nb, "r": e - (nb - 1) * L}
        g["nb"] += nb
        g["recs"].append(rec)
        recs.append(rec)
    for um, g in groups.items():
        lf = lifted[um]
        NB = g["nb"]
        U = np.zeros((Ku, NB, L))
        flat = U.reshape(Ku, NB * L)
        for rec in g["recs"]:
            flat[:, rec["off"] * L:rec["off"] * L + rec["b"] - rec["a"]] = u2[:, rec["a"]:rec["b"]]
        Kt = max(Ku, lf.Ks)
        act = np.flatnonzero(np.any(np.abs(U) > thr, axis=(0, 2)))  # blocks with input
        RU = np.zeros((Kt, NB, n))
        TU = None
        if act.size:
            TU = _times_transpose(U[:, act], lf.T)
            RU[:, act] = _times_transpose(U[:, act], lf.R)
        g["TU"], g["RU"], g["act"] = TU, RU, act
        g["Z"] = np.empty((K, NB, n))
        # the carried-on state ends r samples into the last block: Φ^r z + (Φ^(r-1-i) B_d) u_i
        by_r = {}
        for rec in g["recs"]:
            by_r.setdefault(rec["r"], []).append(rec)
        for r, rs in by_r.items():
            idx = np.array([rec["off"] + rec["nb"] - 1 for rec in rs])
            if r == 0:
                end = np.zeros((Kt, len(rs), n))
            else:
                end = _times_transpose(U[:, idx, :r], lf.R[:, :, L - r:])
            for i, rec in enumerate(rs):
                rec["end"] = end[:, i]
        if lf.Ks == 1:
            # shared system: the zero-state block-start states of every stretch of the group at
            # once (a loop over the longest stretch's blocks, vectorized over stretches), so the
            # sequential part below needs one product per stretch, not per block
            offs = np.array([rec["off"] for rec in g["recs"]])
            nbs = np.array([rec["nb"] for rec in g["recs"]])
            Sst = np.zeros((Kt, NB, n))
            cur = np.zeros((Kt, offs.size, n))
            A1 = lf.AL[0].T
            for bi in range(int(nbs.max()) - 1):
                cur = cur @ A1 + RU[:, offs + np.minimum(bi, nbs - 1)]
                ok = nbs > bi + 1
                Sst[:, offs[ok] + bi + 1] = cur[:, ok]
            g["S"] = Sst
            g["zA"] = np.empty((K, offs.size, n))
            for i, rec in enumerate(g["recs"]):
                rec["i"] = i
                rec["end"] = lf.apply(lf.power(rec["r"]), Sst[:, rec["off"] + rec["nb"] - 1]) + rec["end"]
                kk = ("M", rec["nb"], rec["r"])  # Φ^r (Φ^L)^(nb-1): stretch start → carried state
                if kk not in lf._pow:
                    lf._pow[kk] = lf.power(rec["r"]) @ np.linalg.matrix_power(lf.AL, rec["nb"] - 1)
                rec["M"] = lf._pow[kk]

    # 2. the sequential part. Every piece is an affine map of the state, x ← M x + c (a whole
    #    stretch of a shared system, one block of a per-trial system, or one interval that
    #    holds a boundary); the maps are listed first and then chained in one tight loop that
    #    records the state before each map, and everything else is done in batch afterwards.
    Ms, cs, after = [], [], []  # after: what the recorded state before map i is used for
    eye = np.eye(n)[None]
    for piece, rec in zip(plan.pieces, recs):
        if rec is not None:
            lf, g = lifted[rec["um"]], groups[rec["um"]]
            a, off, nb = rec["a"], rec["off"], rec["nb"]
            e = a + (nb - 1) * L + rec["r"]
            G1 = lf.G1
            if "M" in rec:  # shared system: start state → carried state in one map
                M = rec["M"]
                Ms.append(M)
                cs.append(rec["end"] - lf.apply(M, G1 * u2[:, a:a + 1]) + G1 * u2[:, e:e + 1])
                after.append(("start", g, rec, a))
                continue
            Ms.append(eye)
            cs.append(-G1 * u2[:, a:a + 1])  # to z = x − G1 u
            after.append(None)
            Z, RU = g["Z"], g["RU"]
            for bi in range(nb - 1):
                Ms.append(lf.AL)
                cs.append(RU[:, off + bi])
                after.append(("block", Z, off + bi))
            Ms.append(lf.power(rec["r"]))
            cs.append(rec["end"] + G1 * u2[:, e:e + 1])
            after.append(("block", Z, off + nb - 1))
        else:
            _, a, b = piece
            for j in range(a, b):  # the few intervals that hold a boundary
                m_lo, P, q0, q1 = _window_step(plan, j, As, Bs, umap, rows, dt)
                Ms.append(P)
                cs.append(q0 * uK[:, j:j + 1] + q1 * uK[:, j + 1:j + 2])
                after.append(("sample", m_lo, j))
    X = np.empty((len(Ms), K, n))
    shared = [M.shape[0] == 1 for M in Ms]
    Ms = [M[0].T if sh else M for M, sh in zip(Ms, shared)]
    for i in range(len(Ms)):  # the only sequential loop: one small product per map
        X[i] = x
        x = x @ Ms[i] + cs[i] if shared[i] else np.matmul(Ms[i], x[..., None])[..., 0] + cs[i]
    x = np.broadcast_to(x, (K, n))
    win = [(i, w[1], w[2]) for i, w in enumerate(after) if w is not None and w[0] == "sample"]
    if win:
        iw = np.array([w[0] for w in win])
        js = np.array([w[2] for w in win])
        mw = np.stack([np.broadcast_to(w[1], (K,)) for w in win])  # (W, K) segment per trial
        Cw, Dw = Cs[mw, rows[None, :]], Ds[mw, rows[None, :]]  # (W, K, n), (W, K)
        y[:, js] = (np.einsum("wki,wki->wk", Cw, X[iw]) + Dw * uK[:, js].T).T
    for i, w in enumerate(after):
        if w is None or w[0] == "sample":
            continue
        if w[0] == "block":
            w[1][:, w[2]] = X[i]
        else:
            _, g, rec, a = w
            g["zA"][:, rec["i"]] = X[i] - lifted[rec["um"]].G1 * u2[:, a:a + 1]

    # 3. outputs of every stretch, per group in one product
    for um, g in groups.items():
        lf = lifted[um]
        if "S" in g:  # Z[:, off + b] = (Φ^L)^b z_start + zero-state part
            nbs = np.array([rec["nb"] for rec in g["recs"]])
            pw = [np.eye(n)]
            for _ in range(int(nbs.max()) - 1):
                pw.append(lf.AL[0] @ pw[-1])
            si = np.repeat(np.arange(nbs.size), nbs)
            bi = np.arange(si.size) - np.repeat(np.cumsum(nbs) - nbs, nbs)
            g["Z"] = np.einsum("ksj,sij->ksi", g["zA"][:, si], np.stack(pw)[bi]) + g["S"]
        Y = g["Z"] @ np.swapaxes(lf.O, -1, -2)
        if g["TU"] is not None:
            Y[:, g["act"]] += g["TU"]
        Y = np.broadcast_to(Y, (K,) + Y.shape[1:]).reshape(K, -1)
        for rec in g["recs"]:
            o = rec["off"] * L
            y[:, rec["a"]:rec["b"]] = Y[:, o:o + rec["b"] - rec["a"]]
    return (y, x.copy()) if return_state else y


def _ranges(starts, lengths):
    """Concatenated ranges [s, s + l) for every (s, l), without a Python loop."""
    starts = np.asarray(starts, dtype=np.intp)
    lengths = np.asarray(lengths, dtype=np.intp)
    first = np.cumsum(lengths) - lengths
    return np.arange(int(lengths.sum())) + np.repeat(starts - first, lengths)


def _composite_step(As, Bs, subs, dt):
    """(P, q0, q1) over one sample interval made of exact sub-steps ``subs`` = ((system,
    start, end), ...) with start and end in units of dt: x(dt) = P x(0) + q0 u(0) + q1 u(dt)."""
    n = As.shape[-1]
    P = np.eye(n)
    q0 = np.zeros(n)
    q1 = np.zeros(n)
    for um, wa, wb in subs:
        Phi, G0, G1 = foh_step(As[um, 0], Bs[um, 0], (wb - wa) * dt)
        P = Phi @ P
        q0 = Phi @ q0 + G0 * (1 - wa) + G1 * (1 - wb)
        q1 = Phi @ q1 + G0 * wa + G1 * wb
    return P, q0, q1


def _simulate_shared(plan, uniq, umap, As, Bs, Cs, Ds, u2, x, L, thr):
    """:func:`simulate` when every trial shares the systems and the boundaries.

    Each piece of the record (a stretch of one system, or a sample interval that holds
    boundaries) is an affine map ``x_end = M x_start + W u[start:end + 1]``. Pieces of one
    kind (same system, length, sub-sample offsets) share M and W, so a periodic schedule
    needs a few kinds: the offsets of all pieces of a kind are one product over their stacked
    inputs, and the sequential part is one small product per piece. The outputs inside the
    stretches then come per system in lifted form, vectorized over the stretches.

    The sub-step edges of a boundary interval are taken to 1e-9 of dt, which absorbs the
    rounding of instants computed as k·dt (relative 1e-16 of t, i.e. up to ~1e-11 of dt at
    k ~ 1e5) so that equal intervals are recognised, and moves a switch by at most
    5e-10·dt (an output change below 1e-9 of the peak).

    Returns (y, x_end) with shapes (K, N), (K, n).
    """
    N, dt, K = plan.N, plan.dt, plan.K
    Ku, n = u2.shape[0], x.shape[1]
    um_of = umap.tolist()
    kinds, kdef = {}, []  # kind key -> index; per kind its key
    pa, pk = [], []  # per piece: first sample, kind (-1: boundary interval, set below)
    st = []  # per stretch: (piece, a, b, system)
    wpos, wj = [], []  # per boundary interval: piece, sample interval
    for piece in plan.pieces:
        if piece[0] == "stretch":
            _, a, b, m = piece
            um = um_of[m]
            key = ("s", um, (b if b < N else N - 1) - a)  # the carried state is at b (or N−1)
            k = kinds.setdefault(key, len(kinds))
            if k == len(kdef):
                kdef.append(key)
            st.append((len(pk), a, b, um))
            pa.append(a)
            pk.append(k)
        else:
            for j in range(piece[1], piece[2]):
                wpos.append(len(pk))
                wj.append(j)
                pa.append(j)
                pk.append(-1)
    pk = np.array(pk)
    pa = np.array(pa)
    # boundary intervals: the segment at the start (m_lo) and the boundaries inside
    bl = np.asarray(plan.blist, dtype=float)
    J = np.array(wj, dtype=float)
    t0 = J * dt
    mlo = np.searchsorted(bl, t0, side="right")  # boundaries at or before t0 are passed
    mhi = np.searchsorted(bl, t0 + dt, side="left")
    wkey = [None] * len(wj)
    one = np.flatnonzero(mhi - mlo <= 1)  # the common case, found without a Python loop
    if one.size:
        inside = mhi[one] > mlo[one]
        mnext = np.minimum(mlo[one] + 1, len(bl))
        f = np.where(inside, np.round(np.clip(bl[np.minimum(mlo[one], len(bl) - 1)] - t0[one],
                                              0.0, dt) / dt, 9), 1.0)
        rowsk = np.column_stack([umap[mlo[one]], np.where(inside, umap[mnext], umap[mlo[one]]), f])
        ur, inv = np.unique(rowsk, axis=0, return_inverse=True)
        ukeys = [("w", int(u0), tuple(s for s in ((int(u0), 0.0, float(fr)), (int(u1), float(fr), 1.0))
                                      if s[2] > s[1])) for u0, u1, fr in ur]
        for i, q in zip(one.tolist(), np.reshape(inv, -1).tolist()):
            wkey[i] = ukeys[q]
    for i in np.flatnonzero(mhi - mlo > 1).tolist():  # several boundaries in one interval
        lo, hi, tt = int(mlo[i]), int(mhi[i]), float(t0[i])
        edges = [0.0] + [round(min(max(bl[m] - tt, 0.0), dt) / dt, 9) for m in range(lo, hi)] + [1.0]
        wkey[i] = ("w", um_of[lo], tuple((um_of[m], edges[q], edges[q + 1])
                                         for q, m in enumerate(range(lo, hi + 1))
                                         if edges[q + 1] > edges[q]))
    for i, key in enumerate(wkey):
        k = kinds.setdefault(key, len(kinds))
        if k == len(kdef):
            kdef.append(key)
        pk[wpos[i]] = k

    # the affine map of every kind: Mᵀ and W (n, length + 1)
    lifted = {}
    for key in kdef:
        if key[0] == "s" and key[1] not in lifted:
            lifted[key[1]] = _Lifted(uniq[key[1]], dt, L)
    longest = {}
    for key in kdef:
        if key[0] == "s":
            longest[key[1]] = max(longest.get(key[1], 0), key[2])
    kry = {um: lifted[um].krylov(max(P, 1)) for um, P in longest.items()}
    MT, W = [], []
    for key in kdef:
        if key[0] == "s":
            _, um, ln = key
            V0, V1 = kry[um]
            w = np.zeros((n, ln + 1))
            if ln:  # x_e = Φ^ln x_a + Σ_k Φ^(e−1−k) (G0 u_k + G1 u_(k+1))
                w[:, :ln] += V0[ln - 1::-1].T
                w[:, 1:] += V1[ln - 1::-1].T
            MT.append(np.ascontiguousarray(lifted[um].power(ln)[0].T))
            W.append(w)
        else:
            P, q0, q1 = _composite_step(As, Bs, key[2], dt)
            MT.append(np.ascontiguousarray(P.T))
            W.append(np.stack([q0, q1], axis=1))
    # the input-driven offsets of all pieces of a kind in one product
    c = np.empty((pk.size, Ku, n))
    for k, w in enumerate(W):
        sel = np.flatnonzero(pk == k)
        idx = pa[sel][:, None] + np.arange(w.shape[1])
        c[sel] = np.swapaxes(u2[:, idx] @ w.T, 0, 1)
    # the sequential part: one small product per piece
    X = np.empty((pk.size, K, n))
    maps = [MT[k] for k in pk.tolist()]
    for i, M in enumerate(maps):
        X[i] = x
        x = x @ M + c[i]
    y = np.empty((K, N))
    if wj:  # outputs at the boundary intervals' first samples
        wp, Jw = np.array(wpos), np.array(wj)
        um_lo = umap[mlo]
        y[:, Jw] = (np.einsum("wki,wi->wk", X[wp], Cs[um_lo, 0]) + Ds[um_lo, 0][:, None] * u2[:, Jw].T).T
    # outputs inside the stretches, per system, in lifted form
    by_um = {}
    for rec in st:
        by_um.setdefault(rec[3], []).append(rec)
    for um, recs in by_um.items():
        lf = lifted[um]
        pos, a, b, _ = (np.array(v) for v in zip(*recs))
        ns = b - a
        nbs = -(-ns // L)
        offs = np.cumsum(nbs) - nbs
        NB = int(nbs.sum())
        samp = _ranges(a, ns)
        flat = _ranges(offs * L, ns)
        U = np.zeros((Ku, NB * L))
        U[:, flat] = u2[:, samp]
        U = U.reshape(Ku, NB, L)
        act = np.flatnonzero(np.any(np.abs(U) > thr, axis=(0, 2)))  # blocks with input
        RU = np.zeros((Ku, NB, n))
        if act.size:
            RU[:, act] = _times_transpose(U[:, act], lf.R)
        # block-start states z = x − G1 u, from each stretch's start state
        cur = np.swapaxes(X[pos], 0, 1) - lf.G1[0] * u2[:, a][..., None]
        Z = np.empty((K, NB, n))
        ALT = lf.AL[0].T
        for bi in range(int(nbs.max())):  # over the blocks of the longest stretch
            ok = nbs > bi
            Z[:, offs[ok] + bi] = cur[:, ok]
            if bi + 1 < nbs.max():
                cur = cur @ ALT + RU[:, offs + np.minimum(bi, nbs - 1)]
        Y = Z @ lf.O[0].T
        if act.size:
            Y[:, act] += _times_transpose(U[:, act], lf.T)
        y[:, samp] = Y.reshape(K, NB * L)[:, flat]
    return y, x


def _window_step(plan, j, As, Bs, umap, rows, dt):
    """Composite exact step over sample interval j, which holds one or more boundaries:
    returns (m_lo, P, q0, q1) with x[j+1] = P x[j] + q0 u[j] + q1 u[j+1] and m_lo the segment
    (per trial) at the interval's start."""
    n = As.shape[-1]
    m_lo, subs = plan.substeps(j)
    K = plan.K
    P = np.broadcast_to(np.eye(n), (K, n, n))
    q0 = np.zeros((K, n))
    q1 = np.zeros((K, n))
    for m, sa, sb in subs:
        um = umap[m]
        Phi, G0, G1 = foh_step(As[um, rows], Bs[um, rows], sb - sa)
        wa, wb = (sa / dt)[:, None], (sb / dt)[:, None]
        P = Phi @ P
        q0 = np.einsum("kij,kj->ki", Phi, q0) + G0 * (1 - wa) + G1 * (1 - wb)
        q1 = np.einsum("kij,kj->ki", Phi, q1) + G0 * wa + G1 * wb
    return umap[m_lo], P, q0, q1


def output_variance(schedule, N: int, dt: float, *, block: int = 64, P0=None):
    """Exact output noise variance at every sample, through every switch.

    The state covariance at the first sample is the stationary one of the first segment
    (Lyapunov), unless `P0` is given; it is then propagated exactly (Van Loan).

    Parameters
    ----------
    schedule : Schedule or StateSpace
        Systems with their noise intensities Q.
    N : int
        Number of samples.
    dt : float
        Sample interval, s.
    P0 : array_like, shape (n, n) or (K, n, n), optional
        Initial state covariance.

    Returns
    -------
    var : ndarray, shape (K, N)
        Output variance, output units².
    """
    if isinstance(schedule, StateSpace):
        schedule = Schedule.single(schedule)
    K = _trials(schedule)
    plan = _Plan(schedule, int(N), float(dt), K)
    As, Bs, Cs, Ds, Qs, rows = _stack(schedule, K)
    n = As.shape[-1]
    P = _initial_covariance(plan, As, Qs, rows, dt) if P0 is None else \
        np.broadcast_to(np.asarray(P0, float), (K, n, n)).copy()
    var = np.empty((K, N))
    cache = {}
    L = block
    for piece in plan.pieces:
        if piece[0] == "stretch":
            _, a, b, m = piece
            if m not in cache:
                A, Q, C = As[m], Qs[m], Cs[m]
                Pinf = stationary_covariance(A, Q, dt)
                Phi, _ = noise_step(A, Q, dt)
                O = np.empty((C.shape[0], L, n))
                c = C.copy()
                for p in range(L):
                    O[:, p] = c
                    c = np.einsum("ki,kij->kj", c, Phi)
                cache[m] = (Pinf, Phi, np.linalg.matrix_power(Phi, L), O,
                            np.einsum("ki,kij,kj->k", C, Pinf, C))
            Pinf, Phi, AL, O, vinf = cache[m]
            W = P - Pinf
            Ns = b - a
            nb = -(-Ns // L)
            out = np.empty((K, nb * L))
            for blk in range(nb):  # loop over blocks
                out[:, blk * L:(blk + 1) * L] = np.einsum("kpi,kij,kpj->kp", O, W, O)
                Wlast = W
                W = AL @ W @ np.swapaxes(AL, -1, -2)
            var[:, a:b] = out[:, :Ns] + vinf[:, None]
            r = Ns - (nb - 1) * L
            Pr = np.linalg.matrix_power(Phi, r)
            P = Pr @ Wlast @ np.swapaxes(Pr, -1, -2) + Pinf
        else:
            _, a, b = piece
            for j in range(a, b):
                m_lo, subs = plan.substeps(j)
                C = Cs[m_lo, rows]
                var[:, j] = np.einsum("ki,kij,kj->k", C, P, C)
                for m, sa, sb in subs:
                    Phi, Qd = noise_step(As[m, rows], Qs[m, rows], sb - sa)
                    P = Phi @ P @ np.swapaxes(Phi, -1, -2) + Qd
    return var


def _initial_covariance(plan, As, Qs, rows, dt):
    # stationary covariance of the first segment, computed once per distinct system
    m0 = plan.segment_at(0.0)
    if As.shape[1] == 1 and np.all(m0 == m0[0]):
        P = stationary_covariance(As[m0[0]], Qs[m0[0]], dt)
        return np.broadcast_to(P, (plan.K,) + P.shape[1:]).copy()
    return stationary_covariance(As[m0, rows], Qs[m0, rows], dt)


def _sqrt_psd(M):
    w, V = np.linalg.eigh(0.5 * (M + np.swapaxes(M, -1, -2)))
    return V * np.sqrt(np.clip(w, 0.0, None))[..., None, :]


def sample_noise(schedule, N: int, dt: float, rng: np.random.Generator, *, trials: int | None = None):
    """Sampled output-noise realisations (exact discrete equivalent of the white state noise).

    Each interval adds a Gaussian state increment of covariance Qd (Van Loan); the initial
    state is drawn from the stationary covariance of the first segment. The state recursion
    loops over samples in Python (vectorized over trials): O(N·K·n²).

    Parameters
    ----------
    schedule : Schedule or StateSpace
    N : int
        Number of samples.
    dt : float
        Sample interval, s.
    rng : numpy.random.Generator
        The only source of randomness.
    trials : int, optional
        Number of realisations when nothing else fixes it.

    Returns
    -------
    ndarray, shape (K, N)
        Output noise, output units.
    """
    if isinstance(schedule, StateSpace):
        schedule = Schedule.single(schedule)
    K = _trials(schedule, *(() if trials is None else (int(trials),)))
    plan = _Plan(schedule, int(N), float(dt), K)
    As, Bs, Cs, Ds, Qs, rows = _stack(schedule, K)
    n = As.shape[-1]
    P0 = _initial_covariance(plan, As, Qs, rows, dt)
    x = np.einsum("kij,kj->ki", _sqrt_psd(P0), rng.standard_normal((K, n)))
    out = np.empty((K, N))
    cache = {}
    for piece in plan.pieces:
        if piece[0] == "stretch":
            _, a, b, m = piece
            if m not in cache:
                Phi, Qd = noise_step(As[m], Qs[m], dt)
                cache[m] = (Phi, _sqrt_psd(Qd))
            Phi, S = cache[m]
            W = np.einsum("kij,ktj->kti", S, rng.standard_normal((K, b - a, n)))
            C = Cs[m]
            for j in range(a, b):  # O(K n²) per sample, vectorized over trials
                out[:, j] = np.einsum("ki,ki->k", C, x)
                if Phi.shape[0] == 1:
                    x = x @ Phi[0].T + W[:, j - a]
                else:
                    x = np.einsum("kij,kj->ki", Phi, x) + W[:, j - a]
        else:
            _, a, b = piece
            for j in range(a, b):
                m_lo, subs = plan.substeps(j)
                out[:, j] = np.einsum("ki,ki->k", Cs[m_lo, rows], x)
                for m, sa, sb in subs:
                    Phi, Qd = noise_step(As[m, rows], Qs[m, rows], sb - sa)
                    x = np.einsum("kij,kj->ki", Phi, x) + np.einsum(
                        "kij,kj->ki", _sqrt_psd(Qd), rng.standard_normal((K, n)))
    return out


def simulate_nonlinear(schedule, u, dt: float, limit: float, *, substeps: int = 8, x0=None):
    """Response with soft-limited transconductors: dx/dt = A φ(x) + B φ(u), y = C x + D u.

    φ(v) = V_L·tanh(v / V_L) models gm compression of every transconductor at its input
    (a state's column of A is the set of transconductors that state drives). As V_L → ∞ the
    result tends to :func:`simulate`.

    Parameters
    ----------
    schedule : Schedule or StateSpace
    u : array_like, shape (N,) or (K, N)
        Input samples, linear between samples.
    dt : float
        Sample interval, s.
    limit : float
        V_L, state units (V), > 0.
    substeps : int
        RK4 steps per sample interval.
    x0 : array_like, optional
        Initial state.

    Returns
    -------
    ndarray, shape (K, N)

    Notes
    -----
    Compression of a single section only slows it (slew limit 2·|A_ii|·V_L) and lowers its
    peak monotonically as V_L falls. A cascade need not: every transconductor, including the
    damping ones, is limited, and an all-pass read-out forms the output as the difference
    of internal signals (and of the feed-through D·u), so unequal compression breaks that
    cancellation and the output peak can fall, then rise again as V_L is lowered. That is
    the model's physics, not an integration error (the RK4 result converges with
    `substeps`, and agrees with an ngspice tanh behavioural source).

    Classical fixed-step RK4 (4th order) with the input linearly interpolated at the stage
    times; the segment is chosen per trial at each sub-step's midpoint, so a switch is moved to
    the nearest sub-step edge (an error of first order in dt/substeps unless the switch lies on
    an edge) — keep ``dt/substeps`` small against the filter's time constants. Loops over N·substeps in Python (vectorized over trials): slower
    than the exact linear path by one to two orders of magnitude.
    """
    limit = float(limit)
    if not (math.isfinite(limit) and limit > 0):
        raise ValueError(f"limit must be finite and > 0 V, got {limit!r}")
    if not isinstance(substeps, (int, np.integer)) or substeps < 1:
        raise ValueError(f"substeps must be a whole number >= 1, got {substeps!r}")
    dt = float(dt)
    schedule, u2, x, K = _prepare(schedule, u, x0)
    N = u2.shape[1]
    plan = _Plan(schedule, N, dt, K)
    As, Bs, Cs, Ds, _, rows = _stack(schedule, K)
    uK = np.broadcast_to(u2, (K, N))
    shared = schedule.boundaries.shape[0] == 1 and all(s.trials == 1 for s in schedule.systems)

    def phi(v):
        return limit * np.tanh(v / limit)

    def f(m, x, uu):
        if shared:
            A, B = As[m[0], 0], Bs[m[0], 0]
            return phi(x) @ A.T + phi(uu)[:, None] * B
        return np.einsum("kij,kj->ki", As[m, rows], phi(x)) + phi(uu)[:, None] * Bs[m, rows]

    h = dt / substeps
    y = np.empty((K, N))
    for j in range(N):  # documented slow path
        m = plan.segment_at(j * dt)
        y[:, j] = np.einsum("ki,ki->k", Cs[m, rows], x) + Ds[m, rows] * uK[:, j]
        if j == N - 1:
            break
        u0, u1 = uK[:, j], uK[:, j + 1]
        for s in range(substeps):
            t = j * dt + s * h
            fa, fb, fc = s / substeps, (s + 0.5) / substeps, (s + 1) / substeps
            ua, ub, uc = u0 + (u1 - u0) * fa, u0 + (u1 - u0) * fb, u0 + (u1 - u0) * fc
            # one segment per sub-step (taken at its midpoint) keeps RK4's order between
            # switches; a switch is thereby moved to the nearest sub-step edge
            mseg = plan.segment_at(t + h / 2)
            k1 = f(mseg, x, ua)
            k2 = f(mseg, x + h / 2 * k1, ub)
            k3 = f(mseg, x + h / 2 * k2, ub)
            k4 = f(mseg, x + h * k3, uc)
            x = x + h / 6 * (k1 + 2 * k2 + 2 * k3 + k4)
    return y


# ------------------------------------------------------------------------------------------
# small-signal helpers
# ------------------------------------------------------------------------------------------
def dc_gain(system: StateSpace) -> np.ndarray | float:
    """H(0) = D − C A⁻¹ B (per trial)."""
    A, B, C, D, _ = system.batched(1)
    g = D - np.einsum("ki,ki->k", np.broadcast_to(C, B.shape), np.linalg.solve(A, B[..., None])[..., 0])
    return float(g[0]) if g.size == 1 else g


def dc_group_delay(system: StateSpace) -> np.ndarray | float:
    """Group delay at DC, −H'(0)/H(0) = C A⁻² B / (D − C A⁻¹ B), s."""
    A, B, C, D, _ = system.batched(1)
    v1 = np.linalg.solve(A, B[..., None])
    v2 = np.linalg.solve(A, v1)[..., 0]
    Cb = np.broadcast_to(C, v2.shape)
    g = D - np.einsum("ki,ki->k", Cb, v1[..., 0])
    tau = np.einsum("ki,ki->k", Cb, v2) / g
    return float(tau[0]) if tau.size == 1 else tau


def frequency_response(system: StateSpace, f) -> np.ndarray:
    """H(j2πf) = C (j2πf I − A)⁻¹ B + D for a shared (unbatched) system, at frequencies f (Hz)."""
    if system.trials != 1:
        raise ValueError("frequency_response needs an unbatched system")
    A = system.A.reshape(system.order, system.order)
    # Hessenberg form keeps the per-frequency solve well conditioned and cheap
    H, Z = sla.hessenberg(A, calc_q=True)
    b = Z.T @ system.B.reshape(-1)
    c = system.C.reshape(-1) @ Z
    f = np.atleast_1d(np.asarray(f, dtype=float))
    out = np.empty(f.shape, dtype=complex)
    n = system.order
    for i, fi in enumerate(f):  # one solve per frequency
        out[i] = c @ np.linalg.solve(2j * np.pi * fi * np.eye(n) - H, b)
    return out + float(np.asarray(system.D).reshape(-1)[0])
