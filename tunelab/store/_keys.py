"""The keys under which tunelab records facts on a trial (attributes in optuna's trial tables).

One module owns them, so the engine that writes a fact and the readers that turn trials into
plain records (``tunelab.store.TrialRecord``) cannot drift apart.
"""

from __future__ import annotations

# Ownership and provenance: written when a trial is created or claimed.
LAUNCH = "tl_launch"  # the launch (process) that ran the trial
PHASE = "tl_phase"  # the search-space phase the trial was sampled in
STATE = "tl_state"  # "interrupted" or "failed": what optuna's FAIL state stood for
RETRY_OF = "tl_retry_of"  # number of the interrupted trial whose config this one runs again
WARM_START = "tl_warm_start"  # queued before the search: a prior, a learned or a portfolio config
LEARNED_FROM = "tl_learned_from"  # the earlier study a learned config came from
PORTFOLIO_MEMBER = "tl_portfolio_member"  # the shipped portfolio member a config came from (WARM_START = "portfolio")

# Results: written when the trial ends.
FOLD_SCORES = "fold_scores"  # the metric on each fold finished, in fold order
FOLD_STD = "fold_std"
ROUNDS = "boosting_rounds"  # the rounds a boosting trial's first fold chose (its ceiling was sampled)
CPU_SECONDS = "cpu_seconds"
SECONDS = "seconds"  # wall seconds of a pruned trial
FIT_SECONDS = "fit_seconds"
FIDELITY = "fidelity"  # how far the trial got, in words
ERROR = "error"  # a failed trial's error text

# A study's settings (the study record's ``settings``), beside pruning, jobs and folds.
ROW_SHARES = "row_shares"  # rows as a fidelity: the first fold's sample shares before all rows, if any

# Values of STATE.
INTERRUPTED = "interrupted"
FAILED = "failed"

__all__ = [
    "CPU_SECONDS", "ERROR", "FAILED", "FIDELITY", "FIT_SECONDS", "FOLD_SCORES", "FOLD_STD", "INTERRUPTED",
    "LAUNCH", "LEARNED_FROM", "PHASE", "PORTFOLIO_MEMBER", "RETRY_OF", "ROUNDS", "ROW_SHARES", "SECONDS", "STATE",
    "WARM_START",
]
