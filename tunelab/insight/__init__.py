"""Insight into a finished search: which parameters matter, and which can be frozen."""

from tunelab.insight._importance import (
    FAMILY_PARAM,
    SHARED_PREFIX,
    GroupNote,
    ImportanceReport,
    ImportanceRow,
    Thresholds,
    TrialRecord,
    importance_table,
)

__all__ = [
    "FAMILY_PARAM",
    "SHARED_PREFIX",
    "GroupNote",
    "ImportanceReport",
    "ImportanceRow",
    "Thresholds",
    "TrialRecord",
    "importance_table",
]
