"""Tests of the exact piecewise-LTI kernel against outside references."""

import math

import numpy as np
import pytest
import scipy.linalg as sla
from scipy import signal as ss

from timescale.numerics import lti

KB = 1.380649e-23  # J/K, SI 2019 exact


def _balanced_bessel(n, delay=1.0):
    # companion form balanced by a diagonal similarity (scipy.linalg.matrix_balance)
    z, p, k = ss.bessel(n, 1.0, analog=True, norm="delay", output="zpk")
    A, B, C, D = ss.zpk2ss(z, np.asarray(p) / delay, k / delay ** n)
    A, (sc, _) = sla.matrix_balance(A, permute=False, separate=True)
    return A, B[:, 0] / sc, C[0] * sc, float(D[0, 0])


def test_expm_matches_scipy():
    # independent solver: scipy.linalg.expm, one matrix at a time
    rng = np.random.default_rng(0)
    M = rng.standard_normal((20, 6, 6)) * 3 - 4 * np.eye(6)
    ref = np.stack([sla.expm(m) for m in M])
    assert np.max(np.abs(lti.expm(M) - ref)) < 1e-12 * np.max(np.abs(ref))


def test_unswitched_matches_lsim():
    # independent solver: scipy.signal.lsim with first-order hold (interp=True)
    A, B, C, D = _balanced_bessel(12)
    dt, N = 0.01, 3000
    t = np.arange(N) * dt
    u = np.exp(-0.5 * ((t - 3) / 0.4) ** 2) * np.cos(2 * t)
    _, yl, _ = ss.lsim((A, B[:, None], C[None], D), u, t, interp=True)
    y = lti.simulate(lti.StateSpace(A, B, C, D), u, dt)[0]
    assert np.max(np.abs(y - yl)) < 1e-10 * np.max(np.abs(yl))


def test_rc_resistance_doubles_worked_example():
    # worked example: RC low-pass, τ = 1 ns, driven by a ramp u = t/1ns (linear, so FOH is exact);
    # at t_s = 2.0037 ns R doubles (τ → 2 ns), the capacitor voltage is continuous.
    # Closed form of τ v' = −v + k t: v = k(t − τ) + (v0 − k(t0 − τ)) e^{−(t−t0)/τ}.
    tau, k, ts = 1e-9, 1e9, 2.0037e-9
    dt, N = 10e-12, 800
    t = np.arange(N) * dt
    rc = lti.StateSpace([[-1 / tau]], [1 / tau], [1.0])
    y = lti.simulate(lti.Schedule.switched(rc, 2.0, ts), k * t, dt)[0]

    def v(t, t0, v0, tau):
        return k * (t - tau) + (v0 - k * (t0 - tau)) * np.exp(-(t - t0) / tau)

    vs = v(ts, 0.0, 0.0, tau)
    ref = np.where(t < ts, v(t, 0.0, 0.0, tau), v(t, ts, vs, 2 * tau))
    assert np.max(np.abs(y - ref)) < 1e-12 * np.max(np.abs(ref))


def test_scaling_theorem_after_switch():
    # Oppenheim & Willsky, Signals and Systems: H(αs) ↔ (1/α) h(t/α). With the input ended
    # before t_s, the switched output after t_s is the unswitched zero-input response dilated
    # about t_s: y_sw(t_s + α θ) = y_0(t_s + θ).
    A, B, C, D = _balanced_bessel(8, delay=1.0)
    sysm = lti.StateSpace(A, B, C, D)
    dt = 0.005
    alpha = 2.0
    ts = 1.0  # input (a 0.05-wide Gaussian at 0.4) has ended by then
    N = 2400
    t = np.arange(N) * dt
    u = np.exp(-0.5 * ((t - 0.4) / 0.05) ** 2) * (t < 0.8)
    y0 = lti.simulate(sysm, u, dt)[0]
    ysw = lti.simulate(lti.Schedule.switched(sysm, alpha, ts), u, dt)[0]
    # compare on the samples t = ts + 2θ where θ = (t − ts)/2 is a sample of y0
    k0 = int(round(ts / dt))
    j = np.arange(0, (N - k0) // 2)
    assert np.max(np.abs(ysw[k0 + 2 * j] - y0[k0 + j])) < 1e-9 * np.max(np.abs(y0))


def test_subsample_switch_and_jitter_rows_match_single_trials():
    A, B, C, D = _balanced_bessel(6)
    rng = np.random.default_rng(3)
    K = 4
    As = A[None] * (1 + 0.02 * rng.standard_normal((K, 1, 1)))
    sysm = lti.StateSpace(As, B, C, D)
    tsw = 2.0 + 0.013 * rng.standard_normal(K)
    dt, N = 0.01, 900
    u = np.exp(-0.5 * ((np.arange(N) * dt - 1.0) / 0.2) ** 2)
    sch = lti.Schedule.switched(sysm, 0.5, tsw, ramp=0.07, segments=8)
    y = lti.simulate(sch, u, dt)
    for k in range(K):
        one = lti.Schedule(tuple(lti.StateSpace(s.A[k], s.B, s.C, s.D) for s in sch.systems),
                           sch.boundaries[k])
        # independent path: lsim piecewise on each segment would need unequal grids; instead
        # the single-trial run uses a different code path (no per-trial gather) — and scipy
        # lsim checks the first, unswitched stretch
        # (the single run shares its boundaries, so its sub-step edges are taken to 1e-9 of
        # dt to reuse equal steps: agreement to about 1e-11, not to rounding)
        assert np.max(np.abs(lti.simulate(one, u, dt)[0] - y[k])) < 1e-10
    t = np.arange(N) * dt
    _, yl, _ = ss.lsim((As[0], B[:, None], C[None], D), u, t, interp=True)
    first = t < tsw.min() - 0.07
    assert np.max(np.abs(yl[first] - y[0][first])) < 1e-10


def test_switch_matches_lsim_on_split_grid():
    # independent solver: scipy lsim before the switch, then lsim of (A/α, B/α) from the state
    # at the switch, the switch placed on a sample so both grids are uniform
    A, B, C, D = _balanced_bessel(6)
    dt, N, ks, alpha = 0.01, 1200, 437, 1.7
    t = np.arange(N) * dt
    u = np.exp(-0.5 * ((t - 1.5) / 0.3) ** 2)
    y = lti.simulate(lti.Schedule.switched(lti.StateSpace(A, B, C, D), alpha, ks * dt), u, dt)[0]
    _, ya, xa = ss.lsim((A, B[:, None], C[None], D), u[:ks + 1], t[:ks + 1], interp=True)
    _, yb, _ = ss.lsim((A / alpha, B[:, None] / alpha, C[None], D), u[ks:], t[ks:] - t[ks],
                       X0=xa[-1], interp=True)
    ref = np.concatenate([ya[:-1], yb])
    assert np.max(np.abs(y - ref)) < 1e-10 * np.max(np.abs(ref))


def _lsim_pieces(systems, u, t, cuts, x0=None):
    """scipy lsim on each constant piece [cuts[i], cuts[i+1]] (sample indices), state carried."""
    y = np.empty(u.size)
    x0 = np.zeros(systems[0][0].shape[0]) if x0 is None else x0
    for (A, B, C, D), a, b in zip(systems, cuts[:-1], cuts[1:]):
        _, ys, xs = ss.lsim((A, B[:, None], C[None], D), u[a:b + 1], t[a:b + 1] - t[a],
                            X0=x0, interp=True)
        y[a:b + 1] = ys
        x0 = xs[-1]
    return y, x0


@pytest.mark.parametrize("block", [None, 1, 7, 64])
def test_periodic_schedule_between_samples_matches_lsim(block):
    # independent solver: scipy.signal.lsim (FOH) on a grid 4x finer, where every boundary
    # falls on a sample; the input is linear between the coarse samples, so it is the same
    # signal on both grids. 12 switches at a quarter-sample offset, distinct but equal
    # StateSpace objects (the kernel shares their discretization), and the final state.
    A, B, C, D = _balanced_bessel(6)
    dt, N, alpha, per = 0.04, 1200, 2.5, 100
    t = np.arange(N) * dt
    u = sum(np.exp(-0.5 * ((t - (k * per + 20) * dt) / 0.25) ** 2) for k in range(12))
    bnd = []
    for k in range(6):
        bnd += [(k * per + 45.25) * dt, (k * per + 99.75) * dt]
    systems = [lti.StateSpace(A, B, C, D) if i % 2 == 0 else lti.StateSpace(A / alpha, B / alpha, C, D)
               for i in range(len(bnd) + 1)]
    y, xe = lti.simulate(lti.Schedule(tuple(systems), bnd), u, dt, block=block, return_state=True)
    f = 4
    tf = np.arange((N - 1) * f + 1) * dt / f
    uf = np.interp(tf, t, u)
    cuts = [0] + [int(round(b / dt * f)) for b in bnd] + [tf.size - 1]
    yf, xf = _lsim_pieces([(s.A, s.B, s.C, float(s.D)) for s in systems], uf, tf, cuts)
    assert np.max(np.abs(y[0] - yf[::f])) < 1e-9 * np.max(np.abs(yf))
    assert np.max(np.abs(xe[0] - xf)) < 1e-9 * np.max(np.abs(xf))  # state at the last sample


def test_per_trial_systems_with_many_switches_match_single_runs():
    # the batched path (each trial its own A) against the same trials run one at a time with
    # scipy lsim on a sample-aligned periodic schedule
    A, B, C, D = _balanced_bessel(5)
    rng = np.random.default_rng(7)
    K, dt, N, alpha = 3, 0.05, 700, 0.6
    As = A[None] * (1 + 0.03 * rng.standard_normal((K,) + A.shape) * (A != 0))
    t = np.arange(N) * dt
    u = np.exp(-0.5 * ((t - 3.0) / 0.5) ** 2) + np.exp(-0.5 * ((t - 20.0) / 0.5) ** 2)
    ks = [150, 300, 450, 600]
    sysm = lti.StateSpace(As, B, C, D)
    systems = [sysm if i % 2 == 0 else sysm.scaled(1 / alpha) for i in range(len(ks) + 1)]
    y = lti.simulate(lti.Schedule(tuple(systems), np.array(ks) * dt), u, dt)
    for k in range(K):
        pieces = [(As[k] * (1 if i % 2 == 0 else 1 / alpha), B * (1 if i % 2 == 0 else 1 / alpha), C, D)
                  for i in range(len(ks) + 1)]
        yl, _ = _lsim_pieces(pieces, u, t, [0] + ks + [N - 1])
        assert np.max(np.abs(y[k] - yl)) < 1e-9 * np.max(np.abs(yl))


def test_shared_schedule_with_per_trial_inputs_and_states_matches_lsim():
    # independent solver: scipy lsim per trial on a sample-aligned schedule whose systems and
    # instants all trials share, while the input and the initial state differ per trial
    # (the offsets of repeated pieces are then batched over trials and pieces at once); two
    # switches fall on consecutive samples, and the last one on the record's last interval
    A, B, C, D = _balanced_bessel(5)
    rng = np.random.default_rng(11)
    K, dt, N, alpha = 3, 0.05, 800, 1.8
    t = np.arange(N) * dt
    u = np.stack([a * np.exp(-0.5 * ((t - c) / 0.4) ** 2) + a * np.exp(-0.5 * ((t - c - 20) / 0.4) ** 2)
                  for a, c in zip((1.0, -0.5, 2.0), (2.0, 2.5, 3.0))])
    x0 = rng.standard_normal((K, A.shape[0]))
    ks = [100, 200, 201, 400, 500, 700, N - 2]
    systems = [lti.StateSpace(A, B, C, D) if i % 2 == 0 else lti.StateSpace(A / alpha, B / alpha, C, D)
               for i in range(len(ks) + 1)]
    y, xe = lti.simulate(lti.Schedule(tuple(systems), np.array(ks) * dt), u, dt, x0=x0,
                         return_state=True)
    pieces = [(s.A, s.B, s.C, float(s.D)) for s in systems]
    for k in range(K):
        yl, xl = _lsim_pieces(pieces, u[k], t, [0] + ks + [N - 1], x0=x0[k])
        assert np.max(np.abs(y[k] - yl)) < 1e-9 * np.max(np.abs(yl))
        assert np.max(np.abs(xe[k] - xl)) < 1e-9 * np.max(np.abs(xl))


def test_first_order_gmc_noise_is_ktc():
    # standard result: a first-order gm-C section (input and load transconductors, γ = 1/2
    # each here so the total is one resistor's 4kT·gm) has output noise variance kT/C;
    # kT/C of 1 pF at 300 K is 64.36 µV rms
    T, C, gm = 300.0, 1e-12, 1e-3
    assert math.sqrt(KB * T / C) == pytest.approx(64.36e-6, rel=1e-4)
    q = 2 * (2 * KB * T * 0.5 * gm) / C ** 2  # two sources, one-sided 4kT·γ·gm → two-sided /2
    sysm = lti.StateSpace([[-gm / C]], [gm / C], [1.0], 0.0, [[q]])
    # through a switch (with ramp) the stationary variance stays kT/C: P = Q/(2a) is invariant
    sch = lti.Schedule.switched(sysm, 3.0, 1e-9, ramp=0.2e-9)
    var = lti.output_variance(sch, 300, 10e-12)
    assert np.allclose(var, KB * T / C, rtol=1e-9)
    # sampled realisations reproduce it within a few per cent (4000 trials: ~2.2 % rms)
    r = lti.sample_noise(sch, 300, 10e-12, np.random.default_rng(0), trials=4000)
    assert np.mean(r[:, ::50].var(axis=0)) == pytest.approx(KB * T / C, rel=0.05)


def test_variance_transient_matches_closed_form():
    # from zero initial covariance, a first-order system has P(t) = P∞(1 − e^{−2at})
    a, q = 2e9, 4e9
    sysm = lti.StateSpace([[-a]], [a], [1.0], 0.0, [[q]])
    dt, N = 5e-12, 500
    var = lti.output_variance(sysm, N, dt, P0=[[0.0]])[0]
    t = np.arange(N) * dt
    assert np.allclose(var, q / (2 * a) * (1 - np.exp(-2 * a * t)), rtol=1e-10, atol=1e-20)


def test_nonlinear_path_tends_to_linear_and_compresses():
    A, B, C, D = _balanced_bessel(4)
    sch = lti.Schedule.switched(lti.StateSpace(A, B, C, D), 2.0, 3.0)
    dt, N = 0.02, 500
    u = 0.1 * np.exp(-0.5 * ((np.arange(N) * dt - 1.0) / 0.3) ** 2)
    y = lti.simulate(sch, u, dt)[0]
    big = lti.simulate_nonlinear(sch, u, dt, 1e7, substeps=4)[0]
    assert np.max(np.abs(big - y)) < 1e-6 * np.max(np.abs(y))
    small = lti.simulate_nonlinear(sch, u, dt, 0.03, substeps=4)[0]
    assert np.max(np.abs(small)) < np.max(np.abs(y))  # a soft limit lowers the peak


def test_bad_input():
    with pytest.raises(ValueError, match="factor"):
        lti.Schedule.switched(lti.StateSpace([[-1.0]], [1.0], [1.0]), 0.0, 1.0)
    with pytest.raises(ValueError, match="dt"):
        lti.simulate(lti.StateSpace([[-1.0]], [1.0], [1.0]), np.ones(4), -1.0)
    with pytest.raises(ValueError, match="not stable"):
        lti.stationary_covariance(np.array([[1.0]]), np.array([[1.0]]))
    with pytest.raises(ValueError, match="shape"):
        lti.StateSpace(np.ones((2, 3)), [1, 1], [1, 1])


def test_trials_in_chunks_equal_one_batch_and_bound_memory(monkeypatch):
    # chunking is bookkeeping: the same per-trial results (to rounding) as one batch, with the
    # traced peak of the work arrays held near the output (the target: about 2×)
    import tracemalloc

    from timescale.numerics.lti import kernel

    rng = np.random.default_rng(7)
    n, K, N, dt = 6, 300, 2000, 5e-12
    A = -np.eye(n) * 2e9 + np.diag(np.full(n - 1, 1.5e9), -1)
    As = A[None] * (1 + 0.02 * rng.standard_normal((K, n, n)) * (A != 0))
    sch = lti.Schedule.switched(lti.StateSpace(As, np.r_[2e9, np.zeros(n - 1)], np.eye(n)[-1]), 2.0,
                                3e-9 + 1e-12 * rng.standard_normal(K))
    u = np.exp(-0.5 * ((np.arange(N) * dt - 1e-9) / 100e-12) ** 2)
    monkeypatch.setattr(kernel, "_CHUNK_BYTES", 2 ** 40)
    whole = lti.simulate(sch, u, dt)
    monkeypatch.setattr(kernel, "_CHUNK_BYTES", 2 ** 20)
    assert kernel._chunk(N, n, None) < K  # several chunks
    tracemalloc.start()
    chunked = lti.simulate(sch, u, dt)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    np.testing.assert_allclose(chunked, whole, rtol=0, atol=1e-13 * np.max(np.abs(whole)))
    assert peak < 2.5 * chunked.nbytes


def test_equal_systems_given_as_distinct_objects_share_one_discretization():
    # a periodic schedule written out system by system: the planner must see two systems, not 41
    from timescale.numerics.lti.planning import _unique

    A = np.array([[-2e9, 0.0], [1e9, -1e9]])
    fast = [lti.StateSpace(A, [2e9, 0.0], [0.0, 1.0]) for _ in range(21)]
    slow = [lti.StateSpace(A / 2, [1e9, 0.0], [0.0, 1.0]) for _ in range(20)]
    systems = [s for pair in zip(fast, slow) for s in pair] + [fast[-1]]
    uniq, umap = _unique(lti.Schedule(tuple(systems), np.arange(1, 41) * 1e-9))
    assert len(uniq) == 2
    np.testing.assert_array_equal(umap, np.arange(41) % 2)
    # a system that differs in one bit of one entry stays apart
    odd = lti.StateSpace(np.nextafter(A, 0), [2e9, 0.0], [0.0, 1.0])
    uniq, umap = _unique(lti.Schedule((fast[0], odd, fast[1]), [1e-9, 2e-9]))
    assert len(uniq) == 2 and umap.tolist() == [0, 1, 0]


def test_steps_sharing_one_block_equal_separate_van_loan_exponentials():
    # every step of a switched schedule is expm(h·M0) of one block (the scaled system's too);
    # checked against scipy.linalg.expm of the Van Loan block, one matrix at a time
    from timescale.numerics.lti.discretize import FohFamily

    rng = np.random.default_rng(3)
    n, K = 6, 4
    A = -3e10 * np.eye(n) + 8e9 * rng.standard_normal((K, n, n))
    B = 1e10 * rng.standard_normal((K, n))
    fam = FohFamily(A, B, 2.5e-12)

    def van_loan(a, b, h):
        M = np.zeros((n + 2, n + 2))
        M[:n, :n], M[:n, n], M[n, n + 1] = a * h, b * h, 1.0
        E = sla.expm(M)
        return E[:n, :n], E[:n, n] - E[:n, n + 1], E[:n, n + 1]

    for h, scale in ((2.5e-12, 1.0), (np.array([0.0, 1e-13, 2e-12, 4e-11]), 1.0), (2.5e-12, 0.5)):
        got = fam.step(np.asarray(h) * scale)
        hs = np.broadcast_to(h, (K,))
        for k in range(K):
            want = van_loan(A[k] * scale, B[k] * scale, hs[k])
            for g, w in zip(got, want):
                np.testing.assert_allclose(g[k], w, rtol=0, atol=1e-13 * max(1.0, np.max(np.abs(w))))
