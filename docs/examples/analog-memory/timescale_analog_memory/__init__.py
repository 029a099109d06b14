"""A sampled analog memory (switched-capacitor array) as a timescale method.

This distribution is found by timescale only through its entry point::

    [project.entry-points.timescale]
    analog-memory = "timescale_analog_memory"

which names this module; timescale calls the ``timescale_methods`` hook below.
"""

from timescale.plugin import hookimpl

from .method import AnalogMemory, AnalogMemoryDesign, AnalogMemoryParams

__all__ = ["AnalogMemory", "AnalogMemoryDesign", "AnalogMemoryParams", "timescale_methods"]
__version__ = "0.1.0"


@hookimpl
def timescale_methods():
    """Provide the ``analog-memory`` method."""
    return [AnalogMemory()]
