"""Specification of the numeric map probe (tunelab.probes.probe_transforms).

The probe fits the linear family's pipeline under each numeric map on a row sample and scores
held-out folds with the study's metric; the builder puts the best map first.
"""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
from sklearn import datasets as skdata
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import roc_auc_score
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from tunelab.data import prepare_frame
from tunelab.evaluation import make_folds
from tunelab.probes import probe_transforms


def _breast_cancer():
    # scikit-learn's bundled Wisconsin breast-cancer data (sklearn.datasets.load_breast_cancer)
    frame = skdata.load_breast_cancer(as_frame=True).frame.rename(columns={"target": "y"})
    frame["y"] = np.where(frame["y"] == 1, "benign", "malignant")
    return prepare_frame(frame, "y", "binary")


def test_plain_scaling_score_matches_scikit_learn_on_the_same_folds() -> None:
    # Reference: sklearn.pipeline.make_pipeline(StandardScaler(), LogisticRegression()) scored with
    # sklearn.metrics.roc_auc_score on the same three folds of the same 400-row sample.
    dataset = _breast_cancer()
    probe = probe_transforms(dataset, "roc_auc", ("standard", "quantile"), seed=3, max_rows=400, time_cap_s=60)
    assert probe is not None and probe.rows == 400 and probe.folds == 3
    rows = np.sort(np.random.default_rng(3).choice(dataset.n_rows, 400, replace=False))
    X, y = dataset.X.iloc[rows].to_numpy(), dataset.y[rows]
    reference = []
    for train, test in make_folds(y, "binary", 3, 3):
        model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=300, random_state=3))
        model.fit(X[train], y[train])
        reference.append(roc_auc_score(y[test] == model.classes_[1], model.predict_proba(X[test])[:, 1]))
    assert probe.scores["standard"] == pytest.approx(np.mean(reference), abs=1e-9)


def test_the_quantile_map_ranks_last_on_zero_inflated_pixels() -> None:
    # scikit-learn's bundled digits (sklearn.datasets.load_digits): pixel counts 0-16, mostly 0.
    # A quantile map spreads the few non-zero intensities over the normal's tail and loses their
    # scale; measured here 0.31 log loss against 0.15-0.16 for the other maps (benchmarks/README.md).
    frame = skdata.load_digits(as_frame=True).frame.rename(columns={"target": "y"})
    frame["y"] = "digit_" + frame["y"].astype(str)
    dataset = prepare_frame(frame, "y", "multiclass")
    probe = probe_transforms(dataset, "log_loss", ("log", "standard", "quantile"), time_cap_s=120)
    assert probe is not None and not probe.greater_is_better
    assert probe.ranked(("log", "standard", "quantile"))[-1] == "quantile"


def test_a_log_map_wins_where_the_target_follows_the_log_of_a_long_tail() -> None:
    rng = np.random.default_rng(0)
    # log(x) uniform on [1, 9]: a log map makes the target linear again; a map to the normal's
    # quantiles would bend the uniform log into a normal shape and lose the straight line.
    x = np.exp(rng.uniform(1.0, 9.0, size=(1500, 3)))
    frame = pd.DataFrame(x, columns=["a", "b", "c"])
    frame["y"] = 2.0 * np.log(x[:, 0]) - np.log(x[:, 1]) + 0.1 * rng.normal(size=1500)
    dataset = prepare_frame(frame, "y", "regression")
    probe = probe_transforms(dataset, "rmse", ("standard", "quantile", "log"), time_cap_s=60)
    assert probe is not None
    assert probe.ranked(("standard", "quantile", "log"))[0] == "log"
    assert "linear probe on 1000 rows, 3 folds (rmse): log" in probe.describe()


def test_no_probe_without_numeric_columns_or_when_time_runs_out() -> None:
    rng = np.random.default_rng(1)
    cats = pd.DataFrame({"colour": rng.choice(["red", "green", "blue"], 300),
                         "y": rng.choice(["yes", "no"], 300)})
    assert probe_transforms(prepare_frame(cats, "y", "binary"), None, ("standard", "quantile")) is None
    ticks = itertools.count(step=10.0)  # every clock reading ten seconds later than the last
    assert probe_transforms(_breast_cancer(), None, ("standard", "quantile"), time_cap_s=15.0,
                            clock=lambda: next(ticks)) is None


def test_unscored_maps_keep_their_place_after_the_scored_ones() -> None:
    probe = probe_transforms(_breast_cancer(), None, ("standard", "quantile"), time_cap_s=60)
    assert probe is not None
    assert probe.ranked(("standard", "log", "quantile"))[-1] == "log"
