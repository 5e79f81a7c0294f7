"""One estimator for a weighted average of fitted pipelines: what an exported ensemble is.

It follows the scikit-learn estimator contract (``__init__`` stores its arguments; learned state
ends in ``_``) and predicts like a single pipeline: ``predict_proba`` is the weighted mean of the
members' probabilities (columns aligned by class), ``predict`` the class of highest mean
probability, or for regression the weighted mean of the members' predictions.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from sklearn.base import BaseEstimator, clone


class WeightedEnsemble(BaseEstimator):
    """A weighted average of pipelines.

    Parameters
    ----------
    members
        The member pipelines (fitted by ``fit``, or already fitted: see ``of_fitted``).
    weights
        One weight per member; they are normalised to sum to one.
    """

    def __init__(self, members: Sequence[Any] = (), weights: Sequence[float] = ()) -> None:
        self.members = members
        self.weights = weights

    @classmethod
    def of_fitted(cls, members: Sequence[Any], weights: Sequence[float]) -> WeightedEnsemble:
        """An ensemble of pipelines fitted already (each on the rows its trial was scored on)."""
        ensemble = cls(list(members), list(weights))
        ensemble._settle(list(members))
        return ensemble

    def fit(self, X: Any, y: Any) -> WeightedEnsemble:
        self._settle([clone(member).fit(X, y) for member in self.members])
        return self

    def _settle(self, fitted: list[Any]) -> None:
        if not fitted or len(fitted) != len(self.weights):
            raise ValueError("an ensemble needs one weight per member")
        weights = np.asarray(self.weights, dtype=float)
        self.members_ = fitted
        self.weights_ = weights / weights.sum()
        classes = [getattr(m, "classes_", None) for m in fitted]
        if classes[0] is not None:
            self.classes_ = np.unique(np.concatenate([np.asarray(c) for c in classes]))

    def predict_proba(self, X: Any) -> np.ndarray:
        total = np.zeros((len(X), len(self.classes_)))
        for member, weight in zip(self.members_, self.weights_):
            proba = member.predict_proba(X)
            columns = np.searchsorted(self.classes_, member.classes_)
            total[:, columns] += weight * proba
        # Weights that sum to one in exact arithmetic can sum to 1 + 2e-16 in floats, and
        # scikit-learn's log_loss refuses any probability above 1: a rounding step is not a model's.
        return np.clip(total, 0.0, 1.0)

    def predict(self, X: Any) -> np.ndarray:
        if hasattr(self, "classes_"):
            return np.asarray(self.classes_)[np.argmax(self.predict_proba(X), axis=1)]
        return np.asarray(sum(w * np.asarray(m.predict(X), dtype=float) for m, w in zip(self.members_, self.weights_)))


__all__ = ["WeightedEnsemble"]
