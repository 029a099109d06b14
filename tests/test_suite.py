"""Suites as data: construction, TOML loading, error messages with key paths, ranges, pulses
from constructors and CSV, the not-applicable layout, and the `show` command."""

import json
import math
import sys
from pathlib import Path

import numpy as np
import pytest

import timescale as ts
from timescale.interface.cli import main
from timescale.runner.suite import Suite, expand_range, fill_not_applicable

sys.path.insert(0, str(Path(__file__).parent))
from suite_methods import Noisy  # noqa: E402

DOCS = Path(__file__).resolve().parent.parent / "docs" / "suites"

GAUSS = {"shape": "gaussian", "name": "g", "fwhm": 200e-12, "center": 0.5e-9, "duration": 1e-9, "rate": 50e9}

BASE_TOML = """
methods = ["resample"]
factors = [0.5, 2.0]
seed = 1
[params]
capture = true
[sweep]
bits = [6, 8, 10]
[[pulses]]
shape = "gaussian"
fwhm = 200e-12
center = 0.5e-9
duration = 1e-9
rate = 50e9
"""


def _load(tmp_path, text):
    p = tmp_path / "s.toml"
    p.write_text(text)
    return Suite.from_toml(p)


# ---- ranges ------------------------------------------------------------------------------------

def test_ranges_match_numpy():
    # reference: numpy.linspace / numpy.geomspace (both ends included)
    assert expand_range({"start": 1.0, "stop": 2.0, "num": 5}) == list(np.linspace(1.0, 2.0, 5))
    got = expand_range({"start": 1e-12, "stop": 1e-9, "num": 4, "scale": "log"})
    np.testing.assert_allclose(got, np.geomspace(1e-12, 1e-9, 4), rtol=1e-15)
    np.testing.assert_allclose(got, [1e-12, 1e-11, 1e-10, 1e-9], rtol=1e-12)  # decades
    assert expand_range([3, 1, 2]) == [3, 1, 2]


def test_integer_parameter_range_gives_integers(tmp_path):
    s = _load(tmp_path, BASE_TOML.replace("bits = [6, 8, 10]", "bits = {start = 6, stop = 12, num = 4}"))
    axis = s.plan().axes()[3]
    assert axis.name == "bits" and axis.values == [6, 8, 10, 12]
    assert all(type(v) is int for v in axis.values)


# ---- construction ------------------------------------------------------------------------------

def test_suite_from_toml_layout(tmp_path):
    s = _load(tmp_path, BASE_TOML)
    plan = s.plan()
    assert plan.shape == (1, 1, 2, 3)
    assert plan.n_cells == 6 == s.n_cells()
    assert [a.name for a in plan.axes()] == ["method_name", "pulse", "factor", "bits"]
    assert plan.axes()[3].units == "bit"
    cell = plan.cell(5, entropy=1)  # C order: last factor, last bits
    assert cell.factor == 2.0 and cell.params == {"capture": True, "bits": 10}


def test_python_and_toml_suites_agree(tmp_path):
    a = _load(tmp_path, BASE_TOML)
    b = Suite(pulses=[dict(GAUSS, name="gaussian")], methods=["resample"], factors=[0.5, 2.0],
              params={"capture": True}, sweep={"bits": [6, 8, 10]}, seed=1)
    assert a.to_dict() == b.to_dict()


def test_pulse_parameter_list_makes_one_pulse_per_value():
    s = Suite(pulses=[dict(GAUSS, fwhm=[100e-12, 200e-12, 300e-12])], methods=["resample"])
    pulses = s.plan().pulses
    assert len(pulses) == 3
    # FWHM of a Gaussian: 2*sqrt(2 ln 2)*sigma (standard result); Pulse.fwhm measures it
    widths = sorted(float(p.fwhm()) for p in pulses.values())
    np.testing.assert_allclose(widths, [100e-12, 200e-12, 300e-12], rtol=1e-2)


def test_pulses_from_csv_relative_to_suite_file(tmp_path):
    t = np.arange(64) / 20e9
    v = np.exp(-0.5 * ((t - 1.6e-9) / 0.2e-9) ** 2)
    (tmp_path / "p.csv").write_text("time,value\n" + "\n".join(f"{float(a)!r},{float(b)!r}" for a, b in zip(t, v)))
    s = _load(tmp_path, 'methods = ["resample"]\n[[pulses]]\ncsv = "p.csv"\nname = "bench"\n')
    p = s.plan().pulses["bench"]
    assert p.n == 64 and math.isclose(p.rate, 20e9, rel_tol=1e-9)
    np.testing.assert_array_equal(p.values, v)


def test_technology_preset_inline_and_file(tmp_path):
    text = 'technology = "example-fast"\n' + BASE_TOML
    assert _load(tmp_path, text).technology == ts.preset("example-fast")
    text = BASE_TOML + '[technology]\nbase = "example-coarse"\nname = "mine"\nsupply = 2.5\n'
    card = _load(tmp_path, text).technology
    assert card.name == "mine" and card.supply == 2.5 and card.cap_density == ts.preset("example-coarse").cap_density
    (tmp_path / "card.toml").write_text('base = "example-balanced"\nname = "filed"\n')
    assert _load(tmp_path, 'technology = "card.toml"\n' + BASE_TOML).technology.name == "filed"


# ---- errors name the key path ------------------------------------------------------------------

@pytest.mark.parametrize("edit, needles", [
    (("bits = [6, 8, 10]", 'bits = [6, 8, "ten"]'), ["sweep.bits[2]", "'ten'", "int"]),
    (("factors = [0.5, 2.0]", "factor = [0.5, 2.0]"), ["unknown key 'factor'", "did you mean 'factors'"]),
    (("fwhm = 200e-12", "fwhmm = 200e-12"), ["pulses[0].fwhmm", "did you mean 'fwhm'"]),
    (("bits = [6, 8, 10]", "bitz = [6, 8]"), ["sweep.bitz", "did you mean 'bits'"]),
    (("capture = true", "capture = 3"), ["params", "capture", "bool"]),
    (("bits = [6, 8, 10]", 'bits = {start = 6, stop = 12, num = 4, scale = "logg"}'),
     ["sweep.bits.scale", "'logg'", "'linear' or 'log'"]),
    (("factors = [0.5, 2.0]", "factors = [0.5, -2.0]"), ["factors[1]", "-2.0", "> 0"]),
    (('shape = "gaussian"', 'shape = "gausian"'), ["pulses[0].shape", "did you mean 'gaussian'"]),
    (("seed = 1", 'seed = 1\nkeep = "everything"'), ["keep", "'everything'", "'waveforms'"]),
    (("methods = [\"resample\"]", "methods = [\"resampel\"]"), ["methods[0]", "did you mean 'resample'"]),
    (("seed = 1", "seed = 1\n[technology]\nbase = \"example-fast\"\ncap_densty = 1e-3"),
     ["technology", "cap_densty", "did you mean 'cap_density'"]),
])
def test_toml_errors_name_the_key_path(tmp_path, edit, needles):
    text = BASE_TOML.replace(*edit)
    assert text != BASE_TOML
    with pytest.raises(ValueError) as info:
        _load(tmp_path, text)
    msg = str(info.value)
    assert "s.toml" in msg
    for n in needles:
        assert n in msg, (n, msg)


def test_suite_file_is_data_only(tmp_path):
    # a suite file cannot carry code: TOML has no such construct, and an unknown key is an error
    with pytest.raises(ValueError, match="not valid TOML"):
        _load(tmp_path, BASE_TOML + "\nimport os\n")
    with pytest.raises(ValueError, match="unknown key 'run'"):
        _load(tmp_path, 'run = "rm -rf /"\n' + BASE_TOML)


def test_sweep_name_that_is_a_cube_dim_is_refused():
    with pytest.raises(ValueError, match="sweep.factor"):
        Suite(pulses=[GAUSS], sweep={"factor": [1, 2]})


# ---- not applicable ------------------------------------------------------------------------------

def test_not_applicable_positions_are_nan_with_status_and_fill():
    with ts.registered(Noisy()):
        s = Suite(pulses=[GAUSS], methods=["resample", "suite-noisy"], factors=[2.0],
                  sweep={"bits": [6, 8, 10], "noise": [1e-3, 2e-3]}, seed=4)
        plan = s.plan()
        assert plan.not_applicable() == {"resample": ["noise"], "suite-noisy": ["bits"]}
        cube = ts.run_suite(s, progress=False).cube
    st = cube["status"].sel(factor=2.0, pulse="g")
    # resample runs once per bits value, at the first noise coordinate only
    # (10 bits at this pulse's band edge is beyond the card's aperture-jitter line: "infeasible")
    assert list(st.sel({"method_name": "resample", "noise": 1e-3}).values) == ["ok", "ok", "infeasible"]
    assert list(st.sel({"method_name": "resample", "noise": 2e-3}).values) == ["n/a"] * 3
    assert list(st.sel({"method_name": "suite-noisy", "bits": 6}).values) == ["ok"] * 2
    assert list(st.sel({"method_name": "suite-noisy", "bits": 10}).values) == ["n/a"] * 2
    assert np.isnan(cube["nrmse"].sel({"method_name": "suite-noisy", "bits": 8}).values).all()
    assert cube.attrs["n_not_applicable"] == 3 + 4 and cube.attrs["n_failed"] == 0
    assert json.loads(cube.attrs["not_applicable"])["suite-noisy"] == ["bits"]
    filled = fill_not_applicable(cube)
    a = filled["nrmse"].sel({"method_name": "suite-noisy"})
    np.testing.assert_array_equal(a.sel(bits=10).values, cube["nrmse"].sel({"method_name": "suite-noisy", "bits": 6}).values)
    assert (filled["status"].values == cube["status"].values).all()


# ---- the example suite files ---------------------------------------------------------------------

def test_example_suites_load():
    files = sorted(DOCS.glob("*.toml"))
    assert len(files) >= 3
    for f in files:
        text = f.read_text()
        assert "Invented" in text or "invented" in text, f
        Suite.from_toml(f).plan()
    assert Suite.from_toml(DOCS / "resample-grid-10k.toml").n_cells() == 10_000


# ---- show ------------------------------------------------------------------------------------------

def test_cli_run_and_show(tmp_path, capsys):
    suite = tmp_path / "s.toml"
    suite.write_text(BASE_TOML.replace("bits = [6, 8, 10]", "bits = [6, 10]").replace("[0.5, 2.0]", "[2.0]"))
    out = tmp_path / "r.nc"
    assert main(["run", str(suite), "-o", str(out), "--no-progress"]) == 0
    assert out.exists() and not Path(str(out) + ".checkpoint").exists()
    capsys.readouterr()
    assert main(["show", str(out)]) == 0
    text = capsys.readouterr().out
    for needle in ("bits", "factor", "nrmse", "(mm²)", "(dB)", "resample", "ok", "n/a"):
        assert needle in text, needle
    # a second run refuses to replace the cube unless asked
    assert main(["run", str(suite), "-o", str(out), "--no-progress"]) == 2
    assert "exists" in capsys.readouterr().err
    assert main(["run", str(suite), "-o", str(out), "--no-progress", "--overwrite"]) == 0
