"""Figures for comparing time-scaling methods (matplotlib; never calls ``show``).

Every function follows one template: it computes what it needs, draws into ``ax=`` (a new
figure when omitted), rejects keywords it does not know (``TypeError`` naming them), labels the
axes from the cube's ``long_name`` and ``units`` in display units (:mod:`timescale.units`) and
returns a :class:`Drawing` holding the artists it made.

Each method keeps one colour and marker in every figure (:func:`method_style`): a fixed table for
the known method names and a stable hash of the name for any other, drawn from the Okabe–Ito
colour-blind-safe palette (Okabe & Ito, "Color Universal Design", 2008). The input pulse is
black, the ideal reference a dashed dark grey.

Kinds
-----
:func:`plot_waveforms`   input, outputs and the ideal on a normalized time axis, residual below
:func:`plot_spectra`     input and output spectra with their occupied bandwidths
:func:`plot_metric`      a metric against any swept dimension, one line per method
:func:`plot_tradeoff`    cost against fidelity, one point per design, non-dominated front
:func:`plot_map`         small multiples: a heat map over two swept dimensions per method

Modules: ``style`` (colours, markers, the Drawing record, shared axis and selection helpers),
``waveforms`` (waveforms and spectra of outcomes), ``sweeps`` (a metric against a dimension),
``tradeoff`` (cost against fidelity and the non-dominated front), ``maps`` (heat maps).
Imports numpy, xarray, matplotlib, :mod:`timescale.data` and the layers below the interface.
"""

from timescale.interface.plot.maps import plot_map
from timescale.interface.plot.style import (
    IDEAL_STYLE,
    INPUT_STYLE,
    METHOD_STYLES,
    Drawing,
    method_style,
)
from timescale.interface.plot.sweeps import plot_metric
from timescale.interface.plot.tradeoff import pareto_mask, plot_tradeoff
from timescale.interface.plot.waveforms import plot_spectra, plot_waveforms

__all__ = [
    "Drawing",
    "method_style",
    "METHOD_STYLES",
    "INPUT_STYLE",
    "IDEAL_STYLE",
    "pareto_mask",
    "plot_waveforms",
    "plot_spectra",
    "plot_metric",
    "plot_tradeoff",
    "plot_map",
    "KINDS",
]

#: Figure kinds by their command-line name.
KINDS = {
    "waveforms": plot_waveforms,
    "spectra": plot_spectra,
    "metric": plot_metric,
    "tradeoff": plot_tradeoff,
    "map": plot_map,
}
