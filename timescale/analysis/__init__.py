"""Answers from results: per-method verdicts and per-cell summaries of a cube (``findings``).

May import data, numerics, contract and runner; never the interface.
"""
