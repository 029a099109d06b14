"""timescale: compare analog pulse time-scaling architectures on the same pulse.

Quick start::

    import timescale as ts
    x = ts.Pulse.gaussian(fwhm=200e-12, center=1e-9, duration=2e-9, rate=100e9)
    out = ts.stretch(x, "resample", factor=4.0)
    cube = ts.compare(x, factors=[0.5, 2.0, 4.0])
    ts.save_cube(cube, "result.nc")

The names below are imported on first use, so ``import timescale`` stays light (no xarray,
matplotlib or scipy.signal until a function needs them).
"""

from __future__ import annotations

import importlib

from timescale import _compat

__version__ = "0.1.0"

#: public name -> (module, attribute); attribute None means the module itself.
_PUBLIC = {
    "Pulse": ("timescale.data.pulse", "Pulse"),
    "Technology": ("timescale.data.technology", "Technology"),
    "PRESETS": ("timescale.data.technology", "PRESETS"),
    "preset": ("timescale.data.technology", "preset"),
    "Method": ("timescale.contract.plugin", "Method"),
    "Design": ("timescale.contract.plugin", "Design"),
    "Bill": ("timescale.contract.plugin", "Bill"),
    "Outcome": ("timescale.contract.plugin", "Outcome"),
    "metrics": ("timescale.metrics", None),
    "stretch": ("timescale.contract.outcome", "stretch"),
    "compare": ("timescale.runner.compare", "compare"),
    "Suite": ("timescale.runner.suite", "Suite"),
    "run_suite": ("timescale.runner.execute", "run_suite"),
    "SuiteResult": ("timescale.runner.execute", "SuiteResult"),
    "available_methods": ("timescale.contract.registry", "available_methods"),
    "get_method": ("timescale.contract.registry", "get_method"),
    "register_method": ("timescale.contract.registry", "register_method"),
    "unregister_method": ("timescale.contract.registry", "unregister_method"),
    "registered": ("timescale.contract.registry", "registered"),
    "refresh": ("timescale.contract.registry", "refresh"),
    "save_cube": ("timescale.runner.cube", "save_cube"),
    "load_cube": ("timescale.runner.cube", "load_cube"),
    "TimescaleWarning": ("timescale.data.errors", "TimescaleWarning"),
    "PluginLoadWarning": ("timescale.data.errors", "PluginLoadWarning"),
    "DesignWarning": ("timescale.data.errors", "DesignWarning"),
    "SamplingWarning": ("timescale.data.errors", "SamplingWarning"),
}

__all__ = [*_PUBLIC, "__version__"]

_compat.install()


def __getattr__(name):
    try:
        module, attr = _PUBLIC[name]
    except KeyError:
        if f"timescale.{name}" in _compat.MOVED:  # an old module path used as an attribute
            return importlib.import_module(f"timescale.{name}")
        raise AttributeError(f"module 'timescale' has no attribute {name!r}") from None
    value = importlib.import_module(module)
    if attr is not None:
        value = getattr(value, attr)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__():
    return sorted(set(globals()) | set(_PUBLIC))
