"""The passive LC realization: a constant-k line of spiral inductors and capacitors whose
elements are switched in banks.

Switching physics. Scaling every L and C of the line by α scales its time constants by α (Z0 is
kept). A bank that *adds* elements (α > 1: a discharged capacitor connected across each node
capacitor, a series inductor carrying no current un-shorted in each branch) conserves charge
on every node and flux in every loop, so every capacitor voltage and inductor current is
divided by α at the switch: the stretched output has gain 1/α and the fraction 1 − 1/α of the
stored energy is dissipated in the switches. A bank that *removes* elements (α < 1: part of
each capacitor disconnected, part of each inductor shorted) leaves the voltages and currents of
what remains continuous, and the energy of the removed parts (1 − α) is lost with them. This
module models exactly that.

In state space (states x: node voltages and branch currents × Z0) the network after the switch
is (A/α, B/α, C, D); adding elements also jumps x → x/α. With w = α·x after the switch the jump
disappears: dw/dt = (A/α)·w + B·u, y = (C/α)·w + D·u, and the thermal noise of the fixed
resistors keeps the same intensity in w. So a schedule of continuous-state systems simulates the
bank exactly (:func:`bank_schedule`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from timescale.numerics import costs, lti

from . import prototypes

__all__ = ["LCLine", "line_for", "lossy", "node_capacitance", "noise_intensity", "bank_schedule",
           "bank_gain", "bank_energy_loss"]


@dataclass(frozen=True)
class LCLine:
    """A constant-k LC line sized for a delay and a fidelity (SI units).

    Attributes
    ----------
    sections : int
        Number of series-L, shunt-C sections.
    inductance, capacitance : float
        Per-section L (H) and C (F) in the line's slower state (before the switch for α < 1,
        after it for α > 1 the bank adds (α − 1)·L and (α − 1)·C).
    bank : float
        max(1, α): each section's spiral is a tapped spiral of bank·L and its capacitor bank·C.
    spiral : costs.Spiral
        The tapped square spiral of bank·L (modified Wheeler; Mohan et al. 1999).
    self_resonance : float
        Its self-resonance from its track capacitance to the substrate (Yue–Wong), Hz.
    area : float
        Active area: layout overhead × (spirals + capacitors + 2 switches per section), m².
    """

    sections: int
    inductance: float
    capacitance: float
    bank: float
    spiral: costs.Spiral
    self_resonance: float
    area: float


def _fidelity(proto, f, P):
    return prototypes.delay_error(proto.response(f), f, proto.delay, P)


def line_for(delay: float, f, P, target: float, technology, factor: float, *,
             max_sections: int = 400, z0: float = 50.0, sections: int = 0):
    """The constant-k line (Z0 = `z0`) with DC group delay `delay` and the fewest sections that
    keep its unswitched output within `target` NRMSE of x(t − delay) (spectral weights `P` at
    frequencies `f`), or the given number of `sections`; None when none up to `max_sections`
    meets the target. `factor` sizes the element banks (see :class:`LCLine`)."""
    if sections <= 0:
        # the ladder's error falls roughly as 1/N²: bisection on the section count
        if _fidelity(prototypes.ladder(max_sections, delay), f, P) > target:
            return None
        lo, hi = 1, max_sections
        while lo < hi:
            mid = (lo + hi) // 2
            if _fidelity(prototypes.ladder(mid, delay), f, P) <= target:
                hi = mid
            else:
                lo = mid + 1
        sections = lo
    pr = prototypes.ladder(sections, delay, z0=z0)
    L, C = pr.elements["L"], pr.elements["C"]
    bank = max(1.0, float(factor))
    w, s = technology.inductor_track_width, technology.inductor_track_spacing
    spiral = costs.spiral_for_inductance(bank * L, w, s)
    track = costs.spiral_track_length(spiral.turns, spiral.d_out, spiral.d_in)
    f_sr = costs.spiral_self_resonance(spiral.inductance, track, w, technology.inductor_substrate_cap)
    devices = sections * (spiral.area + bank * C / technology.cap_density + 2 * technology.switch_area)
    return LCLine(sections, L, C, bank, spiral, f_sr, technology.layout_overhead * devices)


def lossy(system: lti.StateSpace, q: float, frequency: float) -> lti.StateSpace:
    """The ladder `system` (states [i1·Z0, v1, …], :func:`prototypes.ladder`) with a series
    resistance R = 2π·f·L/Q in every inductor (:func:`timescale.numerics.costs.spiral_series_resistance`).

    R/L is the same for every inductor, so each current state gains the damping −2π·f/Q.
    A constant R gives the spiral its quality factor `q` at `frequency` only; a real spiral's
    loss rises with frequency above it and falls below it (its Q is flatter than ωL/R).
    """
    A = np.array(system.A, dtype=float)
    rate = costs.spiral_series_resistance(1.0, q, frequency)  # R/L, 1/s
    idx = np.arange(0, A.shape[0], 2)  # current states
    A[idx, idx] -= rate
    return lti.StateSpace(A, system.B, system.C, system.D)


def node_capacitance(A, z0: float) -> np.ndarray:
    """Energy-equivalent capacitance of each ladder state, F: C for a node voltage, L/Z0² for a
    branch current carried as i·Z0 (½L i² = ½(L/Z0²)(i Z0)²).

    Each state's coupling to its neighbours is 1/(its element's delay), so C_eq = 1/(Z0·|A_ij|)
    for its largest off-diagonal |A_ij|.
    """
    A = np.abs(np.asarray(A, dtype=float))
    off = A - np.diag(np.diag(A))
    return 1.0 / (z0 * off.max(axis=-1))


def noise_intensity(A, node_c, temperature: float) -> np.ndarray:
    """Thermal noise of the line's resistors (terminations and spiral series resistance):
    two-sided state intensity Q_ii = 2kT·|A_ii|/C_i, V²/s.

    A resistor R across a capacitor C injects a current of one-sided density 4kT/R, i.e.
    Q = 2kT/(R C²) = 2kT·(1/RC)/C; a series resistor in an inductor branch is its dual. Only
    the diagonal (resistive) entries of A make noise: L and C are noiseless. In thermal
    equilibrium every state then has variance kT/C_i (equipartition).
    """
    A = np.asarray(A, dtype=float)
    d = 2.0 * costs.BOLTZMANN * temperature * np.abs(np.diagonal(A, axis1=-2, axis2=-1)) / np.asarray(node_c)
    return d[..., :, None] * np.eye(A.shape[-1])


def bank_schedule(system: lti.StateSpace, factor: float, t_switch) -> lti.Schedule:
    """The line with its element banks switched at `t_switch` (s from the first sample; per
    trial for jitter): every L and C scaled by α, charge and flux conserved (see the module
    docstring). `system.Q`, if given, is the resistors' noise before the switch."""
    a = float(factor)
    A, B, C, D, Q = system.A, system.B, system.C, system.D, system.Q
    if a >= 1.0:  # elements added: states jump by 1/α; in w = α·x they are continuous
        after = lti.StateSpace(A / a, B, C / a, D, Q)
    else:  # elements removed: states continuous, capacitances α·C (noise Q/α²)
        after = lti.StateSpace(A / a, B / a, C, D, None if Q is None else Q / (a * a))
    ts = np.atleast_1d(np.asarray(t_switch, dtype=float))
    return lti.Schedule((system, after), ts[:, None])


def bank_gain(factor: float) -> float:
    """Output gain after the switch relative to before: 1/α when elements are added (charge
    and flux shared), 1 when they are removed."""
    return 1.0 / factor if factor > 1.0 else 1.0


def bank_energy_loss(factor: float) -> float:
    """Fraction of the line's stored energy lost at the switch: 1 − 1/α adding elements (in the
    switches), 1 − α removing them (with the removed elements)."""
    return 1.0 - min(factor, 1.0 / factor)
