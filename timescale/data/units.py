"""Display units: the one place that converts SI values for people (tables, axes, reports).

Code computes in SI; only display converts, with the scale chosen per unit below.
"""

from __future__ import annotations

import math

__all__ = ["DISPLAY", "display_unit", "to_display", "format_value", "axis_label", "scaled_unit"]

#: SI unit -> (display unit, multiplier applied to the SI value).
DISPLAY: dict[str, tuple[str, float]] = {
    "s": ("ns", 1e9),
    "Hz": ("GHz", 1e-9),
    "m2": ("mm²", 1e6),
    "m²": ("mm²", 1e6),
    "W": ("mW", 1e3),
    "J": ("pJ", 1e12),
    "V": ("V", 1.0),
    "F": ("pF", 1e12),
    "H": ("nH", 1e9),
    "S": ("mS", 1e3),
    "A": ("mA", 1e3),
    "dB": ("dB", 1.0),
    "m": ("µm", 1e6),
    "s2": ("ps²", 1e24),
    "s²": ("ps²", 1e24),
    "Hz/s": ("GHz/ns", 1e-18),
    "": ("", 1.0),
}

#: SI prefixes tried by :func:`scaled_unit`, largest first.
_PREFIXES = (("T", 1e12), ("G", 1e9), ("M", 1e6), ("k", 1e3), ("", 1.0), ("m", 1e-3),
             ("µ", 1e-6), ("n", 1e-9), ("p", 1e-12), ("f", 1e-15))


def display_unit(units: str) -> tuple[str, float]:
    """Return ``(display unit, multiplier)`` for an SI unit string (unknown units pass through)."""
    return DISPLAY.get(units, (units, 1.0))


def to_display(value, units: str):
    """Convert an SI value (or array) to its display unit; returns ``(value, unit)``."""
    unit, k = display_unit(units)
    return value * k, unit


def format_value(value, units: str = "", digits: int = 4, *, unit: bool = True) -> str:
    """Format an SI value in its display unit with `digits` significant digits ("—" for NaN);
    `unit` appends the display unit."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    if math.isnan(v):
        return "—"
    v, shown = to_display(v, units)
    # 1390 rather than 1.39e+03: whole numbers up to 10⁶ read better than an exponent
    text = f"{round(v):d}" if 10 ** digits <= abs(v) < 1e6 else f"{v:.{digits}g}"
    return f"{text} {shown}".rstrip() if unit else text


def axis_label(long_name: str, units: str) -> str:
    """An axis label such as ``"fitted latency (ns)"`` from a cube variable's attributes."""
    unit, _ = display_unit(units)
    return f"{long_name} ({unit})" if unit else long_name


def scaled_unit(units: str, values) -> tuple[str, float]:
    """``(unit, multiplier)`` for showing `values` (SI) on a swept-parameter axis.

    Metrics keep their fixed display unit (see :data:`DISPLAY`) so figures compare; a swept
    setting such as a clock jitter of 0.5 ps would read badly as 0.0005 ns, so when the fixed
    unit gives numbers outside [0.1, 10000) an SI prefix is chosen for the largest magnitude
    (only for the plain units s, Hz, W, J, F, H, S, A, V).
    """
    unit, k = display_unit(units)
    try:
        import numpy as np

        top = float(np.nanmax(np.abs(np.asarray(values, dtype=float))))
    except (TypeError, ValueError):
        return unit, k
    if units not in ("s", "Hz", "W", "J", "F", "H", "S", "A", "V") or not math.isfinite(top) or top == 0:
        return unit, k
    if 0.1 <= top * k < 1e4:
        return unit, k
    for prefix, scale in _PREFIXES:
        if top / scale >= 0.999:
            return f"{prefix}{units}", 1.0 / scale
    return unit, k
