"""Baseline methods: library defaults, random search and plain TPE.

The searches follow one protocol: sample a config from the generic space, score it by
5-fold cross-validation inside the training part with the metric the run searches under (the
user's ``--metric``, else the task's default), keep the best, and when the budget is spent
refit the best config on the whole training part. The budget is checked before every fold;
a trial caught by the deadline mid-way is discarded, so a search overshoots by at most one
fold fit (recorded in the results). The one exception is the first trial, which is always
allowed to finish so that a search returns a model even when a single 5-fold evaluation takes
longer than the budget.
Optuna samplers run with their defaults: no priors, no pruning, no warm starts.
"""

from __future__ import annotations

import math
import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import optuna
import pandas as pd
from sklearn.exceptions import ConvergenceWarning
from sklearn.model_selection import KFold, StratifiedKFold
from sklearn.pipeline import Pipeline

from benchmarks._outcome import Outcome, Problem
from benchmarks._pipelines import build_pipeline, prepare_features, sample_generic_config
from benchmarks._scoring import HIGHER_IS_BETTER, PRIMARY_METRIC, Predictions, score_predictions

Clock = Callable[[], float]
N_FOLDS = 5


class _OutOfTime(Exception):
    """The budget ran out between two folds of a trial."""


@dataclass
class SearchResult:
    """Best config of a budgeted search and the path that led to it."""

    best_config: dict[str, Any] | None
    best_cv: float | None
    n_trials: int
    n_failed: int
    seconds: float
    incumbents: list[tuple[float, dict[str, Any]]] = field(default_factory=list)


def predict(model: Pipeline, features: pd.DataFrame, task: str) -> Predictions:
    """Predict with a fitted pipeline; classifiers also give one probability column per class."""
    values = model.predict(features)
    if task == "regression":
        return Predictions(values=np.asarray(values, dtype=float))
    classes = [str(c) for c in model.classes_]
    proba = pd.DataFrame(model.predict_proba(features), columns=classes)
    return Predictions(values=np.asarray(values).astype(str), proba=proba)


def fit(
    config: dict[str, Any], features: pd.DataFrame, y: pd.Series, task: str, seed: int
) -> Pipeline:
    """Fit one config on the given rows, with convergence warnings silenced."""
    model = build_pipeline(config, task, features, seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        model.fit(features, y)
    return model


def _split_xy(problem: Problem) -> tuple[pd.DataFrame, pd.Series]:
    features = prepare_features(problem.train.drop(columns=[problem.target]))
    y = problem.train[problem.target]
    if problem.task != "regression":
        y = y.astype(str)
    return features, y


def cross_validate(
    config: dict[str, Any],
    features: pd.DataFrame,
    y: pd.Series,
    task: str,
    seed: int,
    deadline: float,
    clock: Clock,
    metric: str | None = None,
) -> float:
    """Mean ``metric`` (default: the task's) of ``config`` over 5 seeded folds; raises if the deadline passes."""
    metric = metric or PRIMARY_METRIC[task]
    if task == "regression":
        folds = KFold(N_FOLDS, shuffle=True, random_state=seed).split(features)
    else:
        folds = StratifiedKFold(N_FOLDS, shuffle=True, random_state=seed).split(features, y)
    scores = []
    for fit_rows, val_rows in folds:
        if clock() >= deadline:
            raise _OutOfTime
        model = fit(config, features.iloc[fit_rows], y.iloc[fit_rows], task, seed)
        predictions = predict(model, features.iloc[val_rows], task)
        scores.append(score_predictions(task, y.iloc[val_rows], predictions)[metric])
    return float(np.mean(scores))


def budgeted_search(
    sampler: optuna.samplers.BaseSampler,
    features: pd.DataFrame,
    y: pd.Series,
    task: str,
    budget_seconds: float,
    seed: int,
    clock: Clock = time.monotonic,
    metric: str | None = None,
) -> SearchResult:
    """Ask/evaluate/tell over the generic space under ``metric`` (default: the task's) until the budget is spent."""
    metric = metric or PRIMARY_METRIC[task]
    direction = "maximize" if HIGHER_IS_BETTER[metric] else "minimize"
    study = optuna.create_study(direction=direction, sampler=sampler)
    start = clock()
    deadline = start + budget_seconds
    result = SearchResult(None, None, 0, 0, 0.0)
    while clock() < deadline or result.n_trials == 0:
        trial = study.ask()
        config = sample_generic_config(trial, task)
        # Until one trial has finished, the running trial may outlive the budget, so that
        # every search hands back a model; the overshoot is recorded, not hidden.
        trial_deadline = deadline if result.best_config is not None else math.inf
        try:
            value = cross_validate(config, features, y, task, seed, trial_deadline, clock, metric)
        except _OutOfTime:
            study.tell(trial, state=optuna.trial.TrialState.FAIL)
            break
        except Exception:  # a config that cannot be fitted is a failed trial, not a crash
            study.tell(trial, state=optuna.trial.TrialState.FAIL)
            result.n_failed += 1
            result.n_trials += 1
            continue
        study.tell(trial, value)
        result.n_trials += 1
        better = result.best_cv is None or (
            value > result.best_cv if direction == "maximize" else value < result.best_cv
        )
        if better:
            result.best_cv, result.best_config = value, config
            result.incumbents.append((clock() - start, config))
    result.seconds = clock() - start
    return result


def default_method(family: str) -> Callable[[Problem], Outcome]:
    """A method that fits one library-default model of ``family`` with plain preprocessing."""

    def run(problem: Problem) -> Outcome:
        features, y = _split_xy(problem)
        test = prepare_features(problem.test_features)
        start = time.monotonic()
        model = fit({"family": family}, features, y, problem.task, problem.seed)
        seconds = time.monotonic() - start
        predictions = predict(model, test, problem.task)
        curve = [(seconds, predictions)] if problem.want_curve else []
        return Outcome(predictions=predictions, search_seconds=seconds, curve=curve)

    return run


def search_method(
    make_sampler: Callable[[int], optuna.samplers.BaseSampler],
) -> Callable[[Problem], Outcome]:
    """A method that runs :func:`budgeted_search` with a sampler, then refits the best config."""

    def run(problem: Problem) -> Outcome:
        features, y = _split_xy(problem)
        test = prepare_features(problem.test_features)
        search = budgeted_search(
            make_sampler(problem.seed), features, y, problem.task,
            problem.budget_seconds, problem.seed, metric=problem.search_metric,
        )
        if search.best_config is None:
            raise RuntimeError(
                f"no trial finished within {problem.budget_text} "
                f"({search.n_trials} tried, {search.n_failed} failed)"
            )
        start = time.monotonic()
        model = fit(search.best_config, features, y, problem.task, problem.seed)
        refit = time.monotonic() - start
        curve = []
        if problem.want_curve:  # after the budget, not counted in it
            for seconds, config in search.incumbents:
                incumbent = fit(config, features, y, problem.task, problem.seed)
                curve.append((seconds, predict(incumbent, test, problem.task)))
        return Outcome(
            predictions=predict(model, test, problem.task),
            search_seconds=search.seconds,
            refit_seconds=refit,
            n_trials=search.n_trials,
            curve=curve,
            details={
                "metric": problem.search_metric,
                "best_cv": search.best_cv,
                "best_config": search.best_config,
                "failed_trials": search.n_failed,
            },
        )

    return run


def random_sampler(seed: int) -> optuna.samplers.BaseSampler:
    """Uniform random sampling of the generic space."""
    return optuna.samplers.RandomSampler(seed=seed)


def tpe_sampler(seed: int) -> optuna.samplers.BaseSampler:
    """Optuna's TPE with every setting at its default, seeded."""
    return optuna.samplers.TPESampler(seed=seed)


__all__ = [
    "SearchResult",
    "budgeted_search",
    "cross_validate",
    "default_method",
    "fit",
    "predict",
    "random_sampler",
    "search_method",
    "tpe_sampler",
]
