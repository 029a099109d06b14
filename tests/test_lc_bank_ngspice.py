"""Independent solver: the passive LC line with switched element banks as an ngspice circuit
(ngspice, Debian package) against :func:`passive.bank_schedule`."""

import shutil
import subprocess

import numpy as np
import pytest

from timescale.numerics import lti
from timescale_builtins.switched_bandwidth import passive, prototypes

pytestmark = pytest.mark.ngspice


def _netlist(N, L, C, alpha, ts, tc, sig, dt, t_stop):
    """A 50 Ω-terminated ladder of N sections whose every L and C is scaled by α at `ts` with
    real switches: α > 1 un-shorts a series (α − 1)·L and connects a discharged (α − 1)·C;
    α < 1 shorts (1 − α)·L and disconnects (1 − α)·C."""
    big = alpha > 1
    la, lb = (L, (alpha - 1) * L) if big else (alpha * L, (1 - alpha) * L)
    ca, cb = (C, (alpha - 1) * C) if big else (alpha * C, (1 - alpha) * C)
    lines = ["* LC ladder with switched element banks",
             f"Bin in 0 V = exp(-0.5*((time-{tc})/{sig})^2)", "Rs in n0 50",
             f"Von on 0 PWL(0 0 {ts - 0.5e-12:.6e} 0 {ts + 0.5e-12:.6e} 1)",
             f"Voff off 0 PWL(0 1 {ts - 0.5e-12:.6e} 1 {ts + 0.5e-12:.6e} 0)",
             ".model sw sw vt=0.5 vh=0 ron=1e-3 roff=1e9"]
    for k in range(1, N + 1):
        lines += [f"La{k} n{k - 1} m{k} {la:.9e} IC=0", f"Lb{k} m{k} n{k} {lb:.9e} IC=0",
                  f"Sl{k} m{k} n{k} {'off' if big else 'on'} 0 sw",
                  f"Ca{k} n{k} 0 {ca:.9e} IC=0", f"Cb{k} n{k} b{k} {cb:.9e} IC=0",
                  f"Sc{k} b{k} 0 {'on' if big else 'off'} 0 sw"]
    lines += [f"Rl n{N} 0 50", ".options method=gear reltol=1e-5", ".control", "set wr_singlescale",
              "set wr_vecnames", f"tran {dt:.3e} {t_stop:.3e} uic", f"wrdata out.txt v(n{N})",
              "quit", ".endc", ".end"]
    return "\n".join(lines) + "\n"


@pytest.mark.skipif(shutil.which("ngspice") is None, reason="the ngspice binary is not installed")
@pytest.mark.parametrize("alpha", [2.0, 1 / 1.7])
def test_switched_banks_conserve_charge_and_flux_like_ngspice(tmp_path, alpha):
    # a 4-section line (1 ns of delay) holding a Gaussian (σ = 80 ps) when every element is
    # scaled at 1 ns by real switches (1 mΩ on, 1 GΩ off) in ngspice at tight tolerances
    N, ts, tc, sig, dt, t_stop = 4, 1.0e-9, 0.35e-9, 80e-12, 1e-12, 4e-9
    pr = prototypes.ladder(N, 1e-9, z0=50.0)
    (tmp_path / "f.cir").write_text(_netlist(N, pr.elements["L"], pr.elements["C"], alpha, ts, tc,
                                             sig, dt, t_stop))
    subprocess.run(["ngspice", "-b", "f.cir"], cwd=tmp_path, check=True, capture_output=True,
                   timeout=120)
    data = np.loadtxt(tmp_path / "out.txt", skiprows=1)
    t_sp, y_sp = data[:, 0], 2 * data[:, 1]  # the model reads the load node out with gain 2
    t = np.arange(int(round(t_stop / dt)) + 1) * dt
    u = np.exp(-0.5 * ((t - tc) / sig) ** 2)
    y = lti.simulate(passive.bank_schedule(pr.system, alpha, ts), u, dt)[0]
    # adding discharged elements makes the output jump at the switch: compare away from it
    away = np.abs(t_sp - ts) > 5e-12
    err = np.max(np.abs(np.interp(t_sp, t, y) - y_sp)[away]) / np.max(np.abs(y))
    assert err < 1e-3
    if alpha > 1:
        # states held continuous (the old model) would miss the circuit by the whole 1 − 1/α
        y_cont = lti.simulate(lti.Schedule.switched(pr.system, alpha, ts), u, dt)[0]
        miss = np.max(np.abs(np.interp(t_sp, t, y_cont) - y_sp)[away]) / np.max(np.abs(y))
        assert miss > 0.3
