"""A stop asked for by a signal, kept until the search can act on it.

Why: a signal handler's exception is swallowed when the signal lands in code that ignores
exceptions (the at-fork hooks of ``logging`` while a trial process starts, ``__del__``
methods); without a record of the request the search would go on as if nothing happened.
The search and the trial runner call ``raise_pending()`` at their safe points.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator

_pending: list[BaseException] = []
_held: list[bool] = []


class StopRequested(BaseException):
    """Raised in the main thread by a signal handler (SIGTERM, SIGHUP) to stop the search cleanly."""

    def __init__(self, signal_name: str, exit_code: int) -> None:
        super().__init__(signal_name)
        self.signal_name = signal_name
        self.exit_code = exit_code


def request_stop(exc: BaseException) -> None:
    """Remember a stop (KeyboardInterrupt or StopRequested) until it is acted on."""
    _pending[:] = [exc]


def raise_pending() -> None:
    """Raise the remembered stop, once."""
    if _pending:
        raise _pending.pop()


def clear_stop() -> None:
    """Forget a stop that has been acted on."""
    _pending.clear()


def holding() -> bool:
    """Whether a stop must wait: the main thread is writing a trial's start or end to the store."""
    return bool(_held)


@contextlib.contextmanager
def hold_stops() -> Iterator[None]:
    """Within the block a stop is only recorded; it is raised when the block ends.

    Why: a Ctrl-C inside ``study.ask()`` landed after a queued trial was claimed in the store and
    before this process held it, and that trial stayed RUNNING after the launch ended.
    """
    _held.append(True)
    try:
        yield
    finally:
        _held.pop()
    if not _held:
        raise_pending()
