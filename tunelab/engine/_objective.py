"""Objectives: what one trial computes, reporting intermediate values so it can be pruned.

An objective is a callable ``objective(config, report) -> TrialResult``.  ``report(step, value)``
hands an intermediate value to the engine and raises :class:`PruneSignal` when the trial should
stop.  Objectives never touch the store or the terminal.
"""

from __future__ import annotations

import time
import warnings
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping, Protocol

import numpy as np
from threadpoolctl import threadpool_limits

from tunelab.data import Dataset
from tunelab.engine._folds import make_folds
from tunelab.engine._metrics import Metric, score

Report = Callable[[int, float], None]


class PruneSignal(Exception):
    """Raised inside an objective (via ``report``) when the engine decides to prune the trial."""


@dataclass
class TrialResult:
    """A finished evaluation: the value, per-fold scores, and anything worth recording."""

    value: float
    fold_scores: list[float] = field(default_factory=list)
    extras: dict[str, Any] = field(default_factory=dict)


class Objective(Protocol):
    def __call__(self, config: Mapping[str, Any], report: Report) -> TrialResult: ...


@dataclass
class CrossValidationObjective:
    """k-fold cross-validation of the pipeline a config describes, reporting the running mean.

    Parameters
    ----------
    dataset
        The prepared data.
    metric
        What to score on each held-out fold.
    seed
        Seeds the folds and the models, so the same config gives the same score.
    n_threads
        Cores a model may use inside one trial.
    """

    dataset: Dataset
    metric: Metric
    seed: int = 0
    n_threads: int = 1
    n_folds: int | None = None

    def __post_init__(self) -> None:
        self.folds = make_folds(self.dataset.y, self.dataset.task, self.seed, self.n_folds)
        self.cardinality = {c.name: c.n_unique for c in self.dataset.columns}

    def __call__(self, config: Mapping[str, Any], report: Report) -> TrialResult:
        from tunelab.models import build_pipeline

        X, y = self.dataset.X, self.dataset.y
        scores: list[float] = []
        started = time.perf_counter()
        for step, (train, test) in enumerate(self.folds, start=1):
            pipeline = build_pipeline(config, self.dataset.roles, self.cardinality, self.dataset.task,
                                      seed=self.seed, n_threads=self.n_threads)
            with warnings.catch_warnings(), threadpool_limits(self.n_threads):
                warnings.simplefilter("ignore")
                pipeline.fit(X.iloc[train], y[train])
                scores.append(score(self.metric, y[test], pipeline, X.iloc[test], self.dataset.classes))
            report(step, float(np.mean(scores)))
        return TrialResult(
            value=float(np.mean(scores)),
            fold_scores=scores,
            extras={"fold_std": float(np.std(scores)), "fit_seconds": time.perf_counter() - started,
                    "fidelity": f"{len(scores)}/{len(self.folds)} folds"},
        )
