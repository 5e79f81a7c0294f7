"""Turning SIGTERM and SIGHUP into a clean stop while a search runs (Ctrl-C is KeyboardInterrupt)."""

from __future__ import annotations

import contextlib
import signal
import threading
from typing import Any, Iterator

from tunelab.engine import StopRequested

_EXIT_CODES = {signal.SIGTERM: 143, signal.SIGHUP: 129}


@contextlib.contextmanager
def stop_on_signals() -> Iterator[None]:
    """Within the block, SIGTERM/SIGHUP raise StopRequested in the main thread."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous: dict[int, Any] = {}

    def handler(signum: int, _frame: Any) -> None:
        raise StopRequested(signal.Signals(signum).name, _EXIT_CODES.get(signum, 128 + signum))

    for sig in _EXIT_CODES:
        previous[sig] = signal.signal(sig, handler)
    try:
        yield
    finally:
        for sig, old in previous.items():
            signal.signal(sig, old)
