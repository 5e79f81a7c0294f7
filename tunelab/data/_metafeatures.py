"""The data's own meta-features: the groups that read the data without fitting a model.

The groups follow Rivolli, Garcia, Soares, Vanschoren and de Carvalho (2022), "Meta-features
for meta-learning", Knowledge-Based Systems: *simple* (counts and shares), *statistical*
(moments, correlation, outliers) and *information-theoretic* (entropies, mutual information).
Their fourth group, *landmarkers*, and tunelab's *cost probes* fit models and live in
:mod:`tunelab.probes`; :mod:`tunelab.facts` puts the five together.

Definitions are chosen to agree with the reference implementation ``pymfe`` where it
defines the same quantity (skewness and kurtosis "type 3", equal-frequency discretisation with
``floor(n ** (1/3))`` bins for mutual information, entropies in bits).  The tests check the
agreement on scikit-learn's bundled data sets.  Where tunelab goes beyond pymfe (missing
values, categorical / text / datetime columns, regression targets) the rule is stated in the
docstring of the function that applies it.

Everything is bounded in time: statistics and mutual information use at most
``_STATS_MAX_ROWS`` rows, so 50,000 rows x 50 columns take a fraction of a second.
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from tunelab.data._roles import ROLES
from tunelab.data._task import TASKS, Task
from tunelab.errors import InputError

_STATS_MAX_ROWS = 50_000  # rows used for statistics, mutual information and token counts
_MAX_ONE_HOT_LEVELS = 10  # most frequent levels of a categorical kept as indicator columns
_OUTLIER_WHISKER = 1.5  # Tukey's fences: outside [Q1 - 1.5 IQR, Q3 + 1.5 IQR]

# --------------------------------------------------------------------------------------
# Value objects
# --------------------------------------------------------------------------------------


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


@dataclass(frozen=True)
class InformationFeatures:
    """Entropy-based figures (Rivolli et al. 2022, "information-theoretic" group), in bits.

    Attributes
    ----------
    class_entropy
        Shannon entropy of the class distribution; ``None`` for regression.
    imbalance_ratio
        Size of the largest class over the size of the smallest; ``None`` for regression.
    mean_mutual_information
        Mean over numeric, datetime and categorical columns of the mutual information with
        the target.  Numeric and datetime columns are cut into ``floor(m ** (1/3))``
        equal-frequency bins (``m`` rows used), as pymfe does; categoricals use their levels;
        a missing value is a level of its own; text columns are left out.  For regression
        the target is binned the same way (tunelab's extension).  Like every plug-in
        estimate it grows with the number of levels: a near-unique categorical scores close
        to the class entropy.
    rows_used
        Rows the figures were computed on.
    """

    class_entropy: float | None
    imbalance_ratio: float | None
    mean_mutual_information: float | None
    rows_used: int


@dataclass(frozen=True)
class DataDescription:
    """The three groups that read the data alone (Rivolli et al. 2022: simple, statistical, information)."""

    simple: SimpleFeatures
    statistical: StatisticalFeatures
    information: InformationFeatures


# --------------------------------------------------------------------------------------
# Entry point
# --------------------------------------------------------------------------------------


def describe_data(
    X: pd.DataFrame,
    y: np.ndarray,
    task: Task,
    roles: Mapping[str, str],
    *,
    rng: np.random.Generator,
) -> DataDescription:
    """Describe a dataset by the meta-features that need no model, on a bounded row sample.

    Parameters
    ----------
    X
        Feature columns as cleaned by the loader (no target; id columns dropped, or ignored
        if present with role ``"id"``).
    y
        Target, one value per row of ``X``.
    task
        ``"binary"``, ``"multiclass"`` or ``"regression"``.
    roles
        Column name to ``"numeric"``, ``"categorical"``, ``"text"``, ``"datetime"`` or
        ``"id"``; every column of ``X`` needs one.
    rng
        Draws the rows the statistics are computed on when the data has more than
        ``_STATS_MAX_ROWS``.

    Returns
    -------
    DataDescription
        The simple, statistical and information-theoretic groups.

    Raises
    ------
    InputError
        When ``task`` is unknown, a column has no or an unknown role, ``y`` does not match
        ``X`` in length, or there are no rows or no feature columns.
    """
    col_roles = _check_inputs(X, y, task, roles)
    y_arr = np.asarray(y)
    stats_rows = sample_rows(len(X), _STATS_MAX_ROWS, rng)
    y_codes = _class_codes(y_arr) if task != "regression" else None
    return DataDescription(
        simple=_simple_features(X, col_roles, roles, y_codes, stats_rows),
        statistical=_statistical_features(X, col_roles, stats_rows),
        information=_information_features(X, col_roles, y_arr, y_codes, stats_rows),
    )


def learning_target(y: np.ndarray, task: str) -> np.ndarray:
    """The target as learners take it: class codes ``0 .. k-1`` for classification, the values otherwise."""
    y_arr = np.asarray(y)
    return _class_codes(y_arr) if task != "regression" else y_arr


def _check_inputs(X: pd.DataFrame, y: Any, task: str, roles: Mapping[str, str]) -> dict[str, str]:
    """Validate and return the roles of the feature columns of ``X`` (id columns left out)."""
    if task not in TASKS:
        raise InputError(
            f"unknown task {task!r}", hint=f"use one of: {', '.join(TASKS)}"
        )
    if len(X) == 0:
        raise InputError("the data has no rows", hint="check the data file and its filters")
    if len(np.asarray(y)) != len(X):
        raise InputError(
            f"the target has {len(np.asarray(y))} values but the data has {len(X)} rows",
            hint="pass the target column of the same frame",
        )
    col_roles = _feature_roles(X, roles)
    if not col_roles:
        raise InputError(
            "the data has no feature columns", hint="keep at least one non-id column"
        )
    return col_roles


def _feature_roles(X: pd.DataFrame, roles: Mapping[str, str]) -> dict[str, str]:
    """The role of every non-id column of ``X``, in the frame's order; refuses missing or unknown roles."""
    col_roles: dict[str, str] = {}
    for column in X.columns:
        role = roles.get(column)
        if role is None:
            raise InputError(
                f"column {column!r} has no role", hint="pass the roles inferred by the loader"
            )
        if role not in ROLES:
            raise InputError(
                f"column {column!r} has unknown role {role!r}",
                hint=f"use one of: {', '.join(ROLES)}",
            )
        if role != "id":
            col_roles[str(column)] = role
    return col_roles


def sample_rows(n: int, cap: int, rng: np.random.Generator) -> np.ndarray:
    """All row positions when ``n <= cap``, else ``cap`` positions drawn without replacement.

    The sample is sorted so that data under the cap keeps its original order, which makes
    fold splits identical to those of a reference computed on the full data.
    """
    if n <= cap:
        return np.arange(n)
    return np.sort(rng.choice(n, size=cap, replace=False))


def _class_codes(y: np.ndarray) -> np.ndarray:
    _, codes = np.unique(y, return_inverse=True)
    return codes.reshape(-1).astype(np.int64)


def _columns(col_roles: Mapping[str, str], *wanted: str) -> list[str]:
    return [c for c, r in col_roles.items() if r in wanted]


# --------------------------------------------------------------------------------------
# Simple
# --------------------------------------------------------------------------------------


def _simple_features(
    X: pd.DataFrame,
    col_roles: Mapping[str, str],
    roles: Mapping[str, str],
    y_codes: np.ndarray | None,
    stats_rows: np.ndarray,
) -> SimpleFeatures:
    n_rows, n_columns = len(X), len(col_roles)
    counts = {role: len(_columns(col_roles, role)) for role in ROLES}
    features = X[list(col_roles)]
    share_missing = float(features.isna().to_numpy().mean())
    text_tokens = {
        column: _mean_tokens(X[column].iloc[stats_rows])
        for column in _columns(col_roles, "text")
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


def _token_counts(s: pd.Series) -> np.ndarray:
    """Whitespace tokens per cell; missing cells give NaN."""
    counts = s.astype("string").str.split().str.len()
    return counts.to_numpy(dtype=float, na_value=np.nan)


def _mean_tokens(s: pd.Series) -> float:
    counts = _token_counts(s)
    present = counts[~np.isnan(counts)]
    return float(present.mean()) if present.size else 0.0


# --------------------------------------------------------------------------------------
# Statistical
# --------------------------------------------------------------------------------------


def _numeric_matrix(X: pd.DataFrame, columns: Sequence[str], rows: np.ndarray) -> np.ndarray:
    if not columns:
        return np.empty((len(rows), 0))
    return _finite(X[list(columns)].iloc[rows].to_numpy(dtype=float, na_value=np.nan))


def _finite(values: np.ndarray) -> np.ndarray:
    """Infinite values count as missing: no moment, quantile or scaler survives them."""
    values = np.array(values, dtype=float)
    values[np.isinf(values)] = np.nan
    return values


def _statistical_features(
    X: pd.DataFrame, col_roles: Mapping[str, str], rows: np.ndarray
) -> StatisticalFeatures:
    A = _numeric_matrix(X, _columns(col_roles, "numeric"), rows)
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


# --------------------------------------------------------------------------------------
# Information-theoretic
# --------------------------------------------------------------------------------------


def _information_features(
    X: pd.DataFrame,
    col_roles: Mapping[str, str],
    y: np.ndarray,
    y_codes: np.ndarray | None,
    rows: np.ndarray,
) -> InformationFeatures:
    m = len(rows)
    n_bins = _cube_root_bins(m)
    class_entropy = imbalance = None
    if y_codes is not None:
        counts = np.bincount(y_codes)
        counts = counts[counts > 0]
        class_entropy = _entropy_bits(counts)
        imbalance = float(counts.max() / counts.min())
        target = y_codes[rows]
    else:
        target = _equal_frequency_codes(np.asarray(y, dtype=float)[rows], n_bins)
    mis = []
    for column, role in col_roles.items():
        if role == "text":
            continue
        s = X[column].iloc[rows]
        if role == "numeric":
            values = _finite(s.to_numpy(dtype=float, na_value=np.nan))
            codes = _equal_frequency_codes(values, n_bins)
        elif role == "datetime":
            codes = _equal_frequency_codes(_datetime_seconds(s), n_bins)
        else:
            codes = _category_codes(s)
        mis.append(_mutual_information_bits(codes, target))
    return InformationFeatures(
        class_entropy=class_entropy,
        imbalance_ratio=imbalance,
        mean_mutual_information=float(np.mean(mis)) if mis else None,
        rows_used=m,
    )


def _cube_root_bins(m: int) -> int:
    # pymfe's rule, int(m ** (1/3)); np.cbrt keeps perfect cubes exact (125 -> 5).
    return max(1, int(np.cbrt(m) + 1e-9))


def _equal_frequency_codes(values: np.ndarray, n_bins: int) -> np.ndarray:
    """Equal-frequency bin of each value, with missing values in a bin of their own.

    Bin edges are the quantiles at ``1/k, 2/k, ..., 1`` (linear interpolation); edges closer
    than 1e-8 are merged, so ties make fewer, unequal bins.  This is pymfe's
    ``_equal_frequency_discretization``.
    """
    present = ~np.isnan(values)
    codes = np.zeros(values.size, dtype=np.int64)
    if not present.any():
        return codes
    edges = np.quantile(values[present], np.linspace(0.0, 1.0, n_bins + 1)[1:])
    edges = np.unique(edges[np.append(True, np.diff(edges) > 1e-8)])
    codes[present] = np.digitize(values[present], edges, right=True)
    codes[~present] = edges.size
    return codes


def _category_codes(s: pd.Series) -> np.ndarray:
    codes, _ = pd.factorize(s, use_na_sentinel=True)
    return np.asarray(codes, dtype=np.int64) + 1  # missing (-1) becomes level 0


def _entropy_bits(counts: np.ndarray) -> float:
    p = counts[counts > 0] / counts.sum()
    return float(-(p * np.log2(p)).sum())


def _mutual_information_bits(a: np.ndarray, b: np.ndarray) -> float:
    """``H(a) + H(b) - H(a, b)`` in bits, for non-negative integer codes."""
    joint = a * (int(b.max()) + 1) + b
    return (
        _entropy_bits(np.bincount(a))
        + _entropy_bits(np.bincount(b))
        - _entropy_bits(np.bincount(joint))
    )


def _datetime_seconds(s: pd.Series) -> np.ndarray:
    """Seconds since 1970 as floats (NaN for missing), whatever the resolution or zone."""
    if not pd.api.types.is_datetime64_any_dtype(s.dtype):
        s = pd.to_datetime(s, errors="coerce", utc=True)
    if getattr(s.dt, "tz", None) is not None:
        s = s.dt.tz_convert("UTC").dt.tz_localize(None)
    delta = (s - pd.Timestamp("1970-01-01")) / pd.Timedelta(seconds=1)
    return delta.to_numpy(dtype=float, na_value=np.nan)


# --------------------------------------------------------------------------------------
# Design matrix the probes fit on
# --------------------------------------------------------------------------------------


def design_matrix(X: pd.DataFrame, roles: Mapping[str, str], rows: np.ndarray) -> np.ndarray:
    """A standardised float matrix of the sampled rows, for the learners that need numbers.

    Numeric columns as they are, datetimes as seconds since 1970, text as its token count,
    missing values replaced by the column median (0 for an all-missing column); each
    categorical becomes indicator columns for its ``_MAX_ONE_HOT_LEVELS`` most frequent levels
    (rarer levels and missing values are all-zero), which keeps the width bounded.  Every
    column is then standardised on the sample (scikit-learn's ``StandardScaler``) — an
    unsupervised transform, so fitting it before the folds leaks nothing about the target;
    this is also what pymfe does with ``fit(rescale="standard")``.
    """
    from sklearn.preprocessing import StandardScaler

    col_roles = _feature_roles(X, roles)
    sub = X.iloc[rows]
    parts: list[np.ndarray] = []
    for column, role in col_roles.items():
        s = sub[column]
        if role == "categorical":
            codes = _category_codes(s) - 1
            counts = np.bincount(codes[codes >= 0]) if (codes >= 0).any() else np.zeros(0)
            top = np.argsort(-counts, kind="stable")[:_MAX_ONE_HOT_LEVELS]
            parts.append((codes[:, None] == top[None, :]).astype(float))
            continue
        if role == "numeric":
            v = _finite(s.to_numpy(dtype=float, na_value=np.nan))
        elif role == "datetime":
            v = _datetime_seconds(s)
        else:
            v = _token_counts(s)
        missing = np.isnan(v)
        if missing.any():
            v = np.where(missing, np.median(v[~missing]) if (~missing).any() else 0.0, v)
        parts.append(v[:, None])
    matrix = np.hstack(parts) if parts else np.zeros((len(rows), 0))
    if matrix.shape[1] == 0:  # e.g. only an all-missing categorical: one constant column
        matrix = np.zeros((len(rows), 1))
    return StandardScaler().fit_transform(matrix)


__all__ = [
    "DataDescription",
    "InformationFeatures",
    "SimpleFeatures",
    "StatisticalFeatures",
    "describe_data",
    "design_matrix",
    "learning_target",
    "sample_rows",
    "type3_moments",
]
