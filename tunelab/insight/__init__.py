"""Insight into a search: which parameters matter, and which can be frozen at what value."""

from tunelab.insight._importance import (
    FAMILY_PARAM,
    GroupNote,
    ImportanceReport,
    ImportanceRow,
    Thresholds,
    TrialRecord,
    importance_table,
)

__all__ = [
    "FAMILY_PARAM",
    "GroupNote",
    "ImportanceReport",
    "ImportanceRow",
    "Thresholds",
    "TrialRecord",
    "importance_table",
]
