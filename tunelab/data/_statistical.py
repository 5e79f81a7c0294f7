"""The statistical meta-features: moments, correlation and outliers of the numeric columns (Rivolli et al. 2022).

Skewness and kurtosis are pymfe's "type 3" estimators; correlation is pymfe's ``cor``; outliers
follow Tukey's fences, as pymfe's ``nr_outliers`` does.
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from tunelab.data._columns import columns_with_role, finite

_OUTLIER_WHISKER = 1.5  # Tukey's fences: outside [Q1 - 1.5 IQR, Q3 + 1.5 IQR]

HIGH_SKEWNESS = 1.0  # |skewness| above 1 is "highly skewed" (Bulmer 1979, Principles of Statistics; from memory)


@dataclass(frozen=True)
class StatisticalFeatures:
    """Shape of the numeric columns (Rivolli et al. 2022, "statistical" group).

    Only columns with role ``"numeric"`` enter; categorical codes have no meaningful moments.
    A value is ``None`` when no column qualifies.

    Attributes
    ----------
    mean_abs_skewness
        Mean over columns of ``|m3 / s**3|`` (``s`` with ``ddof=1``: e1071 and pymfe
        "type 3"), over non-missing values; constant columns and columns with fewer than three
        values are left out.
    mean_kurtosis
        Mean over the same columns of the excess kurtosis ``m4 / s**4 - 3`` (type 3).
    mean_abs_correlation
        Mean of the absolute Pearson correlation over distinct pairs of numeric columns
        (pairwise-complete rows when values are missing; pymfe ``cor``).
    outlier_share
        Share of non-missing numeric values outside Tukey's fences
        ``[Q1 - 1.5 IQR, Q3 + 1.5 IQR]`` of their column (quartiles by linear interpolation).
    share_columns_with_outliers
        Share of numeric columns with at least one such value (pymfe ``nr_outliers`` divided
        by the number of numeric columns).
    rows_used
        Rows the figures were computed on (a seeded sample when the data is larger).
    """

    mean_abs_skewness: float | None
    mean_kurtosis: float | None
    mean_abs_correlation: float | None
    outlier_share: float | None
    share_columns_with_outliers: float | None
    rows_used: int


def statistical_features(
    X: pd.DataFrame, col_roles: Mapping[str, str], rows: np.ndarray
) -> StatisticalFeatures:
    A = _numeric_matrix(X, columns_with_role(col_roles, "numeric"), rows)
    skews, kurts = [], []
    for j in range(A.shape[1]):
        skew, kurt = type3_moments(A[:, j])
        if skew is not None and kurt is not None:
            skews.append(abs(skew))
            kurts.append(kurt)
    outlier_share, share_cols = _outliers(A)
    return StatisticalFeatures(
        mean_abs_skewness=float(np.mean(skews)) if skews else None,
        mean_kurtosis=float(np.mean(kurts)) if kurts else None,
        mean_abs_correlation=_mean_abs_correlation(A),
        outlier_share=outlier_share,
        share_columns_with_outliers=share_cols,
        rows_used=len(rows),
    )


def type3_moments(values: np.ndarray) -> tuple[float | None, float | None]:
    """Skewness ``m3 / s**3`` and excess kurtosis ``m4 / s**4 - 3`` with ``s`` at ``ddof=1``.

    These are the "type 3" estimators of R's e1071 and pymfe's defaults (b1 and b2 - 3 in
    Joanes and Gill 1998, from memory).  ``None`` for fewer than three values or a constant
    column, where they are undefined.
    """
    v = values[~np.isnan(values)]
    n = v.size
    if n < 3 or np.ptp(v) == 0:
        return None, None
    d = v - v.mean()
    m2, m3, m4 = (d**2).mean(), (d**3).mean(), (d**4).mean()
    s2 = m2 * n / (n - 1)
    if s2 <= 0:
        return None, None
    return float(m3 / s2**1.5), float(m4 / s2**2 - 3.0)


def _numeric_matrix(X: pd.DataFrame, columns: Sequence[str], rows: np.ndarray) -> np.ndarray:
    if not columns:
        return np.empty((len(rows), 0))
    return finite(X[list(columns)].iloc[rows].to_numpy(dtype=float, na_value=np.nan))


def _mean_abs_correlation(A: np.ndarray) -> float | None:
    if A.shape[1] < 2:
        return None
    with np.errstate(invalid="ignore", divide="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        if np.isnan(A).any():
            corr = pd.DataFrame(A).corr().to_numpy()
        else:
            corr = np.corrcoef(A, rowvar=False)
    pairs = np.abs(corr[np.tril_indices(A.shape[1], k=-1)])
    pairs = pairs[np.isfinite(pairs)]
    return float(pairs.mean()) if pairs.size else None


def _outliers(A: np.ndarray) -> tuple[float | None, float | None]:
    """Share of values, and of columns with any value, outside Tukey's 1.5 IQR fences."""
    present = ~np.isnan(A)
    filled_columns = present.any(axis=0)
    if not filled_columns.any():
        return None, None
    B = A[:, filled_columns]
    q1, q3 = np.nanpercentile(B, [25, 75], axis=0)
    reach = _OUTLIER_WHISKER * (q3 - q1)
    with np.errstate(invalid="ignore"):
        outside = (B < q1 - reach) | (B > q3 + reach)
    return (
        float(outside.sum() / present.sum()),
        float(outside.any(axis=0).mean()),
    )


__all__ = ["HIGH_SKEWNESS", "StatisticalFeatures", "statistical_features", "type3_moments"]
