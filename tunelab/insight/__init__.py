"""Insight into a search: which families to drop, which knobs matter or can be frozen at what value,
whether another stretch of search is worth it, and the HTML report."""

from tunelab.insight._choice import RULES, Choice, Rule, choose
from tunelab.insight._decisions import DEFAULT_HORIZON, Decisions, StudyEvidence, decide, default_worth
from tunelab.insight._ensemble import MAX_MEMBERS, EnsemblePlan, plan_ensemble
from tunelab.insight._evidence import comparable, fold_fit
from tunelab.insight._families import FamilyVerdict, family_verdicts
from tunelab.insight._forecast import Forecast, forecast
from tunelab.insight._importance import (
    FAMILY_PARAM,
    FANOVA_SECONDS,
    GroupNote,
    ImportanceReport,
    ImportanceRow,
    Method,
    Thresholds,
    importance_table,
)
from tunelab.insight._pace import Pace
from tunelab.insight._report import (
    GENERATOR,
    BestTrial,
    ChartPoint,
    FamilyLine,
    Reason,
    ReportData,
    best_so_far,
    nice_ticks,
    render_report,
    space_reasons,
    trial_chart,
    value_window,
)
from tunelab.store import TrialRecord

__all__ = [
    "BestTrial",
    "ChartPoint",
    "Choice",
    "DEFAULT_HORIZON",
    "Decisions",
    "EnsemblePlan",
    "FAMILY_PARAM",
    "MAX_MEMBERS",
    "FANOVA_SECONDS",
    "FamilyLine",
    "FamilyVerdict",
    "Forecast",
    "GENERATOR",
    "GroupNote",
    "ImportanceReport",
    "ImportanceRow",
    "Method",
    "Pace",
    "RULES",
    "Reason",
    "ReportData",
    "Rule",
    "StudyEvidence",
    "Thresholds",
    "TrialRecord",
    "best_so_far",
    "choose",
    "comparable",
    "decide",
    "default_worth",
    "family_verdicts",
    "fold_fit",
    "forecast",
    "importance_table",
    "nice_ticks",
    "plan_ensemble",
    "render_report",
    "space_reasons",
    "trial_chart",
    "value_window",
]
