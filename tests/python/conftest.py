"""Fixtures shared by the Python tests."""

from __future__ import annotations

import signal
from collections.abc import Iterator

import pytest


@pytest.fixture
def ctrl_c() -> Iterator[None]:
    """SIGINT raises KeyboardInterrupt during the test, as in a terminal (a process started in
    the background inherits SIGINT ignored); the previous handler is restored afterwards."""
    previous = signal.signal(signal.SIGINT, signal.default_int_handler)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)
