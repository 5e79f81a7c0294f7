"""Scores that can be compared: every trial that finished a fold, complete or pruned, on one footing.

A pruned trial stopped after some folds; its mean over them is not comparable with a complete
trial's mean over all folds when the folds differ in difficulty.  With the fold effects of the
additive fold model (``tunelab.stats``) taken out, it is: that is the score the importance table,
the family decisions and the forecast work on.  Trials stopped inside their first fold have no
fold score and are left out (a third of a boosting model's rounds is a point on a learning curve,
not a score).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence

from tunelab.stats import FoldFit, adjusted_mean, fit_folds
from tunelab.store import TrialRecord


def fold_fit(trials: Sequence[TrialRecord]) -> FoldFit | None:
    """The additive fold model of the study's complete trials."""
    return fit_folds(t.fold_scores for t in trials if t.state == "complete")


def comparable(trials: Sequence[TrialRecord], fit: FoldFit | None = None) -> list[TrialRecord]:
    """Complete trials as they are, and pruned trials that finished a fold with their fold-adjusted
    mean as ``value`` (state still ``pruned``, fidelity in ``fold_scores``)."""
    fit = fold_fit(trials) if fit is None else fit
    out = []
    for t in trials:
        if t.state == "complete" and t.scored:
            out.append(t)
        elif t.state == "pruned" and t.fold_scores:
            out.append(dataclasses.replace(t, value=adjusted_mean(t.fold_scores, fit)))
    return out


__all__ = ["comparable", "fold_fit"]
