"""How the meta-features read the feature columns: which ones count, and each kind as numbers.

Shared by the three groups and the design matrix, so that a numeric, datetime, text or
categorical column is read the same way everywhere.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from tunelab.data._roles import ROLES
from tunelab.errors import InputError


def feature_roles(X: pd.DataFrame, roles: Mapping[str, str]) -> dict[str, str]:
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


def columns_with_role(col_roles: Mapping[str, str], *wanted: str) -> list[str]:
    """The columns whose role is one of ``wanted``, in order."""
    return [c for c, r in col_roles.items() if r in wanted]


def finite(values: np.ndarray) -> np.ndarray:
    """Infinite values count as missing: no moment, quantile or scaler survives them."""
    values = np.array(values, dtype=float)
    values[np.isinf(values)] = np.nan
    return values


def token_counts(s: pd.Series) -> np.ndarray:
    """Whitespace tokens per cell; missing cells give NaN."""
    counts = s.astype("string").str.split().str.len()
    return counts.to_numpy(dtype=float, na_value=np.nan)


def datetime_seconds(s: pd.Series) -> np.ndarray:
    """Seconds since 1970 as floats (NaN for missing), whatever the resolution or zone."""
    if not pd.api.types.is_datetime64_any_dtype(s.dtype):
        s = pd.to_datetime(s, errors="coerce", utc=True)
    if getattr(s.dt, "tz", None) is not None:
        s = s.dt.tz_convert("UTC").dt.tz_localize(None)
    delta = (s - pd.Timestamp("1970-01-01")) / pd.Timedelta(seconds=1)
    return delta.to_numpy(dtype=float, na_value=np.nan)


def category_codes(s: pd.Series) -> np.ndarray:
    """Each value's level as ``1 .. k``, missing values as level 0."""
    codes, _ = pd.factorize(s, use_na_sentinel=True)
    return np.asarray(codes, dtype=np.int64) + 1  # missing (-1) becomes level 0


def class_codes(y: np.ndarray) -> np.ndarray:
    """Each class as ``0 .. k-1``, in sorted order of the labels."""
    _, codes = np.unique(y, return_inverse=True)
    return codes.reshape(-1).astype(np.int64)


__all__ = ["category_codes", "class_codes", "columns_with_role", "datetime_seconds", "feature_roles", "finite",
           "token_counts"]
