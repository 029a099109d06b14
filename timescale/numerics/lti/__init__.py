"""Exact piecewise-LTI simulation kernel (state space), with noise covariance.

One home for the numerics of every method that runs a pulse through a linear filter whose
elements change at given instants (switched-bandwidth delay filters, gm-C ladders, ...).

The model, per trial k (SI units; time on the last axis, trials on the leading axis)::

    dx/dt = A_m x + B_m u(t) + w(t),      y = C_m x + D_m u,     E[w(t) w(s)ᵀ] = Q_m δ(t − s)

where the segment index m changes at the *boundaries* τ_1 < τ_2 < … (which may differ per
trial, e.g. a jittered switch instant, and may fall between samples). The state x is
continuous across a boundary (capacitor charges are kept).

Discretization
    The input is taken as piecewise linear between samples (first-order hold, FOH), and each
    sample interval is integrated exactly with the Van Loan block matrix exponential

        expm([[A h, B h, 0], [0, 0, 1], [0, 0, 0]]) = [[Φ, Γ1, Γ2], …]
        x(h) = Φ x(0) + Γ1 u(0) + Γ2 (u(h) − u(0)),

    so the result is exact (to rounding) for a piecewise-linear input, whatever the step.
    An interval that holds a boundary is split into exact sub-steps, per trial.

Lifting
    Where every trial is in the same segment, the discrete system is stepped in blocks of L
    samples (default 64) with matrix products: with z = x − Γ2 u the recursion is
    ``z[k+1] = Φ z[k] + B_d u[k]``, ``y = C z + D_d u``, and a block of outputs is
    ``Y_b = O z_b + T U_b`` (O the L×n observability block, T the L×L lower-triangular
    Toeplitz matrix of Markov parameters); only the block-boundary states are recursed.
    There is no Python loop over samples × trials; the only loops are over blocks and over
    the few sample intervals that hold a boundary (vectorized over trials).

Repeating schedules
    Equal systems (same A, B, C, D, even as distinct objects: found by an exact hash of their
    stacked matrices) share one discretization. The stretches of one system are grouped: the
    input-driven products of all of them are done at once, and for a system shared by all
    trials the whole stretch is one affine map of the state. When all trials also share the
    boundaries, every piece of the record (a stretch, or a sample interval that holds
    boundaries, integrated by exact sub-steps) is an affine map ``x_end = M x_start + c`` that
    depends only on its kind (system, length, sub-sample offsets, edges taken to 1e-9 of the
    sample interval): a periodic schedule has a few kinds, M is computed once per kind, the
    offsets c of all stretches of a kind come from one block recursion vectorized over them,
    and the chain of maps is merged pairwise while the pieces repeat (one product per distinct
    pair), so its sequential part stays short; the outputs inside the stretches follow per
    system in lifted form. A pulse train switched in every period thus costs a few
    microseconds per switch.

Many trials
    When anything differs per trial (systems, boundaries or input), the trials are simulated
    in chunks whose work arrays stay near 8 MB, so the memory peak stays close to the output
    itself and a chunk's arrays are reused from the allocator's cache. Blocks of input below
    2⁻⁶⁴ of the record's peak are skipped in the per-trial lifted products (their share is
    below rounding).

Noise
    The state covariance before the first boundary is the stationary solution of the
    continuous Lyapunov equation A P + P Aᵀ + Q = 0 (computed by exact discrete doubling,
    batched over trials); across intervals it is propagated with the Van Loan form
    ``expm([[−A, Q], [0, Aᵀ]] h)`` (Van Loan, IEEE TAC 23(3), 1978), so the output noise
    variance at every sample is exact, through the switch.

Nonlinear path
    :func:`simulate_nonlinear` integrates ``dx/dt = A φ(x) + B φ(u)`` with a soft limit
    φ(v) = V_L·tanh(v/V_L) applied to every transconductor input (gm compression) with a
    fixed-step classical Runge–Kutta (RK4) integrator. It loops over sub-steps in Python
    (vectorized over trials) and is therefore one to two orders of magnitude slower than the
    exact linear path.

The modal (eigenvector) form is deliberately not used: for high-order delay filters the
eigenvector matrix is ill-conditioned (condition numbers above 1e10 for a 32nd-order
Bessel–Thomson filter), while the matrix exponential and lifting stay accurate.

Modules: ``systems`` (StateSpace, Schedule), ``discretize`` (exact one-interval steps),
``planning`` (where boundaries fall), ``kernel`` (deterministic simulation), ``noise``
(covariance and sampled noise), ``nonlinear`` (soft-limit RK4 path), ``response`` (small-signal
helpers). Imports only numpy, scipy and :mod:`timescale.data`.
"""

from timescale.numerics.lti.discretize import (
    expm,
    foh_step,
    noise_step,
    stationary_covariance,
)
from timescale.numerics.lti.kernel import simulate
from timescale.numerics.lti.noise import output_variance, sample_noise
from timescale.numerics.lti.nonlinear import simulate_nonlinear
from timescale.numerics.lti.response import dc_gain, dc_group_delay, frequency_response
from timescale.numerics.lti.systems import Schedule, StateSpace

__all__ = [
    "StateSpace",
    "expm",
    "Schedule",
    "foh_step",
    "noise_step",
    "stationary_covariance",
    "simulate",
    "output_variance",
    "sample_noise",
    "simulate_nonlinear",
    "dc_gain",
    "dc_group_delay",
    "frequency_response",
]
