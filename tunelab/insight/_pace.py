"""What another stretch of trials costs at this study's own pace, in words a user can act on."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field


@dataclass(frozen=True)
class Pace:
    """The study's ledger seconds and how many trials it ran, in all and by family.

    Parameters
    ----------
    seconds
        Wall seconds on the study's ledger (every launch, parallel workers counted once).
    trials
        Trials that ran to an end (complete, pruned, failed, interrupted).
    by_family
        The same, by model family.
    families
        How many families the current space searches (a family never tried yet is expected to
        get its even share).
    """

    seconds: float
    trials: int
    by_family: Mapping[str, int] = field(default_factory=dict)
    families: int = 1

    def per_minute(self, family: str | None = None) -> float | None:
        """Trials (of ``family``) per ledger minute, ``None`` before any trial."""
        if self.seconds <= 0 or self.trials <= 0:
            return None
        count = float(self.trials) if family is None else float(self.by_family.get(family, 0))
        if family is not None and count == 0:
            count = self.trials / max(1, self.families)
        return 60.0 * count / self.seconds

    def minutes(self, n: int, family: str | None = None) -> float | None:
        rate = self.per_minute(family)
        return None if rate is None or rate <= 0 else n / rate

    def words(self, n: int, family: str | None = None) -> str:
        """``about 40 more trials of hist_gb, ≈ 6 min at this study's pace``."""
        of = f" of {family}" if family else ""
        text = f"about {n} more trials{of}"
        minutes = self.minutes(n, family)
        if minutes is not None and math.isfinite(minutes):
            text += f", ≈ {_minutes(minutes)} at this study's pace"
        return text


def _minutes(minutes: float) -> str:
    if minutes < 1:
        return "under 1 min"
    if minutes < 90:
        return f"{minutes:.0f} min"
    return f"{minutes / 60:.1f} h"


__all__ = ["Pace"]
