"""Which model families to drop: a family whose best trails the leader by more than chance.

Family decisions come first because they save the most time: every trial a dropped family no
longer gets goes to a family that can still win.

The comparison is paired.  Every trial is scored on the same folds, so the leader (the best
complete trial) and a family's best trial are compared fold by fold on the folds both finished —
a pruned trial at the fidelity it reached.  The mean paired difference over ``k`` folds has the
standard error ``noise * sqrt(2 / k)``, where ``noise`` is the residual of the additive fold model
fitted to the study's complete trials (``tunelab.stats``); its 80 % interval is the mean
± 1.28 standard errors.  A family is dropped when the whole interval says it trails.

A family's best is the best of its trials by the fold-adjusted score (``_evidence``): picking the
best of many favours the family, so a drop errs on the side of keeping it.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

from tunelab.insight._evidence import comparable, fold_fit
from tunelab.insight._pace import Pace
from tunelab.stats import Z80
from tunelab.store import TrialRecord, best_of
from tunelab.values import format_score as num

FamilyAction = Literal["leads", "keep", "drop", "undecided"]


@dataclass(frozen=True)
class FamilyVerdict:
    """One model family's decision.

    Attributes
    ----------
    family
        The family.
    action
        ``leads`` (holds the best complete trial), ``keep`` (within chance of the leader),
        ``drop`` (trails by more than chance) or ``undecided`` (no trial of it finished a fold).
    verdict
        The decision in words: ``drop svm``, ``keep``, ``leads``, ``undecided``.
    reason
        Why, in one line with the numbers.
    best_trial
        The family's best trial by fold-adjusted score (``None`` when none finished a fold).
    gap, low, high
        How far the family's best trails the leader on the folds both finished, in metric units
        (positive = behind), with its 80 % interval.
    folds
        Folds the comparison rests on.
    trials
        The family's trials that finished at least one fold.
    needed
        For ``undecided``: about how many more trials of the family would decide.
    """

    family: str
    action: FamilyAction
    verdict: str
    reason: str
    best_trial: int | None = None
    gap: float | None = None
    low: float | None = None
    high: float | None = None
    folds: int = 0
    trials: int = 0
    needed: int | None = None

    def to_dict(self) -> dict[str, object]:
        return {"family": self.family, "action": self.action, "verdict": self.verdict, "reason": self.reason,
                "best_trial": self.best_trial, "gap": self.gap, "low": self.low, "high": self.high,
                "folds": self.folds, "trials": self.trials, "needed": self.needed}


def family_verdicts(trials: Sequence[TrialRecord], families: Sequence[str], *, direction: str,
                    pace: Pace | None = None, dropped: Sequence[str] = ()) -> tuple[FamilyVerdict, ...]:
    """A verdict for each family of ``families`` (the space's, tried or not), in that order.

    Families dropped in an earlier phase stay dropped (their decision and its reason are in
    the phase record); they are listed with action ``drop``.
    """
    if len(families) < 2:
        return ()
    fit = fold_fit(trials)
    scored = comparable(trials, fit)
    leader = best_of(trials, direction)
    sign = 1.0 if direction == "maximize" else -1.0
    reach = _fold_reach(trials)
    out = []
    for family in families:
        own = [t for t in scored if t.family == family]
        if family in dropped:
            out.append(FamilyVerdict(family, "drop", f"drop {family}", "dropped in an earlier phase", trials=len(own)))
            continue
        if leader is not None and leader.family == family:
            out.append(FamilyVerdict(family, "leads", "leads", f"holds the best trial ({leader.number})",
                                     best_trial=leader.number, folds=len(leader.fold_scores), trials=len(own)))
            continue
        if not own or leader is None or fit is None:
            out.append(_undecided(family, own, leader, fit is None, trials, reach, pace))
            continue
        best = max(own, key=lambda t: sign * t.score)
        k = min(len(best.fold_scores), len(leader.fold_scores))
        gap = sign * sum(leader.fold_scores[f] - best.fold_scores[f] for f in range(k)) / k
        half = Z80 * fit.paired_se(k)
        low, high = gap - half, gap + half
        where = f"trial {best.number} against trial {leader.number} on {k} fold{'s' if k > 1 else ''}"
        if low > 0:
            out.append(FamilyVerdict(family, "drop", f"drop {family}",
                                     f"its best trails the leader by {num(gap)} (80 % interval {num(low)} to "
                                     f"{num(high)}; {where})", best.number, gap, low, high, k, len(own)))
        else:
            out.append(FamilyVerdict(family, "keep", "keep",
                                     f"within chance of the leader: behind by {num(gap)} (80 % interval {num(low)} to "
                                     f"{num(high)}; {where})", best.number, gap, low, high, k, len(own)))
    return tuple(out)


def _fold_reach(trials: Sequence[TrialRecord]) -> float:
    """Share of the study's finished trials that finished at least one fold."""
    ended = [t for t in trials if t.state in ("complete", "pruned")]
    if not ended:
        return 1.0
    return max(1, sum(1 for t in ended if t.fold_scores or t.state == "complete")) / len(ended)


def _undecided(family: str, own: list[TrialRecord], leader: TrialRecord | None, no_noise: bool,
               trials: Sequence[TrialRecord], reach: float, pace: Pace | None) -> FamilyVerdict:
    if leader is None:
        why = "no trial is complete yet, so there is no leader to compare with"
        needed = None
    elif no_noise:
        why = "fewer than two complete trials, so the fold noise is not known yet"
        needed = None
    else:
        tried = sum(1 for t in trials if t.family == family and t.state in ("complete", "pruned"))
        why = (f"none of its {tried} trials finished a fold" if tried else "not tried yet")
        needed = max(1, math.ceil(1.0 / reach))
    if needed is not None and pace is not None:
        why += f"; {pace.words(needed, family)} would decide"
    return FamilyVerdict(family, "undecided", "undecided", why, trials=len(own), needed=needed)


__all__ = ["FamilyAction", "FamilyVerdict", "family_verdicts"]
