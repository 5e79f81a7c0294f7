"""A family too slow for the budget on every row trains on a stratified row sample, in search and export."""

from __future__ import annotations

import numpy as np

from tunelab.data import load_dataset
from tunelab.engine import METRICS, CrossValidationObjective
from tunelab.models import capped_rows, row_cap


def test_the_sample_keeps_the_class_shares_and_is_the_same_for_the_same_seed():
    y = np.array([0] * 900 + [1] * 100)
    rows = np.arange(1000)
    picked = capped_rows(rows, y, "binary", 200, seed=3)
    assert len(picked) == 200 and np.mean(y[picked]) == 0.1
    assert np.array_equal(picked, capped_rows(rows, y, "binary", 200, seed=3))
    assert capped_rows(rows, y, "binary", None, seed=3) is rows
    assert capped_rows(rows, y, "binary", 5000, seed=3) is rows


def test_only_the_chosen_familys_cap_applies():
    assert row_cap({"family": "hist_gb", "hist_gb.rows": 3000, "random_forest.rows": 10}) == 3000
    assert row_cap({"family": "linear", "hist_gb.rows": 3000}) is None


def test_cross_validation_trains_each_fold_on_the_sample_and_says_so(small_csv):
    dataset = load_dataset(small_csv, "y")
    config = {"family": "hist_gb", "hist_gb.max_iter": 20, "hist_gb.rows": 60}
    result = CrossValidationObjective(dataset, METRICS["roc_auc"], seed=0, n_folds=3)(config, lambda s, v: None)
    assert "60 training rows per fold" in result.extras["fidelity"]
    assert 0.5 < result.value <= 1.0
