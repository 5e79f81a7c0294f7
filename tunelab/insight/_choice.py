"""Which trial to ship: the best cross-validated score, or the cheapest within one standard error of it.

The best of many cross-validated scores is a biased pick: among leaders within fold noise of each
other, the top one is partly top by luck (the winner's curse).  The one-standard-error rule takes,
among the trials within one standard error of the best, the simplest one — here the cheapest to
fit (Breiman, Friedman, Olshen & Stone 1984, *Classification and Regression Trees*, section 3.4;
from memory).  The standard error is the best trial's: the spread of its fold scores over the
square root of the folds.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

from tunelab.store import TrialRecord, keys, ranked

Rule = Literal["best", "one-se"]
RULES: tuple[Rule, ...] = ("best", "one-se")


@dataclass(frozen=True)
class Choice:
    """The trial a rule ships, the best trial, and the runners-up within one standard error."""

    chosen: TrialRecord
    best: TrialRecord
    se: float | None
    within: tuple[TrialRecord, ...]  # complete trials within one standard error of the best, best included
    rule: Rule

    def words(self, metric: str) -> str:
        """``3 trials within one standard error (0.0042) of the best; the cheapest, trial 17, fits 4.1x faster``."""
        if self.se is None:
            return "the best trial has no fold spread to judge its runners-up by"
        others = len(self.within) - 1
        if others == 0:
            return f"no other trial is within one standard error ({self.se:.4g} {metric}) of the best"
        cheapest = min(self.within, key=cost)
        text = (f"{others} other trial{'s' if others > 1 else ''} within one standard error ({self.se:.4g} {metric}) "
                f"of the best")
        if cheapest.number != self.best.number and cost(cheapest) > 0:
            text += f"; the cheapest, trial {cheapest.number}, fits {cost(self.best) / cost(cheapest):.1f}x faster"
        return text


def cost(trial: TrialRecord) -> float:
    """CPU seconds the trial took (its wall seconds where CPU was not recorded)."""
    value = trial.attrs.get(keys.CPU_SECONDS)
    if isinstance(value, (int, float)) and math.isfinite(value):
        return float(value)
    return trial.duration or 0.0


def standard_error(trial: TrialRecord) -> float | None:
    if len(trial.fold_scores) < 2:
        return None
    mean = sum(trial.fold_scores) / len(trial.fold_scores)
    var = sum((v - mean) ** 2 for v in trial.fold_scores) / len(trial.fold_scores)
    return math.sqrt(var) / math.sqrt(len(trial.fold_scores))


def choose(trials: Sequence[TrialRecord], direction: str, rule: Rule = "best") -> Choice | None:
    """The trial ``rule`` ships among the complete trials, or ``None`` when none is complete."""
    order = ranked(trials, direction)
    if not order:
        return None
    best = order[0]
    se = standard_error(best)
    sign = 1.0 if direction == "maximize" else -1.0
    within = tuple(t for t in order if se is not None and sign * (best.score - t.score) <= se)
    chosen = best
    if rule == "one-se" and within:
        chosen = min(within, key=lambda t: (cost(t), -sign * t.score))
    return Choice(chosen, best, se, within or (best,), rule)


__all__ = ["RULES", "Choice", "Rule", "choose", "cost", "standard_error"]
