"""Exact one-interval steps: batched matrix exponential, first-order-hold input steps, noise steps,
stationary covariance.
"""

from __future__ import annotations

import numpy as np

# Padé coefficients b_j and the norm bounds θ_m below which the degree-m approximant is accurate
# to unit roundoff without scaling (Higham, SIAM J. Matrix Anal. Appl. 26(4), 2005, Table 2.3);
# batched here because scipy's expm loops over a stack one matrix at a time.
_PADE = {
    3: (120.0, 60.0, 12.0, 1.0),
    5: (30240.0, 15120.0, 3360.0, 420.0, 30.0, 1.0),
    7: (17297280.0, 8648640.0, 1995840.0, 277200.0, 25200.0, 1512.0, 56.0, 1.0),
    9: (17643225600.0, 8821612800.0, 2075673600.0, 302702400.0, 30270240.0, 2162160.0, 110880.0,
        3960.0, 90.0, 1.0),
}
_THETA = {3: 1.495585217958292e-2, 5: 2.539398330063230e-1, 7: 9.504178996162932e-1,
          9: 2.097847961257068e0}
_PADE13 = (64764752532480000.0, 32382376266240000.0, 7771770303897600.0, 1187353796428800.0,
           129060195264000.0, 10559470521600.0, 670442572800.0, 33522128640.0, 1323241920.0,
           40840800.0, 960960.0, 16380.0, 182.0, 1.0)
_THETA13 = 5.371920351148152


def _degree(top: float) -> int:
    """Lowest Padé degree whose bound θ_m holds for a 1-norm `top` (13 beyond, with scaling)."""
    for m, theta in _THETA.items():
        if top <= theta:
            return m
    return 13


def _pade(X, power, c, m: int):
    """Degree-m Padé approximant of exp(c·X) for a stack X (K, n, n), from the even powers of X
    (``power(k)`` = X^k, computed once by the caller) and scales c of shape (K, 1, 1):
    (V − U)⁻¹(V + U) with U, V the odd and even parts (Higham 2005)."""
    eye = np.broadcast_to(np.eye(X.shape[-1]), np.broadcast_shapes(X.shape, np.shape(c)[:-2] + (1, 1)))
    if m < 13:
        b = _PADE[m]
        terms = [eye] + [c ** (2 * i) * power(2 * i) for i in range(1, m // 2 + 1)]
        U = (c * X) @ sum(b[2 * i + 1] * P for i, P in enumerate(terms))
        V = sum(b[2 * i] * P for i, P in enumerate(terms))
    else:
        b = _PADE13
        X2, X4, X6 = (c ** k * power(k) for k in (2, 4, 6))
        U = (c * X) @ (X6 @ (b[13] * X6 + b[11] * X4 + b[9] * X2) + b[7] * X6 + b[5] * X4 + b[3] * X2
                       + b[1] * eye)
        V = X6 @ (b[12] * X6 + b[10] * X4 + b[8] * X2) + b[6] * X6 + b[4] * X4 + b[2] * X2 + b[0] * eye
    return np.linalg.solve(V - U, V + U)


def _squared(E, s):
    """Square each matrix E[k] s[k] times (undoing a scaling by 2^−s)."""
    for i in range(int(s.max(initial=0))):
        sel = s > i
        E[sel] = E[sel] @ E[sel]
    return E


class _Powers:
    """Even powers X^k of a stack, each computed once, on demand."""

    def __init__(self, X):
        self._pow = {1: X}

    def __call__(self, k):
        P = self._pow.get(k)
        if P is None:
            a, b = {2: (1, 1), 4: (2, 2), 6: (4, 2), 8: (4, 4)}[k]
            P = self._pow[k] = self(a) @ self(b)
        return P


def expm(M):
    """Matrix exponential of a stack of square matrices, shape (..., n, n).

    Scaling and squaring with Padé approximants (Higham 2005), vectorized over the stack: the
    lowest degree (3, 5, 7, 9) whose bound θ_m holds for every matrix of the stack, else degree
    13 with each matrix scaled by its own power of two.
    """
    M = np.asarray(M, dtype=float)
    shape = M.shape
    n = shape[-1]
    X = M.reshape((-1, n, n))
    norm = np.abs(X).sum(axis=-2).max(axis=-1)  # 1-norm per matrix
    m = _degree(float(norm.max(initial=0.0)))
    s = np.zeros(X.shape[0], dtype=int)
    if m == 13:
        s = np.maximum(0, np.ceil(np.log2(np.maximum(norm, 1e-300) / _THETA13))).astype(int)
    return _squared(_pade(X, _Powers(X), (0.5 ** s)[:, None, None], m), s).reshape(shape)


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


class FohFamily:
    """Exact first-order-hold steps of the systems (s·A, s·B) for many steps h and scales s,
    sharing the powers of one Van Loan block.

    With the block's input-slope entry set to the step itself, the block of (A, B) over a step h
    is h·M0, M0 = [[A, B, 0], [0, 0, 1], [0, 0, 0]], and that of (s·A, s·B) over h is (s·h)·M0:
    the exponentials a switched schedule needs (each system over a sample interval, both
    systems over the two parts of an interval that holds a switch) are all expm(h·M0) for a few
    h per trial. The even powers of M0 are computed once and every Padé approximant is built
    from them (Higham 2005 degrees and bounds; degree 13 with per-matrix scaling when needed),
    which saves about a third of the products of separate exponentials.

    Parameters
    ----------
    A : ndarray, shape (K, n, n)
    B : ndarray, shape (K, n)
    h_ref : float
        A typical step, s (the powers are kept of h_ref·M0, whose norm is moderate).
    """

    def __init__(self, A, B, h_ref: float):
        A = np.asarray(A, dtype=float)
        B = np.asarray(B, dtype=float)
        K, n = max(A.shape[0], B.shape[0]), A.shape[-1]
        X = np.zeros((K, n + 2, n + 2))
        X[:, :n, :n] = A * h_ref
        X[:, :n, n] = B * h_ref
        X[:, n, n + 1] = h_ref
        self.X, self.n, self.h_ref = X, n, float(h_ref)
        self.norm = np.abs(X).sum(axis=-2).max(axis=-1)  # 1-norm of h_ref·M0 per trial
        self._power = _Powers(X)

    def step(self, h):
        """(Phi, G0, G1) of the steps `h` (s; a scalar or one per trial, 0 allowed), as
        :func:`foh_step` returns them."""
        n = self.n
        h = np.asarray(h, dtype=float)
        K = max(self.X.shape[0], h.size if h.ndim else 1)  # a shared system may take per-trial steps
        h = np.broadcast_to(h, (K,))
        r = h / self.h_ref
        norm = np.abs(r) * self.norm
        m = _degree(float(norm.max(initial=0.0)))
        s = np.zeros(K, dtype=int)
        if m == 13:
            s = np.maximum(0, np.ceil(np.log2(np.maximum(norm, 1e-300) / _THETA13))).astype(int)
        E = _squared(_pade(self.X, self._power, (r * 0.5 ** s)[:, None, None], m), s)
        Phi = E[:, :n, :n]
        g1 = E[:, :n, n]
        with np.errstate(divide="ignore", invalid="ignore"):
            g2 = np.where(h[:, None] != 0, E[:, :n, n + 1] / h[:, None], 0.0)  # slope entry was h
        return Phi, g1 - g2, g2
