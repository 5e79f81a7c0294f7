"""Boosting rounds chosen on the first fold: the sampled count is a ceiling, the held-out curve decides.

The reference throughout is a plain scikit-learn fit of the same pipeline with the chosen number
of rounds (scikit-learn documents ``staged_predict_proba`` as the prediction after each
iteration, so the staged score at ``r`` rounds is the score of an ``r``-round model).
"""

from __future__ import annotations

import json
import sys

import numpy as np
import pytest
from sklearn.ensemble import HistGradientBoostingClassifier
from threadpoolctl import threadpool_limits

from conftest import small_frame
from tunelab.data import load_dataset
from tunelab.engine import METRICS, ROUNDS_ATTR, CrossValidationObjective, settled_config
from tunelab.engine._objective import _HeldOut, _stop_on_held_out, chunk_ends, early_stop_patience, fit_in_parts
from tunelab.evaluation import score
from tunelab.models import build_pipeline
from tunelab.models._model_file import read_meta
from tunelab.space import FamilySpec, SpaceSpec, fixed

# Far more rounds than 240 rows can use, at a large step: the held-out log loss climbs early.
OVERFITTING = {"family": "hist_gb", "hist_gb.max_iter": 200, "hist_gb.learning_rate": 0.5,
               "hist_gb.max_leaf_nodes": 31, "hist_gb.min_samples_leaf": 2, "hist_gb.l2_regularization": 0.0}


@pytest.fixture
def dataset(small_csv):
    return load_dataset(small_csv, "y")


def fold_score(dataset, config, metric, fold):
    """The held-out score of fold ``fold`` (from 0) from a plain, one-call fit of the pipeline."""
    objective = CrossValidationObjective(dataset, metric, seed=0, n_folds=3)
    train, test = objective.folds[fold]
    pipeline = build_pipeline(config, dataset.roles, objective.cardinality, dataset.task, seed=0)
    with threadpool_limits(1):
        pipeline.fit(dataset.X.iloc[train], dataset.y[train])
    return score(metric, dataset.y[test], pipeline, dataset.X.iloc[test], dataset.classes)


def evaluate(dataset, config, metric):
    return CrossValidationObjective(dataset, metric, seed=0, n_folds=3)(config, lambda step, value: None)


def test_an_overfitting_boosting_trial_is_cut_back_to_fewer_rounds_with_a_better_score(dataset):
    metric = METRICS["log_loss"]
    result = evaluate(dataset, OVERFITTING, metric)
    rounds = result.extras[ROUNDS_ATTR]
    assert 1 <= rounds < 200
    assert result.fold_scores[0] < fold_score(dataset, OVERFITTING, metric, 0)


@pytest.mark.parametrize("metric", ["log_loss", "roc_auc"])
def test_every_fold_scores_like_a_plain_fit_of_the_chosen_rounds(dataset, metric):
    metric = METRICS[metric]
    result = evaluate(dataset, OVERFITTING, metric)
    settled = settled_config(OVERFITTING, result.extras[ROUNDS_ATTR])
    for fold in range(3):
        assert result.fold_scores[fold] == pytest.approx(fold_score(dataset, settled, metric, fold), rel=1e-9)


def first_fold_model(dataset, config, metric):
    """The boosting model the first fold grew (chunked, stopping on the held-out loss)."""
    objective = CrossValidationObjective(dataset, metric, seed=0, n_folds=3)
    train, test = objective.folds[0]
    pipeline = build_pipeline(config, dataset.roles, objective.cardinality, dataset.task, seed=0)
    held_out = _HeldOut(metric, dataset.y[test], dataset.classes)
    with threadpool_limits(1):
        first = fit_in_parts(pipeline, dataset.X.iloc[train], dataset.y[train], dataset.X.iloc[test], held_out,
                             lambda step, value: None)
    return pipeline, first, (train, test)


def test_the_chosen_rounds_are_one_of_twenty_evenly_spaced_checks_of_the_rounds_grown(dataset):
    pipeline, first, _ = first_fold_model(dataset, OVERFITTING, METRICS["log_loss"])
    grown = pipeline[-1].n_iter_
    assert first.rounds in chunk_ends(grown, 20)


def test_the_first_fold_stops_growing_once_the_held_out_loss_stops_improving(dataset):
    # External check: scikit-learn's own early stopping (HistGradientBoostingClassifier with
    # X_val / y_val, scoring="loss") on the same fold, in one call, stops at the same round.
    pipeline, _, (train, test) = first_fold_model(dataset, OVERFITTING, METRICS["log_loss"])
    grown = pipeline[-1].n_iter_
    assert grown < 200
    reference = build_pipeline(OVERFITTING, dataset.roles, dataset.cardinality,
                               dataset.task, seed=0)
    prep = reference[:-1]
    X_train = prep.fit_transform(dataset.X.iloc[train], dataset.y[train])
    model = reference[-1].set_params(early_stopping=True, scoring="loss", n_iter_no_change=early_stop_patience(200))
    with threadpool_limits(1):
        model.fit(X_train, dataset.y[train], X_val=prep.transform(dataset.X.iloc[test]), y_val=dataset.y[test])
    assert grown == model.n_iter_


def test_a_model_still_learning_grows_to_its_ceiling(dataset):
    slow = {**OVERFITTING, "hist_gb.learning_rate": 0.01, "hist_gb.max_iter": 30, "hist_gb.min_samples_leaf": 20}
    pipeline, _, _ = first_fold_model(dataset, slow, METRICS["log_loss"])
    assert pipeline[-1].n_iter_ == 30


def test_no_early_stop_when_the_held_out_rows_hold_a_class_the_training_rows_lack():
    # A row-capped trial can lose a rare class from its training rows; the model could not
    # encode that class in y_val, so the first fold grows to its ceiling instead of failing.
    model = HistGradientBoostingClassifier(early_stopping=False)
    held_out = _HeldOut(METRICS["log_loss"], np.array([0, 1, 2]), np.array([0, 1, 2]))
    assert _stop_on_held_out(model, 100, np.array([0, 1, 0, 1]), np.zeros((3, 1)), held_out) == {}
    assert model.early_stopping is False


def test_a_regression_trial_chooses_rounds_on_its_own_metric(tmp_path):
    frame = small_frame(240, seed=3)
    frame["y"] = frame["x1"] * 3 + frame["x2"].fillna(0)
    path = tmp_path / "reg.csv"
    frame.to_csv(path, index=False)
    data = load_dataset(path, "y")
    result = evaluate(data, OVERFITTING, METRICS["rmse"])
    settled = settled_config(OVERFITTING, result.extras[ROUNDS_ATTR])
    assert result.fold_scores[1] == pytest.approx(fold_score(data, settled, METRICS["rmse"], 1), rel=1e-9)


@pytest.mark.parametrize("config", [{"family": "random_forest", "random_forest.n_estimators": 30},
                                    {"family": "linear", "linear.C": 1.0}])
def test_other_families_record_no_rounds(dataset, config):
    assert ROUNDS_ATTR not in evaluate(dataset, config, METRICS["roc_auc"]).extras


def test_settled_config_only_touches_the_boosting_rounds():
    assert settled_config(OVERFITTING, 40) == {**OVERFITTING, "hist_gb.max_iter": 40}
    assert settled_config(OVERFITTING, None) == OVERFITTING
    assert settled_config({"family": "hist_gb"}, 40) == {"family": "hist_gb", "hist_gb.max_iter": 40}


def test_export_refits_the_rounds_the_search_chose(cli, small_csv, store_path, tmp_path):
    space = SpaceSpec(families={"hist_gb": FamilySpec({k.split(".", 1)[1]: fixed(v) for k, v in OVERFITTING.items()
                                                       if k != "family"})})
    space_file = tmp_path / "space.json"
    space_file.write_text(space.to_json(), encoding="utf-8")
    run = cli("run", str(small_csv), "--target", "y", "--trials", "1", "--metric", "log_loss", "--space",
              str(space_file), "--store", str(store_path), "--study", "rounds", "--json", "-q")
    assert run.code == 0, run.err
    best = json.loads(run.out)["best_config"]
    assert best["hist_gb.max_iter"] < 200
    model = tmp_path / "model.zip"
    assert cli("export", "rounds", "--out", str(model), "--store", str(store_path)).code == 0
    assert read_meta(model)["config"]["hist_gb.max_iter"] == best["hist_gb.max_iter"]


if __name__ == "__main__":  # pragma: no cover
    sys.exit(pytest.main([__file__, "-q"]))
