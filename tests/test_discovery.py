"""Plugin discovery end to end, through real package metadata (no mocked entry points).

* the example distribution ``timescale-analog-memory`` (CI: ``pip install
  ./docs/examples/analog-memory``) is listed by ``timescale methods``, runs in a suite and
  passes the conformance suite;
* a hand-built distribution (a ``*.dist-info`` folder with ``entry_points.txt`` on sys.path)
  whose module raises on import gives a PluginLoadWarning naming it, and the others load;
* a second method with a taken name is an error naming both sources;
* ``TIMESCALE_NO_AUTOLOAD=1`` leaves only methods registered in code.
"""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
import warnings

import pytest

import timescale
from timescale.contract import registry
from timescale.data.errors import PluginLoadWarning
from toy_methods import Ideal

EXAMPLE = "analog-memory"
INSTALL = "pip install ./docs/examples/analog-memory"


@pytest.fixture(autouse=True)
def _rediscover():
    timescale.refresh()
    yield
    timescale.refresh()


def _require_example():
    from importlib import metadata

    try:
        metadata.distribution("timescale-analog-memory")
    except metadata.PackageNotFoundError:
        pytest.fail(f"the example distribution is not installed; run `{INSTALL}`")


def _cli(*args, env_extra=None):
    env = dict(os.environ)
    env.pop("TIMESCALE_NO_AUTOLOAD", None)
    env.update(env_extra or {})
    return subprocess.run([sys.executable, "-m", "timescale", *args], capture_output=True,
                          text=True, env=env, timeout=120)


def _fake_distribution(root, dist, entry_name, module, source):
    """Write an importable module and a minimal installed-distribution record for it."""
    (root / f"{module}.py").write_text(textwrap.dedent(source))
    info = root / f"{dist.replace('-', '_')}-0.0.1.dist-info"
    info.mkdir()
    (info / "METADATA").write_text(f"Metadata-Version: 2.1\nName: {dist}\nVersion: 0.0.1\n")
    (info / "entry_points.txt").write_text(f"[timescale]\n{entry_name} = {module}\n")


GOOD_SOURCE = """
    from toy_methods import Ideal
    from timescale.plugin import hookimpl

    class HandBuilt(Ideal):
        name = "hand-built"

    @hookimpl
    def timescale_methods():
        return [HandBuilt()]
"""


# ---- the example distribution ------------------------------------------------------------------

def test_cli_lists_the_example_distribution():
    _require_example()
    res = _cli("methods")
    assert res.returncode == 0, res.stderr
    assert f"{EXAMPLE}  —" in res.stdout
    assert "distribution timescale-analog-memory" in res.stdout
    assert "resample  —" in res.stdout  # the built-ins still load beside it


def test_example_found_only_through_its_entry_point():
    _require_example()
    assert EXAMPLE in timescale.available_methods()
    assert "entry point 'analog-memory'" in registry.method_sources()[EXAMPLE]
    assert registry.plugin_versions()["analog-memory"] == "0.1.0"


def test_example_passes_conformance():
    _require_example()
    from timescale.testing import check_method

    found = check_method(timescale.get_method(EXAMPLE))
    assert found["fitted_factors"][2.0] == pytest.approx(2.0, rel=1e-3)


def test_suite_runs_the_example_by_name(tmp_path):
    _require_example()
    suite = tmp_path / "memory.toml"
    suite.write_text(textwrap.dedent("""
        # invented scenario: one Gaussian through the memory and the reference
        name = "discovery"
        methods = ["analog-memory", "resample"]
        factors = [2.0, 100.0]
        seed = 3
        [[pulses]]
        shape = "gaussian"
        name = "g"
        fwhm = 235e-12
        center = 0.6e-9
        duration = 3e-9
        rate = 40e9
    """))
    out = tmp_path / "cube.nc"
    res = _cli("run", str(suite), "-o", str(out), "--no-progress")  # a fresh process
    assert res.returncode == 0, res.stdout + res.stderr
    cube = timescale.load_cube(out)
    status = cube["status"].sel({"method_name": EXAMPLE}).values.ravel()
    assert list(status) == ["ok", "ok"]
    fitted = cube["fitted_factor"].sel({"method_name": EXAMPLE}).values.ravel()
    assert fitted == pytest.approx([2.0, 100.0], rel=1e-3)
    assert "record_energy_fraction" in cube  # the method's own metric reached the cube


def test_compare_by_default_includes_the_example():
    _require_example()
    x = timescale.Pulse.gaussian(sigma=100e-12, center=0.6e-9, duration=3e-9, rate=40e9)
    cube = timescale.compare(x, factors=[4.0], seed=0)
    assert EXAMPLE in list(cube["method_name"].values)


# ---- hand-built distributions on sys.path --------------------------------------------------------

def test_broken_entry_point_warns_by_name_and_the_rest_load(tmp_path, monkeypatch):
    _fake_distribution(tmp_path, "timescale-broken-example", "broken-example",
                       "timescale_broken_example", "raise RuntimeError('deliberately broken at import')\n")
    _fake_distribution(tmp_path, "timescale-hand-built", "hand-built", "timescale_hand_built", GOOD_SOURCE)
    monkeypatch.syspath_prepend(str(tmp_path))
    timescale.refresh()
    with pytest.warns(PluginLoadWarning) as caught:
        names = timescale.available_methods()
    messages = [str(w.message) for w in caught if issubclass(w.category, PluginLoadWarning)]
    assert len(messages) == 1
    assert "'broken-example'" in messages[0]
    assert "timescale-broken-example" in messages[0]
    assert "deliberately broken at import" in messages[0]
    assert "hand-built" in names and "resample" in names
    assert "distribution timescale-hand-built 0.0.1" in registry.method_sources()["hand-built"]


def test_duplicate_name_from_two_distributions_names_both(tmp_path, monkeypatch):
    _fake_distribution(tmp_path, "timescale-copycat", "copycat", "timescale_copycat", """
        from toy_methods import Ideal
        from timescale.plugin import hookimpl

        class Copy(Ideal):
            name = "resample"

        @hookimpl
        def timescale_methods():
            return [Copy()]
    """)
    monkeypatch.syspath_prepend(str(tmp_path))
    timescale.refresh()
    with pytest.raises(ValueError) as err:
        timescale.available_methods()
    text = str(err.value)
    assert "'resample'" in text
    assert "entry point 'resample'" in text  # the built-in
    assert "entry point 'copycat'" in text and "timescale-copycat" in text


def test_code_registration_clashing_with_an_installed_method_names_both():
    with pytest.raises(ValueError, match=r"'resample'.*entry point 'resample'.*registered in code"):
        timescale.register_method(type("Clash", (Ideal,), {"name": "resample"})())


def test_no_autoload_leaves_only_code_registered_methods(tmp_path, monkeypatch):
    _fake_distribution(tmp_path, "timescale-hand-built", "hand-built", "timescale_hand_built", GOOD_SOURCE)
    monkeypatch.syspath_prepend(str(tmp_path))
    monkeypatch.setenv("TIMESCALE_NO_AUTOLOAD", "1")
    timescale.refresh()
    assert timescale.available_methods() == []
    with timescale.registered(Ideal()):
        assert timescale.available_methods() == ["test-ideal"]
    monkeypatch.delenv("TIMESCALE_NO_AUTOLOAD")
    timescale.refresh()
    with warnings.catch_warnings():
        warnings.simplefilter("error", PluginLoadWarning)
        assert {"hand-built", "resample"} <= set(timescale.available_methods())


def test_no_autoload_in_a_fresh_process():
    res = _cli("methods", env_extra={"TIMESCALE_NO_AUTOLOAD": "1"})
    assert res.returncode == 1
    assert "no methods are available" in res.stdout
