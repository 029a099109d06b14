"""Tests of the switched-bandwidth method against outside references."""

import math

import numpy as np
import pytest
from scipy import signal as ss

import timescale as ts
from timescale.numerics import costs, lti
from timescale.data.technology import DEFAULT_TECHNOLOGY
from timescale.testing import check_method
from timescale_builtins.switched_bandwidth import SwitchedBandwidth, prototypes

X = ts.Pulse.gaussian(sigma=100e-12, center=0.6e-9, duration=3e-9, rate=40e9)


def test_conformance_suite():
    # the project's conformance suite: identity, factor 0.5/2, linearity, bill, determinism
    out = check_method(SwitchedBandwidth())
    assert abs(out["fitted_factors"][2.0] / 2.0 - 1) < 0.05


@pytest.mark.parametrize("factor", [2.0, 0.5])
def test_reaches_factor_with_own_design(factor):
    # scaling theorem (Oppenheim & Willsky): duration × α, same peak amplitude
    oc = ts.stretch(X, "switched-bandwidth", factor=factor)
    assert ts.metrics.achieved_factor(oc.pulse, X)[0] == pytest.approx(factor, rel=0.03)
    assert np.max(np.abs(oc.pulse.values)) == pytest.approx(1.0, rel=0.03)
    assert oc.metrics["leakage"].value[0] < 1e-2


def test_bessel_delay_normalization():
    # scipy docs / Thomson 1949: bessel(norm='delay') has unit DC group delay
    p = prototypes.bessel(7, 2e-9)
    assert lti.dc_group_delay(p.system) == pytest.approx(2e-9, rel=1e-12)
    b, a = ss.bessel(7, 1.0 / 2e-9, analog=True, norm="delay")
    f = np.array([1e7, 1e8, 3e8])
    _, h = ss.freqs(b, a, 2 * np.pi * f)
    assert np.allclose(p.response(f), h, rtol=1e-9)


def test_pade_11_group_delay():
    # standard result: Padé (1,1) τ_g = τ/(1 + (ωτ/2)²) → 0.8τ at ωτ = 1
    tau = 1e-9
    assert prototypes.pade_group_delay(1, tau, 1 / tau) == pytest.approx(0.8 * tau, rel=1e-12)
    # and the all-pass keeps |H| = 1
    p = prototypes.pade(9, tau)
    assert np.allclose(np.abs(p.response(np.linspace(0, 5e9, 50))), 1.0, atol=1e-12)


def test_constant_k_ladder_values():
    # Pozar, Microwave Engineering (from memory): L = 1 nH, C = 0.4 pF → Z0 = 50 Ω,
    # 20 ps per section, cutoff 1/(π√(LC)) = 15.92 GHz
    p = prototypes.ladder(40, 1.0e-9)  # per-section delay set by the terminated line
    e = p.elements
    assert math.sqrt(e["L"] / e["C"]) == pytest.approx(50.0, rel=1e-12)
    L, C = 1e-9, 0.4e-12
    assert math.sqrt(L * C) == pytest.approx(20e-12, rel=1e-12)
    assert 1 / (math.pi * math.sqrt(L * C)) == pytest.approx(15.92e9, rel=1e-3)
    # a matched 40-section line delays by about 40 section delays at DC
    assert e["section_delay"] * 40 == pytest.approx(1e-9, rel=0.05)
    assert lti.dc_gain(p.system) == pytest.approx(1.0, rel=1e-9)


def test_gyrator_and_spiral_and_ktc():
    # standard gm-C result; Mohan et al., IEEE JSSC 1999; standard kT/C
    assert costs.gyrator_inductance(100e-15, 5e-3) == pytest.approx(4e-9, rel=1e-12)
    assert costs.spiral_inductance(3, 200e-6, 100e-6) == pytest.approx(2.07e-9, rel=0.01)
    assert costs.ktc_noise(1e-12, 300.0) == pytest.approx(64.36e-6, rel=1e-4)


def test_trade_fact_3ns_delay_for_2ns_pulses():
    # common practice, no source: factors near 2 and 0.5 are reachable with about 3 ns of
    # delay for pulses under 2 ns wide
    x = ts.Pulse.gaussian(fwhm=0.5e-9, center=1.2e-9, duration=4e-9, rate=20e9)
    for a in (2.0, 0.5):
        oc = ts.stretch(x, "switched-bandwidth", factor=a, delay=3e-9)
        assert ts.metrics.achieved_factor(oc.pulse, x)[0] == pytest.approx(a, rel=0.05)


def test_passive_lc_larger_than_gmc():
    # common practice, no source: an on-chip passive LC delay line occupies a few times the
    # area of its gm-C equivalent
    # (true at the default noise target; a much lower target grows the gm-C capacitors as
    # 1/v_n² and reverses it). The 3 ns line for a 0.5 ns pulse of the trade fact above:
    x = ts.Pulse.gaussian(fwhm=0.5e-9, center=1.2e-9, duration=4e-9, rate=20e9)
    oc = ts.stretch(x, "switched-bandwidth", factor=2.0, delay=3e-9)
    lc = ts.stretch(x, "switched-bandwidth", factor=2.0, delay=3e-9, realization="lc")
    assert 2 < lc.bill.area / oc.bill.area < 20  # "a few times"
    assert oc.design.lc_area == pytest.approx(lc.design.lc_area)


def test_more_gm_less_noise():
    # common practice, no source: raising gm (and power) lowers the noise
    lo = ts.stretch(X, "switched-bandwidth", factor=2.0, noise=True, noise_target=2e-3, seed=1)
    hi = ts.stretch(X, "switched-bandwidth", factor=2.0, noise=True, noise_target=0.5e-3, seed=1)
    assert hi.bill.power > lo.bill.power
    n_lo, n_hi = lo.metrics["noise_rms"].value[0], hi.metrics["noise_rms"].value[0]
    assert n_hi < n_lo
    # the exact covariance hits the kT/C sizing target (noise is scale-invariant under the
    # switch: the stationary variance of A/α with Q/α equals that of A with Q)
    assert n_hi == pytest.approx(0.5e-3, rel=0.02)
    assert hi.clean is not None and np.std(hi.pulse.values - hi.clean.values) > 0


def test_mismatch_and_jitter_spread_trials():
    oc = ts.stretch(X, "switched-bandwidth", factor=2.0, trials=6, gm_mismatch=0.01,
                    jitter=5e-12, seed=4)
    v = oc.pulse.values
    assert v.shape[0] == 6 and np.std(v[:, np.argmax(np.abs(v[0]))]) > 0
    ideal = ts.stretch(X, "switched-bandwidth", factor=2.0, trials=2, seed=4).pulse.values
    assert np.array_equal(ideal[0], ideal[1])


def test_transition_and_finite_gain_and_soft_limit_run():
    base = ts.stretch(X, "switched-bandwidth", factor=2.0).pulse.values[0]
    ramp = ts.stretch(X, "switched-bandwidth", factor=2.0, transition=20e-12).pulse.values[0]
    ro = ts.stretch(X, "switched-bandwidth", factor=2.0, gm_ro=30.0).pulse.values[0]
    assert 0 < np.max(np.abs(ramp - base)) < 0.05
    assert np.max(np.abs(ro)) < np.max(np.abs(base))  # lossy integrators lose amplitude
    x = X.scale(0.05)
    lin = ts.stretch(x, "switched-bandwidth", factor=2.0).pulse.values[0]
    # far below the limit the RK4 path agrees with the exact one; what remains is the switch
    # moved to the nearest sub-step edge (first order in the sub-step) and RK4's own error
    soft = ts.stretch(x, "switched-bandwidth", factor=2.0, gm_limit=10.0, substeps=8).pulse.values[0]
    assert np.max(np.abs(soft - lin)) < 1e-2 * np.max(np.abs(lin))
    # a compressed all-pass cascade is not bound to lose peak: its output is a difference of
    # large internal signals and compression breaks the cancellation (see simulate_nonlinear);
    # what must hold is that compression changes the output and the result stays finite
    hard = ts.stretch(x, "switched-bandwidth", factor=2.0, gm_limit=0.01, substeps=8).pulse.values[0]
    assert np.all(np.isfinite(hard)) and np.max(np.abs(hard - lin)) > 0.05 * np.max(np.abs(lin))


def test_soft_limit_slew_bound_first_order():
    # derived bound: a gm-C follower dx/dt = a(φ(u) − φ(x)), |φ| ≤ V_L, cannot move faster
    # than 2·a·V_L, so a 0.1-long unit pulse lifts it by at most 2·a·V_L·0.1; and the smaller
    # the limit, the lower the peak (for a single section the slew limit is the only effect)
    a, dt = 10.0, 1e-3
    t = np.arange(600) * dt
    u = ((t > 0.05) & (t < 0.15)).astype(float)
    sysm = lti.StateSpace([[-a]], [a], [1.0])
    peaks = []
    for vl in (2.0, 0.5, 0.1, 0.02):
        y = lti.simulate_nonlinear(sysm, u, dt, vl, substeps=4)[0]
        assert np.max(y) <= 2 * a * vl * (0.1 + 2 * dt) + 1e-12
        peaks.append(np.max(y))
    assert np.all(np.diff(peaks) < 0)


def test_refusals():
    m = SwitchedBandwidth()
    with pytest.raises(ValueError, match="repetition interval"):
        ts.stretch(X, m, factor=4.0, repetition=3e-9)
    with pytest.raises(ValueError, match="shorter than the pulse"):
        ts.stretch(X, m, factor=2.0, delay=0.2e-9)
    with pytest.raises(ValueError, match="factor"):
        ts.stretch(X, m, factor=0.0)
    with pytest.raises(ValueError, match="factor"):
        ts.stretch(X, m, factor=-1.0)
    with pytest.warns(ts.DesignWarning):
        ts.stretch(X, m, factor=2.0, order=4, delay=1.5e-9)


def test_fidelity_shortfall_designs_best_order_and_warns():
    # a comparison shows a shortfall in its metrics instead of an empty cell: a Bessel-Thomson
    # prototype cannot delay this pulse within 2 % at 20 poles (its impulse response spreads
    # as τ/√(2n−1); Thomson 1949), so the design takes the best order and warns
    m = SwitchedBandwidth()
    with pytest.warns(ts.DesignWarning, match="max_order=20"):
        oc = ts.stretch(X, m, factor=2.0, prototype="bessel", max_order=20)
    d = oc.design
    assert d.fidelity_design > 0.02
    # "best": no order up to 20 at the same delay does better (scipy-normalized Bessel)
    nfft = 1 << int(math.ceil(math.log2(8 * X.n)))
    f, S = X.spectrum(nfft)
    P = np.abs(S) ** 2
    errs = []
    for n in range(1, 21):
        h = prototypes.bessel(n, d.delay).response(f)
        errs.append(math.sqrt(np.sum(P * np.abs(h - np.exp(-2j * np.pi * f * d.delay)) ** 2) / np.sum(P)))
    assert d.fidelity_design == pytest.approx(min(errs), rel=1e-9)
    assert d.order == int(np.argmin(errs)) + 1
    # the cube marks the cell "warned" with the reason, and its metrics are finite
    cube = ts.compare(X, [m], [2.0], prototype="bessel", max_order=20)
    assert str(cube["status"].values.ravel()[0]) == "warned"
    assert np.isfinite(cube["nrmse"].values).all()


def test_summed_cascade_structure_and_response():
    # each Padé section reads only the previous section's summer node (or the input): no
    # node reads across sections; H = Padé all-pass × Π ω_s/(s + ω_s) (closed form, one
    # real pole per summer), DC group delay τ + K/ω_s
    pr = prototypes.pade(9, 1e-9)
    ws = 1.5e11
    sysm, roles = prototypes.summed_cascade(pr, ws)
    A = np.asarray(sysm.A)
    summers = [i for i, r in enumerate(roles) if r == "summer"]
    assert len(summers) == len(pr.elements["sections"]) == 5 and roles[-1] == "summer"
    start = 0
    for k, s in enumerate(summers):
        own = set(range(start, s + 1))
        allowed = own | ({summers[k - 1]} if k else set())
        for i in own:
            assert set(np.flatnonzero(A[i])) <= allowed
        start = s + 1
    f = np.linspace(1e7, 6e9, 40)
    s_ = 2j * np.pi * f
    ref = np.prod((-s_[:, None] - pr.poles) / (s_[:, None] - pr.poles), axis=1) * (ws / (s_ + ws)) ** 5
    assert np.allclose(lti.frequency_response(sysm, f), ref, atol=1e-12)
    assert lti.dc_group_delay(sysm) == pytest.approx(1e-9 + 5 / ws, rel=1e-9)


def test_scaling_theorem_with_summers():
    # Oppenheim & Willsky: every gm (summers and their loads too) divided by α, capacitor
    # charges kept ⇒ after the input has ended the output is the unswitched one dilated about
    # the switch instant, y_sw(t_s + αθ) = y_0(t_s + θ)
    oc = ts.stretch(X, "switched-bandwidth", factor=2.0)
    sysm = oc.design.system()
    dt = X.dt
    N = 4 * X.n
    u = np.concatenate([np.ravel(X.values), np.zeros(N - X.n)])
    k0 = int(math.ceil((oc.design.t_switch - X.t0) / dt))  # first sample after t_s
    # the design left less than leakage_target (1e-3) of the input after t_s; end it there
    assert np.max(np.abs(u[k0:])) < 1e-3 * np.max(np.abs(u))
    u[k0:] = 0.0
    y0 = lti.simulate(sysm, u, dt)[0]
    ysw = lti.simulate(lti.Schedule.switched(sysm, 2.0, k0 * dt), u, dt)[0]
    j = np.arange(0, (N - k0) // 2)
    assert np.max(np.abs(ysw[k0 + 2 * j] - y0[k0 + j])) < 1e-9 * np.max(np.abs(y0))


def test_summer_noise_in_model_and_bill():
    # the exact output variance (Lyapunov + Van Loan through the switch, lti.output_variance)
    # of the realization with every transconductor's 4kTγ·gm — summers and their loads too —
    # equals kTγ·Σ F_i/C_i, the sum the capacitors were sized with; the summers' share is
    # part of it, and dropping their noise lowers the variance
    oc = ts.stretch(X, "switched-bandwidth", factor=2.0, noise=True, seed=2, prototype="pade",
                    noise_target=5e-3)
    d = oc.design
    kT = costs.BOLTZMANN * DEFAULT_TECHNOLOGY.temperature * DEFAULT_TECHNOLOGY.gm_noise_gamma
    c = np.asarray(d.node_capacitance)
    Fi = np.asarray(d.node_noise_factors)
    summer = np.array([r == "summer" for r in d.node_roles])
    assert summer.sum() == len(d.elements["sections"]) and Fi[summer].sum() > 0
    # the nodes swing the card's linear range (0.2 V for a 1 V pulse): the node-scale target is
    # 5 mV × 0.2 (this cascade's summers are too fast for the cells' own pole on this card,
    # own_share > 1, so no node is raised above its noise sizing)
    v_node = 5e-3 * d.swing / d.signal_peak
    assert d.swing == DEFAULT_TECHNOLOGY.gm_linear_range and d.own_share > 1
    assert kT * np.sum(Fi / c) == pytest.approx(v_node ** 2, rel=1e-6)
    sysm = d.system()
    Q = SwitchedBandwidth.__module__ and __import__(
        "timescale_builtins.switched_bandwidth", fromlist=["gm_c_matrices"]).gm_c_matrices(
        sysm.A, sysm.B, c, DEFAULT_TECHNOLOGY.temperature, DEFAULT_TECHNOLOGY.gm_noise_gamma)
    full = lti.StateSpace(sysm.A, sysm.B, sysm.C, sysm.D, Q)
    Qi = Q * (~summer)[:, None]
    part = lti.StateSpace(sysm.A, sysm.B, sysm.C, sysm.D, Qi)
    N = 800
    v_full = lti.output_variance(lti.Schedule.switched(full, 2.0, 1e-9), N, X.dt)[0]
    v_part = lti.output_variance(lti.Schedule.switched(part, 2.0, 1e-9), N, X.dt)[0]
    assert np.sqrt(v_full[-1]) == pytest.approx(v_node, rel=0.03)
    assert np.all(v_part < v_full)
    # and the simulation reads it back at the pulse's scale
    assert oc.metrics["noise_rms"].value[0] == pytest.approx(5e-3, rel=0.03)
    # the bill counts the summers' transconductors and every gm is C_i·|A_ij|
    names = [i.name for i in oc.bill.items]
    assert "summer transconductors" in names and "integrator transconductors" in names
    A = np.abs(np.asarray(sysm.A))
    assert sum(d.gms) == pytest.approx(np.sum(c[:, None] * A) + np.sum(c * np.abs(sysm.B)), rel=1e-12)


def test_cube_trials_metrics_and_seed():
    # the cube carries a trial dim, the method's own metrics with units, trials that differ
    # (gm mismatch + noise) and is identical for the same seed (DESIGN §3 randomness rule)
    kw = dict(trials=8, seed=11, gm_mismatch=0.01, noise=True)
    cube = ts.compare(X, ["switched-bandwidth"], [0.5, 2.0], **kw)
    assert cube.sizes["trial"] == 8
    for name, unit in (("leakage", ""), ("noise_rms", "V"), ("snr_db", "dB"), ("delay", "s"),
                       ("bandwidth_used", "Hz"), ("filter_order", ""), ("lc_area", "m²")):
        assert name in cube.data_vars and cube[name].attrs["units"] == unit
        assert cube[name].attrs["long_name"]
    # noise_rms is the nominal filter's (exact covariance), read where each trial peaks; the
    # sampled noise and the mismatch make the trials differ
    noise = cube["noise_rms"].sel(factor=2.0).values.ravel()
    assert np.all(np.isfinite(noise)) and np.all(noise > 0)
    assert np.std(cube["nrmse"].sel(factor=2.0).values) > 0
    again = ts.compare(X, ["switched-bandwidth"], [0.5, 2.0], **kw)
    for name in ("nrmse", "leakage", "noise_rms", "snr_db", "power"):
        assert np.array_equal(cube[name].values, again[name].values, equal_nan=True)


def test_node_scaling_keeps_response_and_meets_noise_target():
    # the scaled realization keeps the Padé all-pass H(s) = Π(−s − p)/(s − p) (closed form)
    # and equal node peaks; the exact output noise (Lyapunov/Van Loan, lti.output_variance)
    # equals the default noise target the node capacitance was sized for (kT/C sizing)
    oc = ts.stretch(X, "switched-bandwidth", factor=2.0, noise=True, seed=3, prototype="pade",
                    noise_target=5e-3)
    d = oc.design
    sysm = d.system()
    f = np.linspace(1e8, 6e9, 40)
    K = len(d.elements["sections"])
    proto = prototypes.pade(d.order, d.delay - K / d.summer_pole)
    assert np.allclose(lti.frequency_response(sysm, f),
                       prototypes.summer_response(proto, d.summer_pole, f), atol=1e-9)
    n = d.states
    u = np.concatenate([np.ravel(X.values), np.zeros(4 * X.n)])
    nodes = lti.simulate(lti.StateSpace(sysm.A, sysm.B, np.eye(n), 0.0), u, X.dt)
    y = lti.simulate(sysm, u, X.dt)[0]
    assert np.allclose(np.max(np.abs(nodes), axis=1), np.max(np.abs(y)), rtol=1e-6)
    assert oc.metrics["noise_rms"].value[0] == pytest.approx(5e-3, rel=0.02)
    cap = [i for i in oc.bill.items if i.name == "node capacitors"][0]
    drawn = np.maximum(np.asarray(d.node_capacitance) - np.asarray(d.node_own_capacitance), 0)
    assert cap.count == n and cap.area == pytest.approx(drawn.sum() / DEFAULT_TECHNOLOGY.cap_density)


def test_unreachable_leakage_target_gives_the_least_leaky_design_with_a_warning():
    # a comparison keeps the cell: the design tried with the least leakage is delivered and the
    # leakage metric shows the shortfall (a target of 1e-12 is below what any finite delay of
    # an all-pass with feed-through reaches; a ladder line, a low-pass, has no feed-through)
    x = ts.Pulse.gaussian(sigma=100e-12, center=0.6e-9, duration=3e-9, rate=40e9)
    with pytest.warns(ts.DesignWarning, match="leakage at the switch instant"):
        out = ts.stretch(x, "switched-bandwidth", 2.0, leakage_target=1e-12, prototype="pade")
    assert out.metrics["leakage"].value > 1e-12
    assert any("brought the leakage below" in n for n in out.design.notes)
