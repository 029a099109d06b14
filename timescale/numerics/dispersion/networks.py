"""Element values of second-order all-pass sections: the constant-resistance lattice and its
unbalanced bridged-T equivalent.

The section H(s) = (s² − (ω0/Q)s + ω0²)/(s² + (ω0/Q)s + ω0²) between terminations R0 is the
constant-resistance lattice H = (R0 − Z_a)/(R0 + Z_a), Z_a·Z_b = R0² (standard network theory):

* series arms Z_a: a parallel tank, L_a = R0/(Qω0), C_a = Q/(R0ω0);
* cross arms Z_b: a series resonator, L_b = R0·Q/ω0, C_b = 1/(R0·Q·ω0).

A lattice is balanced: it needs two of each arm (four inductors, four capacitors) and a
differential line. By Bartlett's bisection theorem (A. C. Bartlett, 1927; from memory) a
symmetric bridged-T with series arms Z1, bridge Z3 and shunt Z2 equals the lattice with
Z_a = Z1 ∥ (Z3/2) (short-circuit bisection) and Z_b = Z1 + 2·Z2 (open-circuit bisection). With
Z1 the capacitor C_a and Z3/2 the inductor L_a the tank is rebuilt, and

    Z2 = (Z_b − Z1)/2 = s·L_b/2 + 1/(s·C2),   1/C2 = R0·ω0·(Q − 1/Q)/2,

a series resonator with positive elements when Q ≥ 1. The bridged-T (single-ended, one ground)
then takes two series capacitors C_a, a bridging inductor 2·L_a and a shunt branch L_b/2 + C2:
two spirals per section instead of four, the larger one half the lattice's cross arm. Below
Q = 1 the shunt capacitor would be negative, and such (broad, low-frequency) sections are
billed as the balanced lattice.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["AllpassElements", "allpass_elements", "lattice_arms"]


def lattice_arms(omega0, q, r0: float):
    """(L_a, C_a, L_b, C_b) of the constant-resistance lattice of each section (H, F)."""
    w0, q = np.asarray(omega0, dtype=float), np.asarray(q, dtype=float)
    return r0 / (q * w0), q / (r0 * w0), r0 * q / w0, 1.0 / (r0 * q * w0)


@dataclass(frozen=True)
class AllpassElements:
    """Inductors and capacitors that realise a cascade of second-order all-pass sections.

    Attributes
    ----------
    inductors, capacitors : ndarray
        Every element value, H and F (one entry per physical element).
    bridged, lattice : int
        Sections realised as single-ended bridged-T (Q ≥ 1) and as balanced lattice (Q < 1).
    shunt_inductors : ndarray
        The largest spiral of each section, H: L_b/2 of a bridged-T, L_b of a lattice.
    """

    inductors: np.ndarray
    capacitors: np.ndarray
    bridged: int
    lattice: int
    shunt_inductors: np.ndarray

    @property
    def sections(self) -> int:
        """Number of sections."""
        return self.bridged + self.lattice


def allpass_elements(omega0, q, r0: float) -> AllpassElements:
    """Element values of each second-order section at impedance `r0` (Ω): bridged-T where
    Q ≥ 1 (C_a, C_a, 2L_a, L_b/2, C2), balanced lattice otherwise (2 × (L_a, C_a, L_b, C_b)).

    Parameters
    ----------
    omega0, q : array_like
        Section centre frequencies (rad/s) and quality factors.
    r0 : float
        Termination (line) impedance, Ω.
    """
    w0, q = np.atleast_1d(np.asarray(omega0, dtype=float)), np.atleast_1d(np.asarray(q, dtype=float))
    la, ca, lb, cb = lattice_arms(w0, q, r0)
    br = q >= 1.0
    with np.errstate(divide="ignore"):  # Q = 1: the shunt capacitor is a wire (dropped below)
        c2 = 2.0 / (r0 * w0[br] * (q[br] - 1.0 / q[br]))
    lat = ~br
    inductors = np.concatenate([2.0 * la[br], 0.5 * lb[br], np.repeat(la[lat], 2), np.repeat(lb[lat], 2)])
    capacitors = np.concatenate([np.repeat(ca[br], 2), c2[np.isfinite(c2)],
                                 np.repeat(ca[lat], 2), np.repeat(cb[lat], 2)])
    shunt = np.where(br, 0.5 * lb, lb)
    return AllpassElements(inductors=inductors, capacitors=capacitors, bridged=int(br.sum()),
                           lattice=int(lat.sum()), shunt_inductors=shunt)
