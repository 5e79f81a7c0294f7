"""The study store: SQLite by default, any SQLAlchemy URL for many machines.

Readers get plain records (:class:`StudyRecord`, :class:`PhaseRecord`, :class:`LaunchRecord`,
:class:`TrialRecord`); optuna's trial tables live in the same database behind
:meth:`Store.optuna_storage`, which only the engine uses.
"""

from tunelab.store import _keys as keys
from tunelab.store._location import DEFAULT_STORE, ENV_VAR, Location, resolve
from tunelab.store._records import (
    FINISHED_STATES,
    TRIAL_STATES,
    TrialRecord,
    TrialState,
    best_of,
    origin_of,
    ranked,
    record_of,
    state_of,
)
from tunelab.store._store import LaunchRecord, PhaseRecord, Store, StudyRecord, union_length, utc_iso

__all__ = [
    "DEFAULT_STORE",
    "ENV_VAR",
    "FINISHED_STATES",
    "LaunchRecord",
    "Location",
    "PhaseRecord",
    "Store",
    "StudyRecord",
    "TRIAL_STATES",
    "TrialRecord",
    "TrialState",
    "best_of",
    "keys",
    "origin_of",
    "ranked",
    "record_of",
    "resolve",
    "state_of",
    "union_length",
    "utc_iso",
]
