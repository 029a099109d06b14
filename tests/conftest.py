"""Shared test configuration: a non-interactive matplotlib backend and a clean plugin cache."""

import os

os.environ.setdefault("MPLBACKEND", "Agg")

import pytest  # noqa: E402

import timescale  # noqa: E402


@pytest.fixture(autouse=True)
def _fresh_registry():
    """Each test starts and ends with a freshly discovered plugin set."""
    timescale.refresh()
    yield
    timescale.refresh()
