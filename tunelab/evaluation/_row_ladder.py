"""Rows as a fidelity: nested, stratified samples of a fold's training rows, and when to use them.

On a big table one fit on every row can take a large share of a lunch-break budget, and a search
of a dozen trials teaches TPE, the importance table and the forecast next to nothing.  Ranking
configurations on row subsamples and promoting the good ones to more rows is successive halving
with the training-set size as the resource (Jamieson & Talwalkar 2016, AISTATS; Li et al. 2018,
"Hyperband", JMLR 18) — the resource Klein, Falkner, Bartels, Hennig & Hutter 2017 (AISTATS)
model directly.  Here the ladder is fixed: the first fold is fitted on 1/9, then 1/3 of its
training rows, then on all of them, and every rung scores the whole held-out fold, so every value
on one rung is comparable with every other on it.

The samples are *nested* (each rung's rows hold the rows of the rung below) and *stratified* (a
class, or for regression a tenth of the target's range by quantile, keeps its share of the rows
at every rung): both come from one seeded order of the rows, of which every rung takes a prefix.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

# The sample rungs below all rows: successive halving's factor 3 (the rung pruner's), two rungs,
# so that they take the place of the two within-fold steps (see tunelab.engine's objective).
ROW_SHARES: tuple[float, ...] = (1 / 9, 1 / 3)
# The smallest rung must train on at least this many rows: fewer than this judge a family badly
# (the space builder's MIN_SAMPLE_ROWS is 2,000 for a fixed sample; a rung is compared with others
# and gets more room); common practice, no source.
MIN_RUNG_ROWS = 5_000
# The ladder is used when fewer full-data trials than this fit the budget (all workers together):
# TPE's model, the importance table and the forecast have too few points below it (the issue's
# 400,000-row table: 12 trials in 2 minutes, 3 complete).  Common practice, no source.
LADDER_BELOW_TRIALS = 40
REGRESSION_STRATA = 10  # quantile bins of a numeric target, for stratifying its samples


@dataclass(frozen=True)
class LadderChoice:
    """The sample shares in force (empty: off) and the one-line reason."""

    shares: tuple[float, ...]
    reason: str

    def __bool__(self) -> bool:
        return bool(self.shares)


def choose_ladder(mode: str, *, n_fit: int, trial_seconds: float | None, budget_seconds: float | None,
                  workers: int = 1, row_capped: bool = False) -> LadderChoice:
    """Whether a study starts its trials on row samples, and why.

    Parameters
    ----------
    mode
        ``auto`` decides by the rules below; ``off`` never uses the ladder.
    n_fit
        Training rows of one cross-validation fold.
    trial_seconds
        The space builder's estimate of a typical trial on every row (None: not known).
    budget_seconds
        The wall-clock budget (None: a budget of trials only, which a ladder does not serve).
    workers
        Processes searching at once.
    row_capped
        Whether the builder had to train some family on a fixed row sample to fit the budget.
    """
    if mode == "off":
        return LadderChoice((), "rows fidelity off (--rows-fidelity off)")
    smallest = math.floor(n_fit * ROW_SHARES[0])
    if smallest < MIN_RUNG_ROWS:
        return LadderChoice((), f"all rows in every trial: {n_fit:,} training rows per fold, too few for a "
                                f"row ladder (its first rung would train on {smallest:,} < {MIN_RUNG_ROWS:,})")
    if budget_seconds is None or not trial_seconds:
        return LadderChoice((), "all rows in every trial: no time budget to fit trials into")
    fit = workers * budget_seconds / trial_seconds
    if fit >= LADDER_BELOW_TRIALS and not row_capped:
        return LadderChoice((), f"all rows in every trial: about {fit:.0f} full-data trials fit the budget")
    why = ("some families could not fit the budget on every row" if row_capped and fit >= LADDER_BELOW_TRIALS
           else f"only about {fit:.0f} full-data trials fit the budget")
    return LadderChoice(ROW_SHARES, f"rows as a fidelity ({why}): " + describe_ladder(ROW_SHARES, n_fit))


def describe_ladder(shares: Sequence[float], n_fit: int | None = None) -> str:
    """Plain words for a ladder: ``"fold 1 on 1/9 (29,629 rows), then 1/3 (88,888), then all rows"``."""
    parts = []
    for share in shares:
        rows = f" ({rung_rows(share, n_fit):,} rows)" if n_fit else ""
        parts.append(f"{share_words(share)}{rows}")
    return ("fold 1 on " + ", then ".join([*parts, "all rows"]) + "; the other folds on all rows (a family "
            "trained on a row sample climbs to its sample)")


def share_words(share: float) -> str:
    """``1/9`` for a ninth; a share that is no unit fraction as a percentage."""
    inverse = 1 / share
    return f"1/{round(inverse)}" if abs(inverse - round(inverse)) < 1e-6 else f"{share:.0%}"


def rung_rows(share: float, n_rows: int | None) -> int:
    """How many of ``n_rows`` training rows a rung of ``share`` trains on (at least one)."""
    return max(1, math.ceil(share * (n_rows or 0) - 1e-9))


def stratified_order(rows: np.ndarray, y: np.ndarray, task: str, seed: int) -> np.ndarray:
    """``rows`` in a seeded order whose every prefix is stratified: each stratum spread evenly along it.

    A row of a stratum of ``c`` rows gets the key ``(k + u) / c`` for its place ``k`` in a random
    permutation of the stratum and one offset ``u`` per stratum; sorted by key, any prefix of ``m``
    rows holds ``m · c / n`` of the stratum, give or take one.
    """
    rows = np.asarray(rows)
    rng = np.random.default_rng(seed)
    strata = _strata(y[rows], task)
    keys = np.empty(len(rows), dtype=np.float64)
    for label in np.unique(strata):
        where = np.flatnonzero(strata == label)
        keys[where] = (rng.permutation(len(where)) + rng.random()) / len(where)
    return rows[np.lexsort((rng.random(len(rows)), keys))]


def nested_samples(rows: np.ndarray, y: np.ndarray, task: str, shares: Sequence[float], seed: int) -> list[np.ndarray]:
    """Each share's sample of ``rows``, sorted: stratified, nested, and the same for the same seed."""
    return nested_prefixes(stratified_order(rows, y, task, seed), shares)


def nested_prefixes(order: np.ndarray, shares: Sequence[float]) -> list[np.ndarray]:
    """Each share's prefix of a stratified ``order`` (see ``stratified_order``), sorted: nested samples."""
    return [np.sort(order[:rung_rows(share, len(order))]) for share in shares]


def _strata(y: np.ndarray, task: str) -> np.ndarray:
    """The label of each row's stratum: its class, or its tenth of the target by quantile."""
    if task != "regression":
        return np.asarray(y)
    values = np.asarray(y, dtype=np.float64)
    edges = np.unique(np.nanquantile(values, np.linspace(0, 1, REGRESSION_STRATA + 1)[1:-1]))
    return np.searchsorted(edges, values, side="right")


__all__ = ["LADDER_BELOW_TRIALS", "LadderChoice", "MIN_RUNG_ROWS", "ROW_SHARES", "choose_ladder",
           "describe_ladder", "nested_prefixes", "nested_samples", "rung_rows", "share_words", "stratified_order"]
