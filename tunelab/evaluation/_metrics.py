"""Metrics: names, directions, and scoring from predictions."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from sklearn import metrics as skm

from tunelab.errors import InputError

Direction = Literal["maximize", "minimize"]


@dataclass(frozen=True)
class Metric:
    """A metric's name, optimisation direction, whether it needs probabilities, and its tasks.

    ``rank_by`` names a smooth proper scoring rule to rank trials by while they are being pruned,
    for a metric too coarse to rank on part of the data (see ``ranking_metric``).
    """

    name: str
    direction: Direction
    needs_proba: bool
    tasks: tuple[str, ...]
    rank_by: str | None = None


# Accuracy on a third of a fold is a handful of right-or-wrong counts: two configurations tie or
# swap on a single row.  While trials are pruned they are ranked by the Brier score of the same
# predictions instead (a proper scoring rule, smooth in the probabilities: Brier 1950, *Monthly
# Weather Review* 78(1); Gneiting & Raftery 2007, *JASA* 102(477); from memory), negated so that,
# like accuracy, higher is better; the final score and the choice of the best stay accuracy.
NEG_BRIER = Metric("neg_brier", "maximize", True, ("binary", "multiclass"))

METRICS: dict[str, Metric] = {
    "roc_auc": Metric("roc_auc", "maximize", True, ("binary", "multiclass")),
    "accuracy": Metric("accuracy", "maximize", False, ("binary", "multiclass"), rank_by="neg_brier"),
    "log_loss": Metric("log_loss", "minimize", True, ("binary", "multiclass")),
    "rmse": Metric("rmse", "minimize", False, ("regression",)),
    "mae": Metric("mae", "minimize", False, ("regression",)),
    "r2": Metric("r2", "maximize", False, ("regression",)),
}

DEFAULT_METRIC = {"binary": "roc_auc", "multiclass": "log_loss", "regression": "rmse"}


def ranking_metric(metric: Metric) -> Metric:
    """What trials are ranked by at the pruning rungs: ``metric`` itself, or its smooth stand-in."""
    return NEG_BRIER if metric.rank_by == NEG_BRIER.name else metric


def resolve_metric(name: str | None, task: str) -> Metric:
    """The metric for a task, defaulting by task; refuses a metric that does not fit the task."""
    chosen = name or DEFAULT_METRIC[task]
    if chosen not in METRICS:
        raise InputError(f"unknown metric '{chosen}'", f"use one of: {', '.join(METRICS)}")
    metric = METRICS[chosen]
    if task not in metric.tasks:
        fits = [m for m, spec in METRICS.items() if task in spec.tasks]
        raise InputError(f"metric '{chosen}' does not fit a {task} task", f"use one of: {', '.join(fits)}")
    return metric


def score(metric: Metric, y_true: np.ndarray, model: Any, X: Any, classes: Sequence[Any] = ()) -> float:
    """Score a fitted model on held-out rows."""
    output = model.predict_proba(X) if metric.needs_proba else model.predict(X)
    return score_output(metric, y_true, output, list(getattr(model, "classes_", ())))


def score_output(metric: Metric, y_true: np.ndarray, output: np.ndarray, labels: Sequence[Any] = ()) -> float:
    """Score a model's output on held-out rows: class probabilities (columns in ``labels`` order)
    when the metric needs them, predictions otherwise.

    Apart from ``score`` so that outputs a model produces along the way (a boosting model's
    staged probabilities) are scored exactly as the finished model is.
    """
    if metric.needs_proba:
        proba, labels = output, list(labels)
        if metric.name == "log_loss":
            return float(skm.log_loss(y_true, proba, labels=labels))
        if metric.name == NEG_BRIER.name:
            onehot = (np.asarray(y_true)[:, None] == np.asarray(labels)[None, :]).astype(float)
            return -float(np.mean(np.sum((np.asarray(proba, dtype=float) - onehot) ** 2, axis=1)))
        if len(labels) == 2:
            return float(skm.roc_auc_score(y_true, proba[:, 1]))
        present = np.isin(labels, np.unique(y_true))
        proba = proba[:, present] / np.clip(proba[:, present].sum(axis=1, keepdims=True), 1e-12, None)
        return float(skm.roc_auc_score(y_true, proba, multi_class="ovr", labels=np.asarray(labels)[present]))
    pred = output
    if metric.name == "accuracy":
        return float(skm.accuracy_score(y_true, pred))
    if metric.name == "rmse":
        return float(np.sqrt(skm.mean_squared_error(y_true, pred)))
    if metric.name == "mae":
        return float(skm.mean_absolute_error(y_true, pred))
    return float(skm.r2_score(y_true, pred))


def better(metric: Metric, a: float, b: float) -> bool:
    """Whether score ``a`` beats ``b``."""
    return a > b if metric.direction == "maximize" else a < b
