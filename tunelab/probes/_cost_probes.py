"""Cost probes: measured seconds per fit of every model family on a small sample, extrapolated to all rows.

tunelab's own addition to the meta-feature groups of Rivolli et al. (2022): the space builder
splits the budget between the families with these figures before the first trial runs.  Each
probe is bounded: one fit plus one prediction pass on ``probe_rows`` rows, repeated only when
it is too short to time.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from tunelab.models import FAMILY_NAMES
from tunelab.probes._scaling import SCALING_RULES, scaled_cost

if TYPE_CHECKING:  # pragma: no cover - imported lazily at run time to keep start-up fast
    from sklearn.base import BaseEstimator

COST_FAMILIES: tuple[str, ...] = FAMILY_NAMES  # every family the registry builds is timed, in its order

_REPEAT_BELOW_S = 0.05  # a probe faster than this is repeated and the fastest run kept
_PROBE_REPEATS = 3


@dataclass(frozen=True)
class CostProbe:
    """Measured and extrapolated cost of one fit of a model family.

    Attributes
    ----------
    family
        One of :data:`COST_FAMILIES`.
    model
        The estimator and settings that were timed.
    probe_rows
        Rows of the probe sample.
    probe_seconds
        CPU seconds (this thread's) of one fit plus one prediction pass of ``model`` on the probe
        sample, on one thread (the fastest of up to three runs when a run is shorter than
        50 ms; ensembles and the MLP are timed at a fifth of the work and multiplied by 5).
    estimated_seconds
        ``probe_seconds`` scaled to all rows by ``scaling``; ``None`` when the probe failed.
    scaling
        Growth of the cost with the rows ``n`` (see :data:`SCALING_RULES`).
    note
        Why the probe failed, or an empty string.
    """

    family: str
    model: str
    probe_rows: int
    probe_seconds: float | None
    estimated_seconds: float | None
    scaling: str
    note: str = ""


def probe_costs(
    M: np.ndarray,
    y: np.ndarray,
    n_rows: int,
    classification: bool,
    *,
    seed: int,
    clock: Callable[[], float],
) -> Mapping[str, CostProbe]:
    """Time one fit plus one prediction pass per family, then extrapolate to ``n_rows``.

    Parameters
    ----------
    M
        The standardised design matrix of the probe sample (:func:`tunelab.data.design_matrix`).
    y
        Class codes for classification, the target's values for regression.
    n_rows
        Rows of the whole data, which the estimates are for.
    classification
        Whether ``y`` holds classes.
    seed
        Seeds the randomised models.
    clock
        This thread's CPU seconds in normal use, so that the space built from the probes does
        not change with what else the machine runs.

    Returns
    -------
    Mapping
        Family name to :class:`CostProbe`, in the order of :data:`COST_FAMILIES`; a failed probe
        has no estimate and says why.
    """
    target = y if classification else np.asarray(y, dtype=float)
    models = _probe_models(classification, seed)
    probes: dict[str, CostProbe] = {}
    for family in COST_FAMILIES:
        probe, scaling = models[family], SCALING_RULES[family]
        try:
            seconds = _time_fit(probe.model, M, target, clock) * probe.work_factor
        except Exception as exc:  # a failed probe must not stop the profile
            note = f"probe failed: {type(exc).__name__}: {exc}".splitlines()[0]
            probes[family] = CostProbe(
                family, probe.description, len(y), None, None, scaling, note=note
            )
            continue
        probes[family] = CostProbe(
            family=family,
            model=probe.description,
            probe_rows=len(y),
            probe_seconds=seconds,
            estimated_seconds=scaled_cost(seconds, len(y), max(n_rows, len(y)), scaling),
            scaling=scaling,
        )
    return probes


@dataclass(frozen=True)
class _Probe:
    model: BaseEstimator  # the reduced configuration that is timed
    description: str  # the configuration the estimate is for
    work_factor: float  # estimate = measured time x work_factor (trees, iterations, epochs)


def _probe_models(classification: bool, seed: int) -> dict[str, _Probe]:
    """The estimator timed for each family.

    Estimates are for library defaults with the work per fit fixed: 100 trees, 100 boosting
    iterations without early stopping, 50 epochs of scikit-learn's MLP (one hidden layer of
    100 units).  That MLP stands in for tunelab's torch MLP, whose own cost the space builder
    derives from it with a measured correction (``tunelab.space._cost_model``).  To stay
    fast, ensembles and the MLP are timed with a fifth of that work (20 trees, 20
    iterations, 10 epochs) and multiplied by 5: cost grows linearly with the number of trees,
    iterations or epochs (common practice, no source; it slightly over-counts fixed set-up
    work such as binning).
    """
    from sklearn import ensemble, linear_model, neighbors, neural_network, svm

    mlp = {"hidden_layer_sizes": (100,), "max_iter": 10, "tol": 0.0, "random_state": seed}
    trees = {"n_estimators": 20, "random_state": seed}
    boost = {"max_iter": 20, "early_stopping": False, "random_state": seed}
    if classification:
        return {
            "linear": _Probe(
                linear_model.LogisticRegression(max_iter=200), "LogisticRegression", 1
            ),
            "knn": _Probe(
                neighbors.KNeighborsClassifier(), "KNeighborsClassifier(5 neighbours)", 1
            ),
            "random_forest": _Probe(
                ensemble.RandomForestClassifier(**trees), "RandomForestClassifier(100 trees)", 5
            ),
            "extra_trees": _Probe(
                ensemble.ExtraTreesClassifier(**trees), "ExtraTreesClassifier(100 trees)", 5
            ),
            "hist_gb": _Probe(
                ensemble.HistGradientBoostingClassifier(**boost),
                "HistGradientBoostingClassifier(100 iterations)",
                5,
            ),
            "svm": _Probe(svm.SVC(), "SVC(rbf kernel)", 1),
            "mlp": _Probe(
                neural_network.MLPClassifier(**mlp), "MLPClassifier(100 units, 50 epochs)", 5
            ),
        }
    return {
        "linear": _Probe(linear_model.Ridge(), "Ridge", 1),
        "knn": _Probe(neighbors.KNeighborsRegressor(), "KNeighborsRegressor(5 neighbours)", 1),
        "random_forest": _Probe(
            ensemble.RandomForestRegressor(**trees), "RandomForestRegressor(100 trees)", 5
        ),
        "extra_trees": _Probe(
            ensemble.ExtraTreesRegressor(**trees), "ExtraTreesRegressor(100 trees)", 5
        ),
        "hist_gb": _Probe(
            ensemble.HistGradientBoostingRegressor(**boost),
            "HistGradientBoostingRegressor(100 iterations)",
            5,
        ),
        "svm": _Probe(svm.SVR(), "SVR(rbf kernel)", 1),
        "mlp": _Probe(
            neural_network.MLPRegressor(**mlp), "MLPRegressor(100 units, 50 epochs)", 5
        ),
    }


def _time_fit(
    model: BaseEstimator, M: np.ndarray, y: np.ndarray, clock: Callable[[], float]
) -> float:
    from sklearn.base import clone

    best = math.inf
    for _ in range(_PROBE_REPEATS):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # convergence warnings of the short probes
            started = clock()
            clone(model).fit(M, y).predict(M)
            seconds = clock() - started
        best = min(best, seconds)
        if seconds >= _REPEAT_BELOW_S:
            break
    return float(max(best, 1e-9))


__all__ = ["COST_FAMILIES", "CostProbe", "probe_costs"]
