"""Shared numerics, one home each: the exact piecewise-LTI kernel (``lti``), dispersion, chirps and
detection (``dispersion``), the metric definitions (``metrics``) and the published cost and noise
formulas (``costs``). Methods call these instead of writing their own.

May import :mod:`timescale.data` only.
"""
