"""Planning a run: which sample intervals hold a schedule boundary, and which systems repeat.
"""

from __future__ import annotations

import bisect

import numpy as np

from timescale.numerics.lti.systems import Schedule, StateSpace


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

    Equal systems (same A, B, C, D, even as distinct objects) share one discretization: a
    periodic schedule then needs only as many matrix exponentials as it has distinct systems
    and sub-step lengths. Objects are told apart by identity first; the distinct objects are
    then compared in one pass over their stacked matrices (no per-system hashing); the answer is
    kept on the (immutable) schedule for its next run.
    """
    cached = schedule.__dict__.get("_distinct")
    if cached is not None:
        return cached
    uniq, umap = _distinct(schedule)
    uniq = tuple(uniq)
    umap.setflags(write=False)
    object.__setattr__(schedule, "_distinct", (uniq, umap))
    return uniq, umap


def _distinct(schedule: Schedule):
    by_id, objs, obj_of = {}, [], []
    for s in schedule.systems:
        i = by_id.setdefault(id(s), len(objs))
        if i == len(objs):
            objs.append(s)
        obj_of.append(i)
    obj_of = np.array(obj_of, dtype=int)
    if len(objs) == 1:
        return objs, obj_of
    try:  # every system with the same shapes: compare the rows of one stacked array
        S = len(objs)
        rows = np.concatenate([np.array([o.A for o in objs]).reshape(S, -1), np.array([o.B for o in objs]),
                               np.array([o.C for o in objs]), np.array([o.D for o in objs]).reshape(S, -1)],
                              axis=1)
        if rows.ndim != 2 or rows.shape[1] != objs[0].order * (objs[0].order + 2) + 1:
            raise ValueError("batched systems")
    except ValueError:  # shapes differ (some systems batched over trials): compare as bytes
        keys, first = {}, []
        for i, o in enumerate(objs):
            first.append(keys.setdefault(_key(o), i))
        _, idx, inv = np.unique(np.array(first), return_index=True, return_inverse=True)
    else:
        # a hash of each row's bits (integer arithmetic modulo 2⁶⁴: exact, so equal rows hash
        # equal whatever the order of summation); rows with equal hashes are then compared in
        # full, so a coincidence of hashes cannot merge two different systems
        rows = np.ascontiguousarray(rows)
        mult = np.random.default_rng(0).integers(1, 2 ** 63, rows.shape[1], dtype=np.uint64) | np.uint64(1)
        h = (rows.view(np.uint64) * mult).sum(axis=1, dtype=np.uint64)
        _, idx, inv = np.unique(h, return_index=True, return_inverse=True)
        inv = np.reshape(inv, -1)
        if not np.array_equal(rows, rows[idx[inv]]):
            _, idx, inv = np.unique(rows.view(np.dtype((np.void, rows.dtype.itemsize * rows.shape[1]))).ravel(),
                                    return_index=True, return_inverse=True)
    order = np.argsort(idx)  # keep the distinct systems in order of first use
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    return [objs[i] for i in idx[order]], rank[np.reshape(inv, -1)][obj_of]


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
