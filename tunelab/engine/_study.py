"""optuna's study for one launch: the seeded sampler, the pruner, and the store's trial tables.

The engine is the one layer above the store that drives optuna; everything it needs from a
study — ask, tell, queue a config, record a fact on a trial by its number — goes through
:class:`SearchStudy`, so no module reaches into optuna's private attributes.
"""

from __future__ import annotations

import logging
import random
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import optuna
from optuna.distributions import BaseDistribution

from tunelab.engine._pruning import make_pruner
from tunelab.errors import InputError
from tunelab.store import Store, StudyRecord, TrialRecord, keys, record_of

SAMPLERS = ("tpe", "random")


@dataclass
class SearchStudy:
    """An open optuna study on the store's trial tables, with its numeric id for trial lookups."""

    study: optuna.Study
    storage: Any  # the store's LocalTrialStorage: buffered writes for the trials this process runs
    study_id: int
    fresh: bool = False  # created by this call (a new study, or one whose creation was cut short)

    def queue(self, config: Mapping[str, Any], **attrs: Any) -> None:
        """Queue a config to run before the sampler's own (warm starts, retries)."""
        self.study.enqueue_trial(dict(config), user_attrs=attrs or None)

    def set_attr(self, number: int, key: str, value: Any) -> None:
        self.storage.set_attr(self.study_id, number, key, value)

    def is_finished(self, number: int) -> bool:
        return bool(self.storage.is_finished(self.study_id, number))

    def mark_interrupted(self, number: int) -> bool:
        """Record a running trial as interrupted; False when it had already finished (or another
        worker recovered it meanwhile)."""
        if self.is_finished(number):
            return False
        trial_id = self.storage.get_trial_id_from_study_id_trial_number(self.study_id, number)
        try:
            self.storage.set_trial_user_attr(trial_id, keys.STATE, keys.INTERRUPTED)
            return bool(self.storage.set_trial_state_values(trial_id, optuna.trial.TrialState.FAIL))
        except RuntimeError:  # optuna's UpdateFinishedTrialError: finished meanwhile by its owner
            return False

    def running_here(self) -> list[int]:
        """Numbers of the trials this process created or claimed and has not finished."""
        return list(self.storage.running_here())

    def flush(self) -> None:
        """Write what was recorded on this process's running trials (before a fit starts)."""
        self.storage.flush()

    def stamp(self, attrs: Mapping[str, Any]) -> None:
        """Facts every trial this process creates or claims carries from its first write (its owner)."""
        self.storage.stamp = dict(attrs)

    def records(self, states: tuple[str, ...] | None = None) -> list[TrialRecord]:
        """Every trial (or those in ``states``) as plain records."""
        trials = [record_of(t) for t in self.study.get_trials(deepcopy=False)]
        return trials if states is None else [t for t in trials if t.state in states]

    def frozen(self, states: tuple[optuna.trial.TrialState, ...] | None = None) -> list[optuna.trial.FrozenTrial]:
        return self.study.get_trials(deepcopy=False, states=states)


def open_search_study(store: Store, record: StudyRecord, *, launch_number: int, create: bool,
                      salt: int = 0, dropped: tuple[str, ...] = ()) -> SearchStudy:
    """Load (or create) the study's optuna study with a seeded sampler and the study's pruner.

    ``salt`` separates the random streams of workers that join at the same moment (they would
    otherwise see the same launch count and draw the same start-up configs).  ``dropped`` are the
    families the current phase dropped: the sampler never returns them.
    """
    sampler = make_sampler(record.settings.get("sampler", "tpe"), (record.seed + launch_number + salt) % (2**32),
                           dropped=dropped)
    n_folds = int(record.settings.get("n_folds", 5))
    pruner = make_pruner(record.settings.get("pruning", "auto"), max_steps=n_folds,
                         expected_trials=record.settings.get("expected_trials"),
                         row_rungs=len(record.settings.get(keys.ROW_SHARES) or ()))
    # tunelab reports study creation itself: optuna's info lines are off, and the command line's
    # stricter level (the "tunelab" logger's, set before optuna's import reset optuna's) holds.
    wanted = max(optuna.logging.WARNING, logging.getLogger("tunelab").getEffectiveLevel())
    if optuna.logging.get_verbosity() < wanted:
        optuna.logging.set_verbosity(wanted)
    storage = store.optuna_storage()
    fresh = create
    if not create:
        try:
            study = optuna.load_study(study_name=record.name, storage=storage, sampler=sampler, pruner=pruner)
        except KeyError:  # the study's creation was cut short (a full disk) before its trial tables: complete it
            fresh = True
    if fresh:
        study = optuna.create_study(storage=storage, study_name=record.name, direction=record.direction,
                                    sampler=sampler, pruner=pruner)
    return SearchStudy(study, storage, storage.get_study_id_from_name(record.name), fresh=fresh)


def make_sampler(kind: str, seed: int, dropped: tuple[str, ...] = ()) -> optuna.samplers.BaseSampler:
    """TPE (multivariate, grouped for the conditional space, constant liar for parallel workers) or random;
    with ``dropped`` families, wrapped so that it never returns them.

    What TPE learns from lower fidelities (pruned trials; with rows as a fidelity, a trial stopped
    on a row rung): its "good" group is filled with complete trials by score first, then with
    pruned trials by the rung they reached, and among those stopped on one rung by their value
    there.  A trial that climbed further won more successive-halving comparisons, so this is the
    order halving promoted them in (Bergstra et al. 2011, NeurIPS, for TPE; the ordering of pruned
    trials is optuna's TPESampler's, checked in ``tests/test_rows_fidelity.py``).  Values from
    different rungs are never compared with each other.
    """
    base: optuna.samplers.BaseSampler
    if kind == "random":
        base = optuna.samplers.RandomSampler(seed=seed)
    elif kind == "tpe":
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
            base = optuna.samplers.TPESampler(seed=seed, multivariate=True, group=True, constant_liar=True)
    else:
        raise InputError(f"unknown sampler '{kind}'", "use tpe or random")
    return KeptFamilies(base, dropped, seed) if dropped else base


class KeptFamilies(optuna.samplers.BaseSampler):
    """A sampler that draws ``family`` only among the families not dropped.

    A dropped family stays a choice of the ``family`` distribution (optuna's trial tables refuse a
    categorical whose choices change), so the wrapped sampler may still propose it; the proposal
    is then drawn again, up to ``REDRAWS`` times, and finally replaced by a kept family at random.
    Every other parameter is the wrapped sampler's.
    """

    REDRAWS = 5

    def __init__(self, base: optuna.samplers.BaseSampler, dropped: tuple[str, ...], seed: int) -> None:
        self.base = base
        self.dropped = frozenset(dropped)
        self._rng = random.Random(seed)

    def infer_relative_search_space(self, study: optuna.Study,
                                    trial: optuna.trial.FrozenTrial) -> dict[str, BaseDistribution]:
        return self.base.infer_relative_search_space(study, trial)

    def sample_relative(self, study: optuna.Study, trial: optuna.trial.FrozenTrial,
                        search_space: dict[str, BaseDistribution]) -> dict[str, Any]:
        params = self.base.sample_relative(study, trial, search_space)
        for _ in range(self.REDRAWS):
            if params.get("family") not in self.dropped:
                return params
            params = self.base.sample_relative(study, trial, search_space)
        if params.get("family") in self.dropped:
            params = dict(params)
            params["family"] = self._kept(search_space["family"])
        return params

    def sample_independent(self, study: optuna.Study, trial: optuna.trial.FrozenTrial, param_name: str,
                           param_distribution: BaseDistribution) -> Any:
        value = self.base.sample_independent(study, trial, param_name, param_distribution)
        if param_name != "family":
            return value
        for _ in range(self.REDRAWS):
            if value not in self.dropped:
                return value
            value = self.base.sample_independent(study, trial, param_name, param_distribution)
        return value if value not in self.dropped else self._kept(param_distribution)

    def _kept(self, distribution: BaseDistribution) -> Any:
        choices = [c for c in getattr(distribution, "choices", ()) if c not in self.dropped]
        return self._rng.choice(choices)

    def before_trial(self, study: optuna.Study, trial: optuna.trial.FrozenTrial) -> None:
        self.base.before_trial(study, trial)

    def after_trial(self, study: optuna.Study, trial: optuna.trial.FrozenTrial, state: optuna.trial.TrialState,
                    values: Sequence[float] | None) -> None:
        self.base.after_trial(study, trial, state, values)

    def reseed_rng(self) -> None:
        self.base.reseed_rng()
        self._rng = random.Random()


__all__ = ["KeptFamilies", "SAMPLERS", "SearchStudy", "make_sampler", "open_search_study"]
