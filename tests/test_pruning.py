"""Early pruning: reports within the first fold, the step scale, the rung pruner, and crash safety."""

from __future__ import annotations

import math
import re
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import optuna
import pytest
from threadpoolctl import threadpool_limits

from tunelab.data import load_dataset
from tunelab.engine import (
    METRICS,
    ROUNDS_ATTR,
    Budget,
    CrossValidationObjective,
    InProcessRunner,
    Limits,
    PruneSignal,
    SystemClock,
    make_pruner,
    settled_config,
)
from tunelab.engine._objective import _epoch_reporter
from tunelab.engine._pruning import MARGIN_SE, MedianPruner, RungPruner, choose_pruning, fold_noise
from tunelab.errors import InputError
from tunelab.evaluation import score
from tunelab.models import build_pipeline
from tunelab.ops import list_studies, run_objective_study
from tunelab.space import FamilySpec, ParamSpec, SpaceSpec

TUNELAB = Path(sys.executable).with_name("tunelab")


@pytest.fixture
def dataset(small_csv):
    return load_dataset(small_csv, "y")


def collect():
    seen: list[tuple[int, float]] = []
    return seen, lambda step, value: seen.append((step, value))


def first_fold_score(dataset, config, metric):
    """The first fold's held-out score from a plain, one-call fit of the same pipeline."""
    objective = CrossValidationObjective(dataset, metric, seed=0, n_folds=3)
    train, test = objective.folds[0]
    pipeline = build_pipeline(config, dataset.roles, objective.cardinality, dataset.task, seed=0)
    with threadpool_limits(1):  # as trials run: one thread
        pipeline.fit(dataset.X.iloc[train], dataset.y[train])
    return score(metric, dataset.y[test], pipeline, dataset.X.iloc[test], dataset.classes)


# ------------------------------------------------------------------ the warm-up before forked trials

def test_a_warm_up_in_the_parent_leaves_every_trial_score_unchanged(dataset):
    objective = CrossValidationObjective(dataset, METRICS["roc_auc"], seed=0, n_folds=3)
    configs = [{"family": "hist_gb", "hist_gb.max_iter": 40}, {"family": "linear", "linear.C": 0.5},
               {"family": "random_forest", "random_forest.n_estimators": 30}]
    before = [objective(c, lambda step, value: None).fold_scores for c in configs]
    objective.warm_up(configs)
    assert [objective(c, lambda step, value: None).fold_scores for c in configs] == before


def test_a_warm_up_skips_a_config_that_cannot_be_built(dataset):
    objective = CrossValidationObjective(dataset, METRICS["roc_auc"], seed=0, n_folds=3)
    objective.warm_up([{"family": "no_such_family"}, {"family": "linear"}])  # no error: the trial reports it


# ------------------------------------------------------------------ reports within the first fold

def test_boosting_reports_twice_within_the_first_fold_then_after_each_fold_but_the_last(dataset):
    config = {"family": "hist_gb", "hist_gb.max_iter": 40, "hist_gb.max_features": 0.5}
    seen, report = collect()
    result = CrossValidationObjective(dataset, METRICS["roc_auc"], seed=0, n_folds=3)(config, report)
    assert [step for step, _ in seen] == [1, 2, 3, 6]
    assert seen[2][1] == result.fold_scores[0]
    assert seen[3][1] == pytest.approx(np.mean(result.fold_scores[:2]))


@pytest.mark.parametrize("family, size", [("hist_gb", "max_iter"), ("random_forest", "n_estimators"),
                                          ("extra_trees", "n_estimators")])
def test_ensembles_grown_in_chunks_score_like_one_plain_fit_of_the_same_size(dataset, family, size):
    # External check: scikit-learn documents warm_start as adding rounds (boosting) or trees
    # (forests) to the existing fit, keeping the first call's seeds; the reference is one plain
    # scikit-learn fit of the same pipeline.
    config = {"family": family, f"{family}.{size}": 40, f"{family}.max_features": 0.5}
    for metric in (METRICS["roc_auc"], METRICS["log_loss"]):
        seen, report = collect()
        result = CrossValidationObjective(dataset, metric, seed=0, n_folds=3)(config, report)
        assert [step for step, _ in seen] == [1, 2, 3, 6]
        # Boosting is scored at the rounds its first fold chose (tests/test_boosting_rounds.py).
        settled = settled_config(config, result.extras.get(ROUNDS_ATTR))
        assert result.fold_scores[0] == pytest.approx(first_fold_score(dataset, settled, metric), rel=1e-12)


def test_a_prune_signal_at_a_chunk_stops_the_trial_within_the_first_fold(dataset):
    objective = CrossValidationObjective(dataset, METRICS["roc_auc"], seed=0, n_folds=3)
    seen: list[int] = []

    def report(step, value):
        seen.append(step)
        if step == 1:
            raise PruneSignal()

    with pytest.raises(PruneSignal):
        objective({"family": "hist_gb", "hist_gb.max_iter": 60}, report)
    assert seen == [1]


def test_the_runner_records_a_trial_pruned_at_a_chunk_with_the_step_it_reached(dataset):
    objective = CrossValidationObjective(dataset, METRICS["roc_auc"], seed=0, n_folds=3)
    runner = InProcessRunner(objective)
    outcome = runner.run({"family": "hist_gb", "hist_gb.max_iter": 60}, lambda step, value: step == 2,
                         Limits(None), SystemClock())
    assert outcome.kind == "pruned"
    assert outcome.last_step == 2
    assert objective.describe_step(2) == "2/3 of fold 1"


def test_mlp_reports_the_held_out_metric_at_a_third_and_two_thirds_of_its_epochs(dataset):
    # The values reported are the study's metric on the first fold's held-out rows, not the MLP's
    # inner validation loss: at fold 1 the report is exactly the fold's score from a one-call fit.
    config = {"family": "mlp", "mlp.max_epochs": 6, "mlp.patience": 50, "mlp.hidden_width": 16}
    metric = METRICS["roc_auc"]
    objective = CrossValidationObjective(dataset, metric, seed=0, n_folds=3)
    seen, report = collect()
    result = objective(config, report)
    assert [step for step, _ in seen] == [1, 2, 3, 6]
    for _, value in seen[:3]:
        assert 0.0 <= value <= 1.0
    assert seen[2][1] == result.fold_scores[0] == first_fold_score(dataset, config, metric)


def test_under_accuracy_the_rungs_rank_by_the_brier_score_and_the_folds_keep_accuracy(dataset):
    # Accuracy on part of a fold is a few right-or-wrong rows; the rungs see the Brier score of the
    # same predictions instead (negated: higher is better, as for accuracy).  Checked against
    # scikit-learn's sklearn.metrics.brier_score_loss: for two classes our score sums the squared
    # error over both probability columns, twice the binary Brier loss.
    from sklearn.metrics import accuracy_score, brier_score_loss

    config = {"family": "linear", "linear.C": 1.0}
    objective = CrossValidationObjective(dataset, METRICS["accuracy"], seed=0, n_folds=3)
    seen, report = collect()
    result = objective(config, report)
    train, test = objective.folds[0]
    pipeline = build_pipeline(config, dataset.roles, objective.cardinality, dataset.task, seed=0)
    with threadpool_limits(1):
        pipeline.fit(dataset.X.iloc[train], dataset.y[train])
    positive = pipeline.classes_[1]
    proba = pipeline.predict_proba(dataset.X.iloc[test])[:, 1]
    expected = -2 * brier_score_loss(dataset.y[test] == positive, proba)
    assert dict(seen)[3] == pytest.approx(expected, rel=1e-9)
    predicted = pipeline.predict(dataset.X.iloc[test])
    assert result.fold_scores[0] == pytest.approx(accuracy_score(dataset.y[test], predicted))
    assert result.value == pytest.approx(sum(result.fold_scores) / 3)


def test_a_pruned_trial_keeps_the_metric_on_the_folds_it_finished_not_the_ranking_score(dataset):
    objective = CrossValidationObjective(dataset, METRICS["accuracy"], seed=0, n_folds=3)
    runner = InProcessRunner(objective)
    outcome = runner.run({"family": "linear", "linear.C": 1.0}, lambda step, value: step == 6, Limits(None),
                         SystemClock())
    assert outcome.kind == "pruned" and outcome.last_value is not None and outcome.last_value < 0  # Brier side
    assert outcome.fold_scores is not None and len(outcome.fold_scores) == 2
    assert all(0.0 <= v <= 1.0 for v in outcome.fold_scores)  # accuracy side


def test_mlp_checkpoints_sit_at_thirds_of_its_planned_epochs_not_of_max_epochs():
    # Early stopping ends most runs near four patiences; thirds of max_epochs would come too late.
    class HeldOut:
        def rank(self, model, X):
            return 0.5

    model = SimpleNamespace(max_epochs=200, patience=5, module_=object())
    seen, report = collect()
    on_epoch = _epoch_reporter(model, None, HeldOut(), report)
    for epoch in range(1, 201):
        on_epoch(epoch, 0.1)
    assert seen == [(1, 0.5), (2, 0.5)]
    seen.clear()
    for epoch in range(1, 8):
        on_epoch(epoch, 0.1 if epoch != 7 else math.nan)  # diverged at the checkpoint epoch 7
    assert seen == []


def test_a_prune_signal_in_an_mlp_epoch_stops_the_trial(dataset):
    objective = CrossValidationObjective(dataset, METRICS["accuracy"], seed=0, n_folds=3)
    seen: list[int] = []

    def report(step, value):
        seen.append(step)
        raise PruneSignal()

    with pytest.raises(PruneSignal):
        objective({"family": "mlp", "mlp.max_epochs": 30, "mlp.patience": 50, "mlp.hidden_width": 16}, report)
    assert seen == [1]


def test_a_model_fitted_in_one_call_first_reports_when_the_first_fold_is_done(dataset):
    config = {"family": "linear", "linear.C": 1.0}
    seen, report = collect()
    CrossValidationObjective(dataset, METRICS["roc_auc"], seed=0, n_folds=5)(config, report)
    assert [step for step, _ in seen] == [3, 6, 9, 12]


# ------------------------------------------------------------------ the pruners

def ask_and_report(study, reports, finish=True, family="hist_gb"):
    """One trial of ``family`` reporting ``{step: value}``; returns whether the pruner stopped it."""
    study.enqueue_trial({"family": family})
    trial = study.ask()
    trial.suggest_categorical("family", ["hist_gb", "random_forest", "linear"])
    for step, value in sorted(reports.items()):
        trial.report(value, step)
        if trial.should_prune():
            study.tell(trial, state=optuna.trial.TrialState.PRUNED)
            return True
    if finish:
        study.tell(trial, list(reports.values())[-1])
    return False


def rung_study(**kwargs):
    return optuna.create_study(direction="maximize", pruner=RungPruner(**kwargs))


def test_a_rung_compares_a_partly_fitted_model_only_with_values_at_the_same_step():
    study = rung_study(min_peers=3)
    forest = "random_forest"
    ask_and_report(study, {1: 0.60, 3: 0.80}, family=forest)   # a third of the trees, then the fold
    ask_and_report(study, {1: 0.70, 3: 0.82}, family=forest)
    ask_and_report(study, {3: 0.95}, family="linear")  # first report after a whole fold
    ask_and_report(study, {3: 0.96}, family="linear")
    # 0.72 is the best of the three values at step 1, though worse than every value at step 3.
    assert not ask_and_report(study, {1: 0.72}, finish=False, family=forest)
    assert ask_and_report(study, {1: 0.65}, family=forest)


@pytest.mark.parametrize("pruner", [RungPruner(min_peers=2), MedianPruner(startup=1, min_peers=1)])
def test_boosting_is_judged_from_a_full_fold_on_not_at_a_third_of_its_rounds(pruner):
    # A third of the rounds shows how fast a configuration learns, not how well it ends: the
    # learning rate sets the pace, and slow learners that end best would be pruned there.
    study = optuna.create_study(direction="maximize", pruner=pruner)
    for value in (0.80, 0.82, 0.84):
        ask_and_report(study, {1: value, 2: value, 3: value})
    assert not ask_and_report(study, {1: 0.50, 2: 0.55, 3: 0.90})  # slow start, best fold
    assert ask_and_report(study, {1: 0.50, 2: 0.55, 3: 0.60})  # still behind after the fold


def test_below_one_fold_a_partly_fitted_model_meets_only_its_own_family():
    study = rung_study(min_peers=2)
    ask_and_report(study, {1: 0.95}, family="random_forest")  # a third of the trees: nearly there
    ask_and_report(study, {1: 0.96}, family="random_forest")
    ask_and_report(study, {1: 0.60}, family="hist_gb")         # a third of the boosting rounds
    assert not ask_and_report(study, {1: 0.62, 3: 0.70}, finish=False)
    # From one fold on, all families are compared: 0.70 is worse than the best third.
    for value in (0.97, 0.98):
        ask_and_report(study, {3: value}, family="random_forest")
    assert ask_and_report(study, {3: 0.70})


def test_the_median_rule_compares_with_finished_trials_at_the_same_step():
    study = optuna.create_study(direction="minimize", pruner=MedianPruner(startup=3, min_peers=3))
    forest = "random_forest"
    for value in (0.3, 0.4, 0.5):
        ask_and_report(study, {1: value, 3: value, 6: value}, family=forest)
    assert not ask_and_report(study, {1: 0.35, 3: 0.35, 6: 0.35}, family=forest)
    assert ask_and_report(study, {1: 0.9}, family=forest)
    assert not ask_and_report(study, {1: 0.9}, family="linear")  # no finished linear model at step 1
    # The first boosting trial at the first fold is its family's best there: it goes on, once.
    assert not ask_and_report(study, {3: 0.9, 4: 0.9}, finish=False, family="hist_gb")
    assert ask_and_report(study, {3: 0.85}, family="hist_gb")  # better, but boosting went past the fold


def test_a_rung_told_to_keep_half_keeps_the_better_half_and_waits_for_enough_peers():
    study = rung_study(min_peers=4, keep=0.5)
    assert not ask_and_report(study, {3: 0.5})
    assert not ask_and_report(study, {3: 0.4})
    assert not ask_and_report(study, {3: 0.3})   # three values: too few to rank
    assert ask_and_report(study, {3: 0.35})      # 4 values: the best 2 (0.5, 0.4) go on
    assert not ask_and_report(study, {3: 0.45})  # 5 values: the best 3 go on
    assert not ask_and_report(study, {3: 0.9})


def test_a_default_rung_keeps_the_textbook_third():
    study = rung_study(min_peers=1)
    for value in (0.5, 0.4):
        ask_and_report(study, {3: value})
    assert ask_and_report(study, {3: 0.45})      # 3 values: only the best goes on


def test_steps_between_rungs_never_prune_and_nan_always_does():
    study = rung_study(min_peers=1)
    for value in (0.9, 0.8, 0.7):
        ask_and_report(study, {2: value, 4: value})
    assert not ask_and_report(study, {2: 0.1, 4: 0.1})  # steps 2 and 4 are not rungs
    assert ask_and_report(study, {1: math.nan})


def test_the_default_rungs_are_a_third_of_the_first_fold_then_every_fold_but_the_last():
    assert [RungPruner().rung_of(s) for s in (1, 2, 3, 4, 6, 9, 12, 15)] == [0, None, 1, None, 2, 3, 4, None]


def test_from_one_fold_on_a_trial_must_also_be_among_the_best_third_of_its_own_family():
    # The weak linear models pad the rung all families share; within boosting the usual third
    # goes on, so the family the search settles on is halved as the textbook rule intends.
    study = rung_study(min_peers=2)
    for value in (0.60, 0.61, 0.62, 0.63):
        ask_and_report(study, {3: value}, family="linear")
    ask_and_report(study, {3: 0.90})
    ask_and_report(study, {3: 0.91})
    # 0.89 is the third best of seven values at step 3, but the worst of three boosting values.
    assert ask_and_report(study, {3: 0.89})
    assert not ask_and_report(study, {3: 0.92})
    # Judged across families only, the same trial would go on.
    across = rung_study(min_peers=2, within_family=False)
    for value in (0.60, 0.61, 0.62, 0.63):
        ask_and_report(across, {3: value}, family="linear")
    ask_and_report(across, {3: 0.90})
    ask_and_report(across, {3: 0.91})
    assert not ask_and_report(across, {3: 0.89})


def test_a_trial_of_a_weak_family_is_still_stopped_by_the_rung_all_families_share():
    study = rung_study(min_peers=2, second_fold=False)
    for value in (0.90, 0.91, 0.92):
        ask_and_report(study, {3: value})
    # The best linear model so far, but far outside the best third of all values at step 3.
    assert ask_and_report(study, {3: 0.60}, family="linear")


def test_a_weak_familys_best_at_the_first_fold_goes_on_to_a_second_once():
    # The family decisions drop a family only on two folds; without this a weak family's trials
    # all stop at the first fold and it can never be dropped.
    study = rung_study(min_peers=2)
    for value in (0.90, 0.91, 0.92):
        ask_and_report(study, {3: value, 6: value})
    assert not ask_and_report(study, {3: 0.60}, finish=False, family="linear")  # its first: one more fold
    assert ask_and_report(study, {3: 0.55}, family="linear")  # not its family's best at the first fold
    assert ask_and_report(study, {3: 0.60, 6: 0.61}, family="linear")  # judged as usual at the second
    assert ask_and_report(study, {3: 0.65}, family="linear")  # its best now, but linear has had its second fold


def test_hyperband_brackets_start_pruning_at_later_rungs():
    study = rung_study(min_peers=1, brackets=3)
    for number in range(6):  # trials 0-5: two per bracket, values increasing
        ask_and_report(study, {1: 0.5 + number / 100, 3: 0.5 + number / 100})
    # Trial 6 (bracket 0) is judged at step 1, trial 7 (bracket 1) is not; both are the worst.
    assert ask_and_report(study, {1: 0.1, 3: 0.1})
    trial = study.ask()
    trial.report(0.1, 1)
    assert not trial.should_prune()
    trial.report(0.1, 3)
    assert trial.should_prune()


def finished_with_folds(study, fold_scores, family="hist_gb"):
    """A finished trial with these per-fold scores, reporting their running means at every fold but the last."""
    study.enqueue_trial({"family": family})
    trial = study.ask()
    trial.suggest_categorical("family", ["hist_gb", "random_forest", "linear"])
    for fold in range(1, len(fold_scores)):
        trial.report(float(np.mean(fold_scores[:fold])), 3 * fold)
    trial.set_user_attr("fold_scores", list(fold_scores))
    study.tell(trial, float(np.mean(fold_scores)))


def test_fold_noise_is_the_residual_of_trial_and_fold_effects_as_a_two_way_anova_finds_it():
    # External check: statsmodels' ols + anova_lm, two-way additive model without replication
    # (score ~ C(trial) + C(fold)); the noise is the square root of the residual mean square.
    import pandas as pd
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm

    rng = np.random.default_rng(0)
    scores = 0.8 + rng.normal(0, 0.03, (6, 1)) + rng.normal(0, 0.05, (1, 5)) + rng.normal(0, 0.01, (6, 5))
    study = optuna.create_study(direction="maximize")
    for row in scores:
        finished_with_folds(study, row)
    # Only folds 1-4 are reported (a trial's last fold never is): the noise is that of the reported folds.
    long = pd.DataFrame([(t, f, scores[t, f]) for t in range(6) for f in range(4)], columns=["trial", "fold", "score"])
    table = anova_lm(smf.ols("score ~ C(trial) + C(fold)", data=long).fit())
    assert fold_noise(study) == pytest.approx(math.sqrt(table.loc["Residual", "mean_sq"]), rel=1e-9)


def test_fold_noise_is_zero_when_folds_shift_every_trial_alike_and_unknown_before_two_finish():
    study = optuna.create_study(direction="maximize")
    assert fold_noise(study) is None
    hard_and_easy_folds = np.array([0.0, -0.10, 0.05, -0.02, 0.07])
    finished_with_folds(study, 0.80 + hard_and_easy_folds)
    assert fold_noise(study) is None
    finished_with_folds(study, 0.70 + hard_and_easy_folds)
    assert fold_noise(study) == pytest.approx(0.0, abs=1e-12)


def test_a_trial_behind_the_kept_share_by_less_than_chance_goes_on_and_further_behind_is_pruned():

    # Two finished trials that disagree fold by fold (+-0.02 each way): a residual spread of
    # sqrt(8 * 0.02**2 / 4) = 0.0283, so after one fold two running means differ by chance with
    # a standard deviation of 0.0283 * sqrt(2) = 0.04.
    wobble = np.array([0.02, -0.02, 0.02, -0.02, 0.0, 0.0])  # six folds: the first five are reported

    def two_finished(**kwargs):
        study = rung_study(min_peers=2, **kwargs)
        finished_with_folds(study, 0.80 + wobble)  # 0.82 after one fold: the best third of three
        finished_with_folds(study, 0.80 - wobble)
        return study

    assert fold_noise(two_finished()) == pytest.approx(0.02 * math.sqrt(2))
    chance_after_one_fold = 0.04
    best_third_at_fold_one = 0.82
    margin = 0.5 * chance_after_one_fold
    assert not ask_and_report(two_finished(margin_se=0.5), {3: best_third_at_fold_one - 0.9 * margin})
    assert ask_and_report(two_finished(margin_se=0.5), {3: best_third_at_fold_one - 1.1 * margin})
    assert ask_and_report(two_finished(margin_se=1.0), {3: best_third_at_fold_one - 2.2 * margin})
    # Without a margin (the default) the textbook rule prunes the first one too.
    assert MARGIN_SE == 0
    assert ask_and_report(two_finished(), {3: best_third_at_fold_one - 0.9 * margin})


def test_chance_is_measured_in_the_units_the_rungs_rank_by_not_in_the_metric_on_the_folds():
    # Under accuracy the rungs compare Brier scores while fold_scores keep accuracy: a margin in
    # accuracy's units would be the wrong size for Brier differences.
    study = optuna.create_study(direction="maximize")
    for sign in (1.0, -1.0):  # two trials that disagree fold by fold, as in the test above
        brier = -0.20 + sign * np.array([0.02, -0.02, 0.02, -0.02, 0.0])  # reported folds 1-5 of six
        trial = study.ask()
        for fold in range(1, 6):
            trial.report(float(np.mean(brier[:fold])), 3 * fold)
        trial.set_user_attr("fold_scores", [0.5, 0.9, 0.1, 0.7, 0.3, 0.6])  # accuracy, far noisier
        study.tell(trial, 0.5)
    assert fold_noise(study) == pytest.approx(0.02 * math.sqrt(2))


def test_without_two_finished_trials_to_measure_chance_a_rung_prunes_by_rank_alone():
    study = rung_study(min_peers=2)
    ask_and_report(study, {3: 0.90})  # finished, but without fold scores
    assert ask_and_report(study, {3: 0.899})


def test_auto_pruning_follows_the_expected_trial_count():
    assert choose_pruning(None) == "halving"
    assert choose_pruning(3) == "off"
    assert choose_pruning(4) == choose_pruning(12) == "halving"
    assert choose_pruning(200) == "halving"
    assert isinstance(make_pruner("auto", max_steps=5, expected_trials=3), optuna.pruners.NopPruner)
    assert isinstance(make_pruner("median", max_steps=5), MedianPruner)
    assert isinstance(make_pruner("halving", max_steps=5), RungPruner)
    assert make_pruner("hyperband", max_steps=5).brackets == 3


def test_an_unknown_pruning_choice_is_refused_with_a_hint():
    with pytest.raises(InputError, match="unknown pruning 'sometimes'"):
        make_pruner("sometimes", max_steps=5)


# ------------------------------------------------------------------ in a search

BOOSTING_ONLY = SpaceSpec(families={"hist_gb": FamilySpec({
    "max_iter": ParamSpec("int", low=10, high=60),
    "learning_rate": ParamSpec("float", low=0.001, high=0.5, log=True),
    "max_leaf_nodes": ParamSpec("int", low=4, high=32),
})})


def test_pruned_trials_keep_how_far_they_got_and_the_time_they_used_and_status_counts_them(dataset, store_path):
    objective = CrossValidationObjective(dataset, METRICS["roc_auc"], seed=0, n_folds=3)
    result = run_objective_study("prune", objective, BOOSTING_ONLY, Budget(trials=24), store=str(store_path),
                                 direction="maximize", pruning="halving")
    pruned = result.summary.counts["pruned"]
    assert pruned > 0
    study = optuna.load_study(study_name="prune", storage=f"sqlite:///{store_path}")
    for trial in study.get_trials(states=(optuna.trial.TrialState.PRUNED,)):
        # boosting is judged from a full fold on: at one fold or two of three
        assert re.fullmatch(r"step (3 \(1|6 \(2) of 3 folds\)", trial.user_attrs["fidelity"])
        assert trial.user_attrs["seconds"] > 0
    [line] = list_studies(str(store_path))
    assert line.counts["pruned"] == pruned


# ------------------------------------------------------------------ crash safety with pruning on

def store_counts(store: Path) -> dict[str, int]:
    try:
        conn = sqlite3.connect(f"file:{store}?mode=ro", uri=True)
        try:
            return dict(conn.execute("select state, count(*) from trials group by state").fetchall())
        finally:
            conn.close()
    except sqlite3.Error:
        return {}


@pytest.mark.slow
def test_a_killed_run_with_pruning_on_resumes_cleanly(tmp_path, small_csv):
    store = tmp_path / "kill.db"
    command = [str(TUNELAB), "run", str(small_csv), "--target", "y", "--budget", "60s", "--store", str(store),
               "--study", "kill", "--pruning", "halving", "-q"]
    proc = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    deadline = time.monotonic() + 120
    counts: dict[str, int] = {}
    while time.monotonic() < deadline and proc.poll() is None:
        time.sleep(0.1)
        counts = store_counts(store)
        if counts.get("PRUNED", 0) >= 1 and counts.get("COMPLETE", 0) >= 3:
            break
    assert proc.poll() is None, "the run ended before it could be killed"
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=30)
    assert counts.get("PRUNED", 0) >= 1

    resumed = subprocess.run([str(TUNELAB), "resume", "kill", "--store", str(store), "-q"],
                             capture_output=True, text=True, timeout=180)
    assert resumed.returncode == 0, resumed.stderr
    conn = sqlite3.connect(store)
    try:
        assert conn.execute("pragma integrity_check").fetchone() == ("ok",)
        running = conn.execute("select count(*) from trials where state = 'RUNNING'").fetchone()[0]
    finally:
        conn.close()
    assert running == 0
    after = store_counts(store)
    assert after.get("PRUNED", 0) >= counts["PRUNED"]
    assert after.get("COMPLETE", 0) >= counts["COMPLETE"]


@pytest.mark.parametrize("trial_seconds, expected, rule", [(30.0, 2.0, "off"), (5.0, 12.0, "halving"),
                                                          (0.5, 40.0, "halving")])
def test_auto_pruning_follows_the_trials_the_budget_is_expected_to_finish(tmp_path, small_csv, trial_seconds,
                                                                          expected, rule):
    # 60 s at the builder's trial estimate, capped by --trials 40: the rule is kept with the study.
    from tunelab.engine import Budget
    from tunelab.ops import RunRequest, run_study
    from tunelab.space import default_space
    from tunelab.store import Store

    dataset = load_dataset(small_csv, "y")
    space = default_space(dataset.task, dataset.roles)
    space_file = tmp_path / "space.json"
    space_file.write_text(type(space).from_dict({**space.to_dict(), "trial_seconds": trial_seconds}).to_json())
    store = tmp_path / "auto.db"
    run_study(RunRequest(small_csv, "y", Budget(60.0, trials=40), store=str(store), space_file=space_file,
                         study="auto"), settings=None, on_progress=None, announce=None,
              runner_factory=lambda objective: _StopAtOnce())
    with Store.open(str(store)) as st:
        assert st.get_study("auto").settings["expected_trials"] == expected
    assert choose_pruning(expected) == rule


class _StopAtOnce:
    """A runner that ends the launch before any trial runs (only the study's settings matter here)."""

    objective = None

    def run(self, *args, **kwargs):
        raise KeyboardInterrupt

    def close(self):
        pass

    def live_cpu(self):
        return 0.0
