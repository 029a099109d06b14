"""The conformance suite every method, built-in or third-party, must pass.

The stable public face of :mod:`timescale.contract.conformance`::

    from timescale.testing import check_method
    def test_conformance():
        check_method(MyMethod())
"""

from timescale.contract.conformance import *  # noqa: F401,F403
from timescale.contract.conformance import __all__  # noqa: F401
