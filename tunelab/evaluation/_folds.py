"""Cross-validation folds: the same seeded folds for every trial of a study."""

from __future__ import annotations

import numpy as np
from sklearn.model_selection import KFold, StratifiedKFold

LARGE_DATA_ROWS = 20_000  # above this, 3 folds keep trials affordable; common practice, no source


def fold_count(n_rows: int, task: str, y: np.ndarray) -> int:
    """5 folds, 3 on large data, never more than the rarest class has rows."""
    k = 5 if n_rows <= LARGE_DATA_ROWS else 3
    if task != "regression":
        _, counts = np.unique(y, return_counts=True)
        k = min(k, int(counts.min()))
    return max(2, k)


def make_folds(y: np.ndarray, task: str, seed: int, n_folds: int | None = None) -> list[tuple[np.ndarray, np.ndarray]]:
    """Seeded (train, test) index pairs, stratified for classification."""
    k = n_folds or fold_count(len(y), task, y)
    if task == "regression":
        splitter = KFold(n_splits=k, shuffle=True, random_state=seed)
        return list(splitter.split(np.zeros(len(y))))
    splitter = StratifiedKFold(n_splits=k, shuffle=True, random_state=seed)
    return list(splitter.split(np.zeros(len(y)), y))
