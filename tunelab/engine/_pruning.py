"""Choosing the pruner: from the user's wish, or from the expected trial count.

Steps count work (see ``tunelab.engine._objective``: step 1 is a third of the first fold, step
3 one fold, step 9 three folds), so the halving rungs sit at steps 1, 3, 9, … for every family.

optuna's own halving pruners compare a trial, at a rung, with whatever value other trials had
when they passed it — a forest that first reports after a whole fold would then be ranked
against boosting models a third of the way through theirs.  :class:`RungPruner` compares only
values reported *at the rung's own step*, so partly fitted models meet partly fitted models.
"""

from __future__ import annotations

import math
from typing import Any

import optuna
from optuna.pruners import BasePruner
from optuna.trial import FrozenTrial, TrialState

from tunelab.errors import InputError

PRUNING_CHOICES = ("auto", "off", "median", "halving", "hyperband")

REDUCTION_FACTOR = 3  # keep the best third at each rung (common practice, no source)
MIN_PEERS = 4  # values a rung needs before it prunes anything (common practice, no source)
FEW_TRIALS = 10  # below this many expected trials there is too little to rank (common practice, no source)
MEDIAN_UP_TO = 30  # up to this many, the gentler median rule (common practice, no source)


class RungPruner(BasePruner):
    """Asynchronous successive halving at fixed steps, comparing equal steps only.

    A trial that reports at a rung step (1, η, η², … with η the reduction factor) goes on only
    if its value is within the best 1/η of all values reported at that same step so far, its
    own included (trials of any state; in hyperband, trials of its bracket).  A rung with fewer
    than ``min_peers`` values prunes nothing.  A NaN value is always pruned.

    Parameters
    ----------
    reduction_factor
        η: the share 1/η of a rung goes on to the next one.
    min_peers
        Values a rung must hold, this trial's included, before it prunes.
    first_rung
        Index of the first rung that prunes (0 for step 1); hyperband's brackets start later.
    brackets
        With more than one bracket, trial ``n`` belongs to bracket ``n % brackets`` and is
        compared only within it (hyperband); the bracket sets ``first_rung``.
    """

    def __init__(self, reduction_factor: int = REDUCTION_FACTOR, min_peers: int = MIN_PEERS,
                 first_rung: int = 0, brackets: int = 1) -> None:
        if reduction_factor < 2 or min_peers < 1 or first_rung < 0 or brackets < 1:
            raise ValueError("reduction_factor >= 2, min_peers >= 1, first_rung >= 0 and brackets >= 1 are required")
        self.reduction_factor = reduction_factor
        self.min_peers = min_peers
        self.first_rung = first_rung
        self.brackets = brackets

    def rung_of(self, step: int) -> int | None:
        """The rung index of a step (step η^r is rung r), or None between rungs."""
        rung, at = 0, 1
        while at < step:
            at *= self.reduction_factor
            rung += 1
        return rung if at == step else None

    def _bracket(self, trial: FrozenTrial) -> int:
        return trial.number % self.brackets

    def prune(self, study: optuna.Study, trial: FrozenTrial) -> bool:
        step = trial.last_step
        if step is None:
            return False
        value = trial.intermediate_values[step]
        if math.isnan(value):
            return True
        rung = self.rung_of(step)
        first = self.first_rung + (self._bracket(trial) if self.brackets > 1 else 0)
        if rung is None or rung < first:
            return False
        bracket = self._bracket(trial)
        values = [value]
        for other in study.get_trials(deepcopy=False):
            if other.number == trial.number or other.state == TrialState.WAITING:
                continue
            if self.brackets > 1 and self._bracket(other) != bracket:
                continue
            seen = other.intermediate_values.get(step)
            if seen is not None and not math.isnan(seen):
                values.append(seen)
        if len(values) < self.min_peers:
            return False
        keep = max(1, len(values) // self.reduction_factor)
        ranked = sorted(values, reverse=study.direction == optuna.study.StudyDirection.MAXIMIZE)
        threshold = ranked[keep - 1]
        if study.direction == optuna.study.StudyDirection.MAXIMIZE:
            return value < threshold
        return value > threshold


def choose_pruning(expected_trials: float | None) -> str:
    """What ``auto`` means for a launch expected to finish ``expected_trials`` trials.

    Ranking needs a population: with very few trials nothing is pruned; with a few dozen the
    median rule (prune what is worse than the median of finished trials at that step) is
    gentle; with more, or when the count is unknown, successive halving, which makes each
    trial's first third of a fold decide whether it gets a whole fold.
    """
    if expected_trials is None:
        return "halving"
    if expected_trials < FEW_TRIALS:
        return "off"
    return "median" if expected_trials <= MEDIAN_UP_TO else "halving"


def make_pruner(kind: str, *, max_steps: int | None = None, expected_trials: float | None = None) -> Any:
    """An optuna pruner for ``kind`` (one of ``PRUNING_CHOICES``).

    Parameters
    ----------
    kind
        ``auto`` chooses with :func:`choose_pruning`; ``off``, ``median``, ``halving`` or
        ``hyperband`` force a rule.
    max_steps
        Accepted for callers that pass it; the rules here need no step count, because steps
        count work and the last fold is never reported.
    expected_trials
        Trials the launch is expected to finish (budget divided by a typical trial time), if known.

    Raises
    ------
    InputError
        For an unknown ``kind``.
    """
    del max_steps
    if kind not in PRUNING_CHOICES:
        raise InputError(f"unknown pruning '{kind}'", f"use one of: {', '.join(PRUNING_CHOICES)}")
    if kind == "auto":
        kind = choose_pruning(expected_trials)
    if kind == "off":
        return optuna.pruners.NopPruner()
    if kind == "median":
        # Compared with finished trials at the same step; five of them before any pruning.
        return optuna.pruners.MedianPruner(n_startup_trials=5, n_warmup_steps=0, n_min_trials=3)
    if kind == "halving":
        return RungPruner()
    return RungPruner(brackets=3)
