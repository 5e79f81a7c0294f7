"""The one place that relies on optuna's private names: a cached RDB storage whose running trials are
written in a few transactions, plus the conditional claim of a queued trial.

Why: optuna's RDB storage commits every parameter, attribute and intermediate value on its own
and re-reads the running trial before each parameter, about twenty round trips a trial; at a
thousand trials that is most of the engine's cost per trial.  This process is the only writer
of a trial it runs, so it can keep that trial in memory and write it at three points, each one
committed transaction:

- creation, or the claim of a queued trial, with the attributes that say which launch and phase
  own it (``stamp``);
- ``flush()``, which the engine calls once the config is sampled and before the model is fitted,
  so a crash during the fit leaves the config in the store to be re-queued;
- the final state, together with everything recorded since the flush.

A crash loses at most the intermediate reports of the trial that was running, which is
interrupted and re-queued anyway.  Trials of other processes are read as optuna reads them.

Every private name of optuna used here is listed in ``PRIVATE_NAMES``; ``missing_private_names``
checks them against the installed optuna (``tests/test_optuna_adapter.py``), so an upgrade that
moves one fails with its name rather than deep inside a search.  Nothing outside this module
touches an optuna name that starts with an underscore.
"""

from __future__ import annotations

import copy
import json
from collections.abc import Container, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any, cast

from optuna.distributions import BaseDistribution, check_distribution_compatibility, distribution_to_json
from optuna.storages import RDBStorage
from optuna.storages._cached_storage import _CachedStorage
from optuna.storages._rdb import models
from optuna.storages._rdb.storage import _create_scoped_session
from optuna.trial import FrozenTrial, TrialState
from sqlalchemy import insert, select, update
from sqlalchemy.engine import CursorResult

# Each private name this module uses: (module, attribute) pairs checked by ``missing_private_names``;
# attributes of instances are checked on a live storage by the adapter's test.
PRIVATE_NAMES: tuple[tuple[str, str], ...] = (
    ("optuna.storages._cached_storage", "_CachedStorage"),
    ("optuna.storages._cached_storage._CachedStorage", "_read_trials_from_remote_storage"),
    ("optuna.storages._rdb.storage", "_create_scoped_session"),
    ("optuna.storages._rdb.storage.RDBStorage", "_set_trial_value_without_commit"),
    ("optuna.storages._rdb.models", "TrialModel"),
    ("optuna.storages._rdb.models", "TrialParamModel"),
    ("optuna.storages._rdb.models", "TrialUserAttributeModel"),
    ("optuna.storages._rdb.models", "TrialSystemAttributeModel"),
    ("optuna.storages._rdb.models", "TrialIntermediateValueModel"),
    ("optuna.storages._rdb.models.TrialModel", "find_or_raise_by_id"),
    ("optuna.storages._rdb.models.TrialIntermediateValueModel", "intermediate_value_to_stored_repr"),
)
# Attributes of a live _CachedStorage / RDBStorage / FrozenTrial this module reads.
PRIVATE_INSTANCE_NAMES: tuple[tuple[str, str], ...] = (
    ("_CachedStorage", "_backend"),
    ("_CachedStorage", "_lock"),
    ("_CachedStorage", "_studies"),
    ("_CachedStorage", "_trial_id_to_study_id_and_number"),
    ("_StudyInfo", "trials"),
    ("_StudyInfo", "param_distribution"),
    ("RDBStorage", "scoped_session"),
    ("RDBStorage", "engine"),
    ("FrozenTrial", "_trial_id"),
)


def missing_private_names() -> list[str]:
    """The names of ``PRIVATE_NAMES`` the installed optuna lacks (empty when the adapter fits it)."""
    import importlib

    missing = []
    for where, name in PRIVATE_NAMES:
        parts = where.split(".")
        obj: Any = None
        for cut in range(len(parts), 0, -1):  # the longest importable prefix, then attributes
            try:
                obj = importlib.import_module(".".join(parts[:cut]))
            except ImportError:
                continue
            for attr in parts[cut:]:
                obj = getattr(obj, attr, None)
            break
        if obj is None or not hasattr(obj, name):
            missing.append(f"{where}.{name}")
    return missing


class LocalTrialStorage(_CachedStorage):
    """optuna storage whose running trials (created or claimed here) are written at flush points."""

    def __init__(self, backend: RDBStorage) -> None:
        super().__init__(backend)
        self.stamp: dict[str, Any] = {}
        self._local: dict[int, FrozenTrial] = {}
        self._pending: dict[int, _Batch] = {}
        self._stored: dict[int, set[tuple[str, Any]]] = {}  # rows of a local trial already in the database
        self._fresh = False  # whether the cache has read the other processes' trials since our last write
        # Trials whose last write failed: it may have reached the database all the same (a connection
        # lost at the commit), so the next write reads back which rows are there before inserting.
        self._unsure: set[int] = set()

    # ---- trials this process runs ------------------------------------------------------------
    def create_new_trial(self, study_id: int, template_trial: FrozenTrial | None = None) -> int:
        if template_trial is not None:  # queued or copied trials: optuna's path
            self._fresh = False
            return super().create_new_trial(study_id, template_trial)
        template = FrozenTrial(number=-1, state=TrialState.RUNNING, value=None, datetime_start=datetime.now(),
                               datetime_complete=None, params={}, distributions={}, user_attrs=dict(self.stamp),
                               system_attrs={}, intermediate_values={}, trial_id=-1)
        trial_id = super().create_new_trial(study_id, template)
        with self._lock:
            study_id_, number = self._trial_id_to_study_id_and_number[trial_id]
            created = self._studies[study_id_].trials[number]
        self._adopt(created)
        return trial_id

    def set_trial_state_values(self, trial_id: int, state: TrialState,
                               values: Sequence[float] | None = None) -> bool:
        if trial_id not in self._local:
            self._fresh = False
            if state != TrialState.RUNNING:
                return super().set_trial_state_values(trial_id, state, values)
            claimed = self._claim(trial_id)
            if claimed:  # a queued trial this process now runs
                self._adopt(self._backend.get_trial(trial_id))
            return claimed
        if state == TrialState.RUNNING:
            return False
        self._write(trial_id, state=state, values=values)
        return True

    def _claim(self, trial_id: int) -> bool:
        """Take a queued trial in one conditional update, so exactly one process wins it.

        Why: optuna's claim reads the state and then writes it; SQLite's Python driver begins
        the transaction at the write, so two workers could both read WAITING and both run the
        config (seen as duplicate parameter and attribute rows, and a worker dying on them).
        The owner (``stamp``) is written in the same transaction, so no crash can leave a
        claimed trial running without a launch that recovery can find dead.
        """
        table = models.TrialModel.__table__
        with _create_scoped_session(self._backend.scoped_session) as session:
            taken = cast("CursorResult[Any]", session.execute(
                update(table).where(table.c.trial_id == trial_id, table.c.state == TrialState.WAITING)
                .values(state=TrialState.RUNNING, datetime_start=datetime.now())))
            if taken.rowcount != 1:
                return False
            if self.stamp:
                attrs = models.TrialUserAttributeModel.__table__
                have = {key for (key,) in session.execute(
                    select(attrs.c.key).where(attrs.c.trial_id == trial_id, attrs.c.key.in_(list(self.stamp))))}
                _write_batch(session, trial_id, _Batch(user=dict(self.stamp)), {("user", key) for key in have})
            return True

    def running_here(self) -> list[int]:
        """Numbers of the trials this process created or claimed and has not finished."""
        with self._lock:
            return sorted(t.number for t in self._local.values())

    def flush(self) -> None:
        """Write what this process recorded on its running trials, one transaction per trial."""
        for trial_id in [t for t, batch in self._pending.items() if batch]:
            self._write(trial_id)

    def _adopt(self, trial: FrozenTrial) -> None:
        with self._lock:
            self._local[trial._trial_id] = copy.deepcopy(trial)
            self._pending[trial._trial_id] = _Batch()
            self._stored[trial._trial_id] = {("param", k) for k in trial.params} | \
                {("user", k) for k in trial.user_attrs} | {("system", k) for k in trial.system_attrs} | \
                {("step", k) for k in trial.intermediate_values}

    def _write(self, trial_id: int, state: TrialState | None = None, values: Sequence[float] | None = None) -> None:
        with self._lock:
            batch = self._pending[trial_id]
            self._pending[trial_id] = _Batch()
            stored = set(self._stored[trial_id])
        unsure, ended = trial_id in self._unsure, False
        try:
            with _create_scoped_session(self._backend.scoped_session) as session:
                trial = models.TrialModel.find_or_raise_by_id(trial_id, session, for_update=state is not None)
                if unsure:
                    stored = _rows_in_database(session, trial_id)
                    ended = trial.state.is_finished()  # the failed write was the trial's end, and it landed
                if not ended:
                    self._backend.check_trial_is_updatable(trial_id, trial.state)
                    _write_batch(session, trial_id, batch, stored)
                if state is not None:
                    for objective, value in enumerate(values or ()):
                        self._backend._set_trial_value_without_commit(session, trial, objective, value)
                    trial.state = state
                    if state.is_finished():
                        trial.datetime_complete = datetime.now()
        except BaseException:
            with self._lock:  # keep what was not written, ahead of anything recorded since
                self._pending[trial_id] = batch.then(self._pending[trial_id])
                self._unsure.add(trial_id)
            raise
        with self._lock:
            self._unsure.discard(trial_id)
            self._stored[trial_id] = stored
            if ended or (state is not None and state.is_finished()):
                for table in (self._local, self._pending, self._stored):
                    table.pop(trial_id, None)
        self._fresh = False

    # ---- for the engine: trials by number, never by optuna's private trial id ----------------
    def set_attr(self, study_id: int, number: int, key: str, value: Any) -> None:
        """Record a fact on trial ``number`` of a study (buffered when this process runs it)."""
        self.set_trial_user_attr(self.get_trial_id_from_study_id_trial_number(study_id, number), key, value)

    def is_finished(self, study_id: int, number: int) -> bool:
        return self.get_trial(self.get_trial_id_from_study_id_trial_number(study_id, number)).state.is_finished()

    def dispose(self) -> None:
        """Close the backend's connections."""
        self._backend.engine.dispose()

    # ---- writes: buffered for local trials ---------------------------------------------------
    def set_trial_param(self, trial_id: int, param_name: str, param_value_internal: float,
                        distribution: BaseDistribution) -> None:
        if trial_id not in self._local:
            self._fresh = False
            return super().set_trial_param(trial_id, param_name, param_value_internal, distribution)
        with self._lock:
            study_id, _ = self._trial_id_to_study_id_and_number[trial_id]
            known = self._studies[study_id].param_distribution
            if param_name in known:
                check_distribution_compatibility(known[param_name], distribution)
            else:
                known[param_name] = distribution
            local = self._local[trial_id]
            local.params[param_name] = distribution.to_external_repr(param_value_internal)
            local.distributions[param_name] = distribution
            self._pending[trial_id].params[param_name] = (param_value_internal, distribution)

    def set_trial_user_attr(self, trial_id: int, key: str, value: Any) -> None:
        if trial_id not in self._local:
            self._fresh = False
            return super().set_trial_user_attr(trial_id, key, value)
        with self._lock:
            self._local[trial_id].user_attrs[key] = value
            self._pending[trial_id].user[key] = value

    def set_trial_system_attr(self, trial_id: int, key: str, value: Any) -> None:
        if trial_id not in self._local:
            self._fresh = False
            return super().set_trial_system_attr(trial_id, key, value)
        with self._lock:
            self._local[trial_id].system_attrs[key] = value
            self._pending[trial_id].system[key] = value

    def set_trial_intermediate_value(self, trial_id: int, step: int, intermediate_value: float) -> None:
        if trial_id not in self._local:
            self._fresh = False
            return super().set_trial_intermediate_value(trial_id, step, intermediate_value)
        with self._lock:
            self._local[trial_id].intermediate_values[step] = intermediate_value
            self._pending[trial_id].steps[step] = intermediate_value
        self._fresh = False  # a pruner deciding on this report should see the other workers' latest

    # ---- reads: local trials from memory -----------------------------------------------------
    def get_trial(self, trial_id: int) -> FrozenTrial:
        with self._lock:
            local = self._local.get(trial_id)
            if local is not None:
                return copy.deepcopy(local)
        return super().get_trial(trial_id)

    def get_all_trials(self, study_id: int, deepcopy: bool = True,
                       states: Container[TrialState] | None = None) -> list[FrozenTrial]:
        """All trials; the database is read once between two writes of this process, not on every call.

        Sampling one config asks for all trials three times in a row; other workers' news is
        at most one sampling old, which constant-liar TPE tolerates by design.
        """
        if self._fresh:
            with self._lock:
                info = self._studies.get(study_id)
            if info is None:
                self._fresh = False
        if not self._fresh:
            self._read_trials_from_remote_storage(study_id)
            self._fresh = True
        with self._lock:
            trials = sorted((t for t in self._studies[study_id].trials.values() if states is None or t.state in states),
                            key=lambda t: t.number)
            trials = [self._local.get(t._trial_id, t) for t in trials]
            return copy.deepcopy(trials) if deepcopy else [copy.deepcopy(t) if t._trial_id in self._local else t
                                                            for t in trials]


@dataclass
class _Batch:
    """What was recorded on one local trial since its last write, the latest value per key."""

    params: dict[str, tuple[float, BaseDistribution]] = field(default_factory=dict)
    user: dict[str, Any] = field(default_factory=dict)
    system: dict[str, Any] = field(default_factory=dict)
    steps: dict[int, float] = field(default_factory=dict)

    def __bool__(self) -> bool:
        return bool(self.params or self.user or self.system or self.steps)

    def then(self, later: _Batch) -> _Batch:
        return _Batch({**self.params, **later.params}, {**self.user, **later.user},
                      {**self.system, **later.system}, {**self.steps, **later.steps})


def _rows_in_database(session: Any, trial_id: int) -> set[tuple[str, Any]]:
    """The parameter, attribute and report rows the database holds for one trial, as ``_write_batch`` names them."""
    params = models.TrialParamModel.__table__
    found: set[tuple[str, Any]] = {("param", name) for (name,) in
                                   session.execute(select(params.c.param_name).where(params.c.trial_id == trial_id))}
    for kind, model in (("user", models.TrialUserAttributeModel), ("system", models.TrialSystemAttributeModel)):
        table = model.__table__
        found |= {(kind, key) for (key,) in session.execute(select(table.c.key).where(table.c.trial_id == trial_id))}
    steps = models.TrialIntermediateValueModel.__table__
    found |= {("step", step) for (step,) in
              session.execute(select(steps.c.step).where(steps.c.trial_id == trial_id))}
    return found


def _write_batch(session: Any, trial_id: int, batch: _Batch, stored: set[tuple[str, Any]]) -> None:
    """Insert or update each row; ``stored`` says which exist, and gains the ones inserted here."""
    for name, (internal, distribution) in batch.params.items():
        if ("param", name) not in stored:
            session.add(models.TrialParamModel(trial_id=trial_id, param_name=name, param_value=internal,
                                               distribution_json=distribution_to_json(distribution)))
            stored.add(("param", name))
    for kind, model, items in (("user", models.TrialUserAttributeModel, batch.user),
                               ("system", models.TrialSystemAttributeModel, batch.system)):
        table = model.__table__
        for key, value in items.items():
            row = {"value_json": json.dumps(value)}
            if (kind, key) in stored:
                session.execute(update(table).where(table.c.trial_id == trial_id, table.c.key == key).values(**row))
            else:
                session.execute(insert(table).values(trial_id=trial_id, key=key, **row))
                stored.add((kind, key))
    table = models.TrialIntermediateValueModel.__table__
    for step, value in batch.steps.items():
        number, value_type = models.TrialIntermediateValueModel.intermediate_value_to_stored_repr(value)
        step_row = {"intermediate_value": number, "intermediate_value_type": value_type}
        if ("step", step) in stored:
            session.execute(update(table).where(table.c.trial_id == trial_id, table.c.step == step).values(**step_row))
        else:
            session.execute(insert(table).values(trial_id=trial_id, step=step, **step_row))
            stored.add(("step", step))
