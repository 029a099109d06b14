"""The plugin contract: every hook timescale calls, documented as the reference.

A plugin is a module (or object) with functions decorated by :data:`timescale.plugin.hookimpl`
whose names match the hooks below. It is found through the ``timescale`` entry-point group::

    [project.entry-points.timescale]
    my-method = "my_package.my_module"

Hooks are called with keyword arguments only; a hook implementation may accept any subset of
the documented parameters. Results from all plugins are gathered into one list and sorted by
name, so nothing depends on the order in which plugins were loaded.
"""

from __future__ import annotations

import pluggy

hookspec = pluggy.HookspecMarker("timescale")


@hookspec
def timescale_methods() -> list:
    """Return the time-scaling methods this plugin provides.

    Returns
    -------
    list of timescale.plugin.Method
        Method instances. Each ``Method.name`` must be unique across every installed plugin;
        a second method with a name already taken is an error naming both plugins.
        Constructing a method must be cheap: do not design or simulate here.
    """
