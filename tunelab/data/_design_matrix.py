"""The data as a standardised float matrix, for the learners the probes fit."""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from tunelab.data._columns import category_codes, datetime_seconds, feature_roles, finite, token_counts

_MAX_ONE_HOT_LEVELS = 10  # most frequent levels of a categorical kept as indicator columns


def design_matrix(X: pd.DataFrame, roles: Mapping[str, str], rows: np.ndarray) -> np.ndarray:
    """A standardised float matrix of the sampled rows, for the learners that need numbers.

    Numeric columns as they are, datetimes as seconds since 1970, text as its token count,
    missing values replaced by the column median (0 for an all-missing column); each
    categorical becomes indicator columns for its ``_MAX_ONE_HOT_LEVELS`` most frequent levels
    (rarer levels and missing values are all-zero), which keeps the width bounded.  Every
    column is then standardised on the sample (scikit-learn's ``StandardScaler``) — an
    unsupervised transform, so fitting it before the folds leaks nothing about the target;
    this is also what pymfe does with ``fit(rescale="standard")``.  Columns whose role is ``"id"``
    are left out.
    """
    from sklearn.preprocessing import StandardScaler

    col_roles = feature_roles(X, roles)
    sub = X.iloc[rows]
    parts: list[np.ndarray] = []
    for column, role in col_roles.items():
        s = sub[column]
        if role == "categorical":
            codes = category_codes(s) - 1
            counts = np.bincount(codes[codes >= 0]) if (codes >= 0).any() else np.zeros(0)
            top = np.argsort(-counts, kind="stable")[:_MAX_ONE_HOT_LEVELS]
            parts.append((codes[:, None] == top[None, :]).astype(float))
            continue
        if role == "numeric":
            v = finite(s.to_numpy(dtype=float, na_value=np.nan))
        elif role == "datetime":
            v = datetime_seconds(s)
        else:
            v = token_counts(s)
        missing = np.isnan(v)
        if missing.any():
            v = np.where(missing, np.median(v[~missing]) if (~missing).any() else 0.0, v)
        parts.append(v[:, None])
    matrix = np.hstack(parts) if parts else np.zeros((len(rows), 0))
    if matrix.shape[1] == 0:  # e.g. only an all-missing categorical: one constant column
        matrix = np.zeros((len(rows), 1))
    return StandardScaler().fit_transform(matrix)


__all__ = ["design_matrix"]
