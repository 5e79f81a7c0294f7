"""The ensemble a study's kept predictions allow: planned from the store, refitted for export."""

from __future__ import annotations

import time
import warnings
from typing import Any

import numpy as np

from tunelab.data import Dataset
from tunelab.evaluation import make_folds, resolve_metric
from tunelab.insight import MAX_MEMBERS, EnsemblePlan, plan_ensemble
from tunelab.models import WeightedEnsemble, build_pipeline, capped_rows, row_cap
from tunelab.store import Store, StudyRecord


def ensemble_plan(st: Store, record: StudyRecord, dataset: Dataset, *, max_members: int) -> EnsemblePlan | None:
    """The ensemble selection would pick from the kept predictions, cross-fitted against the best trial."""
    predictions = st.predictions(record)
    if len(predictions) < 2:
        return None
    values = {t.number: t.score for t in st.trials(record) if t.state == "complete" and t.number in predictions}
    folds = make_folds(dataset.y, dataset.task, record.seed, record.settings.get("n_folds"))
    y_folds = [dataset.y[test] for _, test in folds]
    labels = [] if dataset.task == "regression" else sorted(np.unique(dataset.y))
    return plan_ensemble(predictions, values, y_folds, labels, resolve_metric(record.metric, record.task),
                         max_members=max_members)


def ensemble_words(st: Store, record: StudyRecord) -> str:
    """What an ensemble of the kept trials would add, or why it cannot be said (the data file moved)."""
    from pathlib import Path

    from tunelab.data import load_dataset
    from tunelab.errors import TunelabError

    try:
        dataset = load_dataset(Path(record.data_path), record.target, record.task)
        found = ensemble_plan(st, record, dataset, max_members=MAX_MEMBERS)
    except TunelabError as exc:
        return f"an ensemble's gain was not computed: {exc.message}"
    return "" if found is None else found.words(record.metric)


def fit_config(config: dict[str, Any], dataset: Dataset, seed: int) -> Any:
    """One trial's pipeline refitted on the rows its search scored it on (all, or its row cap)."""
    pipeline = build_pipeline(config, dataset.roles, dataset.cardinality, dataset.task,
                              seed=seed, n_threads=1)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rows = capped_rows(np.arange(dataset.n_rows), dataset.y, dataset.task, row_cap(config), seed)
        pipeline.fit(dataset.X.iloc[rows], dataset.y[rows])
    return pipeline


def predict_ms(model: Any, dataset: Dataset) -> float:
    """Milliseconds the model takes to predict 1,000 rows (the training rows, repeated if fewer)."""
    rows = np.resize(np.arange(dataset.n_rows), 1000)
    sample = dataset.X.iloc[rows]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        started = time.perf_counter()
        (model.predict_proba if hasattr(model, "classes_") else model.predict)(sample)
    return 1000.0 * (time.perf_counter() - started)


def within_predict_limit(members: list[Any], weights: list[float], dataset: Dataset,
                         limit_ms: float | None) -> tuple[WeightedEnsemble, float, list[int]]:
    """The ensemble, its prediction time per 1,000 rows, and the members dropped to fit ``limit_ms``
    (the lightest first, the weights renormalised)."""
    kept = list(range(len(members)))
    while True:
        model = WeightedEnsemble.of_fitted([members[i] for i in kept], [weights[i] for i in kept])
        ms = predict_ms(model, dataset)
        if limit_ms is None or ms <= limit_ms or len(kept) == 1:
            return model, ms, [i for i in range(len(members)) if i not in kept]
        kept.remove(min(kept, key=lambda i: weights[i]))


__all__ = ["ensemble_plan", "ensemble_words", "fit_config", "predict_ms", "within_predict_limit"]
