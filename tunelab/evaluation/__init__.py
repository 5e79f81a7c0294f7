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
from tunelab.evaluation._row_ladder import (
    MIN_RUNG_ROWS,
    ROW_SHARES,
    LadderChoice,
    choose_ladder,
    describe_ladder,
    nested_prefixes,
    nested_samples,
    rung_rows,
    share_words,
    stratified_order,
)

__all__ = ["DEFAULT_METRIC", "Direction", "LARGE_DATA_ROWS", "METRICS", "MIN_RUNG_ROWS", "Metric", "ROW_SHARES",
           "LadderChoice", "better", "choose_ladder", "describe_ladder", "fold_count", "make_folds",
           "nested_prefixes", "nested_samples", "ranking_metric", "resolve_metric", "rung_rows", "score",
           "score_output", "share_words", "stratified_order"]
