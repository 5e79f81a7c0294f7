"""Which numeric map (plain scaling, signed log, quantile) suits the scaled models on this data.

Skewness alone misleads: pixel intensities are zero-inflated and "highly skewed", yet a quantile
map squeezes their scale away: on scikit-learn's digits it raises the linear model's log loss from
0.12 to 0.30 and k-nearest neighbours' from 0.21 to 0.37, while on hpc's long tails the log map
beats both others for the linear model and the SVM.  So the data is asked: the linear family's
own pipeline, fitted with each map on a capped row sample and scored on held-out folds with the
study's metric, orders the maps, and the space builder makes that order the prior (first map =
warm start).  Which maps are tried at all follows the skewness rule (:func:`numeric_map_choices`).
The linear model stands in for every scaled family because it is the cheapest one.  Checked side
by side (``benchmarks/numeric_maps.py``, six benchmark datasets): its pick was within 1 % of the RBF
SVM's best map on all six, but not of k-nearest neighbours' on three (digits, hpc, ames).
"""

from __future__ import annotations

import math
import time
import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from tunelab.data import HIGH_SKEWNESS, Dataset
from tunelab.evaluation import make_folds, resolve_metric, score
from tunelab.models import build_pipeline
from tunelab.probes._threads import one_thread

PROBE_ROWS = 1000  # rows of the sample: a few seconds at most for three maps × three folds
PROBE_FOLDS = 3
PROBE_CAP_S = 4.0  # the whole probe stops here; maps not reached are left unranked


def numeric_map_choices(mean_abs_skewness: float | None, shared_scale: bool = False) -> tuple[str, ...]:
    """The numeric maps scaled models search, in the order the rules prefer them.

    Columns of one shared scale put the pooled map (one divisor for all) first; skewed columns
    add the log map.
    """
    pooled = ("pooled",) if shared_scale else ()
    if mean_abs_skewness is not None and mean_abs_skewness > HIGH_SKEWNESS:
        return (*pooled, "log", "standard", "quantile")
    return (*pooled, "standard", "quantile")


@dataclass(frozen=True)
class TransformProbe:
    """Held-out score of the linear pipeline under each numeric map."""

    scores: dict[str, float]
    metric: str
    greater_is_better: bool
    rows: int
    folds: int
    seconds: float

    def ranked(self, choices: Sequence[str]) -> tuple[str, ...]:
        """``choices`` best first; maps the probe did not score keep their order, after the scored."""
        scored = [c for c in choices if c in self.scores]
        scored.sort(key=lambda c: self.scores[c], reverse=self.greater_is_better)
        return tuple(scored) + tuple(c for c in choices if c not in self.scores)

    def describe(self) -> str:
        figures = ", ".join(f"{name} {value:.4g}" for name, value in sorted(
            self.scores.items(), key=lambda kv: kv[1], reverse=self.greater_is_better))
        return f"linear probe on {self.rows} rows, {self.folds} folds ({self.metric}): {figures}"


def probe_transforms(dataset: Dataset, metric: str | None, choices: Sequence[str], *, seed: int = 0,
                     max_rows: int = PROBE_ROWS, time_cap_s: float = PROBE_CAP_S,
                     clock: Callable[[], float] = time.perf_counter) -> TransformProbe | None:
    """Score the linear pipeline under each map in ``choices``; ``None`` when fewer than two scored.

    Nothing here may stop a profile: a map whose fit fails or whose folds give no finite score is
    left out, and the probe stops at ``time_cap_s`` (checked before each fit).
    """
    roles = dataset.roles
    if not any(role == "numeric" for role in roles.values()) or dataset.n_rows < 4 * PROBE_FOLDS:
        return None
    resolved = resolve_metric(metric, dataset.task)
    rng = np.random.default_rng(seed)
    rows = np.sort(rng.choice(dataset.n_rows, min(max_rows, dataset.n_rows), replace=False))
    X, y = dataset.X.iloc[rows], dataset.y[rows]
    try:
        folds = make_folds(y, dataset.task, seed, PROBE_FOLDS)
    except ValueError:  # a class too small to split: no probe, the rule decides
        return None
    cardinality = dataset.cardinality
    started = clock()
    with one_thread():  # a thousand rows under load: 10 s with many threads, 2.5 s with one (digits)
        scores = _scores(X, y, folds, choices, roles, cardinality, dataset.task, resolved, seed,
                         lambda: clock() - started > time_cap_s)
    if len(scores) < 2:
        return None
    return TransformProbe(scores, resolved.name, resolved.direction == "maximize", len(rows), len(folds),
                          clock() - started)


def _scores(X: Any, y: np.ndarray, folds: Sequence[tuple[np.ndarray, np.ndarray]], choices: Sequence[str],
            roles: Mapping[str, str], cardinality: Mapping[str, int], task: str, metric: Any, seed: int,
            out_of_time: Callable[[], bool]) -> dict[str, float]:
    scores: dict[str, float] = {}
    for choice in choices:
        fold_scores: list[float] = []
        for train, test in folds:
            if out_of_time():
                break
            pipeline = build_pipeline({"family": "linear", "linear.num_transform": choice}, roles, cardinality,
                                      task, seed=seed)
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")  # convergence, constant columns in a small sample
                    pipeline.fit(X.iloc[train], y[train])
                    fold_scores.append(score(metric, y[test], pipeline, X.iloc[test]))
            except Exception:  # a degenerate sample must not stop the profile
                fold_scores = []
                break
        if len(fold_scores) == len(folds) and all(math.isfinite(s) for s in fold_scores):
            scores[choice] = float(np.mean(fold_scores))
    return scores


__all__ = ["PROBE_CAP_S", "PROBE_FOLDS", "PROBE_ROWS", "TransformProbe", "numeric_map_choices", "probe_transforms"]
