"""Metric definitions of a time-scaled pulse (pure functions; part of the contract).

The stable public face of :mod:`timescale.numerics.metrics`, where the definitions and their
formulas are documented.
"""

from timescale.numerics.metrics import *  # noqa: F401,F403
from timescale.numerics.metrics import __all__  # noqa: F401
