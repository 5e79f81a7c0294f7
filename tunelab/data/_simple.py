"""The simple meta-features: counts and shares that need no model (Rivolli et al. 2022)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from tunelab.data._columns import columns_with_role, token_counts
from tunelab.data._roles import ROLES


@dataclass(frozen=True)
class SimpleFeatures:
    """Counts and shares that need no model (Rivolli et al. 2022, "simple" group).

    Attributes
    ----------
    n_rows, n_columns
        Rows and feature columns (id columns excluded).
    rows_per_column
        ``n_rows / n_columns`` (pymfe ``inst_to_attr``).
    n_numeric, n_categorical, n_text, n_datetime
        Feature columns per role.
    n_id
        Columns whose role is ``"id"`` in ``roles`` (dropped by the loader, counted here).
    share_categorical
        ``n_categorical / n_columns``.
    share_missing
        Missing cells over all cells of the feature columns.
    n_classes
        Distinct target values for classification, ``None`` for regression.
    mean_text_tokens
        Per text column, mean number of whitespace-separated tokens over non-missing cells
        (on at most ``_STATS_MAX_ROWS`` sampled rows).
    """

    n_rows: int
    n_columns: int
    rows_per_column: float
    n_numeric: int
    n_categorical: int
    n_text: int
    n_datetime: int
    n_id: int
    share_categorical: float
    share_missing: float
    n_classes: int | None
    mean_text_tokens: Mapping[str, float]


def simple_features(
    X: pd.DataFrame,
    col_roles: Mapping[str, str],
    roles: Mapping[str, str],
    y_codes: np.ndarray | None,
    stats_rows: np.ndarray,
) -> SimpleFeatures:
    n_rows, n_columns = len(X), len(col_roles)
    counts = {role: len(columns_with_role(col_roles, role)) for role in ROLES}
    features = X[list(col_roles)]
    share_missing = float(features.isna().to_numpy().mean())
    text_tokens = {
        column: _mean_tokens(X[column].iloc[stats_rows])
        for column in columns_with_role(col_roles, "text")
    }
    return SimpleFeatures(
        n_rows=n_rows,
        n_columns=n_columns,
        rows_per_column=n_rows / n_columns,
        n_numeric=counts["numeric"],
        n_categorical=counts["categorical"],
        n_text=counts["text"],
        n_datetime=counts["datetime"],
        n_id=sum(1 for r in roles.values() if r == "id"),
        share_categorical=counts["categorical"] / n_columns,
        share_missing=share_missing,
        n_classes=None if y_codes is None else int(np.unique(y_codes).size),
        mean_text_tokens=text_tokens,
    )


def _mean_tokens(s: pd.Series) -> float:
    counts = token_counts(s)
    present = counts[~np.isnan(counts)]
    return float(present.mean()) if present.size else 0.0


__all__ = ["SimpleFeatures", "simple_features"]
