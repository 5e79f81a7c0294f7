"""Ensemble selection over the search's out-of-fold predictions, judged without peeking.

The method is ensemble selection (Caruana, Niculescu-Mizil, Crew & Ksikes 2004, ICML, "Ensemble
selection from libraries of models"), with the refinements of Caruana, Munson & Niculescu-Mizil
2006 (ICDM): the library is the best trials by cross-validated score; the ensemble starts from the
few best of them (sorted initialisation), then greedily adds, with replacement, the trial whose
predictions most improve the average's score, in the study's own metric; the best prefix of those
additions is kept, and the number of distinct members is capped.  A trial's weight is how many
times it was added, over the additions.

Whether the ensemble beats the best single trial is cross-fitted: for each judged fold, the
ensemble is selected (and the single best trial picked) on the other folds, then both are scored on
the judged fold; selection and scoring never share rows.  Fold 1 is left out of both: a boosting
trial chose its rounds on fold 1's held-out rows, so its predictions there are a little better than
a fresh model's, which would favour boosting members in selection and in the comparison alike.
The ensemble is worth shipping when its mean gain over the judged folds exceeds the standard error
of the paired fold differences (its fold noise).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from tunelab.evaluation import Metric, score_output

LIBRARY = 20  # the best trials by cross-validated score that selection chooses from
INITIAL = 3  # trials the ensemble starts from (sorted initialisation)
ROUNDS = 25  # greedy additions at most
MAX_MEMBERS = 10  # distinct trials at most (a deployable ensemble; ``--max-members``)


@dataclass(frozen=True)
class EnsemblePlan:
    """The ensemble selection picks on every fold but the first, and how it compares cross-fitted.

    Attributes
    ----------
    members
        ``(trial number, weight)``, weights summing to one, heaviest first.
    score, single
        Cross-fitted mean score of the ensemble and of the best single trial over the judged folds.
    gain
        How much better the ensemble scored, in metric units (positive = better).
    noise
        Standard error of the paired fold differences.
    folds
        The folds judged.
    oof_score
        The shipped weights' score on the judged folds' held-out rows taken together (selected on
        those same rows: an optimistic figure, which the cross-fitted ``score`` is not).
    """

    members: tuple[tuple[int, float], ...]
    score: float
    single: float
    gain: float
    noise: float
    folds: tuple[int, ...]
    oof_score: float = math.nan  # the shipped weights' score on the judged folds' held-out rows, all together

    @property
    def worth_it(self) -> bool:
        """Whether the ensemble beats the best single trial by more than its fold noise."""
        return len(self.members) > 1 and self.gain > self.noise

    def words(self, metric: str) -> str:
        """``an ensemble of 4 trials would add 0.0031 roc_auc (cross-fitted, fold noise 0.0012)``."""
        text = (f"an ensemble of {len(self.members)} trial{'s' if len(self.members) != 1 else ''} would add "
                f"{self.gain:+.4g} {metric} over the best single trial (cross-fitted on folds "
                f"{', '.join(map(str, self.folds))}; fold noise {self.noise:.2g})")
        return text + ("" if self.worth_it else "; not worth shipping")

    def to_dict(self) -> dict[str, object]:
        return {"members": [{"trial": n, "weight": w} for n, w in self.members], "score": self.score,
                "single": self.single, "gain": self.gain, "noise": self.noise, "folds": list(self.folds),
                "oof_score": self.oof_score, "worth_it": self.worth_it}


def metric_input(prediction: np.ndarray, labels: Sequence[object], metric: Metric) -> np.ndarray:
    """Kept predictions as the metric takes them: class probabilities, class labels, or values."""
    if not len(labels):
        return prediction
    proba = np.column_stack([1.0 - prediction, prediction]) if prediction.ndim == 1 else prediction
    # Kept predictions are float32 and a blend of them can land a rounding step past 1 (seen:
    # 1.0000000186), which scikit-learn's log_loss refuses; clipping moves no score by more than that step.
    proba = np.clip(proba, 0.0, 1.0)
    if metric.needs_proba:
        return proba
    return np.asarray(labels, dtype=object)[np.argmax(proba, axis=1)]


def _score(prediction: np.ndarray, y: np.ndarray, labels: Sequence[object], metric: Metric) -> float:
    return score_output(metric, y, metric_input(prediction, labels, metric), list(labels))


def _oriented(value: float, metric: Metric) -> float:
    return value if metric.direction == "maximize" else -value


def select(predictions: Mapping[int, np.ndarray], y: np.ndarray, labels: Sequence[object], metric: Metric,
           *, max_members: int = MAX_MEMBERS, rounds: int = ROUNDS, initial: int = INITIAL) -> dict[int, float]:
    """Greedy ensemble selection with replacement on one set of rows: trial number -> weight."""
    if not predictions:
        return {}
    single = {n: _oriented(_score(p, y, labels, metric), metric) for n, p in predictions.items()}
    order = sorted(single, key=lambda n: (-single[n], n))
    counts = {n: 1 for n in order[:max(1, min(initial, max_members))]}
    total = blend(dict.fromkeys(counts, 1.0), predictions)
    size = len(counts)
    best_score, best_counts = _oriented(_score(total / size, y, labels, metric), metric), dict(counts)
    for _ in range(rounds):
        allowed = order if len(counts) < max_members else list(counts)
        trial_scores = {n: _oriented(_score((total + predictions[n]) / (size + 1), y, labels, metric), metric)
                        for n in allowed}
        pick = max(trial_scores, key=lambda n: (trial_scores[n], -order.index(n)))
        total = total + predictions[pick]
        size += 1
        counts[pick] = counts.get(pick, 0) + 1
        if trial_scores[pick] > best_score + 1e-12:
            best_score, best_counts = trial_scores[pick], dict(counts)
    weight = sum(best_counts.values())
    return {n: c / weight for n, c in best_counts.items()}


def blend(weights: Mapping[int, float], predictions: Mapping[int, np.ndarray]) -> np.ndarray:
    """The weighted average of the members' predictions."""
    total = np.zeros_like(next(iter(predictions.values())), dtype=float)
    for n, w in weights.items():
        total = total + w * predictions[n]
    return total


def plan_ensemble(predictions: Mapping[int, Sequence[np.ndarray]], values: Mapping[int, float],
                  y_folds: Sequence[np.ndarray], labels: Sequence[object], metric: Metric, *,
                  max_members: int = MAX_MEMBERS) -> EnsemblePlan | None:
    """Select an ensemble on folds 2..k and judge it cross-fitted against the best single trial.

    Parameters
    ----------
    predictions
        Trial number -> its held-out predictions, one array per fold (as the store keeps them).
    values
        Trial number -> its cross-validated score (to pick the library).
    y_folds
        The true targets of each fold's held-out rows, in the same order.
    labels
        Class labels in the models' order (empty for regression).
    metric
        The study's metric.
    max_members
        Distinct trials the ensemble may hold.

    Returns
    -------
    EnsemblePlan or None
        ``None`` with fewer than two trials or fewer than two folds to judge on.
    """
    sign = 1.0 if metric.direction == "maximize" else -1.0
    library = sorted((n for n in predictions if n in values), key=lambda n: (-sign * values[n], n))[:LIBRARY]
    folds = [f for f in range(1, len(y_folds)) if all(len(predictions[n]) == len(y_folds) for n in library)]
    if len(library) < 2 or len(folds) < 2:
        return None

    def rows(on: Sequence[int]) -> tuple[dict[int, np.ndarray], np.ndarray]:
        stacked = {n: np.concatenate([predictions[n][f] for f in on]) for n in library}
        return stacked, np.concatenate([y_folds[f] for f in on])

    gains, ensemble_scores, single_scores = [], [], []
    for judged in folds:
        chosen_on = [f for f in folds if f != judged]
        train_preds, train_y = rows(chosen_on)
        weights = select(train_preds, train_y, labels, metric, max_members=max_members)
        best = max(library, key=lambda n: (_oriented(_score(train_preds[n], train_y, labels, metric), metric), -n))
        test_preds, test_y = rows([judged])
        ensemble = _score(blend(weights, test_preds), test_y, labels, metric)
        single = _score(test_preds[best], test_y, labels, metric)
        ensemble_scores.append(ensemble)
        single_scores.append(single)
        gains.append(sign * (ensemble - single))
    all_preds, all_y = rows(folds)
    weights = select(all_preds, all_y, labels, metric, max_members=max_members)
    members = tuple(sorted(weights.items(), key=lambda item: (-item[1], item[0])))
    noise = float(np.std(gains, ddof=1) / math.sqrt(len(gains))) if len(gains) > 1 else math.inf
    oof = _score(blend(dict(members), all_preds), all_y, labels, metric)
    return EnsemblePlan(members, float(np.mean(ensemble_scores)), float(np.mean(single_scores)),
                        float(np.mean(gains)), noise, tuple(f + 1 for f in folds), oof)


__all__ = ["MAX_MEMBERS", "EnsemblePlan", "blend", "metric_input", "plan_ensemble", "select"]
