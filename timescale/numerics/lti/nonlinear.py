"""Soft-limited (gm compression) simulation by fixed-step RK4: the slow, nonlinear path.
"""

from __future__ import annotations

import math

import numpy as np

from timescale.numerics.lti.planning import _Plan, _prepare, _stack


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
