"""Clocks: one injected source of time for deadlines and records, so tests can fake it."""

from __future__ import annotations

import time
from typing import Protocol


class Clock(Protocol):
    """Seconds since the epoch, never going backwards within a process."""

    def now(self) -> float: ...

    def sleep(self, seconds: float) -> None: ...


class SystemClock:
    """Wall-clock epoch anchored once, advanced by the monotonic clock (immune to NTP steps)."""

    def __init__(self) -> None:
        self._wall0 = time.time()
        self._mono0 = time.monotonic()

    def now(self) -> float:
        return self._wall0 + (time.monotonic() - self._mono0)

    def sleep(self, seconds: float) -> None:
        time.sleep(max(0.0, seconds))


class FakeClock:
    """A clock that moves only when told to; a 10-minute search on it runs in milliseconds."""

    def __init__(self, start: float = 1_700_000_000.0) -> None:
        self.t = start

    def now(self) -> float:
        return self.t

    def sleep(self, seconds: float) -> None:
        self.t += max(0.0, seconds)

    def advance(self, seconds: float) -> None:
        self.t += seconds
