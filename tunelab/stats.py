"""The additive fold model every comparison of two trials rests on.

Every trial of a study is scored on the same folds, so a fold that is hard for one configuration
is hard for all: fold scores are modelled as ``trial effect + fold effect + noise``.  The fold
effects let a trial that finished only some folds be compared with trials that finished all of
them, and the noise is what two trials' paired difference on the same folds cannot explain.
The pruner (``tunelab.engine``) uses both; the decisions (``tunelab.insight``) use the fold
effects, and measure the noise between two *families* on pairs of families instead: the noise here
is an average over all pairs of complete trials, and near copies of one family make it tiny.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np

# One-sided standard normal quantile for an 80 % two-sided interval (10th / 90th percentile).
Z80 = 1.2815515655446004


@dataclass(frozen=True)
class FoldFit:
    """Fold effects (summing to zero) and the residual noise of one fold's score.

    Two trials' means over the same ``k`` folds differ by chance with a standard deviation of
    ``noise * sqrt(2 / k)``.
    """

    effects: tuple[float, ...]
    noise: float
    trials: int


def fit_folds(rows: Iterable[Sequence[float]]) -> FoldFit | None:
    """Fit the additive model to the fold scores of trials that finished every fold.

    Uses the most common row length (the study's fold count); rows with a non-finite score are
    left out.  ``None`` until two such trials with at least two folds exist.
    """
    by_length: dict[int, list[list[float]]] = {}
    for row in rows:
        values = [float(v) for v in row]
        if len(values) >= 2 and all(math.isfinite(v) for v in values):
            by_length.setdefault(len(values), []).append(values)
    if not by_length:
        return None
    matrix = np.asarray(max(by_length.values(), key=len))
    n, folds = matrix.shape
    if n < 2:
        return None
    grand = matrix.mean()
    effects = matrix.mean(axis=0) - grand
    residual = matrix - matrix.mean(axis=1, keepdims=True) - effects
    noise = float(np.sqrt((residual ** 2).sum() / ((n - 1) * (folds - 1))))
    return FoldFit(tuple(float(e) for e in effects), noise, n)


def adjusted_mean(scores: Sequence[float], fit: FoldFit | None) -> float:
    """The mean of a trial's first folds with the fold effects taken out: comparable with a
    trial that finished every fold (whose mean the effects, summing to zero, leave unchanged)."""
    if fit is None or len(scores) > len(fit.effects):
        return float(np.mean(scores))
    return float(np.mean([s - e for s, e in zip(scores, fit.effects)]))


__all__ = ["FoldFit", "Z80", "adjusted_mean", "fit_folds"]
