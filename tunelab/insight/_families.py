"""Which model families to drop: a family whose best trails the leader by more than chance.

Family decisions come first because they save the most time: every trial a dropped family no
longer gets goes to a family that can still win.

The comparison is paired.  Every trial is scored on the same folds, so the leader (the best
complete trial) and a family's best trial are compared fold by fold on the folds both finished —
a pruned trial at the fidelity it reached.  The chance part of that difference is how much two
*families* disagree from fold to fold, and it is measured on exactly such pairs: the per-fold
differences between the leader and every trial of another family that shares two folds or more
with it, pooled (their spread around each pair's own mean).  Its 80 % interval is the mean ± the
t quantile of those degrees of freedom times the spread over ``sqrt(k)`` for ``k`` shared folds.
A family is dropped when the whole interval says it trails; until two folds of some such pair
measure that spread, no family is dropped.

Two folds to drop a family.  When its best trails on one fold only, a trial of it that finished
two folds or more must trail beyond chance too; until one has, the family is *undecided*.  One fold
is what a trial stopped at the first rung has, and nothing else speaks for its family: both wrong
drops of seeds 6-8 in ``benchmarks/decisions.py`` were such one-fold drops of svm, the family of a
10-minute study's best (``docs/experiments/decisions.md``).  The pruner lets each family's best at
the first fold go on to a second once (``tunelab.engine``), so a weak family still gets its two
folds at the cost of one more fold.

Not the residual of the additive fold model of all complete trials (``tunelab.stats``), which the
pruner uses: when most complete trials are near copies of one family (82 of 82 logistic
regressions differing in C on a 1,000-row table), that residual is a few ten-thousandths and it
dropped every other family, the table's true best among them, on one fold's difference.

A family's best is the best of its trials by the fold-adjusted score (``_evidence``): picking the
best of many favours the family, so a drop errs on the side of keeping it.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

from scipy import stats as scipy_stats

from tunelab.insight._evidence import comparable, fold_fit
from tunelab.insight._pace import Pace
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
        ``drop`` (trails by more than chance on two folds or more) or ``undecided`` (no trial of it
        finished a fold, or its best trails on its first fold only).
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
    rivals = [t for t in scored if leader is not None and t.family != leader.family and t.family not in dropped]
    spread = _family_spread(leader, rivals)
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
        if not own or leader is None or spread is None:
            out.append(_undecided(family, own, leader, spread is None and bool(own), trials, reach, pace))
            continue
        best = max(own, key=lambda t: sign * t.score)
        first = _paired(best, leader, sign, spread)
        deep = [t for t in own if min(len(t.fold_scores), len(leader.fold_scores)) >= 2]
        if first.low <= 0:
            out.append(_keep(family, first, len(own)))
        elif first.folds >= 2:
            out.append(_drop(family, first, len(own), first.words()))
        elif not deep:
            out.append(_one_fold(family, len(own), first, trials, pace))
        else:
            second = _paired(max(deep, key=lambda t: sign * t.score), leader, sign, spread)
            if second.low > 0:
                out.append(_drop(family, second, len(own),
                                 f"on two folds or more {second.words()}; its best on one fold {first.words()}"))
            else:
                out.append(_keep(family, second, len(own)))
    return tuple(out)


@dataclass(frozen=True)
class _Paired:
    """One trial against the leader on the folds both finished: the gap (positive = behind) and its interval."""

    trial: int
    folds: int
    gap: float
    low: float
    high: float
    leader: int

    def words(self, behind: str = "trails the leader by") -> str:
        return (f"{behind} {num(self.gap)} (80 % interval {num(self.low)} to {num(self.high)}; trial "
                f"{self.trial} against trial {self.leader} on {self.folds} fold{'s' if self.folds > 1 else ''})")


def _paired(trial: TrialRecord, leader: TrialRecord, sign: float, spread: tuple[float, int]) -> _Paired:
    k = min(len(trial.fold_scores), len(leader.fold_scores))
    gap = sign * sum(leader.fold_scores[f] - trial.fold_scores[f] for f in range(k)) / k
    sd, dof = spread
    half = float(scipy_stats.t.ppf(0.9, dof)) * sd / math.sqrt(k)
    return _Paired(trial.number, k, gap, gap - half, gap + half, leader.number)


def _keep(family: str, p: _Paired, trials: int) -> FamilyVerdict:
    return FamilyVerdict(family, "keep", "keep", f"within chance of the leader: {p.words('behind by')}", p.trial,
                         p.gap, p.low, p.high, p.folds, trials)


def _drop(family: str, p: _Paired, trials: int, words: str) -> FamilyVerdict:
    return FamilyVerdict(family, "drop", f"drop {family}", f"its best {words}", p.trial, p.gap, p.low, p.high,
                         p.folds, trials)


def _fold_reach(trials: Sequence[TrialRecord], folds: int = 1) -> float:
    """Share of the study's finished trials that finished at least ``folds`` folds."""
    ended = [t for t in trials if t.state in ("complete", "pruned")]
    if not ended:
        return 1.0
    return max(1, sum(1 for t in ended if len(t.fold_scores) >= folds or t.state == "complete")) / len(ended)


def _one_fold(family: str, tried: int, p: _Paired, trials: Sequence[TrialRecord],
              pace: Pace | None) -> FamilyVerdict:
    """A family that trails on one fold only, with no trial of it on two: not enough to drop it."""
    needed = max(1, math.ceil(1.0 / _fold_reach(trials, 2)))
    why = (f"its best {p.words()}, but no trial of {family} has finished two folds; one that does")
    why += f" ({pace.words(needed, family)})" if pace is not None else ""
    return FamilyVerdict(family, "undecided", "undecided", why + " would decide", p.trial, p.gap, p.low, p.high,
                         p.folds, tried, needed)


def _family_spread(leader: TrialRecord | None, rivals: Sequence[TrialRecord]) -> tuple[float, int] | None:
    """How much the leader and a trial of another family differ from fold to fold by chance: the
    pooled spread of their per-fold differences around each pair's own mean, over every such trial
    that shares two folds or more with the leader, with its degrees of freedom; ``None`` until one does."""
    if leader is None:
        return None
    squares, dof = 0.0, 0
    for rival in rivals:
        k = min(len(rival.fold_scores), len(leader.fold_scores))
        if k < 2:
            continue
        diffs = [leader.fold_scores[f] - rival.fold_scores[f] for f in range(k)]
        mean = sum(diffs) / k
        squares += sum((d - mean) ** 2 for d in diffs)
        dof += k - 1
    if dof == 0:
        return None
    return math.sqrt(squares / dof), dof


def _undecided(family: str, own: list[TrialRecord], leader: TrialRecord | None, no_spread: bool,
               trials: Sequence[TrialRecord], reach: float, pace: Pace | None) -> FamilyVerdict:
    if leader is None:
        why = "no trial is complete yet, so there is no leader to compare with"
        needed = None
    elif no_spread:
        why = ("how much two families differ from fold to fold by chance is not measured yet: no trial of a "
               "family other than the leader's has finished two folds")
        needed = max(1, math.ceil(2.0 / reach))
    else:
        tried = sum(1 for t in trials if t.family == family and t.state in ("complete", "pruned"))
        why = (f"none of its {tried} trials finished a fold" if tried else "not tried yet")
        needed = max(1, math.ceil(1.0 / reach))
    if needed is not None and pace is not None:
        why += f"; {pace.words(needed, family)} would decide"
    return FamilyVerdict(family, "undecided", "undecided", why, trials=len(own), needed=needed)


__all__ = ["FamilyAction", "FamilyVerdict", "family_verdicts"]
