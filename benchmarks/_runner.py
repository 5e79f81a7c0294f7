"""Run methods on datasets one at a time and turn what they return into raw result records.

Each dataset is split once (``datasets.write_split``) and read back from the CSV files, so
every method, in-process or not, sees the same bytes. Methods run strictly one after the
other on the same machine. A searching method runs once per metric of the task, told the
metric as a user's ``--metric``; a method that fits once whatever the metric (a library
default) runs once and its predictions are scored under every metric. A method that raises
is recorded with its error and no score; the suite goes on with the next one.
"""

from __future__ import annotations

import sys
import tempfile
import time
import traceback
from collections.abc import Callable, Collection, Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any, TextIO

import pandas as pd
from threadpoolctl import threadpool_limits

from benchmarks import datasets
from benchmarks._outcome import Outcome, Problem
from benchmarks._scoring import HIGHER_IS_BETTER, METRICS, score_predictions

Method = Callable[[Problem], Outcome]


def _head(problem: Problem, method: str, metric: str, wall: float) -> dict[str, Any]:
    """What every record says, scored or not: which run, under which metric."""
    return {
        "dataset": problem.name,
        "method": method,
        "seed": problem.seed,
        "task": problem.task,
        "metric": metric,
        "searched_metric": problem.metric,
        "higher_is_better": HIGHER_IS_BETTER[metric],
        "budget_seconds": problem.budget_seconds,
        "wall_seconds": round(wall, 3),
    }


def _record(problem: Problem, method: str, metric: str, outcome: Outcome, test_y: pd.Series,
            wall: float) -> dict[str, Any]:
    scores = score_predictions(problem.task, test_y, outcome.predictions)
    curve = [
        (round(seconds, 3), score_predictions(problem.task, test_y, predictions)[metric])
        for seconds, predictions in outcome.curve
    ]
    return {
        **_head(problem, method, metric, wall),
        "score": scores[metric],
        "scores": scores,
        "search_seconds": round(outcome.search_seconds, 3),
        "over_budget_seconds": round(max(0.0, outcome.search_seconds - problem.budget_seconds), 3),
        "refit_seconds": round(outcome.refit_seconds, 3),
        "n_trials": outcome.n_trials,
        "curve": curve,
        "details": outcome.details,
        "error": None,
    }


def _failure(problem: Problem, method: str, metric: str, exc: BaseException, wall: float) -> dict[str, Any]:
    return {
        **_head(problem, method, metric, wall),
        "score": None,
        "curve": [],
        "error": "".join(traceback.format_exception_only(type(exc), exc)).strip(),
        "details": {"commands": getattr(exc, "log", [])},
    }


def run_suite(
    dataset_names: Iterable[str],
    methods: dict[str, Method],
    budget_seconds: float,
    budget_text: str,
    seed: int,
    threads: int = 1,
    want_curve: bool = False,
    progress: TextIO = sys.stderr,
    searches: Collection[str] = (),
    metrics: Mapping[str, Sequence[str]] = METRICS,
) -> list[dict[str, Any]]:
    """Run every method on every dataset, one at a time; return one record per dataset, method and metric.

    Parameters
    ----------
    searches
        Methods that search under a metric: each runs once per metric of the task, with the
        metric in its ``Problem``. Every other method runs once per dataset and is scored
        under each metric.
    metrics
        The metrics of each task (``METRICS``), in the order the runs go.
    """
    records: list[dict[str, Any]] = []
    for name in dataset_names:
        spec = datasets.get(name)
        task_metrics = list(metrics[spec.task])
        with tempfile.TemporaryDirectory(prefix=f"bench-{name}-") as tmp:
            root = Path(tmp)
            train_csv, test_csv = datasets.write_split(name, root, seed=seed)
            train, test = pd.read_csv(train_csv), pd.read_csv(test_csv)
            test_features = test.drop(columns=[spec.target])
            test_features_csv = root / "test_features.csv"
            test_features.to_csv(test_features_csv, index=False)
            test_y = test[spec.target]
            for method, run in methods.items():
                # A search runs under each metric; a default runs once, scored under all of them.
                runs: list[str | None] = list(task_metrics) if method in searches else [None]
                for searched in runs:
                    workdir = root / (f"{method}-{searched}" if searched else method)
                    workdir.mkdir()
                    problem = Problem(
                        name=name, task=spec.task, target=spec.target, train=train,
                        test_features=test_features, train_csv=train_csv,
                        test_features_csv=test_features_csv, budget_seconds=budget_seconds,
                        budget_text=budget_text, seed=seed, workdir=workdir, metric=searched,
                        threads=threads, want_curve=want_curve,
                    )
                    scored = [searched] if searched else task_metrics
                    start = time.monotonic()
                    try:
                        with threadpool_limits(limits=threads):
                            outcome = run(problem)
                        wall = time.monotonic() - start
                        new = [_record(problem, method, m, outcome, test_y, wall) for m in scored]
                    except Exception as exc:  # one failing method must not stop the suite
                        wall = time.monotonic() - start
                        new = [_failure(problem, method, m, exc, wall) for m in scored]
                    records.extend(new)
                    for record in new:
                        print(_progress_line(record), file=progress, flush=True)
    return records


def _progress_line(record: dict[str, Any]) -> str:
    head = f"{record['dataset']:<14} seed {record['seed']:<3} {record['method']:<15}"
    if record["error"]:
        return f"{head} {record['metric']:<9} FAILED: {record['error'].splitlines()[0]}"
    trials = f"  {record['n_trials']} trials" if record.get("n_trials") is not None else ""
    return (
        f"{head} {record['metric']}={record['score']:.4g}  search {record['search_seconds']:.1f}s"
        f"  refit {record['refit_seconds']:.1f}s{trials}"
    )


__all__ = ["Method", "run_suite"]
