"""Training on a row sample: how a family too slow for the budget on all rows still takes part.

The space builder fixes ``<family>.rows`` when a trial on every row could not fit the budget;
cross-validation then trains each fold on a stratified sample of that many of the fold's
training rows (scoring on all of its held-out rows), and ``export`` refits on a sample of the
same size, so the exported model is the one that was measured.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
from sklearn.model_selection import train_test_split

ROWS_KEY = "rows"


def row_cap(config: Mapping[str, Any]) -> int | None:
    """The config's cap on training rows, or ``None`` to train on all of them."""
    value = config.get(f"{config.get('family', '')}.{ROWS_KEY}")
    return int(value) if value else None


def capped_rows(rows: np.ndarray, y: np.ndarray, task: str, cap: int | None, seed: int) -> np.ndarray:
    """``cap`` of the positions in ``rows``, stratified by class for classification; all when fewer.

    Parameters
    ----------
    rows
        Positions of the candidate training rows.
    y
        The whole target (indexed by ``rows``).
    task
        ``binary``, ``multiclass`` or ``regression``.
    cap
        Rows to keep; ``None`` keeps all.
    seed
        The same seed gives the same sample.
    """
    if cap is None or len(rows) <= cap:
        return rows
    stratify = y[rows] if task != "regression" else None
    try:
        picked, _ = train_test_split(rows, train_size=cap, stratify=stratify, random_state=seed)
    except ValueError:  # a class too small to spread over the sample
        picked, _ = train_test_split(rows, train_size=cap, random_state=seed)
    return np.sort(picked)
