"""The report's figures: per-pulse panels of fidelity, trade-off and bandwidth, and the re-run
waveforms and spectra.
"""

from __future__ import annotations

from timescale.analysis.findings import _HIGHER_IS_BETTER, _cell_dims
from timescale.interface.plot.style import _coord_name, _short_name

# ---- figures -----------------------------------------------------------------------------------

def _figure(figsize):
    from matplotlib.figure import Figure

    return Figure(figsize=figsize, layout="constrained")


def _per_pulse(ds, draw, figsize_per=(4.6, 3.7)):
    """One panel per pulse in a row; only the last carries the legend, to its right."""
    pulses = [str(p) for p in ds["pulse"].values]
    fig = _figure((figsize_per[0] * len(pulses) + 2.4, figsize_per[1]))
    axs = fig.subplots(1, len(pulses), squeeze=False)[0]
    for i, (a, p) in enumerate(zip(axs, pulses)):
        draw(a, p, "outside" if i == len(pulses) - 1 else False)
    return fig


def _swept_axis(ds):
    """The dim for the horizontal axis of the metric figures: factor, unless it has a single
    value and some other setting is swept."""
    if ds.sizes["factor"] > 1:
        return "factor"
    others = [d for d in _cell_dims(ds) if d not in ("pulse", "factor") and ds.sizes[d] > 1]
    return others[0] if others else "factor"


def _build_figures(ds, *, target, fidelity, outcomes, pname, factor):
    from timescale.interface import plot

    figs = []  # (key, heading, caption, Figure)
    over = _swept_axis(ds)
    settings = [d for d in _cell_dims(ds) if d not in ("pulse", over) and ds.sizes[d] > 1]
    others = "best" if settings else "median"
    other_note = (f" Where several settings of {', '.join(settings)} were tried, each point is the "
                  f"best of them." if settings else "")
    over_name = _coord_name(ds, over)
    # results exact to rounding (NRMSE ~1e-14) would squeeze a log axis: draw them at a floor
    floor = target * 1e-4 if fidelity not in _HIGHER_IS_BETTER and target > 0 else None

    def fid_panel(a, p, legend):
        plot.plot_metric(ds, fidelity, over, ax=a, select={"pulse": p}, others=others, target=target,
                         floor=floor, title=f"{_short_name(ds[fidelity])}, {p}", legend=legend)

    figs.append(("fidelity", f"Fidelity against {over_name}",
                 f"How closely each method's output matches the ideal scaled pulse at each "
                 f"{over_name}; dashed: the target.{other_note} Lower is better.",
                 _per_pulse(ds, fid_panel)))
    if "bw_out" in ds:
        def bw_panel(a, p, legend):
            plot.plot_metric(ds, "bw_out", over, ax=a, select={"pulse": p}, others="median",
                             title=f"Output 99 % bandwidth, {p}", legend=legend)

        figs.append(("bandwidth", f"Output bandwidth against {over_name}",
                     "The band a digitizer after the time-scaler must pass (99 % occupied "
                     "bandwidth of the output).", _per_pulse(ds, bw_panel)))
    costs = [c for c in ("area", "power") if c in ds]
    if costs:
        fig = _figure((4.6 * len(costs) + 2.4, 3.7))
        axs = fig.subplots(1, len(costs), squeeze=False)[0]
        for i, (a, c) in enumerate(zip(axs, costs)):
            plot.plot_metric(ds, c, over, ax=a, others="median",
                             title=f"{_short_name(ds[c])} versus {over_name}",
                             legend="outside" if i == len(costs) - 1 else False)
        figs.append(("cost", f"Cost against {over_name}",
                     "Silicon area and active power of each design (median over pulses"
                     + (" and settings" if settings else "") + ").", fig))
        fig = _figure((4.8 * len(costs) + 2.6, 4.1))
        axs = fig.subplots(1, len(costs), squeeze=False)[0]
        for i, (a, c) in enumerate(zip(axs, costs)):
            plot.plot_tradeoff(ds, c, fidelity, ax=a, target=target, floor=floor,
                               legend="outside" if i == len(costs) - 1 else False)
        figs.append(("tradeoff", "Cost against fidelity",
                     "One point per design (pulse, factor and settings). Outlined points with the "
                     "staircase form each method's front: no other design of that method is both "
                     "cheaper and more faithful.", fig))
    two = [d for d in _cell_dims(ds) if d != "pulse" and ds.sizes[d] > 1]
    if len(two) >= 2:
        n = ds.sizes["method_name"]
        fig = _figure((3.3 * n + 1.4, 3.9))
        axs = fig.subplots(1, n, squeeze=False, sharey=True)[0]
        plot.plot_map(ds, fidelity, two[0], two[1], ax=list(axs))
        figs.append(("map", f"Fidelity over {_coord_name(ds, two[0])} and "
                             f"{_coord_name(ds, two[1])}",
                     "One map per method on a shared colour scale (median over pulses and trials); "
                     "grey cells failed.", fig))
    if outcomes:
        fig = _figure((11.0, 5.6))  # room for the legend beside the panels
        a, r = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [3, 1.3]})
        plot.plot_waveforms(outcomes, ax=[a, r],
                            title=f"Waveforms at α = {factor:g}, {pname}, mapped back onto the input's time")
        figs.append(("waveforms", "Waveforms",
                     f"Each method re-run for the pulse “{pname}” at α = {factor:g} with the cube's "
                     "parameters, technology and seed (best setting where settings were swept). "
                     "Outputs are shifted by their fitted latency, divided by their fitted gain "
                     "and drawn on τ = (t − d)/α, so a perfect method lies on the dashed ideal; "
                     "the lower panel shows what is left over.", fig))
        fig = _figure((7.6, 4.3))
        plot.plot_spectra(outcomes, ax=fig.subplots(),
                          title=f"Spectra at α = {factor:g}, {pname} (dotted: 99 % occupied bandwidth)")
        figs.append(("spectra", "Spectra",
                     "Magnitude spectra of the input and of each output, each relative to its own "
                     "peak; the dotted lines mark the 99 % occupied bandwidths.", fig))
    return figs
