"""Insight into a search: which parameters matter, which can be frozen at what value, and the HTML report."""

from tunelab.insight._importance import (
    FAMILY_PARAM,
    GroupNote,
    ImportanceReport,
    ImportanceRow,
    Thresholds,
    TrialRecord,
    importance_table,
)
from tunelab.insight._report import (
    GENERATOR,
    BestTrial,
    ChartPoint,
    FamilyLine,
    Reason,
    ReportData,
    best_so_far,
    nice_ticks,
    value_window,
    render_report,
    space_reasons,
    trial_chart,
)

__all__ = [
    "BestTrial",
    "ChartPoint",
    "FAMILY_PARAM",
    "FamilyLine",
    "GENERATOR",
    "GroupNote",
    "ImportanceReport",
    "ImportanceRow",
    "Reason",
    "ReportData",
    "Thresholds",
    "TrialRecord",
    "best_so_far",
    "importance_table",
    "nice_ticks",
    "value_window",
    "render_report",
    "space_reasons",
    "trial_chart",
]
