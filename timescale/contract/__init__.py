"""The plugin contract: the :class:`Method` base class and its records (``plugin``), the hook
specifications (``hookspecs``), discovery (``registry``), running one method on one pulse
(``outcome``), the conformance suite (``conformance``) and the hook reference (``hookdoc``).

May import :mod:`timescale.data` and :mod:`timescale.numerics`; never a built-in method.
"""
