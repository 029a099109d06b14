"""timescale: compare analog pulse time-scaling architectures on the same pulse.

Quick start::

    import timescale as ts
    x = ts.Pulse.gaussian(fwhm=200e-12, center=1e-9, duration=2e-9, rate=100e9)
    out = ts.stretch(x, "resample", factor=4.0)
    cube = ts.compare(x, factors=[0.5, 2.0, 4.0])
    ts.save_cube(cube, "result.nc")
"""

from . import metrics
from .cube import load_cube, save_cube
from .errors import DesignWarning, PluginLoadWarning, SamplingWarning, TimescaleWarning
from .plugin import Bill, Design, Method, Outcome
from .pulse import Pulse
from .registry import (
    available_methods,
    get_method,
    refresh,
    register_method,
    registered,
    unregister_method,
)
from .run import compare, stretch
from .suite import Suite
from .execute import SuiteResult, run_suite
from .technology import PRESETS, Technology, preset

__version__ = "0.1.0"

__all__ = [
    "Pulse",
    "Technology",
    "PRESETS",
    "preset",
    "Method",
    "Design",
    "Bill",
    "Outcome",
    "metrics",
    "stretch",
    "compare",
    "Suite",
    "run_suite",
    "SuiteResult",
    "available_methods",
    "get_method",
    "register_method",
    "unregister_method",
    "registered",
    "refresh",
    "save_cube",
    "load_cube",
    "TimescaleWarning",
    "PluginLoadWarning",
    "DesignWarning",
    "SamplingWarning",
    "__version__",
]
