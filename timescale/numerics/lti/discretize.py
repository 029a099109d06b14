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
    eye = np.broadcast_to(np.eye(n), X.shape)
    top = float(norm.max(initial=0.0))
    for m, theta in _THETA.items():
        if top <= theta:
            b = _PADE[m]
            X2 = X @ X
            powers = [eye, X2]
            for _ in range(m // 2 - 1):
                powers.append(powers[-1] @ X2)
            U = X @ sum(b[2 * i + 1] * P for i, P in enumerate(powers))
            V = sum(b[2 * i] * P for i, P in enumerate(powers))
            return np.linalg.solve(V - U, V + U).reshape(shape)
    s = np.maximum(0, np.ceil(np.log2(np.maximum(norm, 1e-300) / _THETA13))).astype(int)
    X = X * (0.5 ** s)[:, None, None]
    b = _PADE13
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
