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

Several seeds are pooled first (:func:`pool_seeds`): a method's score on a dataset is its mean
over the seeds every method ran there, and missing if it failed on any of them. Two comparisons
read the seeds themselves: :func:`head_to_head` counts datasets where one method's pooled score
beats another's, and :func:`gaps_to_best_default` gives, per dataset, the mean per-seed
difference between a method and the best default with its standard error (the seed spread).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats


def standard_error(values: object) -> float:
    """The seed spread of a mean: ``std(ddof=1) / sqrt(n)``, ``NaN`` below two values (no spread to judge by)."""
    array = np.asarray(values, dtype=float)
    return float(array.std(ddof=1) / np.sqrt(len(array))) if len(array) > 1 else float("nan")


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


def never_ran(long: pd.DataFrame) -> pd.DataFrame:
    """Dataset × method: true where a method has no run at all on a dataset (not even a failed one)."""
    ran = long.assign(ran=True).pivot_table(index="dataset", columns="method", values="ran", aggfunc="any")
    return ran.isna().reindex(index=list(dict.fromkeys(long["dataset"])),
                              columns=list(dict.fromkeys(long["method"])))


def per_seed_table(long: pd.DataFrame) -> pd.DataFrame:
    """(dataset, seed) × method table of oriented scores, kept to the seeds every method ran.

    ``long`` has one row per run: ``dataset``, ``seed``, ``method`` and ``score`` (oriented,
    ``NaN`` for a failed run). A (dataset, seed) that a method run on that dataset has no row
    for is left out, so that every pooled mean is over the same seeds; a failed run stays as
    ``NaN``, and so does a method never run on the dataset (see :func:`never_ran`).
    """
    keys = ["dataset", "seed", "method"]
    if long.duplicated(keys).any():
        raise ValueError(f"more than one run of {long[long.duplicated(keys)][keys].iloc[0].tolist()}")
    table = long.set_index(keys)["score"].unstack("method")
    ran = long.assign(ran=True).set_index(keys)["ran"].unstack("method").notna()
    order = list(dict.fromkeys(long["dataset"]))
    absent = never_ran(long).reindex(index=ran.index.get_level_values("dataset"), columns=ran.columns)
    table = table[(ran.to_numpy() | absent.to_numpy()).all(axis=1)]
    return table.reindex(columns=list(dict.fromkeys(long["method"]))).loc[
        [d for d in order if d in table.index.get_level_values("dataset")]
    ]


def pool_seeds(per_seed: pd.DataFrame) -> pd.DataFrame:
    """Dataset × method table of mean oriented scores over the seeds; ``NaN`` if any seed failed."""
    by_dataset = per_seed.groupby(level="dataset", sort=False)
    return by_dataset.mean().mask(by_dataset.agg(lambda s: s.isna().any()).astype(bool))


def head_to_head(pooled: pd.DataFrame, method: str, other: str) -> tuple[int, int, int]:
    """``(wins, ties, losses)`` of ``method`` against ``other`` over the datasets either scored.

    A method that failed there (``NaN``) loses to one that scored; two failures are left out.
    """
    pair = pooled[[method, other]].dropna(how="all")
    mine, theirs = pair[method], pair[other]
    wins = int(((mine > theirs) | (mine.notna() & theirs.isna())).sum())
    ties = int((mine == theirs).sum())
    return wins, ties, len(pair) - wins - ties


def gaps_to_best_default(per_seed: pd.DataFrame, method: str, defaults: list[str]) -> pd.DataFrame:
    """Per dataset: the best default, ``method`` minus it (mean of the per-seed differences) and its spread.

    The best default is the one with the best pooled score. ``spread`` is the standard error
    of the per-seed differences, ``std(ddof=1) / sqrt(seeds)`` (``NaN`` with one seed), and
    ``below`` says the method's mean is below the default's by more than that spread (with
    one seed: below at all, there being no spread to judge by). A method that failed on a
    seed where a default scored is ``below`` with no gap (``failed``).
    """
    rows = []
    present = [d for d in defaults if d in per_seed.columns]
    for dataset, block in per_seed.groupby(level="dataset", sort=False):
        pooled = block.mean()
        candidates = [d for d in present if block[d].notna().all()]
        if method not in block.columns or not candidates:
            continue
        best = max(candidates, key=lambda d: pooled[d])
        row = {"dataset": dataset, "best_default": best, "seeds": len(block)}
        if block[method].isna().any():
            rows.append({**row, "gap": np.nan, "spread": np.nan, "below": True, "failed": True})
            continue
        diff = (block[method] - block[best]).to_numpy(dtype=float)
        gap = float(diff.mean())
        spread = standard_error(diff)
        # isclose: with two seeds and one tie, |gap| equals the spread up to rounding.
        beyond = np.isnan(spread) or (-gap > spread and not np.isclose(-gap, spread, rtol=1e-9, atol=0.0))
        rows.append({**row, "gap": gap, "spread": spread, "below": bool(gap < 0 and beyond), "failed": False})
    columns = ["best_default", "gap", "spread", "seeds", "below", "failed"]
    return pd.DataFrame(rows, columns=["dataset", *columns]).set_index("dataset")


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
    "gaps_to_best_default",
    "head_to_head",
    "mean_ranks",
    "method_summary",
    "never_ran",
    "normalised_scores",
    "per_seed_table",
    "pool_seeds",
    "wins_against_best_default",
]
