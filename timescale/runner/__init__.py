"""The runner: one cell (``cells``), suites as data (``suite``), executors with checkpoints and
progress (``executors``, ``checkpoint``, ``progress``, ``execute``), the results cube (``cube``)
and :func:`compare` (``compare``).

May import data, numerics and contract; it finds methods by name through the registry.
"""
