"""How a fitted model is judged: metrics with their directions, and the seeded cross-validation folds.

Below both the engine (every trial is scored here) and the probes (the numeric-map probe scores
the same way), so that neither has to import the other.
"""

from tunelab.evaluation._folds import LARGE_DATA_ROWS, fold_count, make_folds
from tunelab.evaluation._metrics import (
    DEFAULT_METRIC,
    METRICS,
    Direction,
    Metric,
    better,
    ranking_metric,
    resolve_metric,
    score,
    score_output,
)

__all__ = ["DEFAULT_METRIC", "Direction", "LARGE_DATA_ROWS", "METRICS", "Metric", "better", "fold_count",
           "make_folds", "ranking_metric", "resolve_metric", "score", "score_output"]
