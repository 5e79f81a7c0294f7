"""The ``export`` and ``predict`` verbs: refit the best pipeline, write it, use it."""

from __future__ import annotations

import platform
import time
import warnings
from collections.abc import Callable
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from tunelab import __version__
from tunelab.data import clean_column, load_dataset, read_table
from tunelab.engine import Clock, SystemClock
from tunelab.errors import InputError, StudyStateError
from tunelab.files import write_atomically
from tunelab.insight import MAX_MEMBERS, RULES, EnsemblePlan, choose
from tunelab.models import (
    check_columns,
    load_pipeline,
    read_meta,
    row_cap,
    write_model_file,
)
from tunelab.ops._ensemble import ensemble_plan, fit_config, predict_ms, within_predict_limit
from tunelab.ops._trials import Phases
from tunelab.store import Store, TrialRecord, keys
from tunelab.values import plain

# A refit expected to take longer than this is announced, with a progress line (see ``Refit``).
ANNOUNCE_REFIT_SECONDS = 5.0


@dataclass(frozen=True)
class Refit:
    """What export is about to fit: the trials, on how many rows, and how long it should take."""

    trials: tuple[int, ...]
    rows: int
    rows_words: str  # "all 400,000 rows", or the trial's row cap
    expected_seconds: float  # from the trials' own fold fits, scaled to the refit's rows

    @property
    def worth_announcing(self) -> bool:
        return self.expected_seconds > ANNOUNCE_REFIT_SECONDS


@dataclass
class ExportResult:
    study: str
    path: str
    sha256: str
    trial: int
    metric: str
    score: float
    family: str
    chosen_by: str = "best"  # "best", "one-se", "trial" when named, or "ensemble"
    members: list[dict[str, Any]] = field(default_factory=list)  # an ensemble's trials and weights
    plan: dict[str, Any] | None = None  # what ensemble selection found, cross-fitted, shipped or not
    refit_seconds: float = 0.0
    predict_ms_per_1000: float = 0.0
    rows: int = 0  # the rows the shipped model was refitted on
    rows_words: str = ""  # "all 400,000 rows", or the trial's row cap

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
                 choose_by: str = "best", ensemble: bool | None = None, max_members: int = MAX_MEMBERS,
                 max_predict_ms: float | None = None, clock: Clock | None = None,
                 on_refit: Callable[[Refit], None] | None = None) -> ExportResult:
    """Refit the best (or a chosen) trial's pipeline, or an ensemble of trials, and write a model file.

    ``choose_by`` is the rule that picks the trial when ``trial`` is not given: ``best`` (the best
    cross-validated score) or ``one-se`` (the cheapest within one standard error of it).
    ``ensemble``: ``None`` ships the ensemble selection picks from the kept predictions when it
    beats the best single trial by more than its fold noise (cross-fitted), else the single trial;
    ``True`` ships the ensemble anyway, ``False`` never.  ``max_members`` caps its distinct trials,
    ``max_predict_ms`` its prediction time per 1,000 rows (the lightest members are dropped).
    ``on_refit`` hears what is about to be fitted and how long it should take, before the fit.

    A trial is refitted on the rows it was scored on: all of them (a trial that reached every row
    of its folds), or the stratified sample of its row cap.
    """
    clock = clock or SystemClock()
    if out.exists() and out.is_dir():
        raise InputError(f"--out {out} is a folder", "pass a file path such as model.zip")
    if not out.parent.exists():
        raise InputError(f"folder {out.parent} does not exist", "create it, or choose another --out")
    if choose_by not in RULES:
        raise InputError(f"unknown rule '{choose_by}' for choosing the trial", f"use one of: {', '.join(RULES)}")
    if max_members < 1:
        raise InputError(f"--max-members must be at least 1, got {max_members}", "e.g. --max-members 5")
    with Store.open(store) as st:
        record = st.get_study(name)
        trials = st.trials(record)
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
        phases = Phases.of(st, record)
        plan = None if trial is not None or ensemble is False else ensemble_plan(st, record, dataset,
                                                                                max_members=max_members)
        if ensemble and plan is None:
            raise StudyStateError(f"study '{name}' keeps too few trials' predictions for an ensemble",
                                  "it needs two complete trials with kept predictions; export --single")
        started = time.perf_counter()
        by_number = {t.number: t for t in trials}
        if plan is not None and (ensemble or plan.worth_it):
            configs = [phases.config(by_number[n]) for n, _ in plan.members]
            refit = _refit([by_number[n] for n, _ in plan.members], configs, dataset.n_rows)
            if on_refit is not None:
                on_refit(refit)
            fitted = [fit_config(config, dataset, record.seed) for config in configs]
            model, ms, dropped = within_predict_limit(fitted, [w for _, w in plan.members], dataset, max_predict_ms)
            members = [(n, float(w), configs[i]) for i, ((n, _), w) in
                       enumerate(zip(plan.members, _renormalised(plan, dropped))) if i not in dropped]
            config = members[0][2]
            ensemble_meta: dict[str, Any] | None = {
                **plan.to_dict(), "members": [{"trial": n, "weight": w, "config": c} for n, w, c in members],
                "dropped_for_speed": [plan.members[i][0] for i in dropped], "predict_ms_per_1000": ms}
        else:
            config = phases.config(chosen)
            refit = _refit([chosen], [config], dataset.n_rows)
            if on_refit is not None:
                on_refit(refit)
            model = fit_config(config, dataset, record.seed)  # the size the search measured
            ms, ensemble_meta, members = predict_ms(model, dataset), None, []
        seconds = time.perf_counter() - started
        meta = {
            "study": record.name, "trial": chosen.number if not members else members[0][0], "metric": record.metric,
            "direction": record.direction, "cv_score": chosen.value, "fold_scores": list(chosen.fold_scores) or None,
            "task": record.task, "target": record.target, "classes": [plain(c) for c in dataset.classes],
            "columns": list(dataset.X.columns), "dtypes": {c: str(t) for c, t in dataset.X.dtypes.items()},
            "roles": dataset.roles, "config": config, "data_sha256": record.data_sha256,
            "versions": _versions(), **({"ensemble": ensemble_meta} if ensemble_meta else {}),
        }
        sha = write_model_file(out, model, meta)
        shipped = members[0][0] if members else chosen.number
        st.record_export(record.id, now=clock.now(), path=str(out.resolve()), sha256=sha, trial_number=shipped)
    how = "ensemble" if members else ("trial" if trial is not None else choose_by)
    return ExportResult(record.name, str(out), sha, shipped, record.metric, chosen.score,
                        str(config.get("family", "")), how, [{"trial": n, "weight": w} for n, w, _ in members],
                        None if plan is None else plan.to_dict(), seconds, ms, refit.rows, refit.rows_words)


def _refit(trials: list[TrialRecord], configs: list[dict[str, Any]], n_rows: int) -> Refit:
    """The refit's rows and expected seconds: each trial's fold fits, scaled from a fold's rows to the refit's."""
    caps = [row_cap(config) for config in configs]
    rows = max(min(cap, n_rows) if cap else n_rows for cap in caps)
    expected = 0.0
    for trial, cap in zip(trials, caps, strict=True):
        folds = max(2, len(trial.fold_scores))
        fit = float(trial.attrs.get(keys.FIT_SECONDS) or trial.duration or 0.0)
        per_fold = fit / folds
        expected += per_fold if cap else per_fold * folds / (folds - 1)  # a fold trains on (k-1)/k of the rows
    capped = len(caps) == 1 and caps[0] and caps[0] < n_rows
    words = (f"a stratified sample of {rows:,} rows (the trial's row cap; it was scored on that many)" if capped
             else f"all {n_rows:,} rows")
    return Refit(tuple(t.number for t in trials), rows, words, expected)


def _renormalised(plan: EnsemblePlan, dropped: list[int]) -> list[float]:
    kept = [w for i, (_, w) in enumerate(plan.members) if i not in dropped]
    total = sum(kept) or 1.0
    out, k = [], 0
    for i in range(len(plan.members)):
        if i in dropped:
            out.append(0.0)
        else:
            out.append(kept[k] / total)
            k += 1
    return out


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
