"""What a plugin author imports: the :class:`Method` base class, its records and ``hookimpl``.

This is the stable public face of :mod:`timescale.contract.plugin`; see that module for the
contract's conventions (SI units, the stretch factor, the Fourier sign, trial axes).
"""

from timescale.contract.plugin import *  # noqa: F401,F403
from timescale.contract.plugin import __all__  # noqa: F401
