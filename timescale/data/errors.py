"""Warning classes of timescale.

Doubtful-but-legal input warns with a :class:`TimescaleWarning` subclass; the suite runner
records such cells with status ``"warned"`` in the results cube.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable

__all__ = [
    "TimescaleWarning",
    "PluginLoadWarning",
    "DesignWarning",
    "SamplingWarning",
    "closest",
]


class TimescaleWarning(UserWarning):
    """Base class of every warning timescale issues."""


class PluginLoadWarning(TimescaleWarning):
    """A plugin failed to load; the other plugins are still available."""


class DesignWarning(TimescaleWarning):
    """A design is legal but doubtful (switch while the input is on, output longer than the
    repetition interval, factor near a method's limit, ...)."""


class SamplingWarning(TimescaleWarning):
    """A waveform is sampled too coarsely for an accurate result (content near Nyquist)."""


def closest(word: str, choices: Iterable[str]) -> str:
    """Return a ``" (did you mean 'x'?)"`` hint for the closest of `choices`, or ``""``."""
    match = difflib.get_close_matches(str(word), list(choices), n=1, cutoff=0.5)
    return f" (did you mean {match[0]!r}?)" if match else ""
