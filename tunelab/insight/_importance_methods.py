"""The importance adapter: fANOVA and PED-ANOVA computed by optuna's evaluators on throw-away studies.

This is insight's one module that imports optuna.  fANOVA (Hutter, Hoos & Leyton-Brown, ICML 2014)
gives the share of score variance each parameter's main effect explains; PED-ANOVA (Watanabe et
al., IJCAI 2023) how much each parameter matters for reaching the top quantile of scores.
"""

from __future__ import annotations

import logging
import math
import warnings
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from typing import cast

import numpy as np

from tunelab.insight._encoding import Encoded, snap
from tunelab.space import ParamSpec
from tunelab.store import TrialRecord

FANOVA_BINS = 32  # numeric values are snapped to this many cells before fANOVA


@contextmanager
def _quiet_optuna() -> Iterator[None]:
    """Drop optuna's "study created" chatter and warnings for our throw-away studies only."""
    logger = logging.getLogger("optuna.storages._in_memory")
    logger.addFilter(_drop_record)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            yield
    finally:
        logger.removeFilter(_drop_record)


def _drop_record(record: logging.LogRecord) -> bool:
    return False


def fanova_replicates(enc: Encoded, n_bootstrap: int, depth: int, seed: int) -> np.ndarray:
    """Importance of each column by ``n_bootstrap`` one-tree forests (resamples x columns).

    fANOVA grows every tree on its own bootstrap resample of the trials, so one tree with its own
    seed is one resample's answer: their mean is the forest's answer and their spread the
    interval.  Every column enters as a number on [0, 1] snapped to ``FANOVA_BINS`` cells;
    categorical choices become equal cells, so each choice weighs the same in fANOVA's uniform
    marginal (optuna's one-hot coding would also weigh impossible combinations and cost 2**k walks).
    """
    import optuna
    from optuna.distributions import BaseDistribution, FloatDistribution
    from optuna.importance import FanovaImportanceEvaluator

    dists: dict[str, BaseDistribution] = {name: FloatDistribution(0.0, 1.0) for name in enc.names}
    x = snap(enc.unit, FANOVA_BINS)
    out = np.zeros((n_bootstrap, len(enc.names)))
    with _quiet_optuna():
        study = optuna.create_study(direction="minimize")
        study.add_trials([
            optuna.trial.create_trial(params=dict(zip(enc.names, map(float, row))), distributions=dists, value=float(v))
            for row, v in zip(x, enc.y)
        ])
        for b, tree_seed in enumerate(np.random.default_rng(seed).integers(2**31 - 1, size=n_bootstrap)):
            evaluator = FanovaImportanceEvaluator(n_trees=1, max_depth=depth, seed=int(tree_seed))
            try:
                result = evaluator.evaluate(study)
            except RuntimeError:  # this resample's tree saw no variance: nothing explains anything
                continue
            out[b] = [result[name] for name in enc.names]
    return out


def ped_anova_replicates(trials: Sequence[TrialRecord], names: Sequence[str], space: Mapping[str, ParamSpec],
                         *, minimize: bool, top_quantile: float, n_halves: int,
                         seed: int) -> tuple[np.ndarray, np.ndarray]:
    """PED-ANOVA shares on all trials, and on ``n_halves`` random halves of them.

    Half-sampling gives the interval's width (its spread matches the bootstrap's for averages;
    from memory: Efron & Tibshirani 1993, *An Introduction to the Bootstrap*).
    """
    import optuna
    from optuna.distributions import BaseDistribution
    from optuna.importance import PedAnovaImportanceEvaluator

    # only searched parameters are judged: none is fixed, so none has no distribution
    dists = {name: cast(BaseDistribution, space[name].distribution()) for name in names}
    sign = 1.0 if minimize else -1.0  # the evaluator's target is minimised
    n = len(trials)
    evaluator = PedAnovaImportanceEvaluator(target_quantile=top_quantile)
    rng = np.random.default_rng(seed)
    with _quiet_optuna():
        study = optuna.create_study(direction="minimize")
        study.add_trials([
            optuna.trial.create_trial(params={name: t.params[name] for name in names}, distributions=dists,
                                      value=sign * t.score)
            for t in trials
        ])

        def shares(keep: np.ndarray) -> np.ndarray:
            # A non-finite target leaves a trial out, so one study serves every half.
            result = evaluator.evaluate(study, params=list(names),
                                        target=lambda t: (t.value if keep[t.number] and t.value is not None
                                                          else math.nan))
            raw = np.array([result[name] for name in names])
            return raw / raw.sum() if raw.sum() > 0 else raw

        point = shares(np.ones(n, dtype=bool))
        halves = np.empty((n_halves, len(names)))
        for b in range(n_halves):
            keep = np.zeros(n, dtype=bool)
            keep[rng.choice(n, size=n // 2, replace=False)] = True
            halves[b] = shares(keep)
    return point, halves


__all__ = ["FANOVA_BINS", "fanova_replicates", "ped_anova_replicates"]
