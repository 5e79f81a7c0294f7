"""The data's facts: everything the space builder reads about a dataset, in one frozen value.

``run`` and ``profile`` measure a dataset once (meta-features, probes, the fold rule, the metric)
and hand the builder this value; the builder asks nothing else, so no layer calls back up to
finish the picture.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tunelab.data import ColumnRole, Dataset, shares_one_scale, type3_moments
from tunelab.evaluation import DEFAULT_METRIC, fold_count
from tunelab.facts._metafeatures import MetaFeatures
from tunelab.probes import TransformProbe, numeric_map_choices


@dataclass(frozen=True)
class DataFacts:
    """What is known about one dataset before any trial, measured once.

    Attributes
    ----------
    task
        ``"binary"``, ``"multiclass"`` or ``"regression"``.
    n_rows
        Rows of the data.
    columns
        Every column as the loader read it (role, cardinality, missing share), identifiers
        included.
    n_folds
        Folds of the study's cross-validation (:func:`tunelab.evaluation.fold_count`).
    metric
        The study's metric; the task's default when none was given.
    majority_share
        Share of the most frequent class, what always guessing it scores; 0 for regression.
    target_skew
        The target's skewness when it is a regression target above zero everywhere, else ``None``.
    shared_scale
        Whether the numeric columns look like one unit (:func:`tunelab.data.shares_one_scale`).
    numeric_maps
        The numeric maps worth searching for scaled models, in the order the skewness rule
        prefers them (:func:`tunelab.probes.numeric_map_choices`).
    meta
        The meta-features, landmarkers and cost probes included.
    transform_probe
        Held-out scores of the linear pipeline under each of ``numeric_maps``; ``None`` when not
        probed or when fewer than two maps scored.
    """

    task: str
    n_rows: int
    columns: tuple[ColumnRole, ...]
    n_folds: int
    metric: str
    majority_share: float
    target_skew: float | None
    shared_scale: bool
    numeric_maps: tuple[str, ...]
    meta: MetaFeatures
    transform_probe: TransformProbe | None = None


def data_facts(dataset: Dataset, meta: MetaFeatures, *, metric: str | None = None,
               transform_probe: TransformProbe | None = None) -> DataFacts:
    """Put a dataset's facts together from its meta-features; nothing here fits a model.

    Parameters
    ----------
    dataset
        The loaded data.
    meta
        Its meta-features (:func:`tunelab.facts.compute_metafeatures`).
    metric
        The study's metric; ``None`` means the task's default.
    transform_probe
        The numeric-map probe's result, when it has been run (see ``DataFacts.numeric_maps``
        for the maps it should score).

    Returns
    -------
    DataFacts
        The value the space builder reads.
    """
    numeric = [c.name for c in dataset.columns if c.role == "numeric"]
    shared = shares_one_scale(dataset.X[numeric]) if numeric else False
    return DataFacts(
        task=dataset.task, n_rows=dataset.n_rows, columns=tuple(dataset.columns),
        n_folds=fold_count(dataset.n_rows, dataset.task, dataset.y),
        metric=metric or DEFAULT_METRIC[dataset.task], majority_share=_majority_share(dataset),
        target_skew=_positive_target_skew(dataset), shared_scale=shared,
        numeric_maps=numeric_map_choices(meta.statistical.mean_abs_skewness, shared), meta=meta,
        transform_probe=transform_probe,
    )


def _majority_share(dataset: Dataset) -> float:
    """Share of the most frequent class; 0 for regression or no rows."""
    if dataset.task == "regression" or not len(dataset.y):
        return 0.0
    _, counts = np.unique(dataset.y, return_counts=True)
    return float(counts.max() / counts.sum())


def _positive_target_skew(dataset: Dataset) -> float | None:
    """The target's skewness when it is a regression target above zero everywhere, else ``None``."""
    if dataset.task != "regression" or not len(dataset.y):
        return None
    y = np.asarray(dataset.y, dtype=float)
    if not np.all(np.isfinite(y)) or y.min() <= 0:
        return None
    skew, _ = type3_moments(y)
    return skew


__all__ = ["DataFacts", "data_facts"]
