"""Test-split scores computed by the benchmark itself, from predictions only.

No method reports its own score: every method hands back predicted labels (or values) and,
for classifiers, one probability column per class; the scores below come from
scikit-learn's metric functions on the held-out test rows. That keeps methods comparable
even when they use different internals.

Every task is scored under the two metrics a user most often picks for it (``METRICS``):
binary, ROC AUC (higher is better) and log loss (lower); multiclass, accuracy (higher) and log
loss; regression, RMSE and MAE (both lower). ``score_predictions`` computes all of a task's
metrics from one set of predictions. ``PRIMARY_METRIC`` is each task's default metric (tunelab's
own default when ``--metric`` is not given), which the single-metric benchmarks rank by.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.metrics import accuracy_score, log_loss, mean_absolute_error, mean_squared_error, roc_auc_score

PRIMARY_METRIC = {"binary": "roc_auc", "multiclass": "log_loss", "regression": "rmse"}
METRICS = {
    "binary": ("roc_auc", "log_loss"),
    "multiclass": ("accuracy", "log_loss"),
    "regression": ("rmse", "mae"),
}
HIGHER_IS_BETTER = {"roc_auc": True, "log_loss": False, "rmse": False, "accuracy": True, "mae": False}


@dataclass(frozen=True)
class Predictions:
    """What a method predicts for the test rows.

    Parameters
    ----------
    values
        Predicted class labels (classification) or predicted values (regression), one per row.
    proba
        Classification only: one column per class, named by the class label as text, each
        row summing to one. ``None`` for regression.
    """

    values: np.ndarray
    proba: pd.DataFrame | None = None


def score_predictions(task: str, y_true: pd.Series, predictions: Predictions) -> dict[str, float]:
    """Score predictions against the true test targets.

    Returns
    -------
    dict
        Every metric of ``task`` (``METRICS``) under its name, plus ``accuracy`` for binary
        classification: scikit-learn's ``roc_auc_score``, ``log_loss``, ``accuracy_score``,
        ``mean_absolute_error`` and the square root of ``mean_squared_error``.
    """
    if task == "regression":
        truth = np.asarray(y_true, dtype=float)
        values = np.asarray(predictions.values, dtype=float)
        return {"rmse": float(np.sqrt(mean_squared_error(truth, values))),
                "mae": float(mean_absolute_error(truth, values))}
    if predictions.proba is None:
        raise ValueError("a classification method must return class probabilities")
    truth = np.asarray(y_true).astype(str)
    proba = predictions.proba
    classes = sorted(str(c) for c in proba.columns)
    proba = proba.rename(columns=str)[classes].to_numpy(dtype=float)
    missing = sorted(set(truth) - set(classes))
    if missing:
        raise ValueError(f"no probability column for test class(es) {missing}")
    result = {"accuracy": float(accuracy_score(truth, np.asarray(predictions.values).astype(str)))}
    if task == "binary":
        # AUC of the last class in sorted order; with its own probability column the AUC does
        # not depend on which of the two classes is called positive.
        result["roc_auc"] = float(roc_auc_score(truth == classes[-1], proba[:, -1]))
    result["log_loss"] = float(log_loss(truth, proba, labels=classes))
    return result


def score_prediction_file(task: str, target: str, test: str | Path, predictions: str | Path) -> dict[str, float]:
    """Scores of a ``tunelab predict`` output file (``prediction`` and ``proba_<class>`` columns) on the test rows."""
    truth = pd.read_csv(test)[target]
    frame = pd.read_csv(predictions)
    proba = None
    if task != "regression":
        cols = [c for c in frame.columns if c.startswith("proba_")]
        proba = frame[cols].rename(columns=lambda c: c[len("proba_"):])
    return score_predictions(task, truth, Predictions(frame["prediction"].to_numpy(), proba))


def orient(metric: str, value: float) -> float:
    """Return ``value`` turned so that higher is better (losses are negated)."""
    return value if HIGHER_IS_BETTER[metric] else -value


__all__ = ["HIGHER_IS_BETTER", "METRICS", "PRIMARY_METRIC", "Predictions", "orient", "score_prediction_file",
           "score_predictions"]
