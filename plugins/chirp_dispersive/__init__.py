"""Built-in method ``chirp-dispersive``: chirp mixing and dispersive delay lines.

Two arrangements (``arrangement=``):

``"stretch"``
    The pulse amplitude-modulates a linearly chirped carrier (chirp rate μ, equivalent GDD
    Φ1 = 1/(2πμ)); a dispersive line Φ2 maps each instant of the chirp to a new delay, so the
    envelope comes out scaled by M = 1 + Φ2/Φ1 (Φ2 of the opposite sign compresses). The two
    sidebands of each tone pick up the phase Φ2ω²/(2M): the dispersion penalty
    cos(Φ2ω²/(2M)), reported and warned about when it dominates.
``"lens"``
    Temporal imaging: line Φ1, quadratic-phase mixing with focal GDD Φf ("time lens"), line
    Φ2, with 1/Φ1 + 1/Φ2 = 1/Φf and M = −Φ2/Φ1. The classic, inverted image (Φ1, Φ2 of one
    sign) is time-reversed and recorded as ``orientation = −1``; ``image="upright"`` uses
    lines of opposite sign instead.

The numerics (line models, padding, detectors) live in :mod:`timescale.numerics.dispersion`.
"""

from timescale.plugin import hookimpl

from .method import ChirpDesign, ChirpDispersive, ChirpParams

__all__ = ["ChirpDispersive", "ChirpDesign", "ChirpParams", "timescale_methods"]


@hookimpl
def timescale_methods():
    """Provide the built-in ``chirp-dispersive`` method."""
    return [ChirpDispersive()]
