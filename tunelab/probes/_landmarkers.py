"""Landmarkers: cross-validated scores of four fast, simple learners (Rivolli et al. 2022, "landmarking").

Definitions agree with the reference implementation ``pymfe`` under its optional protocol
(shuffled folds, features standardised first: ``MFE(shuffle_cv_folds=True)`` with
``fit(rescale="standard")``) rather than its default (unshuffled folds on raw values), because
1-NN on raw values measures the units of the columns more than the data: accuracy over 10-fold
stratified cross-validation for classification, R² over 10 shuffled folds for regression
(tunelab's extension).  Each landmarker is stopped at a time cap, so the whole group is bounded.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:  # pragma: no cover - imported lazily at run time to keep start-up fast
    from sklearn.base import BaseEstimator

LANDMARKERS: tuple[str, ...] = ("one_nn", "decision_stump", "naive_bayes", "linear")

_LANDMARK_FOLDS = 10  # Rivolli et al. (2022) and pymfe both use 10-fold cross-validation


@dataclass(frozen=True)
class Landmarkers:
    """Cross-validated scores of four fast learners (Rivolli et al. 2022, "landmarking").

    Attributes
    ----------
    metric
        ``"accuracy"`` for classification, ``"r2"`` for regression.
    one_nn, decision_stump, naive_bayes, linear
        Mean score over the folds; ``None`` when skipped (the reason is in ``notes``).
        ``naive_bayes`` is ``None`` for regression.  ``linear`` is linear discriminant
        analysis for classification and ridge regression for regression.
    rows_used
        Rows in the landmarking sample (at most ``max_rows``).
    n_folds
        Folds of the (stratified, for classification) shuffled k-fold split.
    notes
        Landmarker name to the reason it was skipped.
    """

    metric: str
    one_nn: float | None
    decision_stump: float | None
    naive_bayes: float | None
    linear: float | None
    rows_used: int
    n_folds: int
    notes: Mapping[str, str]


def measure_landmarkers(
    M: np.ndarray,
    y: np.ndarray,
    classification: bool,
    *,
    seed: int,
    time_cap_s: float,
    clock: Callable[[], float],
) -> Landmarkers:
    """Mean fold score of each landmarker, each stopped at ``time_cap_s`` seconds.

    Folds run one after another; before each fold the landmarker is abandoned when the
    time spent has reached the cap or the next fold, at the mean pace so far, would pass it.
    A cap therefore bounds the time by about one fold over the cap, without threads.

    Parameters
    ----------
    M
        The standardised design matrix of the landmarking sample
        (:func:`tunelab.data.design_matrix`).
    y
        Class codes for classification, the target's values for regression.
    classification
        Whether ``y`` holds classes.
    seed
        Seeds the fold split and the decision stump.
    time_cap_s
        Seconds each landmarker may take; ``0`` skips them all.
    clock
        Monotonic clock in seconds; a seam for tests.
    """
    from sklearn.base import clone

    splits, split_note = _folds(y, classification, seed)
    scores: dict[str, float | None] = {}
    notes: dict[str, str] = {}
    target = y if classification else np.asarray(y, dtype=float)
    for name, model in _landmark_models(classification, seed).items():
        scores[name] = None
        if model is None:
            notes[name] = "not defined for regression"
            continue
        if split_note:
            notes[name] = split_note
            continue
        started = clock()
        fold_scores: list[float] = []
        for done, (train, test) in enumerate(splits):
            spent = clock() - started
            pace = spent / done if done else 0.0
            if spent >= time_cap_s or spent + pace > time_cap_s:
                notes[name] = (
                    f"skipped: time cap of {time_cap_s:g} s reached after "
                    f"{done} of {len(splits)} folds"
                )
                break
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")  # collinear LDA, constant folds
                    fitted = clone(model).fit(M[train], target[train])
                    predicted = fitted.predict(M[test])
            except Exception as exc:  # tiny or degenerate folds must not stop the profile
                notes[name] = f"failed: {type(exc).__name__}: {exc}".splitlines()[0]
                break
            fold_scores.append(_fold_score(target[test], predicted, classification))
        else:
            finite = [s for s in fold_scores if math.isfinite(s)]
            if finite:
                scores[name] = float(np.mean(finite))
            else:
                notes[name] = "skipped: no fold gave a finite score"
    return Landmarkers(
        metric="accuracy" if classification else "r2",
        one_nn=scores["one_nn"],
        decision_stump=scores["decision_stump"],
        naive_bayes=scores["naive_bayes"],
        linear=scores["linear"],
        rows_used=len(y),
        n_folds=len(splits),
        notes=notes,
    )


def _landmark_models(classification: bool, seed: int) -> dict[str, BaseEstimator | None]:
    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis
    from sklearn.linear_model import Ridge
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neighbors import KNeighborsClassifier, KNeighborsRegressor
    from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

    if classification:
        return {
            "one_nn": KNeighborsClassifier(n_neighbors=1),
            "decision_stump": DecisionTreeClassifier(max_depth=1, random_state=seed),
            "naive_bayes": GaussianNB(),
            # pymfe's linear_discr uses the default "svd" solver; "lsqr" fits the same
            # pooled-covariance model three times faster (equal predictions at full rank).
            "linear": LinearDiscriminantAnalysis(solver="lsqr"),
        }
    return {
        "one_nn": KNeighborsRegressor(n_neighbors=1),
        "decision_stump": DecisionTreeRegressor(max_depth=1, random_state=seed),
        "naive_bayes": None,
        "linear": Ridge(alpha=1.0),
    }


def _folds(
    y: np.ndarray, classification: bool, seed: int
) -> tuple[list[tuple[np.ndarray, np.ndarray]], str]:
    """Shuffled k-fold splits (stratified for classes), or no splits and the reason.

    Ten folds as in pymfe; fewer when the smallest class (or the data) is smaller than ten.
    """
    from sklearn.model_selection import KFold, StratifiedKFold

    n = len(y)
    if classification:
        counts = np.bincount(y)
        counts = counts[counts > 0]
        if counts.size < 2:
            return [], "skipped: the sample has a single class"
        k = int(min(_LANDMARK_FOLDS, max(2, counts.min())))
        splitter: Any = StratifiedKFold(n_splits=k, shuffle=True, random_state=seed)
    else:
        if n < 2:
            return [], "skipped: fewer than 2 rows"
        k = min(_LANDMARK_FOLDS, n)
        splitter = KFold(n_splits=k, shuffle=True, random_state=seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # "least populated class has ..."
        return list(splitter.split(np.zeros((n, 1)), y)), ""


def _fold_score(y_true: np.ndarray, y_pred: np.ndarray, classification: bool) -> float:
    if classification:
        return float(np.mean(y_true == y_pred))
    residual = float(((y_true - y_pred) ** 2).sum())
    total = float(((y_true - y_true.mean()) ** 2).sum())
    return 1.0 - residual / total if total > 0 else float("nan")


__all__ = ["LANDMARKERS", "Landmarkers", "measure_landmarkers"]
