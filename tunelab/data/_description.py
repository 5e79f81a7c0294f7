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
``_STATS_MAX_ROWS`` rows, so their cost stops growing with the rows beyond that.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from tunelab.data._columns import class_codes, feature_roles
from tunelab.data._information import InformationFeatures, information_features
from tunelab.data._simple import SimpleFeatures, simple_features
from tunelab.data._statistical import StatisticalFeatures, statistical_features
from tunelab.data._task import TASKS, Task
from tunelab.errors import InputError

_STATS_MAX_ROWS = 50_000  # rows used for statistics, mutual information and token counts


@dataclass(frozen=True)
class DataDescription:
    """The three groups that read the data alone (Rivolli et al. 2022: simple, statistical, information)."""

    simple: SimpleFeatures
    statistical: StatisticalFeatures
    information: InformationFeatures


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
    y_codes = class_codes(y_arr) if task != "regression" else None
    return DataDescription(
        simple=simple_features(X, col_roles, roles, y_codes, stats_rows),
        statistical=statistical_features(X, col_roles, stats_rows),
        information=information_features(X, col_roles, y_arr, y_codes, stats_rows),
    )


def learning_target(y: np.ndarray, task: str) -> np.ndarray:
    """The target as learners take it: class codes ``0 .. k-1`` for classification, the values otherwise."""
    y_arr = np.asarray(y)
    return class_codes(y_arr) if task != "regression" else y_arr


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
    col_roles = feature_roles(X, roles)
    if not col_roles:
        raise InputError(
            "the data has no feature columns", hint="keep at least one non-id column"
        )
    return col_roles


def sample_rows(n: int, cap: int, rng: np.random.Generator) -> np.ndarray:
    """All row positions when ``n <= cap``, else ``cap`` positions drawn without replacement.

    The sample is sorted so that data under the cap keeps its original order, which makes
    fold splits identical to those of a reference computed on the full data.
    """
    if n <= cap:
        return np.arange(n)
    return np.sort(rng.choice(n, size=cap, replace=False))


__all__ = ["DataDescription", "describe_data", "learning_target", "sample_rows"]
