"""Dataset meta-features: what the search-space builder knows about a dataset before any trial.

The groups follow Rivolli, Garcia, Soares, Vanschoren and de Carvalho (2022), "Meta-features
for meta-learning", Knowledge-Based Systems: *simple* (counts and shares), *statistical*
(moments, correlation, outliers), *information-theoretic* (entropies, mutual information) and
*landmarkers* (cross-validated scores of fast, simple learners).  A fifth group, *cost
probes*, is tunelab's own: measured seconds per fit of every model family on a small
subsample, extrapolated to the full data, so that the budget can be split before the first
trial runs.  The first three read the data alone (:mod:`tunelab.data`); landmarkers and cost
probes fit models (:mod:`tunelab.probes`).  This module draws each group's sample and puts the
five together.

Everything is bounded in time: statistics and mutual information use at most 50,000 rows,
landmarkers at most ``max_rows`` rows and ``time_cap_s`` seconds each, cost probes
``probe_rows`` rows, so 50,000 rows x 50 columns take a few seconds.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from tunelab.data import (
    InformationFeatures,
    SimpleFeatures,
    StatisticalFeatures,
    Task,
    describe_data,
    design_matrix,
    learning_target,
    sample_rows,
)
from tunelab.errors import InputError
from tunelab.probes import CostProbe, Landmarkers, measure_landmarkers, one_thread, probe_costs
from tunelab.values import plain


@dataclass(frozen=True)
class MetaFeatures:
    """All meta-features of one dataset, grouped as in Rivolli et al. (2022).

    Frozen; the mappings inside are plain dicts, to be read only, so that the object
    pickles to worker processes.

    Attributes
    ----------
    task
        ``"binary"``, ``"multiclass"`` or ``"regression"``.
    simple, statistical, information, landmarkers
        The four groups of Rivolli et al. (2022).
    cost
        Family name to :class:`~tunelab.probes.CostProbe`, in the order of
        :data:`tunelab.probes.COST_FAMILIES`.
    seconds
        Wall-clock seconds the computation took.
    """

    task: str
    simple: SimpleFeatures
    statistical: StatisticalFeatures
    information: InformationFeatures
    landmarkers: Landmarkers
    cost: Mapping[str, CostProbe]
    seconds: float

    def to_dict(self) -> dict[str, Any]:
        """Return plain dicts, lists, numbers, strings and ``None``, ready for ``json.dumps``.

        Returns
        -------
        dict
            One key per group, nested the same way as the dataclasses.
        """
        result = plain(self)
        assert isinstance(result, dict)
        return result


def compute_metafeatures(
    X: pd.DataFrame,
    y: np.ndarray,
    task: Task,
    roles: Mapping[str, str],
    *,
    seed: int = 0,
    max_rows: int = 5000,
    time_cap_s: float = 2.0,
    probe_rows: int = 500,
    clock: Callable[[], float] = time.perf_counter,
    probe_clock: Callable[[], float] = time.thread_time,
) -> MetaFeatures:
    """Describe a dataset with meta-features, in bounded time.

    The space builder uses these to set priors and to split the budget between model
    families before any trial has run, so every part is capped in rows or seconds rather
    than exact on huge data.

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
    seed
        Seeds every subsample, fold split and randomised model.
    max_rows
        Rows of the landmarking sample.
    time_cap_s
        Seconds each landmarker may take; a landmarker that reaches the cap, or would pass it
        with its next fold, is skipped (``None``, with the reason in ``Landmarkers.notes``).
        ``0`` skips all landmarkers.
    probe_rows
        Rows of the sample each model family is timed on.
    clock
        Monotonic clock in seconds; a seam for tests.  It times the landmarkers (their caps
        are wall-clock limits) and the whole computation.
    probe_clock
        The clock of the cost probes: this thread's CPU seconds, so that the space built
        from them does not change with what else the machine runs (wall-clock probes on a
        busy machine kept SVM in one profile of a table and not in the next).  The probes
        fit on one thread, as trials do.

    Returns
    -------
    MetaFeatures
        The five groups; :meth:`MetaFeatures.to_dict` gives the JSON form.

    Raises
    ------
    InputError
        When ``max_rows`` or ``probe_rows`` is below 2, ``task`` is unknown, a column has no
        or an unknown role, ``y`` does not match ``X`` in length, or there are no rows or no
        feature columns.
    """
    started = clock()
    if max_rows < 2 or probe_rows < 2:
        raise InputError(
            "max_rows and probe_rows must be at least 2", hint="use the defaults (5000, 500)"
        )
    stats_seq, landmark_seq, probe_seq = np.random.SeedSequence(seed).spawn(3)
    classification = task != "regression"
    with one_thread():
        described = describe_data(X, y, task, roles, rng=np.random.default_rng(stats_seq))
        target = learning_target(y, task)
        landmark_rows = sample_rows(len(X), max_rows, np.random.default_rng(landmark_seq))
        probe_sample = sample_rows(len(X), probe_rows, np.random.default_rng(probe_seq))
        landmarkers = measure_landmarkers(
            design_matrix(X, roles, landmark_rows),
            target[landmark_rows],
            classification,
            seed=seed,
            time_cap_s=time_cap_s,
            clock=clock,
        )
        cost = probe_costs(
            design_matrix(X, roles, probe_sample),
            target[probe_sample],
            len(X),
            classification,
            seed=seed,
            clock=probe_clock,
        )
    return MetaFeatures(
        task=task,
        simple=described.simple,
        statistical=described.statistical,
        information=described.information,
        landmarkers=landmarkers,
        cost=cost,
        seconds=float(clock() - started),
    )


__all__ = ["MetaFeatures", "compute_metafeatures"]
