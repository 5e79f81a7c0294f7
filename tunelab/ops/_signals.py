"""Turning Ctrl-C, SIGTERM and SIGHUP into one clean stop while a search runs.

The first signal stops the search (KeyboardInterrupt for SIGINT, StopRequested otherwise);
later ones are ignored so that recording the interrupted trial cannot itself be interrupted.
"""

from __future__ import annotations

import contextlib
import signal
import threading
from collections.abc import Iterator
from typing import Any

from tunelab.engine import StopRequested, clear_stop, holding, request_stop

_EXIT_CODES: dict[int, int] = {signal.SIGINT: 130, signal.SIGTERM: 143, signal.SIGHUP: 129}


@contextlib.contextmanager
def stop_on_signals() -> Iterator[None]:
    """Within the block, the first SIGINT/SIGTERM/SIGHUP raises in the main thread; repeats are ignored."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous: dict[int, Any] = {}
    fired: list[int] = []

    def handler(signum: int, _frame: Any) -> None:
        if fired:
            return
        fired.append(signum)
        stop: BaseException = KeyboardInterrupt() if signum == signal.SIGINT else \
            StopRequested(signal.Signals(signum).name, _EXIT_CODES.get(signum, 128 + signum))
        request_stop(stop)  # kept in case this raise lands where exceptions are swallowed
        if not holding():  # a trial is being written to the store: the stop waits for the block's end
            raise stop

    for sig in _EXIT_CODES:
        previous[sig] = signal.signal(sig, handler)
    try:
        yield
    finally:
        for sig, old in previous.items():
            signal.signal(sig, old)
        clear_stop()
