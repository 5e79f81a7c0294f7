"""What every benchmark method receives and hands back.

A method is a function ``(problem: Problem) -> Outcome``. It gets the training part of one
dataset (as a frame and as the ``train.csv`` file every method shares), the test features,
and a wall-clock budget; it returns predictions for the test rows and how long it took.
The suite, not the method, turns the predictions into scores.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from benchmarks._scoring import PRIMARY_METRIC, Predictions


@dataclass(frozen=True)
class Problem:
    """One dataset's train/test split and the rules of the run.

    Parameters
    ----------
    name
        Dataset name from the registry.
    task
        ``"binary"``, ``"multiclass"`` or ``"regression"``.
    target
        Target column name in ``train``.
    train
        Training part, target included (what a search may look at).
    test_features
        Test part without the target.
    train_csv, test_features_csv
        The same two tables as files, for methods that run as a separate program.
    budget_seconds, budget_text
        The wall-clock budget in seconds and as typed (``"30s"``, ``"5m"``).
    seed
        Seed for every random choice a method makes.
    workdir
        A private scratch directory for this method on this dataset.
    metric
        The metric a searching method optimises, as a user would pass ``--metric``; ``None``
        for a method that fits once whatever the metric (a library default), and then the
        task's default metric if a method asks (:attr:`search_metric`).
    threads
        Thread cap for BLAS and OpenMP pools, the same for every method (an OpenMP pool of
        2 threads on a shared 2-core machine can run ten times slower than 1 thread).
    want_curve
        If true, a searching method also returns test predictions of each incumbent, for
        the anytime plot. That work is done after the budget and not counted in it.
    """

    name: str
    task: str
    target: str
    train: pd.DataFrame
    test_features: pd.DataFrame
    train_csv: Path
    test_features_csv: Path
    budget_seconds: float
    budget_text: str
    seed: int
    workdir: Path
    metric: str | None = None
    threads: int = 1
    want_curve: bool = False

    @property
    def search_metric(self) -> str:
        """The metric to search under: ``metric``, else the task's default (``PRIMARY_METRIC``)."""
        return self.metric or PRIMARY_METRIC[self.task]


@dataclass
class Outcome:
    """A method's result on one dataset.

    Parameters
    ----------
    predictions
        Test predictions of the final model.
    search_seconds
        Wall time of the budgeted part (the single fit, for a default).
    refit_seconds
        Wall time of fitting the chosen config on the whole training part after the search.
    n_trials
        Configurations tried (``None`` for a default).
    curve
        ``(seconds since start, predictions)`` for each new incumbent, if asked for.
    details
        Anything else worth keeping in the raw results (best CV score, tool output).
    """

    predictions: Predictions
    search_seconds: float
    refit_seconds: float = 0.0
    n_trials: int | None = None
    curve: list[tuple[float, Predictions]] = field(default_factory=list)
    details: dict[str, Any] = field(default_factory=dict)


__all__ = ["Outcome", "Problem"]
