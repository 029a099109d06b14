"""State-space systems and switch schedules: the records the kernel steps through.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


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
