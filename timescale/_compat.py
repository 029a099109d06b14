"""Old module paths (timescale 0.1 had one flat package) that keep working for one release.

``import timescale.lti`` (and every other moved path) gives a stand-in module that forwards each
attribute to the module's new home and warns once with :class:`DeprecationWarning` naming it.
The stand-ins go away in timescale 0.3.
"""

from __future__ import annotations

import importlib
import importlib.abc
import importlib.util
import sys
import types
import warnings

#: old dotted path -> new homes, searched in order for each attribute.
MOVED: dict[str, tuple[str, ...]] = {
    "timescale.pulse": ("timescale.data.pulse",),
    "timescale.technology": ("timescale.data.technology",),
    "timescale.units": ("timescale.data.units",),
    "timescale.errors": ("timescale.data.errors",),
    "timescale.signal": ("timescale.data.signal",),
    "timescale._checks": ("timescale.data.checks",),
    "timescale.costs": ("timescale.numerics.costs",),
    "timescale.lti": ("timescale.numerics.lti",),
    "timescale.dispersion": ("timescale.numerics.dispersion",),
    "timescale.hookspecs": ("timescale.contract.hookspecs",),
    "timescale.registry": ("timescale.contract.registry",),
    "timescale.hookdoc": ("timescale.contract.hookdoc",),
    "timescale.run": ("timescale.contract.outcome", "timescale.runner.cells", "timescale.runner.compare"),
    "timescale.suite": ("timescale.runner.suite",),
    "timescale.cube": ("timescale.runner.cube",),
    "timescale.execute": ("timescale.runner.execute", "timescale.runner.executors"),
    "timescale.cli": ("timescale.interface.cli",),
    "timescale.demo": ("timescale.interface.demo",),
    "timescale.summary": ("timescale.interface.tables",),
    "timescale.plot": ("timescale.interface.plot",),
    "timescale.report": ("timescale.interface.report",),
}


class _Forward(types.ModuleType):
    """A module whose attributes are looked up in the new homes."""

    def __init__(self, name: str, homes: tuple[str, ...]):
        super().__init__(name, f"Moved: see {', '.join(homes)}.")
        self.__homes = homes

    def __getattr__(self, attr):
        for home in self.__homes:
            mod = importlib.import_module(home)
            if hasattr(mod, attr):
                return getattr(mod, attr)
        raise AttributeError(f"module {self.__name__!r} (moved to {', '.join(self.__homes)}) has no attribute {attr!r}")

    def __dir__(self):
        names = set()
        for home in self.__homes:
            names.update(dir(importlib.import_module(home)))
        return sorted(names)


class _MovedFinder(importlib.abc.MetaPathFinder, importlib.abc.Loader):
    def find_spec(self, fullname, path=None, target=None):
        if fullname in MOVED:
            return importlib.util.spec_from_loader(fullname, self)
        return None

    def create_module(self, spec):
        homes = MOVED[spec.name]
        warnings.warn(f"{spec.name} has moved to {' / '.join(homes)}; the old path will be removed in "
                      "timescale 0.3", DeprecationWarning, stacklevel=2)
        return _Forward(spec.name, homes)

    def exec_module(self, module):
        pass

    def get_code(self, fullname):
        """The new home's code, so ``python -m timescale.cli`` still runs (via runpy)."""
        homes = MOVED[fullname]
        spec = importlib.util.find_spec(homes[0])
        return spec.loader.get_code(homes[0]) if len(homes) == 1 and spec is not None else None


def install() -> None:
    """Put the finder on ``sys.meta_path`` once."""
    if not any(isinstance(f, _MovedFinder) for f in sys.meta_path):
        sys.meta_path.append(_MovedFinder())
