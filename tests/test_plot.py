"""Figures: what each kind draws (lines per method, labels with units, the front, colours).

The cube comes from toy methods (tests/plotreport_toys.py) whose behaviour the tests control:
one refuses factors above 3 (failed cells), one adds noise that varies by trial.
"""

import os
import subprocess
import sys

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from matplotlib.colors import to_hex  # noqa: E402

import timescale  # noqa: E402
from timescale.interface import plot  # noqa: E402

sys.path.insert(0, os.path.dirname(__file__))
import plotreport_toys as toys  # noqa: E402

# Okabe & Ito, "Color Universal Design" (2008): the eight colour-blind-safe colours (from memory)
OKABE_ITO = {"#000000", "#e69f00", "#56b4e9", "#009e73", "#f0e442", "#0072b2", "#d55e00", "#cc79a7"}


@pytest.fixture(scope="module")
def cube():
    return toys.swept_cube(trials=3, scales=(0.6, 2.0), factors=(0.5, 2.0, 4.0))


@pytest.fixture(autouse=True)
def _close():
    yield
    plt.close("all")


@pytest.fixture(scope="module")
def outcomes():
    x = toys.pulses()["monocycle"]
    with timescale.registered(toys.ToyLowpass()):
        return {"resample": timescale.stretch(x, "resample", 4.0),
                "toy-lowpass": timescale.stretch(x, "toy-lowpass", 4.0, scale=0.8)}


# ---- styles -------------------------------------------------------------------------------------

def test_known_methods_use_okabe_ito_colours_and_distinct_markers():
    names = ["resample", "chirp-dispersive", "switched-bandwidth"]
    styles = [plot.method_style(n) for n in names]
    assert {s["color"].lower() for s in styles} <= OKABE_ITO
    assert len({s["color"] for s in styles}) == 3
    assert len({s["marker"] for s in styles}) == 3


def test_fallback_style_is_stable_across_processes():
    # Python's str hash is salted per process; the style must not be
    code = "from timescale.plot import method_style as s; print(s('my-new-method'))"
    outs = {subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                           env={**os.environ, "PYTHONHASHSEED": seed}).stdout for seed in ("1", "2")}
    assert len(outs) == 1
    assert outs.pop().strip() == str(plot.method_style("my-new-method"))


def test_fallback_styles_do_not_reuse_the_known_colours():
    known = {s["color"] for s in plot.METHOD_STYLES.values()}
    for name in ("a", "toy-lowpass", "toy-noisy", "time-lens", "x" * 40):
        assert plot.method_style(name)["color"] not in known


# ---- metric versus a swept dimension -----------------------------------------------------------

def test_metric_draws_one_line_per_method_with_trial_band(cube):
    d = plot.plot_metric(cube, "nrmse", "factor", select={"pulse": "gaussian"}, others="best")
    for m in ("toy-lowpass", "toy-noisy"):
        assert len(d.lines_of(m)) == 1
    # independent reduction with xarray: best (lowest) over the swept scale, median over trials
    expect = cube["nrmse"].sel(pulse="gaussian").min("scale").median("trial")
    for m in ("toy-lowpass", "toy-noisy"):
        y = d.lines_of(m)[0].get_ydata()
        np.testing.assert_allclose(y, expect.sel({"method_name": m}).values, rtol=1e-12)
    # the noisy toy varies by trial: it has a band; x positions are the factors
    assert "band:toy-noisy" in d.artists
    np.testing.assert_allclose(d.lines_of("toy-noisy")[0].get_xdata(), [0.5, 2.0, 4.0])
    assert d.axes[0].get_xlabel() == "stretch factor α"
    assert d.axes[0].get_ylabel() == "NRMSE against the ideal scaled pulse"
    assert d.legend is not None and "trials" in d.legend.get_title().get_text()


def test_metric_axis_in_display_units_and_failed_cells_marked(cube):
    d = plot.plot_metric(cube, "area", "factor")
    assert d.axes[0].get_ylabel() == "silicon area (mm²)"
    y = d.lines_of("toy-noisy")[0].get_ydata()
    expect = cube["area"].sel({"method_name": "toy-noisy"}).median(["pulse", "scale"]).median("trial") * 1e6
    np.testing.assert_allclose(y, expect.values, rtol=1e-12)
    # toy-lowpass refuses factor 4 (max_factor 3): one failed marker, at factor 4
    fx = d.artists["failed:toy-lowpass"][0]
    np.testing.assert_allclose(fx.get_xdata(), [4.0])
    assert "failed:toy-noisy" not in d.artists


def test_metric_over_a_swept_setting_and_a_floor(cube):
    d = plot.plot_metric(cube, "nrmse", "scale", select={"factor": 2.0}, floor=0.05)
    assert d.axes[0].get_xlabel() == "band limit / output bandwidth"
    y = d.lines_of("toy-lowpass")[0].get_ydata()
    assert np.all(y >= 0.05)
    raw = cube["nrmse"].sel({"method_name": "toy-lowpass", "factor": 2.0}).median("pulse").median("trial")
    assert np.any(raw.values < 0.05)  # so the floor did something
    assert "floor:toy-lowpass" in d.artists


def test_metric_over_a_categorical_dimension(cube):
    d = plot.plot_metric(cube, "sndr_db", "pulse", select={"factor": 2.0})
    assert [t.get_text() for t in d.axes[0].get_xticklabels()] == ["gaussian", "monocycle"]
    assert d.axes[0].get_ylabel() == "signal to noise-and-distortion ratio (dB)"


# ---- trade-off ----------------------------------------------------------------------------------

def test_pareto_mask_on_a_worked_example():
    # worked by hand: (2,3) is dominated by (2,2); (3,3) by all three of the front; NaN never on it
    cost = [1, 2, 3, 2, 3, np.nan]
    bad = [3, 2, 1, 3, 3, 0]
    assert plot.pareto_mask(cost, bad).tolist() == [True, True, True, False, False, False]


def test_tradeoff_front_points_are_non_dominated(cube):
    d = plot.plot_tradeoff(cube, "power", "nrmse", target=0.1)
    ax = d.axes[0]
    assert ax.get_ylabel().startswith("active power (mW)")
    assert ax.get_xlabel().startswith("NRMSE against the ideal scaled pulse")
    for m in ("toy-lowpass", "toy-noisy"):
        pts, front = d.data[f"points:{m}"], d.data[f"front:{m}"]
        assert len(front) >= 1
        for f, c in front:  # no design of the method is no worse in both and better in one
            dom = (pts[:, 0] <= f) & (pts[:, 1] <= c) & ((pts[:, 0] < f) | (pts[:, 1] < c))
            assert not np.any(dom)
        for f, c in pts:  # every other design is dominated by (or equal to) a front design
            assert np.any((front[:, 0] <= f) & (front[:, 1] <= c))
        # one point per design: cells with a value (median over trials)
        n = int(np.isfinite(cube["nrmse"].sel({"method_name": m}).median("trial")).sum())
        assert len(pts) == n
        assert len(d.lines_of(f"front:{m}")) == 1


def test_tradeoff_with_sndr_prefers_higher(cube):
    d = plot.plot_tradeoff(cube, "area", "sndr_db")
    pts, front = d.data["points:toy-noisy"], d.data["front:toy-noisy"]
    best = pts[np.argmax(pts[:, 0])]
    assert any(np.allclose(best, f) for f in front)  # the highest SNDR is always on the front
    assert "→ better" in d.axes[0].get_xlabel()


# ---- heat maps ----------------------------------------------------------------------------------

def test_map_one_panel_per_method_shared_scale_and_failed_cells(cube):
    d = plot.plot_map(cube, "nrmse", "factor", "scale")
    assert len(d.axes) == 2
    meshes = [d.artists[m][0] for m in ("toy-lowpass", "toy-noisy")]
    assert meshes[0].norm is meshes[1].norm or (meshes[0].norm.vmin, meshes[0].norm.vmax) == \
        (meshes[1].norm.vmin, meshes[1].norm.vmax)
    expect = cube["nrmse"].sel({"method_name": "toy-noisy"}).median(["pulse", "trial"]).transpose("scale", "factor")
    np.testing.assert_allclose(d.data["toy-noisy"], expect.values, rtol=1e-12)
    # toy-lowpass fails at factor 4 for both scales: two cells say so
    texts = [t.get_text() for t in d.artists["failed:toy-lowpass"]]
    assert texts == ["failed", "failed"]
    assert d.artists["colorbar"][0].ax.get_ylabel() == "NRMSE against the ideal scaled pulse"
    assert d.axes[0].get_ylabel() == "band limit / output bandwidth"
    assert d.axes[0].get_xlabel() == "stretch factor α"


# ---- waveforms and spectra ----------------------------------------------------------------------

def test_waveforms_lines_and_residual(outcomes):
    d = plot.plot_waveforms(outcomes)
    main, res = d.axes
    assert len(d.lines_of("input")) == 1 and len(d.lines_of("ideal")) == 1
    for m in outcomes:
        assert len(d.lines_of(m)) == 1 and len(d.lines_of(f"residual:{m}")) == 1
    assert res.get_xlabel() == "normalized time τ = (t − d)/α (ns)"
    # ideal band-limited scaling is exact (DESIGN §5): its residual is at rounding level
    assert np.max(np.abs(d.lines_of("residual:resample")[0].get_ydata())) < 1e-6
    # the low-pass toy leaves a visible residual
    assert np.max(np.abs(d.lines_of("residual:toy-lowpass")[0].get_ydata())) > 1e-3
    # the mapped-back output of the exact method lies on the input: x(τ) sampled at its τ
    x = toys.pulses()["monocycle"]
    line = d.lines_of("resample")[0]
    tau, y = line.get_xdata() * 1e-9, line.get_ydata()
    inside = (tau > x.t[2]) & (tau < x.t[-3])
    ref = np.interp(tau[inside], x.t, x.values) / np.max(np.abs(x.values))
    assert np.max(np.abs(y[inside] - ref)) < 0.02  # linear interpolation of the input grid
    assert d.data["gain"]["resample"] == pytest.approx(1.0, abs=1e-9)


def test_waveforms_into_one_given_axes_splits_off_the_residual(outcomes):
    fig, ax = plt.subplots()
    d = plot.plot_waveforms(outcomes, ax=ax)
    assert d.axes[0] is ax and len(d.axes) == 2 and d.figure is fig


def test_spectra_mark_occupied_bandwidths(outcomes):
    d = plot.plot_spectra(outcomes)
    ax = d.axes[0]
    assert ax.get_xlabel() == "frequency (GHz)"
    assert ax.get_ylabel() == "magnitude relative to own peak (dB)"
    x = toys.pulses()["monocycle"]
    assert d.data["bandwidth"]["input"] == pytest.approx(x.occupied_bandwidth(), rel=1e-12)
    # scaling theorem (Oppenheim & Willsky): x(t/α) has its spectrum compressed by α
    assert d.data["bandwidth"]["resample"] == pytest.approx(x.occupied_bandwidth() / 4.0, rel=0.01)
    vline = d.artists["bandwidth:resample"][0]
    assert vline.get_xdata()[0] == pytest.approx(d.data["bandwidth"]["resample"] * 1e-9)
    assert len(d.lines_of("resample")) == 1 and len(d.lines_of("input")) == 1


# ---- consistency and keyword checks ----------------------------------------------------------

def test_colours_and_markers_match_across_figures(cube, outcomes):
    m = "toy-lowpass"
    style = plot.method_style(m)
    a = plot.plot_metric(cube, "nrmse", "factor").lines_of(m)[0]
    b = plot.plot_tradeoff(cube, "area", "nrmse").lines_of(f"front:{m}")[0]
    pts = plot.plot_tradeoff(cube, "area", "nrmse").artists[m][1]
    c = plot.plot_waveforms(outcomes).lines_of(m)[0]
    e = plot.plot_spectra(outcomes).lines_of(m)[0]
    for line in (a, b, c, e):
        assert to_hex(line.get_color()) == to_hex(style["color"])
    for line in (a, c, e):
        assert line.get_marker() == style["marker"]
    assert to_hex(pts.get_facecolor()[0]) == to_hex(style["color"])
    assert to_hex(plot.plot_metric(cube, "nrmse", "factor").lines_of("toy-noisy")[0].get_color()) \
        == to_hex(plot.method_style("toy-noisy")["color"])


@pytest.mark.parametrize("fn, args", [
    (plot.plot_metric, ("nrmse",)), (plot.plot_tradeoff, ()), (plot.plot_map, ("nrmse", "factor", "scale")),
])
def test_unknown_keywords_are_rejected_by_name(cube, fn, args):
    with pytest.raises(TypeError, match="colour"):
        fn(cube, *args, colour="red")


@pytest.mark.parametrize("fn", [plot.plot_waveforms, plot.plot_spectra])
def test_unknown_keywords_are_rejected_for_outcome_figures(outcomes, fn):
    with pytest.raises(TypeError, match="linewidht"):
        fn(outcomes, linewidht=2)


def test_bad_names_are_reported_with_valid_choices(cube):
    with pytest.raises(ValueError, match="nrmse"):
        plot.plot_metric(cube, "nrmsee")
    with pytest.raises(ValueError, match="factor"):
        plot.plot_metric(cube, "nrmse", "factr")
    with pytest.raises(ValueError, match="0.5, 2.0, 4.0"):
        plot.plot_metric(cube, "nrmse", "scale", select={"factor": 3.0})
    with pytest.raises(TypeError, match="Outcome"):
        plot.plot_waveforms([1, 2])


def test_no_figure_is_shown(cube, monkeypatch):
    def fail(*a, **k):
        raise AssertionError("show() was called")

    monkeypatch.setattr(plt, "show", fail)
    plot.plot_metric(cube)
    plot.plot_tradeoff(cube)
    plot.plot_map(cube, "nrmse", "factor", "scale")
