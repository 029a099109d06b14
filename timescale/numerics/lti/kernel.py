"""The deterministic simulation: lifted block stepping, per-trial boundary sub-steps, and the
shared-schedule affine-map path.
"""

from __future__ import annotations

import math

import numpy as np

from timescale.numerics.lti.discretize import FohFamily, foh_step
from timescale.numerics.lti.planning import _Plan, _prepare, _stack_systems, _unique
from timescale.numerics.lti.systems import Schedule, StateSpace


# ------------------------------------------------------------------------------------------
# lifting
# ------------------------------------------------------------------------------------------
class _Lifted:
    """Block (lifted) form of one segment's FOH discretization, L samples per block.

    With z = x − G1·u the recursion is z[k+1] = Φ z[k] + B_d u[k], y[k] = C z[k] + D_d u[k];
    a block of L outputs from the block-start state z_b is ``O z_b + T U_b`` and the next
    block-start state is ``Φ^L z_b + R U_b``.
    """

    def __init__(self, system: StateSpace, dt: float, L: int, steps=None):
        A, B, C, D, _ = system.batched(1)
        Phi, G0, G1 = foh_step(A, B, dt) if steps is None else steps
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
    per_trial = K > 1 and (schedule.boundaries.shape[0] > 1 or u2.shape[0] > 1
                           or any(s.trials > 1 for s in {id(s): s for s in schedule.systems}.values()))
    kc = _chunk(N, n, block) if per_trial else K
    thr = _ZERO_INPUT * float(np.max(np.abs(u2)))
    if kc < K:
        # trials in chunks: the work arrays of a chunk stay a fraction of the output, and the
        # per-trial discretizations and lifted blocks are built chunk by chunk
        y = np.empty((K, N))
        x_end = np.empty((K, n))
        for k0 in range(0, K, kc):
            sl = slice(k0, min(K, k0 + kc))
            y[sl], x_end[sl] = _simulate(_take(schedule, sl), u2 if u2.shape[0] == 1 else u2[sl],
                                         x[sl], dt, block, thr)
        return (y, x_end) if return_state else y
    y, x = _simulate(schedule, u2, x, dt, block, thr)
    return (y, x.copy()) if return_state else y


#: trials per chunk are chosen so that one chunk's work arrays (about 4 records of N samples per
#: trial, with n/L states per sample) stay near this size, bytes: below the output of any large
#: batch, and within the last-level cache's reach for a fast first call
_CHUNK_BYTES = 8 * 2 ** 20


def _chunk(N: int, n: int, block) -> int:
    L = block or (16 if n <= 24 else 32)
    per_trial = 8 * N * (4 + 3 * n / L) + 8 * 4 * (n + 2) ** 2 * 2 + 8 * 3 * L * max(n, L)
    return max(16, int(_CHUNK_BYTES // per_trial))


def _take(schedule: Schedule, sl: slice) -> Schedule:
    """The trials `sl` of a schedule (batched systems and per-trial boundaries sliced)."""
    def cut(a, nd):
        return a if a is None or a.ndim < nd else a[sl]
    systems = tuple(s if s.trials == 1 else
                    StateSpace(cut(s.A, 3), cut(s.B, 2), cut(s.C, 2), cut(s.D, 1), cut(s.Q, 3))
                    for s in schedule.systems)
    b = schedule.boundaries
    return Schedule(systems, b if b.shape[0] == 1 else b[sl])


def _simulate(schedule, u2, x, dt, block, thr):
    """:func:`simulate` on prepared arrays: u2 (1 or K, N), x (K, n), `thr` the input level
    treated as zero; returns (y, x_end)."""
    K, n = x.shape
    N = u2.shape[1]
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
    if plan.shared and As.shape[1] == 1:
        return _simulate_shared(plan, uniq, umap, As, Bs, Cs, Ds, u2, x, L, thr)

    # 1. group the stretches by system; everything the input drives is computed per group
    #    in a few large products (the schedule repeats, so the groups are few)
    fams = _Families(As, Bs, dt)
    lifted, groups, recs = {}, {}, []
    for piece in plan.pieces:
        if piece[0] != "stretch":
            recs.append(None)
            continue
        _, a, b, m = piece
        um = int(umap[m])
        if um not in lifted:
            lifted[um] = _Lifted(uniq[um], dt, L, steps=fams.step(um, dt))
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
                m_lo, P, q0, q1 = _window_step(plan, j, As, Bs, umap, rows, dt, fams)
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
    return y, x


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
    boundaries) is an affine map ``x_end = M x_start + c``. Pieces of one kind (same system,
    length, sub-sample offsets) share M, so a periodic schedule needs a few kinds: the offsets
    of all stretches of a kind come from one block recursion vectorized over them
    (:func:`_stretch_offsets`), those of the boundary intervals from one product per kind, and
    the chain of maps is stepped by :func:`_chain`. The outputs inside the stretches then come
    per system in lifted form, vectorized over the stretches.

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
    MT = []
    c = np.empty((pk.size, Ku, n))
    for k, key in enumerate(kdef):
        sel = np.flatnonzero(pk == k)
        if key[0] == "s":
            lf = lifted[key[1]]
            MT.append(np.ascontiguousarray(lf.power(key[2])[0].T))
            c[sel] = _stretch_offsets(lf, u2, pa[sel], key[2])
        else:  # the input-driven offsets of all pieces of a kind in one product
            P, q0, q1 = _composite_step(As, Bs, key[2], dt)
            MT.append(np.ascontiguousarray(P.T))
            c[sel] = np.swapaxes(u2[:, pa[sel][:, None] + np.arange(2)] @ np.stack([q0, q1]), 0, 1)
    # the sequential part: the chain of affine maps, states before each
    X, x = _chain(MT, pk, c, x)
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
        flat = samp + np.repeat(offs * L - a, ns)
        U = np.zeros((Ku, NB * L))
        U[:, flat] = u2[:, samp]
        U = U.reshape(Ku, NB, L)
        # one product for every block: with the system shared, skipping quiet blocks would cost
        # more (gathers and scatters) than the products it saves
        RU = _times_transpose(U, lf.R)
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
        Y += _times_transpose(U, lf.T)
        y[:, samp] = Y.reshape(K, NB * L)[:, flat]
    return y, x


#: a chain longer than this is first merged pairwise (pieces of a repeating schedule repeat too)
_CHAIN_DIRECT = 32


def _chain(mats, kinds, c, x):
    """States of the chain x ← x·Mᵀ_k + c_i over its pieces i (kind k = kinds[i]; `mats` holds
    Mᵀ per kind, c has shape (P, Ku, n), x (K, n)): returns (X, x_end) with X[i] the state
    before piece i, shape (P, K, n).

    One small product per piece would make the sequential loop the cost of a long periodic
    schedule. So neighbouring pieces are merged pairwise, level by level, while the pairs
    repeat (few distinct pairs: one product of matrices per distinct pair, and the offsets of
    all pairs of a kind in one product); the short chain left is stepped one piece at a time,
    and the states inside every merged pair follow level by level on the way down, again one
    product per kind."""
    mats = list(mats)
    kinds = np.asarray(kinds, dtype=int)
    levels = []
    while kinds.size > _CHAIN_DIRECT:
        half = kinds.size // 2
        left, right = kinds[0:2 * half:2], kinds[1:2 * half:2]
        pairs, inv = np.unique(left * len(mats) + right, return_inverse=True)
        if pairs.size > max(8, half // 8):  # the pieces do not repeat: merging would not pay
            break
        inv = np.reshape(inv, -1)
        base = len(mats)
        for code in pairs.tolist():
            mats.append(mats[code // base] @ mats[code % base])
        cl, cr = c[0:2 * half:2], c[1:2 * half:2]
        merged = np.empty((half,) + c.shape[1:])
        for r in np.unique(right).tolist():
            sel = np.flatnonzero(right == r)
            merged[sel] = cl[sel] @ mats[r] + cr[sel]
        levels.append((left, cl, kinds.size))
        kinds = np.concatenate([base + inv, kinds[2 * half:]])
        c = np.concatenate([merged, c[2 * half:]])
    X = np.empty((kinds.size,) + np.broadcast_shapes(x.shape, c.shape[1:]))
    if x.shape[0] == 1 and c.shape[1] == 1:  # one record: vector products, less overhead each
        x1, X1, c1, dot = x[0], X[:, 0], c[:, 0], np.dot
        for i, k in enumerate(kinds.tolist()):
            X1[i] = x1
            x1 = dot(x1, mats[k]) + c1[i]
        x = x1[None]
    else:
        for i, k in enumerate(kinds.tolist()):
            X[i] = x
            x = x @ mats[k] + c[i]
    for left, cl, size in reversed(levels):  # the states inside the merged pairs
        half = left.size
        Y = np.empty((size,) + X.shape[1:])
        Y[0:2 * half:2] = X[:half]
        for k in np.unique(left).tolist():
            sel = np.flatnonzero(left == k)
            Y[2 * sel + 1] = X[sel] @ mats[k] + cl[sel]
        Y[2 * half:] = X[half:]
        X = Y
    return X, x


def _stretch_offsets(lf, u2, starts, ln):
    """``x_e − Φ^ln x_a`` of the stretches of ln samples that start at `starts` (shared system),
    for every input record: shape (stretches, Ku, n).

    In the lifted variable z = x − G1 u the stretch adds Σ_k Φ^(ln−1−k) B_d u_(a+k); with the
    input padded with zeros at the front to whole blocks this is the block recursion
    s ← Φ^L s + R U_b from zero, vectorized over the stretches (no full-length Krylov basis)."""
    Ku, n, L = u2.shape[0], lf.n, lf.L
    if ln == 0:
        return np.zeros((starts.size, Ku, n))
    nb = -(-ln // L)
    U = np.zeros((Ku, starts.size, nb * L))
    U[:, :, nb * L - ln:] = u2[:, starts[:, None] + np.arange(ln)]
    RU = U.reshape(-1, L) @ lf.R[0].T
    RU = RU.reshape(Ku, starts.size, nb, n)
    acc = RU[:, :, 0]
    ALT = lf.AL[0].T
    for b in range(1, nb):
        acc = acc @ ALT + RU[:, :, b]
    G1 = lf.G1[0]
    off = acc - (lf.power(ln)[0] @ G1) * u2[:, starts][..., None] + G1 * u2[:, starts + ln][..., None]
    return np.swapaxes(off, 0, 1)


class _Families:
    """Which distinct systems are scalings (s·A, s·B) of one another (a switched or ramped
    schedule: every segment scales the first), so that their exact steps share one
    :class:`FohFamily`; `step` returns None where the systems asked for are of different
    families."""

    def __init__(self, As, Bs, dt):
        U = As.shape[0]
        self.base = np.arange(U)
        self.scale = np.ones(U)
        self.As, self.Bs, self.dt, self._fam = As, Bs, dt, {}
        for j in range(1, U):
            for i in range(j):
                if self.base[i] != i:
                    continue
                Ai = As[i]
                k = np.unravel_index(np.argmax(np.abs(Ai)), Ai.shape)
                if Ai[k] == 0:
                    continue
                s = As[j][k] / Ai[k]
                # equal to rounding: A_j = A_i·(1/α) as StateSpace.scaled computes it
                if s > 0 and np.allclose(As[j], s * Ai, rtol=1e-14, atol=0) and \
                        np.allclose(Bs[j], s * Bs[i], rtol=1e-14, atol=0):
                    self.base[j], self.scale[j] = i, s
                    break

    def step(self, um, h):
        """(Phi, G0, G1) of systems `um` (an index, or one per trial) over steps `h`, or None."""
        um = np.asarray(um)
        b = self.base[um]
        if b.ndim and np.any(b != b.flat[0]):
            return None
        b0 = int(b.flat[0]) if b.ndim else int(b)
        fam = self._fam.get(b0)
        if fam is None:
            fam = self._fam[b0] = FohFamily(self.As[b0], self.Bs[b0], self.dt)
        return fam.step(np.asarray(h, dtype=float) * self.scale[um])


def _window_step(plan, j, As, Bs, umap, rows, dt, fams=None):
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
        steps = None if fams is None else fams.step(um, sb - sa)
        Phi, G0, G1 = foh_step(As[um, rows], Bs[um, rows], sb - sa) if steps is None else steps
        wa, wb = (sa / dt)[:, None], (sb / dt)[:, None]
        P = Phi @ P
        q0 = np.einsum("kij,kj->ki", Phi, q0) + G0 * (1 - wa) + G1 * (1 - wb)
        q1 = np.einsum("kij,kj->ki", Phi, q1) + G0 * wa + G1 * wb
    return umap[m_lo], P, q0, q1
