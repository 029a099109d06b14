"""Argument checks shared by the core: each raises with the argument's name, its value and
what would be valid."""

from __future__ import annotations

import math
import tomllib
from pathlib import Path

import numpy as np

__all__ = ["positive", "finite", "nonnegative", "finite_array", "choice", "fraction", "read_toml"]


def _is_real(value) -> bool:
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)


def finite(name: str, value) -> float:
    """Return `value` as float, or raise if it is not a finite real number."""
    if not _is_real(value):
        raise TypeError(f"{name} must be a real number, got {value!r} ({type(value).__name__})")
    value = float(value)
    if not math.isfinite(value):
        raise ValueError(f"{name} must be finite, got {value!r}")
    return value


def positive(name: str, value) -> float:
    """Return `value` as float, or raise if it is not finite and > 0."""
    value = finite(name, value)
    if value <= 0:
        raise ValueError(f"{name} must be > 0, got {value!r}")
    return value


def nonnegative(name: str, value) -> float:
    """Return `value` as float, or raise if it is not finite and >= 0."""
    value = finite(name, value)
    if value < 0:
        raise ValueError(f"{name} must be >= 0, got {value!r}")
    return value


def fraction(name: str, value) -> float:
    """Return `value` as float, or raise unless 0 < value < 1."""
    value = finite(name, value)
    if not 0.0 < value < 1.0:
        raise ValueError(f"{name} must lie strictly between 0 and 1, got {value!r}")
    return value


def finite_array(name: str, values, *, min_samples: int = 2) -> np.ndarray:
    """Return `values` as a float64 array with time on the last axis, or raise if it holds
    NaN/inf, is complex, or has fewer than `min_samples` samples."""
    try:
        arr = np.asarray(values)
    except Exception as exc:  # pragma: no cover - exotic inputs
        raise TypeError(f"{name} must be array-like of real numbers: {exc}") from None
    if arr.dtype.kind == "c":
        raise TypeError(f"{name} must be real; got a complex array (take .real or abs() first)")
    if arr.dtype.kind not in "biuf":
        raise TypeError(f"{name} must hold real numbers, got dtype {arr.dtype}")
    arr = np.array(arr, dtype=np.float64)
    if arr.ndim == 0:
        raise ValueError(f"{name} must have at least one axis (time), got a scalar")
    if arr.shape[-1] < min_samples:
        raise ValueError(
            f"{name} must have at least {min_samples} samples on its last (time) axis, "
            f"got {arr.shape[-1]}"
        )
    bad = ~np.isfinite(arr)
    if bad.any():
        first = int(np.flatnonzero(bad.reshape(-1))[0])
        raise ValueError(
            f"{name} must be finite; found {int(bad.sum())} NaN/inf sample(s), the first at "
            f"flat index {first}"
        )
    return arr


def choice(name: str, value, valid) -> str:
    """Return `value` if it is one of `valid`, or raise naming the valid choices."""
    valid = tuple(valid)
    if value not in valid:
        from timescale.data.errors import closest

        raise ValueError(
            f"{name} must be one of {', '.join(map(repr, valid))}; got {value!r}"
            + closest(value, valid)
        )
    return value


def read_toml(path, what: str) -> dict:
    """Read a TOML file; a missing or malformed file raises ValueError naming it as `what`
    ("suite file", "technology file")."""
    path = Path(path)
    try:
        with path.open("rb") as fh:
            return tomllib.load(fh)
    except FileNotFoundError:
        raise ValueError(f"{what} {str(path)!r} does not exist") from None
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{what} {str(path)!r} is not valid TOML: {exc}") from None
