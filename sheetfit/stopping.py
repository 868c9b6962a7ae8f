"""Stop signals: SIGINT and SIGTERM become an exception, except while a file is swapped in.

While :func:`stop_signals` is active (the command line wraps a refresh in it), either
signal raises :class:`Stopped`, so every ``finally`` and ``with`` on the way out runs:
temporary files are removed, locks released, the workbook left as it was. Inside
:func:`not_now` (the few calls that move a finished file into place) a signal is
ignored: the refresh finishes, because the file on disk is then already the new one and
saying "not changed" would be false.
"""

from __future__ import annotations

import signal
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from types import FrameType

__all__ = ["Stopped", "not_now", "stop_signals"]

_SIGNALS = (signal.SIGINT, signal.SIGTERM)
_state = {"deferring": 0}


class Stopped(BaseException):
    """A stop signal arrived; ``signum`` says which. A BaseException, like KeyboardInterrupt."""

    def __init__(self, signum: int):
        super().__init__(f"stopped by {signal.Signals(signum).name}")
        self.signum = signum


def _handler(signum: int, _frame: FrameType | None) -> None:
    if _state["deferring"]:
        return
    raise Stopped(signum)


@contextmanager
def stop_signals() -> Iterator[None]:
    """Turn SIGINT and SIGTERM into :class:`Stopped` inside the block (main thread only)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = {s: signal.signal(s, _handler) for s in _SIGNALS}
    try:
        yield
    finally:
        for s, h in previous.items():
            signal.signal(s, h)


@contextmanager
def not_now() -> Iterator[None]:
    """Hold stop signals back for the block; the work it finishes is not undone."""
    _state["deferring"] += 1
    try:
        yield
    finally:
        _state["deferring"] -= 1
