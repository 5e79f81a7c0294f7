"""Column-role preprocessing: impute, scale, encode and vectorise by role.

Trees get ordinal codes and dense output; linear, distance and neural models get scaled numbers,
one-hot (or target) encoding and sparse TF-IDF where it is cheaper.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd
from sklearn.base import BaseEstimator, TransformerMixin
from sklearn.compose import ColumnTransformer
from sklearn.decomposition import TruncatedSVD
from sklearn.feature_extraction.text import TfidfVectorizer
from sklearn.impute import SimpleImputer
from sklearn.pipeline import Pipeline, make_pipeline
from sklearn.preprocessing import (
    FunctionTransformer,
    OneHotEncoder,
    OrdinalEncoder,
    QuantileTransformer,
    StandardScaler,
    TargetEncoder,
)

ONE_HOT_MAX_CARDINALITY = 30  # above this, one-hot columns outgrow the data; common practice, no source


def as_object(frame: Any) -> Any:
    """Categoricals as object arrays with NaN for missing, which every sklearn encoder accepts."""
    if isinstance(frame, pd.DataFrame):
        return frame.astype(object).where(frame.notna(), np.nan)
    return frame


def fill_text(column: Any) -> list[str]:
    """Free text with missing values as empty strings (TF-IDF cannot read NaN)."""
    series = pd.Series(np.asarray(column, dtype=object).ravel())
    return series.where(series.notna(), "").astype(str).tolist()


def datetime_parts(frame: Any) -> np.ndarray:
    """Year, month, day of week, hour and days since 1970 for each datetime column."""
    frame = pd.DataFrame(frame)
    parts = []
    for name in frame.columns:
        col = pd.to_datetime(frame[name], errors="coerce")
        days = (col - pd.Timestamp("1970-01-01")).dt.total_seconds() / 86400.0
        parts += [col.dt.year, col.dt.month, col.dt.day_of_week, col.dt.hour, days]
    return np.column_stack([np.asarray(p, dtype=float) for p in parts]) if parts else np.empty((len(frame), 0))


class CappedSVD(TransformerMixin, BaseEstimator):
    """Truncated SVD that keeps at most ``n_features - 1`` components, so a small vocabulary never fails."""

    def __init__(self, n_components: int = 32, random_state: int = 0) -> None:
        self.n_components = n_components
        self.random_state = random_state

    def fit(self, X: Any, y: Any = None) -> CappedSVD:
        k = max(1, min(self.n_components, X.shape[1] - 1, X.shape[0] - 1))
        self.svd_ = TruncatedSVD(n_components=k, random_state=self.random_state).fit(X)
        return self

    def transform(self, X: Any) -> np.ndarray:
        return self.svd_.transform(X)


def build_preprocessor(
    roles: Mapping[str, str],
    cardinality: Mapping[str, int],
    *,
    style: str,
    task: str,
    numeric_transform: str = "standard",
    text_features: int = 5000,
    text_components: int = 32,
    seed: int = 0,
) -> ColumnTransformer:
    """A ColumnTransformer for one model style: ``"tree"`` (ordinal, dense) or ``"scaled"`` (one-hot, scaled).

    Parameters
    ----------
    roles
        Column name → role (``numeric``, ``categorical``, ``text``, ``datetime``).
    cardinality
        Column name → number of distinct values, for choosing the categorical encoder.
    style
        ``"tree"`` for tree ensembles, ``"scaled"`` for linear, distance and neural models,
        ``"dense_scaled"`` when the model cannot take sparse input.
    """
    by_role: dict[str, list[str]] = {}
    for name, role in roles.items():
        by_role.setdefault(role, []).append(name)
    parts: list[tuple[str, Any, Any]] = []
    scaled = style != "tree"

    numeric = by_role.get("numeric", [])
    if numeric:
        steps: list[Any] = [SimpleImputer(strategy="median", add_indicator=True, keep_empty_features=True)]
        if scaled:
            steps.append(_numeric_scaler(numeric_transform, seed))
        parts.append(("numeric", make_pipeline(*steps), numeric))

    dates = by_role.get("datetime", [])
    if dates:
        steps = [FunctionTransformer(datetime_parts), SimpleImputer(strategy="median", keep_empty_features=True)]
        if scaled:
            steps.append(StandardScaler())
        parts.append(("datetime", make_pipeline(*steps), dates))

    categorical = by_role.get("categorical", [])
    low = [c for c in categorical if cardinality.get(c, 0) <= ONE_HOT_MAX_CARDINALITY]
    high = [c for c in categorical if cardinality.get(c, 0) > ONE_HOT_MAX_CARDINALITY]
    if style == "tree" and categorical:
        parts.append(("categorical", make_pipeline(
            FunctionTransformer(as_object),
            OrdinalEncoder(handle_unknown="use_encoded_value", unknown_value=-1,
                           encoded_missing_value=-1, dtype=np.float64),
        ), categorical))
    else:
        if low:
            parts.append(("categorical", make_pipeline(
                FunctionTransformer(as_object),
                SimpleImputer(strategy="constant", fill_value="(missing)"),
                OneHotEncoder(handle_unknown="infrequent_if_exist", min_frequency=3, sparse_output=True),
            ), low))
        if high:
            target_type = "continuous" if task == "regression" else ("binary" if task == "binary" else "multiclass")
            parts.append(("categorical_many", make_pipeline(
                FunctionTransformer(as_object),
                SimpleImputer(strategy="constant", fill_value="(missing)"),
                TargetEncoder(target_type=target_type, random_state=seed),
                StandardScaler(),
            ), high))

    for name in by_role.get("text", []):
        steps = [FunctionTransformer(fill_text), TfidfVectorizer(max_features=text_features, min_df=1,
                                                                 sublinear_tf=True, dtype=np.float32)]
        if style != "scaled":
            steps.append(CappedSVD(n_components=text_components, random_state=seed))
        parts.append((f"text_{name}", make_pipeline(*steps), name))

    sparse_threshold = 0.3 if style == "scaled" else 0.0
    return ColumnTransformer(parts, remainder="drop", sparse_threshold=sparse_threshold)


def signed_log1p(values: Any) -> Any:
    """``sign(x) * log(1 + |x|)``: tames long tails, keeps zero and sign, defined for every real."""
    values = np.asarray(values, dtype=float)
    return np.sign(values) * np.log1p(np.abs(values))


class PooledScaler(TransformerMixin, BaseEstimator):
    """Centre each column, then divide every column by one shared scale.

    For columns measured in one unit (pixels, counts of one kind): the root mean of the column
    variances becomes 1 while each column keeps its spread relative to the others, which
    per-column standardising would erase (see :mod:`tunelab.data._shared_scale`).
    """

    def fit(self, X: Any, y: Any = None) -> PooledScaler:
        values = np.asarray(X, dtype=float)
        self.mean_ = values.mean(axis=0)
        pooled = float(np.sqrt(values.var(axis=0).mean())) if values.size else 0.0
        self.scale_ = pooled if np.isfinite(pooled) and pooled > 0 else 1.0
        self.n_features_in_ = values.shape[1]
        return self

    def transform(self, X: Any) -> np.ndarray:
        return (np.asarray(X, dtype=float) - self.mean_) / self.scale_


def _numeric_scaler(kind: str, seed: int) -> Any:
    if kind == "pooled":
        return PooledScaler()
    if kind == "quantile":
        return QuantileTransformer(output_distribution="normal", n_quantiles=200, random_state=seed)
    if kind == "log":
        return make_pipeline(FunctionTransformer(signed_log1p), StandardScaler())
    return StandardScaler()


def text_columns(roles: Mapping[str, str]) -> Sequence[str]:
    return [c for c, r in roles.items() if r == "text"]


__all__ = ["PooledScaler", "build_preprocessor", "datetime_parts", "fill_text", "as_object", "text_columns", "Pipeline"]
