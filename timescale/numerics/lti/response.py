"""Small-signal helpers: DC gain, DC group delay and frequency response of a state-space system.
"""

from __future__ import annotations

import numpy as np

from timescale.numerics.lti.systems import StateSpace


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
    import scipy.linalg as sla  # imported here: slow to import, needed by this helper only

    H, Z = sla.hessenberg(A, calc_q=True)
    b = Z.T @ system.B.reshape(-1)
    c = system.C.reshape(-1) @ Z
    f = np.atleast_1d(np.asarray(f, dtype=float))
    out = np.empty(f.shape, dtype=complex)
    n = system.order
    for i, fi in enumerate(f):  # one solve per frequency
        out[i] = c @ np.linalg.solve(2j * np.pi * fi * np.eye(n) - H, b)
    return out + float(np.asarray(system.D).reshape(-1)[0])
