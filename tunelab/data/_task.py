"""Task inference and target validation."""

from __future__ import annotations

from typing import Literal

import numpy as np
import pandas as pd

from tunelab.errors import InputError

Task = Literal["binary", "multiclass", "regression"]
TASKS: tuple[Task, ...] = ("binary", "multiclass", "regression")
_MAX_INTEGER_CLASSES = 20  # integer targets with at most this many values are classes; common practice, no source


def infer_task(target: pd.Series) -> Task:
    """Binary for two values, multiclass for text or few integer values, regression otherwise."""
    present = target.dropna()
    n_unique = present.nunique()
    if n_unique == 2:
        return "binary"
    if not pd.api.types.is_numeric_dtype(present) or pd.api.types.is_bool_dtype(present):
        return "multiclass"
    values = present.to_numpy(dtype=float)
    if np.all(np.mod(values, 1) == 0) and n_unique <= _MAX_INTEGER_CLASSES:
        return "multiclass"
    return "regression"


def check_target(target: pd.Series, name: str, task: Task) -> None:
    """Refuse targets no model can learn: all missing, constant, a single class, non-numeric regression."""
    present = target.dropna()
    if present.empty:
        raise InputError(f"target column '{name}' has no values (all missing)", "choose another --target")
    if present.nunique() == 1:
        kind = "a single class" if task != "regression" else "one constant value"
        raise InputError(
            f"target column '{name}' has {kind} ({present.iloc[0]!r}); there is nothing to learn",
            "choose another --target, or add rows of the other classes",
        )
    if task == "regression" and not pd.api.types.is_numeric_dtype(present):
        raise InputError(f"target column '{name}' is not numeric, so it cannot be a regression target",
                         "drop --task regression, or clean the column")
    if task == "binary" and present.nunique() != 2:
        raise InputError(f"--task binary needs exactly 2 classes; '{name}' has {present.nunique()}",
                         "use --task multiclass")
    if task != "regression":
        counts = present.value_counts()
        rare = counts[counts < 2]
        if len(rare):
            raise InputError(
                f"class {rare.index[0]!r} of target '{name}' has a single row; cross-validation needs at least 2",
                "drop or merge the rarest classes",
            )
