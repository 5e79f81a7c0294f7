"""The ``profile`` verb: what tunelab sees in a data file and the search space it would build.

``profile`` answers "what will ``run`` do with my data, and why?" before any trial is spent: each
column's role, the meta-features, and the built space with a reason for every decision.  It is
also the one place that decides how much meta-feature work a dataset gets and that measures a
dataset's facts (``profile_facts``, which ``run`` calls too), so the two verbs never disagree
about the space.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from tunelab.data import Dataset, load_dataset
from tunelab.errors import InputError
from tunelab.evaluation import resolve_metric
from tunelab.facts import DataFacts, MetaFeatures, compute_metafeatures, data_facts
from tunelab.models import ONE_HOT_MAX_CARDINALITY
from tunelab.ops._jobs import parse_jobs, resolve_jobs
from tunelab.ops._portfolio import portfolio_starts
from tunelab.probes import probe_transforms
from tunelab.space import REFERENCE_BUDGET_S, SpaceSpec, build_space
from tunelab.values import plain

# Meta-feature effort: landmarkers on at most this many rows, each stopped after this many seconds,
# so 50,000 rows x 50 columns profile in a few seconds (statistics already cap their own rows).
_LANDMARK_ROWS = 5000
_LANDMARK_ROWS_LARGE = 2000  # above _LARGE_CELLS cells
_LARGE_CELLS = 1_000_000
_LANDMARK_CAP_S = 1.5


@dataclass(frozen=True)
class ColumnProfile:
    """One column as tunelab reads it.

    Attributes
    ----------
    name, role, reason
        The column, its inferred role (``numeric``, ``categorical``, ``text``, ``datetime``,
        ``id``) and why.
    n_unique
        Distinct non-missing values (the cardinality).
    missing_share
        Share of missing cells.
    mean_tokens
        Mean words per value, for text columns; ``None`` otherwise.
    treatment
        What preprocessing does with it, in a few words.
    """

    name: str
    role: str
    reason: str
    n_unique: int
    missing_share: float
    mean_tokens: float | None
    treatment: str

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "role": self.role, "reason": self.reason, "n_unique": self.n_unique,
                "missing_share": self.missing_share, "mean_tokens": self.mean_tokens, "treatment": self.treatment}


@dataclass(frozen=True)
class ProfileReport:
    """Schema, meta-features and the built search space of one data file.

    Attributes
    ----------
    path, target, task
        The file, its target column and the (given or inferred) task.
    n_rows
        Rows kept (rows with a missing target are dropped).
    columns
        Every feature column, identifiers included (they are dropped from the search).
    classes
        Class labels for classification, empty for regression.
    meta
        The meta-features the space was built from.
    space
        The search space ``run`` would use with the same budget.
    budget_seconds
        The budget the space was planned for, ``None`` when none was given.
    notes
        What the loader changed (dropped rows or identifier columns).
    seconds
        Wall-clock seconds the profile took.
    """

    path: str
    target: str
    task: str
    n_rows: int
    columns: tuple[ColumnProfile, ...]
    classes: tuple[Any, ...]
    meta: MetaFeatures
    space: SpaceSpec
    budget_seconds: float | None
    notes: tuple[str, ...]
    seconds: float
    workers: int = 1
    expected_trials: float | None = None
    portfolio: tuple[tuple[str, dict[str, Any]], ...] = ()  # the portfolio configurations run would try first

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready values, for ``profile --json``."""
        return {
            "path": self.path, "target": self.target, "task": self.task, "rows": self.n_rows,
            "columns": [c.to_dict() for c in self.columns],
            "classes": [plain(c) for c in self.classes],
            "meta_features": self.meta.to_dict(),
            "space": self.space.to_dict(),
            "budget_seconds": self.budget_seconds,
            "workers": self.workers,
            "expected_trials": self.expected_trials,
            "portfolio": [{"member": name, "config": config} for name, config in self.portfolio],
            "notes": list(self.notes),
            "seconds": self.seconds,
        }


def profile_metafeatures(dataset: Dataset, *, seed: int = 0) -> MetaFeatures:
    """Meta-features with effort bounded for the dataset's size (a few seconds at 50,000 x 50).

    Parameters
    ----------
    dataset
        The loaded data.
    seed
        Seeds every subsample and fold split.
    """
    cells = dataset.n_rows * max(1, dataset.X.shape[1])
    rows = _LANDMARK_ROWS_LARGE if cells > _LARGE_CELLS else _LANDMARK_ROWS
    return compute_metafeatures(dataset.X, dataset.y, dataset.task, dataset.roles, seed=seed,
                                max_rows=rows, time_cap_s=_LANDMARK_CAP_S)


def profile_facts(dataset: Dataset, *, metric: str | None = None, seed: int = 0) -> DataFacts:
    """Measure a dataset's facts once: meta-features, the numeric-map probe, folds and metric.

    The space builder reads only this value, so ``run`` and ``profile`` build the same space from
    the same measurements.

    Parameters
    ----------
    dataset
        The loaded data.
    metric
        The study's metric, or ``None`` for the task's default; the numeric-map probe scores with it.
    seed
        Seeds the meta-feature subsamples and the probe's folds.
    """
    facts = data_facts(dataset, profile_metafeatures(dataset, seed=seed), metric=metric)
    probe = probe_transforms(dataset, facts.metric, facts.numeric_maps, seed=seed)
    return replace(facts, transform_probe=probe)


def built_space(dataset: Dataset, *, budget_seconds: float | None, metric: str | None = None,
                seed: int = 0) -> SpaceSpec:
    """The data-driven search space ``run`` uses when no ``--space`` file is given.

    Parameters
    ----------
    dataset
        The loaded data.
    budget_seconds
        The study's wall-clock budget, or ``None``.
    metric
        The study's metric, or ``None`` for the task's default.
    seed
        Seeds the meta-feature subsamples.
    """
    return build_space(profile_facts(dataset, metric=metric, seed=seed), budget_seconds=budget_seconds)


def profile_data(path: str | Path, target: str, task: str | None = None, *,
                 budget_seconds: float | None = None, metric: str | None = None, seed: int = 0,
                 jobs: str | int | None = None, portfolio: bool = True,
                 portfolio_file: Path | None = None, rows_fidelity: str = "auto") -> ProfileReport:
    """Load a data file, describe it, and build the search space ``run`` would use.

    Parameters
    ----------
    path
        CSV or Parquet file.
    target
        Target column.
    task
        ``binary``, ``multiclass`` or ``regression``; inferred from the target when ``None``.
    budget_seconds
        Plan the space for this wall-clock budget; ``None`` plans for a reference budget.
    metric
        Plan for this metric (as ``run --metric``); ``None`` means the task's default.
    seed
        Seeds the meta-feature subsamples.
    rows_fidelity
        ``auto`` or ``off``, as ``run --rows-fidelity``: whether the space may plan a row ladder.

    Returns
    -------
    ProfileReport
        Schema, meta-features and space; ``to_dict()`` gives the JSON form.

    Raises
    ------
    InputError
        The same errors as ``run``: unreadable file, unknown target, unusable target, bad task.
    """
    started = time.perf_counter()
    dataset = load_dataset(Path(path), target, task)
    if metric is not None:
        metric = resolve_metric(metric, dataset.task).name  # the same refusal as run's
    if rows_fidelity not in ("auto", "off"):
        raise InputError(f"unknown --rows-fidelity '{rows_fidelity}'", "use one of: auto, off")
    workers = resolve_jobs(parse_jobs(jobs), process_bytes=_resident_bytes()).count
    facts = profile_facts(dataset, metric=metric, seed=seed)
    space = build_space(facts, budget_seconds=budget_seconds, workers=workers, rows_fidelity=rows_fidelity)
    meta = facts.meta
    tokens = meta.simple.mean_text_tokens
    columns = tuple(ColumnProfile(c.name, c.role, c.reason, c.n_unique, c.missing_share,
                                  tokens.get(c.name) if c.role == "text" else None, _treatment(c.role, c.n_unique,
                                                                                              c.missing_share))
                    for c in dataset.columns)
    expected = None
    if space.trial_seconds and (budget_seconds or REFERENCE_BUDGET_S):
        expected = round(workers * (budget_seconds or REFERENCE_BUDGET_S) / space.trial_seconds, 1)
    room = None if expected is None else max(2, int(expected // 3))
    starts = portfolio_starts(space, dataset, use=portfolio, path=portfolio_file, limit=room)
    return ProfileReport(str(path), target, dataset.task, dataset.n_rows, columns, tuple(dataset.classes), meta,
                         space, budget_seconds, tuple(dataset.notes), time.perf_counter() - started, workers,
                         expected, tuple(starts.configs))


def _resident_bytes() -> int:
    import psutil

    return int(psutil.Process().memory_info().rss)


def _treatment(role: str, n_unique: int, missing_share: float) -> str:
    if role == "id":
        return "dropped (identifier)"
    if role == "numeric":
        return "median fill + missing indicator, scaled" if missing_share > 0 else "scaled for non-tree models"
    if role == "categorical":
        scaled = "one-hot" if n_unique <= ONE_HOT_MAX_CARDINALITY else "target encoding"
        return f"{scaled}; ordinal codes for trees"
    if role == "text":
        return "TF-IDF; SVD components for non-linear models"
    return "year, month, weekday, hour, day count"


__all__ = ["ColumnProfile", "ProfileReport", "built_space", "profile_data", "profile_facts", "profile_metafeatures"]
