"""Budgets: parsing ``90s``/``10m``/``2h``, and deciding how much of a study's box is left."""

from __future__ import annotations

import re
from dataclasses import dataclass

from tunelab.errors import BudgetError

_UNITS = {"s": 1.0, "m": 60.0, "h": 3600.0, "d": 86400.0}
_PART = re.compile(r"(\d+(?:\.\d+)?)([smhd])")


def parse_duration(text: str, what: str = "budget") -> float:
    """Seconds in a duration such as ``90s``, ``10m``, ``1h30m`` or a bare number of seconds.

    ``what`` names the option in the error (``budget``, ``--horizon``).

    Raises
    ------
    BudgetError
        Unparsable, zero or negative.
    """
    raw = str(text).strip().lower().replace(" ", "")
    hint = "write a duration such as 90s, 10m, 2h or 1h30m"
    if not raw:
        raise BudgetError(f"empty {what}", hint)
    if re.fullmatch(r"\d+(\.\d+)?", raw):
        seconds = float(raw)
    else:
        parts = _PART.findall(raw)
        if not parts or "".join(n + u for n, u in parts) != raw:
            raise BudgetError(f"cannot read {what} '{text}'", hint)
        seconds = sum(float(n) * _UNITS[u] for n, u in parts)
    if seconds <= 0:
        raise BudgetError(f"{what} must be more than zero, got '{text}'", hint)
    return seconds


@dataclass(frozen=True)
class Budget:
    """A study's total box: wall seconds, optional CPU seconds and trial count (None = no cap)."""

    wall_seconds: float | None = None
    cpu_seconds: float | None = None
    trials: int | None = None

    def __post_init__(self) -> None:
        if self.wall_seconds is None and self.trials is None:
            raise BudgetError("a study needs a time budget or a trial count", "pass --budget 10m or --trials 50")
        for name in ("wall_seconds", "cpu_seconds"):
            value = getattr(self, name)
            if value is not None and value <= 0:
                raise BudgetError(f"{name.replace('_', ' ')} must be more than zero", "pass a positive budget")
        if self.trials is not None and self.trials <= 0:
            raise BudgetError("--trials must be at least 1", "pass a positive trial count")

    def extended(self, wall_seconds: float = 0.0, trials: int = 0) -> Budget:
        """The same box with more time or trials (``resume --extend``)."""
        wall = None if self.wall_seconds is None else self.wall_seconds + wall_seconds
        if self.wall_seconds is None and wall_seconds:
            wall = wall_seconds
        count = None if self.trials is None else self.trials + trials
        return Budget(wall, self.cpu_seconds, count)


@dataclass(frozen=True)
class Spent:
    """What a study has used so far, summed over every launch."""

    wall_seconds: float = 0.0
    cpu_seconds: float = 0.0
    trials: int = 0


def overshoot_allowance(box_seconds: float) -> float:
    """How far past its box a launch may run: max(5 %, 3 s) (the design's promise)."""
    return max(0.05 * box_seconds, 3.0)


def remaining(budget: Budget, spent: Spent) -> tuple[float | None, float | None, int | None]:
    """Wall seconds, CPU seconds and trials left (None where there is no cap)."""
    wall = None if budget.wall_seconds is None else max(0.0, budget.wall_seconds - spent.wall_seconds)
    cpu = None if budget.cpu_seconds is None else max(0.0, budget.cpu_seconds - spent.cpu_seconds)
    count = None if budget.trials is None else max(0, budget.trials - spent.trials)
    return wall, cpu, count
