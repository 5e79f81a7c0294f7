"""The study store: SQLite by default, any SQLAlchemy URL for many machines."""

from tunelab.store._location import DEFAULT_STORE, ENV_VAR, Location, resolve
from tunelab.store._store import LaunchRecord, PhaseRecord, Store, StudyRecord, union_length, utc_iso

__all__ = [
    "DEFAULT_STORE",
    "ENV_VAR",
    "LaunchRecord",
    "Location",
    "PhaseRecord",
    "Store",
    "StudyRecord",
    "resolve",
    "union_length",
    "utc_iso",
]
