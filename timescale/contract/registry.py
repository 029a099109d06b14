"""Plugin discovery: entry points, in-code registration, one cache.

Each entry point of the ``timescale`` group is loaded in its own ``try``: one broken plugin
warns (:class:`~timescale.errors.PluginLoadWarning`, naming it) and the others still load.
Set the environment variable ``TIMESCALE_NO_AUTOLOAD=1`` to skip entry points entirely, leaving
only methods registered in code. The plugin manager is built on first use and cached;
:func:`refresh` rebuilds it.
"""

from __future__ import annotations

import contextlib
import os
import threading
import warnings
from dataclasses import dataclass
from importlib import metadata

import pluggy

from timescale.contract import hookspecs
from timescale.contract.plugin import Method
from timescale.data.errors import PluginLoadWarning, closest

__all__ = [
    "AUTOLOAD_ENV",
    "available_methods",
    "get_method",
    "method_sources",
    "plugin_versions",
    "register_method",
    "unregister_method",
    "registered",
    "refresh",
]

AUTOLOAD_ENV = "TIMESCALE_NO_AUTOLOAD"
_GROUP = "timescale"
_lock = threading.RLock()
_state: "_Registry | None" = None
_code_methods: dict[str, Method] = {}


@dataclass
class _Registry:
    manager: pluggy.PluginManager
    methods: dict[str, Method]
    sources: dict[str, str]
    versions: dict[str, str]


def _entry_points():
    return sorted(metadata.entry_points(group=_GROUP), key=lambda ep: ep.name)


def _build() -> _Registry:
    pm = pluggy.PluginManager(_GROUP)
    pm.add_hookspecs(hookspecs)
    sources: dict[str, str] = {}  # plugin name -> "entry point X (distribution Y)"
    versions: dict[str, str] = {}
    if os.environ.get(AUTOLOAD_ENV, "").strip().lower() not in ("1", "true", "yes", "on"):
        for ep in _entry_points():
            dist = getattr(ep, "dist", None)
            label = f"entry point {ep.name!r} ({ep.value}"
            label += f", distribution {dist.name} {dist.version})" if dist else ")"
            try:
                plugin = ep.load()
                pm.register(plugin, name=ep.name)
            except Exception as exc:  # any failure in third-party code: warn, carry on
                warnings.warn(
                    f"timescale plugin {label} failed to load and is skipped: "
                    f"{type(exc).__name__}: {exc}",
                    PluginLoadWarning,
                    stacklevel=3,
                )
                continue
            sources[ep.name] = label
            versions[ep.name] = dist.version if dist else "unknown"
    pm.check_pending()
    methods: dict[str, Method] = {}
    where: dict[str, str] = {}
    for impl in pm.hook.timescale_methods.get_hookimpls():
        plugin_name = pm.get_name(impl.plugin)
        try:
            found = impl.function()
            found = list(found or [])
            for m in found:
                if not isinstance(m, Method):
                    raise TypeError(f"returned {m!r}, which is not a timescale.plugin.Method")
        except Exception as exc:
            warnings.warn(
                f"timescale plugin {sources.get(plugin_name, plugin_name)} failed in "
                f"timescale_methods() and is skipped: {type(exc).__name__}: {exc}",
                PluginLoadWarning,
                stacklevel=3,
            )
            continue
        for m in found:
            _add(methods, where, m, sources.get(plugin_name, plugin_name))
    for m in _code_methods.values():
        _add(methods, where, m, "registered in code")
    return _Registry(pm, dict(sorted(methods.items())), where, versions)


def _add(methods, where, m: Method, source: str):
    if m.name in methods:
        raise ValueError(
            f"two methods are named {m.name!r}: one from {where[m.name]}, one from {source}; "
            "rename one of them"
        )
    methods[m.name] = m
    where[m.name] = source


def _registry() -> _Registry:
    global _state
    with _lock:
        if _state is None:
            _state = _build()
        return _state


def refresh() -> None:
    """Forget the cached plugin manager; the next call rediscovers every plugin."""
    global _state
    with _lock:
        _state = None


def available_methods() -> list[str]:
    """Return the names of every available method, sorted."""
    return list(_registry().methods)


def method_sources() -> dict[str, str]:
    """Return ``{method name: where it came from}``."""
    return dict(_registry().sources)


def plugin_versions() -> dict[str, str]:
    """Return ``{entry-point name: distribution version}`` of the loaded plugins."""
    return dict(_registry().versions)


def get_method(method) -> Method:
    """Return a Method from a name or pass a Method object through.

    Raises
    ------
    ValueError
        For an unknown name (with the closest valid one).
    TypeError
        For anything that is neither a string nor a Method.
    """
    if isinstance(method, Method):
        return method
    if not isinstance(method, str):
        raise TypeError(f"method must be a method name (str) or a timescale.plugin.Method, got {method!r}")
    methods = _registry().methods
    if method not in methods:
        raise ValueError(
            f"method {method!r} is not available{closest(method, methods)}; available: "
            f"{', '.join(methods) or '(none: is timescale installed with its plugins?)'}"
        )
    return methods[method]


def register_method(method: Method) -> Method:
    """Register a method in code (scripts, notebooks); returns it.

    Raises
    ------
    ValueError
        When a method of that name already exists (naming both sources).
    """
    if not isinstance(method, Method):
        raise TypeError(f"method must be a timescale.plugin.Method instance, got {method!r}")
    with _lock:
        existing = _registry()
        if method.name in existing.methods:
            raise ValueError(
                f"two methods are named {method.name!r}: one from "
                f"{existing.sources[method.name]}, one registered in code; rename one of them"
            )
        _code_methods[method.name] = method
        refresh()
    return method


def unregister_method(name: str) -> None:
    """Remove a method registered in code."""
    with _lock:
        if name not in _code_methods:
            raise ValueError(f"no method named {name!r} was registered in code; registered: {', '.join(_code_methods) or '(none)'}")
        del _code_methods[name]
        refresh()


@contextlib.contextmanager
def registered(method: Method):
    """Context manager: register `method` in code for the duration of the block."""
    register_method(method)
    try:
        yield method
    finally:
        unregister_method(method.name)
