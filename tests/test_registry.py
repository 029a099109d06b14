"""Plugin registry: code registration, failures isolated, duplicate names, unknown names."""

import numpy as np
import pytest

import timescale
from timescale.contract import registry
from timescale.data.errors import PluginLoadWarning
from timescale.plugin import hookimpl
from toy_methods import Ideal


def test_register_in_code_and_undo():
    with timescale.registered(Ideal()):
        assert "test-ideal" in timescale.available_methods()
        x = timescale.Pulse.gaussian(sigma=50e-12, center=0.5e-9, duration=1e-9, rate=100e9)
        out = timescale.stretch(x, "test-ideal", 3.0, gain=2.0)
        assert out.pulse.values.shape == (1, x.n)
        assert out.pulse.peak()[0] == pytest.approx(2.0)
    assert "test-ideal" not in timescale.available_methods()


def test_duplicate_name_names_both_sources():
    with timescale.registered(Ideal()):
        with pytest.raises(ValueError, match="registered in code"):
            timescale.register_method(Ideal())
    clash = type("Clash", (Ideal,), {"name": "resample"})()
    with pytest.raises(ValueError, match=r"'resample'.*entry point 'resample'"):
        timescale.register_method(clash)


def test_unknown_method_suggests_the_closest():
    with pytest.raises(ValueError, match="did you mean 'resample'"):
        timescale.get_method("resampel")


def test_unknown_parameter_lists_the_valid_ones():
    x = timescale.Pulse.gaussian(sigma=50e-12, center=0.5e-9, duration=1e-9, rate=100e9)
    with pytest.raises(TypeError, match=r"no parameter 'bitz' \(did you mean 'bits'\?\)"):
        timescale.stretch(x, "resample", 2.0, bitz=8)
    with pytest.raises(TypeError, match="must be int"):
        timescale.stretch(x, "resample", 2.0, bits=8.5)
    with pytest.raises(ValueError, match="must be one of 'zoh', 'ideal'"):
        timescale.stretch(x, "resample", 2.0, dac="sinc")


class _FakeEntryPoint:
    def __init__(self, name, target=None, error=None):
        self.name, self.value, self._target, self._error, self.dist = name, f"fake:{name}", target, error, None

    def load(self):
        if self._error:
            raise self._error
        return self._target


class _GoodPlugin:
    @staticmethod
    @hookimpl
    def timescale_methods():
        return [Ideal()]


def test_broken_plugin_warns_by_name_and_others_still_load(monkeypatch):
    eps = [_FakeEntryPoint("broken-one", error=ImportError("no module named nowhere")),
           _FakeEntryPoint("good-one", target=_GoodPlugin)]
    monkeypatch.setattr(registry, "_entry_points", lambda: eps)
    timescale.refresh()
    with pytest.warns(PluginLoadWarning, match="'broken-one'.*ImportError"):
        names = timescale.available_methods()
    assert names == ["test-ideal"]


def test_autoload_switch_leaves_only_code_methods(monkeypatch):
    monkeypatch.setenv(registry.AUTOLOAD_ENV, "1")
    timescale.refresh()
    with timescale.registered(Ideal()):
        assert timescale.available_methods() == ["test-ideal"]


def test_registry_is_cached_until_refresh(monkeypatch):
    calls = []
    real = registry._entry_points
    monkeypatch.setattr(registry, "_entry_points", lambda: calls.append(1) or real())
    timescale.refresh()
    timescale.available_methods()
    timescale.available_methods()
    assert len(calls) == 1
    timescale.refresh()
    timescale.available_methods()
    assert len(calls) == 2


def test_method_object_is_accepted_directly():
    x = timescale.Pulse.gaussian(sigma=50e-12, center=0.5e-9, duration=1e-9, rate=100e9)
    out = timescale.stretch(x, Ideal(), 2.0)
    assert out.method == "test-ideal"
    np.testing.assert_array_equal(out.pulse.values[0], x.values)
