"""A deadline for tests that must never block (FIFOs, devices): SIGALRM turns a hang into a failure."""

from __future__ import annotations

import contextlib
import signal
from collections.abc import Iterator


@contextlib.contextmanager
def deadline(seconds: int, what: str) -> Iterator[None]:
    """Raise TimeoutError(``what``) in the main thread when the block runs longer than ``seconds``."""

    def expired(signum, frame):
        raise TimeoutError(what)

    previous = signal.signal(signal.SIGALRM, expired)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)
