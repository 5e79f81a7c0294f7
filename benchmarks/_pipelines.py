"""Plain scikit-learn pipelines for the baseline methods, and the generic search space.

Every baseline uses the same plain preprocessing, the one a careful practitioner writes
first: median imputation and standard scaling for numeric columns, most-frequent imputation
and one-hot encoding for the others. Only the estimator and its settings change.

The generic space is what one would write without knowledge of the data: a choice of model
family (gradient-boosted trees, random forest, linear), then a few conventional ranges per
family. Random search and plain TPE both search it; neither gets priors or warm starts.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import optuna
import pandas as pd
from sklearn.compose import ColumnTransformer
from sklearn.ensemble import (
    HistGradientBoostingClassifier,
    HistGradientBoostingRegressor,
    RandomForestClassifier,
    RandomForestRegressor,
)
from sklearn.impute import SimpleImputer
from sklearn.linear_model import LogisticRegression, Ridge
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler

DEFAULT_MODELS = ("hgb", "rf", "linear")


def prepare_features(frame: pd.DataFrame) -> pd.DataFrame:
    """Give feature columns the types the pipelines expect.

    Text columns (pandas 3 reads them as its string dtype) become ``object`` with ``NaN``
    for missing, which every scikit-learn imputer and encoder accepts; booleans become
    floats so they count as numeric.
    """
    out = frame.copy()
    for column in out.columns:
        series = out[column]
        if pd.api.types.is_bool_dtype(series):
            out[column] = series.astype(float)
        elif not pd.api.types.is_numeric_dtype(series):
            out[column] = series.astype(object).where(series.notna(), np.nan)
    return out


def preprocessor(features: pd.DataFrame) -> ColumnTransformer:
    """Impute, one-hot encode and scale, with columns split by dtype."""
    numeric = [c for c in features.columns if pd.api.types.is_numeric_dtype(features[c])]
    categorical = [c for c in features.columns if c not in numeric]
    numeric_steps = Pipeline(
        [("impute", SimpleImputer(strategy="median")), ("scale", StandardScaler())]
    )
    categorical_steps = Pipeline(
        [
            ("impute", SimpleImputer(strategy="most_frequent")),
            ("onehot", OneHotEncoder(handle_unknown="ignore", sparse_output=False)),
        ]
    )
    return ColumnTransformer(
        [("numeric", numeric_steps, numeric), ("categorical", categorical_steps, categorical)]
    )


def estimator(family: str, task: str, params: dict[str, Any], seed: int) -> Any:
    """Build the estimator of one family with ``params`` on top of library defaults.

    The only departure from library defaults is ``max_iter=1000`` for logistic regression,
    so that lbfgs converges on one-hot encoded data instead of stopping with a warning.
    """
    classify = task != "regression"
    if family == "hgb":
        cls = HistGradientBoostingClassifier if classify else HistGradientBoostingRegressor
        return cls(random_state=seed, **params)
    if family == "rf":
        cls = RandomForestClassifier if classify else RandomForestRegressor
        return cls(random_state=seed, **params)
    if family == "linear":
        if classify:
            return LogisticRegression(max_iter=1000, **params)
        return Ridge(**params)
    raise ValueError(f"unknown model family {family!r}")


def build_pipeline(
    config: dict[str, Any], task: str, features: pd.DataFrame, seed: int
) -> Pipeline:
    """Turn a config ``{"family": ..., **params}`` into an unfitted pipeline."""
    params = {k: v for k, v in config.items() if k != "family"}
    return Pipeline(
        [
            ("prepare", preprocessor(features)),
            ("model", estimator(config["family"], task, params, seed)),
        ]
    )


def sample_generic_config(trial: optuna.trial.BaseTrial, task: str) -> dict[str, Any]:
    """Sample one config from the generic space (ranges: common practice, no source)."""
    family = trial.suggest_categorical("family", list(DEFAULT_MODELS))
    config: dict[str, Any] = {"family": family}
    if family == "hgb":
        config["learning_rate"] = trial.suggest_float("hgb_learning_rate", 0.01, 0.3, log=True)
        config["max_leaf_nodes"] = trial.suggest_int("hgb_max_leaf_nodes", 8, 128, log=True)
        config["min_samples_leaf"] = trial.suggest_int("hgb_min_samples_leaf", 2, 100, log=True)
        config["l2_regularization"] = trial.suggest_float("hgb_l2", 1e-6, 10.0, log=True)
        config["max_iter"] = trial.suggest_int("hgb_max_iter", 50, 500, log=True)
    elif family == "rf":
        config["n_estimators"] = trial.suggest_int("rf_n_estimators", 50, 300, log=True)
        config["max_features"] = trial.suggest_float("rf_max_features", 0.1, 1.0)
        config["min_samples_leaf"] = trial.suggest_int("rf_min_samples_leaf", 1, 20, log=True)
    elif task == "regression":
        config["alpha"] = trial.suggest_float("ridge_alpha", 1e-4, 1e3, log=True)
    else:
        config["C"] = trial.suggest_float("logistic_C", 1e-4, 1e2, log=True)
    return config


__all__ = [
    "DEFAULT_MODELS",
    "build_pipeline",
    "estimator",
    "prepare_features",
    "preprocessor",
    "sample_generic_config",
]
