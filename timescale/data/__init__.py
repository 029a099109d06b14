"""The data model: sampled pulses and the band-limited operations on them (``pulse``, ``signal``),
process cards (``technology``), display units (``units``), errors and warnings (``errors``) and
argument checks (``checks``).

Lowest layer: imports only numpy, scipy and the standard library, never another timescale package.
"""
