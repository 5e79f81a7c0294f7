"""Summary statistics over a dataset × method table of test scores.

All functions take *oriented* scores: a frame with one row per dataset and one column per
method, where higher is better (losses negated, see ``_scoring.orient``). Comparisons across
datasets use ranks and a per-dataset normalisation, never raw scores, because AUC, log loss
and RMSE live on different scales.

* mean rank: rank 1 is the best method on a dataset, ties share the average rank; ranks are
  averaged over the datasets every method finished (Demšar 2006, JMLR 7:1-30, section 3.2.2).
* Friedman test over those ranks, computed with ``scipy.stats.friedmanchisquare`` (Demšar 2006,
  section 3.2.2, recommends it for comparing several methods over many datasets).
* wins: datasets where a method beats the best of the library defaults.
* normalised score per dataset: (score − worst default) / (best score seen − worst default),
  so the worst default scores 0 and the best method seen scores 1; then averaged.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats


def complete_rows(oriented: pd.DataFrame) -> pd.DataFrame:
    """Datasets on which every method produced a score."""
    return oriented.dropna(axis=0, how="any")


def mean_ranks(oriented: pd.DataFrame) -> pd.Series:
    """Average rank of each method (1 = best) over the complete datasets."""
    rows = complete_rows(oriented)
    if rows.empty:
        return pd.Series(np.nan, index=oriented.columns)
    ranks = rows.rank(axis=1, ascending=False, method="average")
    return ranks.mean(axis=0)


def wins_against_best_default(oriented: pd.DataFrame, defaults: list[str]) -> pd.Series:
    """Count datasets where each method scores strictly better than every default."""
    present = [d for d in defaults if d in oriented.columns]
    if not present:
        return pd.Series(np.nan, index=oriented.columns)
    best_default = oriented[present].max(axis=1, skipna=False)
    wins = oriented.gt(best_default, axis=0) & best_default.notna().to_numpy()[:, None]
    return wins.sum(axis=0).astype(float)


def normalised_scores(oriented: pd.DataFrame, defaults: list[str]) -> pd.DataFrame:
    """Per-dataset (score − worst default) / (best seen − worst default).

    A dataset where the best score seen equals the worst default (every method tied) gives
    no information and is left out (``NaN``).
    """
    present = [d for d in defaults if d in oriented.columns]
    if not present:
        return pd.DataFrame(np.nan, index=oriented.index, columns=oriented.columns)
    worst_default = oriented[present].min(axis=1, skipna=False)
    best_seen = oriented.max(axis=1)
    span = (best_seen - worst_default).where(lambda s: s > 0)
    return oriented.sub(worst_default, axis=0).div(span, axis=0)


def friedman_p_value(oriented: pd.DataFrame) -> tuple[float, int, int]:
    """Friedman test that all methods rank alike, over the complete datasets.

    Returns
    -------
    tuple
        ``(p_value, n_datasets, n_methods)``; the p-value is ``NaN`` with fewer than three
        methods or two datasets, where the test is not defined.
    """
    rows = complete_rows(oriented)
    n, k = rows.shape
    if k < 3 or n < 2:
        return float("nan"), n, k
    statistic = stats.friedmanchisquare(*[rows[c].to_numpy() for c in rows.columns])
    return float(statistic.pvalue), n, k


def method_summary(oriented: pd.DataFrame, defaults: list[str]) -> pd.DataFrame:
    """One row per method: mean rank, wins against the best default, mean normalised score.

    All three are taken over the datasets every method scored, so that every method is
    judged on the same datasets; ``datasets scored`` shows where a method failed.
    """
    rows = complete_rows(oriented)
    summary = pd.DataFrame(
        {
            "mean rank": mean_ranks(rows),
            "wins vs best default": wins_against_best_default(rows, defaults),
            "mean normalised score": normalised_scores(rows, defaults).mean(axis=0),
            "datasets scored": oriented.notna().sum(axis=0),
        }
    )
    return summary.sort_values("mean rank")


__all__ = [
    "complete_rows",
    "friedman_p_value",
    "mean_ranks",
    "method_summary",
    "normalised_scores",
    "wins_against_best_default",
]
