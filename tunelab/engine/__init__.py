"""The search engine: budget ledger, objectives, runners, pruning, and the ask/evaluate/tell loop.

The engine never prints: it reports progress through callbacks.
"""

from tunelab.engine._budget import Budget, Spent, format_duration, overshoot_allowance, parse_duration, remaining
from tunelab.engine._clock import Clock, FakeClock, SystemClock
from tunelab.engine._folds import fold_count, make_folds
from tunelab.engine._metrics import DEFAULT_METRIC, METRICS, Metric, better, resolve_metric, score
from tunelab.engine._objective import (ROUNDS_ATTR, CrossValidationObjective, Objective, PruneSignal, Report,
                                       TrialResult, settled_config)
from tunelab.engine._pruning import PRUNING_CHOICES, make_pruner
from tunelab.engine._recovery import Recovery, recover, trial_state
from tunelab.engine._runner import ForkRunner, InProcessRunner, Limits, Outcome
from tunelab.engine._search import Progress, SearchSettings, SearchSummary, search
from tunelab.engine._stop import StopRequested, clear_stop, request_stop

__all__ = [
    "DEFAULT_METRIC", "METRICS", "PRUNING_CHOICES", "ROUNDS_ATTR", "Budget", "Clock", "CrossValidationObjective", "FakeClock",
    "ForkRunner", "InProcessRunner", "Limits", "Metric", "Objective", "Outcome", "Progress", "PruneSignal",
    "Recovery", "Report", "SearchSettings", "SearchSummary", "Spent", "StopRequested", "SystemClock", "clear_stop",
    "TrialResult", "better", "fold_count", "format_duration", "make_folds", "make_pruner", "overshoot_allowance",
    "parse_duration", "recover", "remaining", "request_stop", "resolve_metric", "score", "search", "settled_config",
    "trial_state",
]
