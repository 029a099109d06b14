"""Independent solver: the switched gm-C filter as an ngspice netlist (ngspice, Debian package)."""

import shutil
import subprocess

import numpy as np
import pytest

from timescale.numerics import lti
from timescale_builtins.switched_bandwidth import prototypes

pytestmark = pytest.mark.ngspice


def _run_ngspice(folder, net, out, system):
    """Run `net` in ngspice batch mode; return its time points and the read-out y = C·x + D·u."""
    (folder / "f.cir").write_text(net)
    subprocess.run(["ngspice", "-b", str(folder / "f.cir")], cwd=folder, check=True,
                   capture_output=True, timeout=120)
    data = np.loadtxt(out, skiprows=1)
    t_sp, nodes, vin = data[:, 0], data[:, 1:-1], data[:, -1]
    return t_sp, nodes @ np.asarray(system.C) + float(system.D) * vin


@pytest.mark.skipif(shutil.which("ngspice") is None, reason="the ngspice binary is not installed")
def test_switched_gmc_against_ngspice(tmp_path):
    # 6th-order Padé all-pass as three sections, each with its output summer (9 nodes, each
    # section reads only the previous summer), τ = 1.5 ns, Gaussian σ = 100 ps at 0.6 ns;
    # switch to α = 2 at 1.1 ns with a 2 ps gm ramp (summers and their loads switched too);
    # unequal node capacitances; ngspice at its default tolerances
    proto = prototypes.pade(6, 1.5e-9)
    system, roles = prototypes.summed_cascade(proto, 8 * np.max(np.abs(proto.poles)))
    c_node = np.linspace(150e-15, 400e-15, system.order)
    ts, ramp, alpha = 1.1e-9, 2e-12, 2.0
    sig, tc = 100e-12, 0.6e-9
    dt, t_stop = 2e-12, 5e-9
    out = tmp_path / "out.txt"
    net = prototypes.ngspice_netlist(
        system, c_node, ts, alpha, ramp=ramp, roles=roles,
        source=f"exp(-0.5*((time-{tc})/{sig})^2)", t_stop=t_stop, t_step=dt, out_file=str(out))
    # one element per transconductor: summers' feed-through, feed-forward and load included
    assert sum(line.startswith("B") for line in net.splitlines()) - 1 == \
        np.count_nonzero(system.A) + np.count_nonzero(system.B)
    t_sp, y_sp = _run_ngspice(tmp_path, net, out, system)
    t = np.arange(int(round(t_stop / dt)) + 1) * dt
    u = np.exp(-0.5 * ((t - tc) / sig) ** 2)
    # ngspice's PWL ramp runs over [ts, ts + ramp]; ours is centred on the given instant
    sch = lti.Schedule.switched(system, alpha, ts + ramp / 2, ramp=ramp, segments=32)
    y = lti.simulate(sch, u, dt)[0]
    y_on_sp = np.interp(t_sp, t, y)
    err = np.max(np.abs(y_on_sp - y_sp)) / np.max(np.abs(y))
    # issue target: better than 1 % of the peak (ngspice default tolerances give ~1e-4)
    print(f"ngspice vs exact: {err:.2e} of the peak")
    assert err < 1e-2
    # and the stretched output did happen (α = 2: output peak later than τ + tc)
    assert t[np.argmax(y)] > tc + 1.5e-9


@pytest.mark.skipif(shutil.which("ngspice") is None, reason="the ngspice binary is not installed")
def test_compressed_gmc_against_ngspice_tanh(tmp_path):
    # independent solver: the same 6-node switched filter with every transconductor input
    # soft-limited, V_L·tanh(v/V_L), as ngspice B-sources, against our RK4 path. V_L = 0.3 V
    # with a 0.5 V pulse: strong compression (the output differs from the linear one by
    # well over the 1 % agreement asked for)
    proto = prototypes.pade(6, 1.5e-9)
    system, _ = prototypes.summed_cascade(proto, 8 * np.max(np.abs(proto.poles)))
    c_node, ts, ramp, alpha, vl = 200e-15, 1.1e-9, 2e-12, 2.0, 0.3
    sig, tc, amp = 100e-12, 0.6e-9, 0.5
    dt, t_stop = 2e-12, 5e-9
    out = tmp_path / "out.txt"
    net = prototypes.ngspice_netlist(
        system, c_node, ts, alpha, ramp=ramp, limit=vl,
        source=f"{amp}*exp(-0.5*((time-{tc})/{sig})^2)", t_stop=t_stop, t_step=dt, out_file=str(out))
    t_sp, y_sp = _run_ngspice(tmp_path, net, out, system)
    t = np.arange(int(round(t_stop / dt)) + 1) * dt
    u = amp * np.exp(-0.5 * ((t - tc) / sig) ** 2)
    sch = lti.Schedule.switched(system, alpha, ts + ramp / 2, ramp=ramp, segments=8)
    y = lti.simulate_nonlinear(sch, u, dt, vl, substeps=8)[0]
    y_lin = lti.simulate(sch, u, dt)[0]
    err = np.max(np.abs(np.interp(t_sp, t, y) - y_sp)) / np.max(np.abs(y))
    assert err < 1e-2
    assert np.max(np.abs(y - y_lin)) > 0.05 * np.max(np.abs(y_lin))
