"""Noise through a switched LTI system: exact output variance and sampled realizations.
"""

from __future__ import annotations

import numpy as np

from timescale.numerics.lti.discretize import noise_step, stationary_covariance
from timescale.numerics.lti.planning import _Plan, _stack, _trials
from timescale.numerics.lti.systems import Schedule, StateSpace


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
