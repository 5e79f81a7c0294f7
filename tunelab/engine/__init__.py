"""The search engine: budget ledger, objectives, runners, pruning, and the ask/evaluate/tell loop.

The engine never prints: it reports progress through callbacks.  Metrics and folds live in
:mod:`tunelab.evaluation`, which the probes share; their names are re-exported here.
"""

from tunelab.engine._budget import Budget, Spent, overshoot_allowance, parse_duration, remaining
from tunelab.engine._clock import Clock, FakeClock, SystemClock
from tunelab.engine._objective import (
    ROUNDS_ATTR,
    STEPS_PER_FOLD,
    CrossValidationObjective,
    Objective,
    PruneSignal,
    Report,
    TrialResult,
    fold_scores_from_reports,
    settled_config,
)
from tunelab.engine._pruning import PRUNING_CHOICES, choose_pruning, make_pruner
from tunelab.engine._recovery import Recovery, recover, trial_state
from tunelab.engine._runner import ForkRunner, InProcessRunner, Limits, Outcome
from tunelab.engine._search import (
    DEFAULT_KEEP_PREDICTIONS,
    KEEP_PREDICTIONS,
    Progress,
    SearchSettings,
    SearchSummary,
    search,
)
from tunelab.engine._stop import StopRequested, clear_stop, holding, request_stop
from tunelab.engine._study import SAMPLERS, SearchStudy, make_sampler, open_search_study
from tunelab.evaluation import (
    DEFAULT_METRIC,
    LARGE_DATA_ROWS,
    METRICS,
    Metric,
    better,
    fold_count,
    make_folds,
    resolve_metric,
    score,
)
from tunelab.values import format_duration

__all__ = [
    "DEFAULT_KEEP_PREDICTIONS",
    "KEEP_PREDICTIONS",
    "DEFAULT_METRIC", "LARGE_DATA_ROWS", "METRICS", "PRUNING_CHOICES", "ROUNDS_ATTR", "SAMPLERS", "STEPS_PER_FOLD",
    "Budget", "Clock", "CrossValidationObjective", "FakeClock", "ForkRunner", "InProcessRunner", "Limits", "Metric",
    "Objective", "Outcome", "Progress", "PruneSignal", "Recovery", "Report", "SearchSettings", "SearchStudy",
    "SearchSummary", "Spent", "StopRequested", "SystemClock", "TrialResult", "better", "choose_pruning",
    "clear_stop", "fold_count", "fold_scores_from_reports", "format_duration", "holding", "make_folds",
    "make_pruner", "make_sampler", "open_search_study", "overshoot_allowance", "parse_duration", "recover",
    "remaining", "request_stop", "resolve_metric", "score", "search", "settled_config", "trial_state",
]
