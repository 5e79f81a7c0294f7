"""The ``export`` and ``predict`` verbs: refit the best pipeline, write it, use it."""

from __future__ import annotations

import platform
import warnings
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from tunelab import __version__
from tunelab.data import clean_column, load_dataset, read_table
from tunelab.engine import Clock, SystemClock
from tunelab.errors import InputError, StudyStateError
from tunelab.files import write_atomically
from tunelab.insight import RULES, choose
from tunelab.models import (
    build_pipeline,
    capped_rows,
    check_columns,
    load_pipeline,
    read_meta,
    row_cap,
    write_model_file,
)
from tunelab.ops._trials import Phases
from tunelab.store import Store
from tunelab.values import plain


@dataclass
class ExportResult:
    study: str
    path: str
    sha256: str
    trial: int
    metric: str
    score: float
    family: str
    chosen_by: str = "best"  # "best", "one-se", or "trial" when named

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass
class PredictResult:
    path: str
    rows: int
    columns: list[str]
    extra_columns: list[str]

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def export_model(name: str, out: Path, *, store: str | None = None, trial: int | None = None,
                 choose_by: str = "best", clock: Clock | None = None) -> ExportResult:
    """Refit the best (or a chosen) trial's pipeline on all rows and write a model file.

    ``choose_by`` is the rule that picks the trial when ``trial`` is not given: ``best`` (the best
    cross-validated score) or ``one-se`` (the cheapest within one standard error of it).
    """
    clock = clock or SystemClock()
    if out.exists() and out.is_dir():
        raise InputError(f"--out {out} is a folder", "pass a file path such as model.zip")
    if not out.parent.exists():
        raise InputError(f"folder {out.parent} does not exist", "create it, or choose another --out")
    with Store.open(store) as st:
        record = st.get_study(name)
        trials = st.trials(record)
        if choose_by not in RULES:
            raise InputError(f"unknown rule '{choose_by}' for choosing the trial", f"use one of: {', '.join(RULES)}")
        picked = choose(trials, record.direction, choose_by)
        chosen = picked.chosen if picked is not None else None
        if chosen is None:
            raise StudyStateError(f"study '{name}' has no finished trial to export",
                                  f"give it more budget: tunelab resume {name} --extend 10m")
        if trial is not None:
            matches = [t for t in trials if t.number == trial and t.state == "complete"]
            if not matches:
                raise InputError(f"trial {trial} of study '{name}' is not a finished trial",
                                 f"see the finished trials with `tunelab status {name}`")
            chosen = matches[0]
        dataset = load_dataset(Path(record.data_path), record.target, record.task)
        config = Phases.of(st, record).config(chosen)
        pipeline = build_pipeline(config, dataset.roles, {c.name: c.n_unique for c in dataset.columns},
                                  dataset.task, seed=record.seed, n_threads=1)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            rows = capped_rows(np.arange(dataset.n_rows), dataset.y, dataset.task, row_cap(config), record.seed)
            pipeline.fit(dataset.X.iloc[rows], dataset.y[rows])  # the size the search measured
        meta = {
            "study": record.name, "trial": chosen.number, "metric": record.metric, "direction": record.direction,
            "cv_score": chosen.value, "fold_scores": list(chosen.fold_scores) or None,
            "task": record.task, "target": record.target, "classes": [plain(c) for c in dataset.classes],
            "columns": list(dataset.X.columns), "dtypes": {c: str(t) for c, t in dataset.X.dtypes.items()},
            "roles": dataset.roles, "config": config, "data_sha256": record.data_sha256,
            "versions": _versions(),
        }
        sha = write_model_file(out, pipeline, meta)
        st.record_export(record.id, now=clock.now(), path=str(out.resolve()), sha256=sha, trial_number=chosen.number)
    return ExportResult(record.name, str(out), sha, chosen.number, record.metric, chosen.score,
                        str(config.get("family", "")), "trial" if trial is not None else choose_by)


def predict_file(model: Path, data: Path, out: Path) -> PredictResult:
    """Check the model file and the input columns, then write predictions (and class probabilities)."""
    meta = read_meta(model)
    frame = read_table(data)
    check_columns(meta, frame)
    extra = [str(c) for c in frame.columns if c not in meta["columns"]]
    pipeline = load_pipeline(model, meta)
    features = _features_like_training(frame, meta)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = pd.DataFrame({"prediction": pipeline.predict(features)})
        if meta["task"] != "regression":
            proba = pipeline.predict_proba(features)
            for i, cls in enumerate(pipeline.classes_):
                result[f"proba_{cls}"] = proba[:, i]
    if not out.parent.exists():
        raise InputError(f"folder {out.parent} does not exist", "create it, or choose another --out")
    write_atomically(out, lambda tmp: result.to_csv(tmp, index=False), "predictions file")
    return PredictResult(str(out), len(result), list(result.columns), extra)


def _features_like_training(frame: pd.DataFrame, meta: dict[str, Any]) -> pd.DataFrame:
    """Clean new rows the same way training rows were cleaned (roles fixed from the model file)."""
    return pd.DataFrame({c: clean_column(frame[c], meta["roles"][c]) for c in meta["columns"]})


def _versions() -> dict[str, str]:
    from importlib.metadata import version

    return {"tunelab": __version__, "python": platform.python_version(), "scikit-learn": version("scikit-learn"),
            "optuna": version("optuna"), "pandas": pd.__version__, "numpy": np.__version__}
