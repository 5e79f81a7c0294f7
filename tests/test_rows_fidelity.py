"""Rows as a fidelity: on a big table trials start on nested row samples of the first fold, and the
good ones climb to all rows; small tables are searched as before."""

from __future__ import annotations

import json
import math
import signal
import sqlite3
import subprocess
import time

import numpy as np
import optuna
import psutil
import pytest
from optuna.distributions import CategoricalDistribution, FloatDistribution
from optuna.trial import TrialState, create_trial
from sklearn.metrics import roc_auc_score

from benchmarks._faults import TUNELAB
from conftest import small_frame
from tunelab.data import load_dataset
from tunelab.engine import METRICS, CrossValidationObjective, make_pruner, make_sampler
from tunelab.evaluation import MIN_RUNG_ROWS, ROW_SHARES, choose_ladder, nested_samples
from tunelab.models import build_pipeline
from tunelab.ops import profile_data

# ------------------------------------------------------------------ the samples


def test_rung_samples_are_nested_stratified_and_the_same_for_the_same_seed():
    rng = np.random.default_rng(0)
    y = rng.choice(np.array(["common", "middling", "rare"], dtype=object), size=9000, p=[0.7, 0.2, 0.1])
    rows = np.sort(rng.permutation(9000)[:6000])  # a fold's training rows
    small, large = nested_samples(rows, y, "multiclass", (1 / 9, 1 / 3), seed=4)
    assert (len(small), len(large)) == (math.ceil(6000 / 9), 2000)
    assert set(small) <= set(large) <= set(rows)
    for sample, share in ((small, 1 / 9), (large, 1 / 3)):
        for label in ("common", "middling", "rare"):
            assert abs(np.sum(y[sample] == label) - share * np.sum(y[rows] == label)) <= 1
    again = nested_samples(rows, y, "multiclass", (1 / 9, 1 / 3), seed=4)
    assert all(np.array_equal(a, b) for a, b in zip(again, (small, large), strict=True))
    other = nested_samples(rows, y, "multiclass", (1 / 9, 1 / 3), seed=5)
    assert not np.array_equal(other[0], small)


def test_a_regression_sample_keeps_each_tenth_of_the_target():
    rng = np.random.default_rng(1)
    y = rng.lognormal(size=5000)
    rows = np.arange(5000)
    (sample,) = nested_samples(rows, y, "regression", (1 / 9,), seed=0)
    deciles = np.quantile(y, np.linspace(0, 1, 11))
    counts, _ = np.histogram(y[sample], bins=deciles)
    assert counts.min() >= 500 / 9 - 2 and counts.max() <= 500 / 9 + 2


# ------------------------------------------------------------------ when the ladder is in force


def test_the_ladder_is_used_only_when_the_fold_is_big_and_few_full_trials_fit():
    big = MIN_RUNG_ROWS * 9
    assert choose_ladder("auto", n_fit=big, trial_seconds=30.0, budget_seconds=120.0).shares == ROW_SHARES
    too_small = choose_ladder("auto", n_fit=big - 9, trial_seconds=30.0, budget_seconds=120.0)
    assert not too_small and "too few" in too_small.reason
    roomy = choose_ladder("auto", n_fit=big, trial_seconds=1.0, budget_seconds=120.0)
    assert not roomy and "full-data trials fit" in roomy.reason
    assert not choose_ladder("auto", n_fit=big, trial_seconds=30.0, budget_seconds=None)
    assert not choose_ladder("off", n_fit=big, trial_seconds=30.0, budget_seconds=120.0)
    assert choose_ladder("auto", n_fit=big, trial_seconds=1.0, budget_seconds=120.0, row_capped=True)


def test_a_small_table_is_searched_on_all_rows_even_on_a_tight_budget(small_csv):
    # the suite's tables have at most 50,000 rows, of which a fold trains on at most 26,667 < 9 x 5,000
    space = profile_data(small_csv, "y", budget_seconds=5.0).space
    assert space.row_shares == ()


# ------------------------------------------------------------------ what a rung computes


@pytest.fixture
def mid_dataset(tmp_path):
    path = tmp_path / "mid.csv"
    small_frame(3000, seed=2).to_csv(path, index=False)
    return load_dataset(path, "y")


def test_a_rung_fits_the_first_fold_whole_on_its_sample_and_scores_all_its_held_out_rows(mid_dataset):
    objective = CrossValidationObjective(mid_dataset, METRICS["roc_auc"], seed=0, n_folds=3, row_shares=ROW_SHARES)
    config = {"family": "linear", "linear.C": 1.0}
    reports: dict[int, float] = {}
    result = objective(config, lambda step, value: reports.__setitem__(step, value))
    assert sorted(reports) == [1, 2, 3, 6]  # 1/9, 1/3, then fold 1 and fold 2 on all rows
    assert len(result.fold_scores) == 3
    # step 1 is the sample's model scored on the whole held-out fold (scikit-learn's roc_auc_score)
    _, test = objective.folds[0]
    sample = objective.first_fold_rows(None)[1][0]
    pipeline = build_pipeline(config, mid_dataset.roles, mid_dataset.cardinality,
                              mid_dataset.task, seed=0, n_threads=1)
    pipeline.fit(mid_dataset.X.iloc[sample], mid_dataset.y[sample])
    positive = pipeline.classes_[1]
    expected = roc_auc_score(mid_dataset.y[test] == positive, pipeline.predict_proba(mid_dataset.X.iloc[test])[:, 1])
    assert reports[1] == pytest.approx(expected, abs=1e-9)
    assert objective.describe_step(1) == "fold 1 on 1/9 of its training rows"
    assert objective.describe_step(3) == "1 of 3 folds"


def test_a_row_capped_familys_ladder_climbs_to_its_sample_not_to_all_rows(mid_dataset):
    def objective(min_rung_rows: int) -> CrossValidationObjective:
        return CrossValidationObjective(mid_dataset, METRICS["roc_auc"], seed=0, n_folds=3, row_shares=ROW_SHARES,
                                        min_rung_rows=min_rung_rows)

    every, _ = objective(50).first_fold_rows(None)
    assert len(every) == len(objective(50).folds[0][0])
    top, (low, mid) = objective(50).first_fold_rows(900)  # a family capped at 900 rows: rungs of 100 and 300
    assert (len(top), len(low), len(mid)) == (900, 100, 300)
    assert set(low) <= set(mid) <= set(top) <= set(every)
    top, samples = objective(101).first_fold_rows(900)  # its bottom rung would be too small: no rungs
    assert len(top) == 900 and samples == []


def test_without_a_ladder_the_first_steps_are_thirds_of_a_fold(mid_dataset):
    objective = CrossValidationObjective(mid_dataset, METRICS["roc_auc"], seed=0, n_folds=3)
    reports: dict[int, float] = {}
    objective({"family": "random_forest", "random_forest.n_estimators": 30},
              lambda step, value: reports.__setitem__(step, value))
    assert sorted(reports) == [1, 2, 3, 6]
    assert objective.describe_step(1) == "1/3 of fold 1"


# ------------------------------------------------------------------ how rungs are judged


def _study_with_step_one_values(values: dict[str, list[float]]) -> optuna.Study:
    study = optuna.create_study(direction="maximize")
    distribution = {"family": CategoricalDistribution(["hist_gb", "linear"])}
    for family, scores in values.items():
        for score in scores:
            study.add_trial(create_trial(params={"family": family}, distributions=distribution,
                                         state=TrialState.PRUNED, intermediate_values={1: score}, value=None))
    return study


@pytest.mark.parametrize("peers, row_rungs, pruned", [
    ("linear", 2, True),  # a row rung judges linear models, against their own family
    ("linear", 0, False),  # a third of a fold judges forests only: a linear model is not cut into parts
    ("hist_gb", 2, False),  # nor across families on a sample: their learning curves cross
])
def test_a_row_rung_judges_every_family_within_its_own(peers, row_rungs, pruned):
    """Logistic regression can lead trees on a small sample and trail them on all rows (Perlich,
    Provost & Simonoff 2003, JMLR 4, "Tree induction vs. logistic regression: a learning-curve
    analysis"; from memory), so a sample rung ranks a trial only among its own family's."""
    study = _study_with_step_one_values({peers: [0.80, 0.81, 0.82, 0.83]})
    trial = create_trial(params={"family": "linear"}, distributions={
        "family": CategoricalDistribution(["hist_gb", "linear"])}, state=TrialState.RUNNING,
        intermediate_values={1: 0.70})
    pruner = make_pruner("halving", row_rungs=row_rungs)
    assert pruner.prune(study, trial) is pruned


def test_a_study_with_a_ladder_always_prunes_and_cannot_turn_pruning_off():
    assert type(make_pruner("auto", expected_trials=2.0, row_rungs=2)).__name__ == "RungPruner"
    with pytest.raises(ValueError):
        make_pruner("off", row_rungs=2)


def test_tpe_learns_from_how_far_pruned_trials_climbed_before_their_value_on_a_lower_rung():
    """optuna's TPE ranks pruned trials by the step they reached, then by their value there: a trial
    that climbed to 1/3 of the rows counts as better than any stopped at 1/9 (the order in which
    successive halving promotes them)."""
    study = optuna.create_study(direction="maximize", sampler=make_sampler("tpe", seed=0))
    distribution = {"x": FloatDistribution(0.0, 1.0)}
    rng = np.random.default_rng(0)
    for _ in range(15):  # climbed to rung 2 (lower values there), all near x = 0.85
        study.add_trial(create_trial(params={"x": float(rng.uniform(0.8, 0.9))}, distributions=distribution,
                                     state=TrialState.PRUNED, intermediate_values={1: 0.7, 2: 0.6}))
    for _ in range(15):  # stopped on rung 1 with higher values, near x = 0.15
        study.add_trial(create_trial(params={"x": float(rng.uniform(0.1, 0.2))}, distributions=distribution,
                                     state=TrialState.PRUNED, intermediate_values={1: 0.9}))
    drawn = [study.ask({"x": FloatDistribution(0.0, 1.0)}).params["x"] for _ in range(20)]
    assert np.median(drawn) > 0.5


# ------------------------------------------------------------------ a kill on a sample rung


def _running(store) -> bool:
    """Whether the store holds a running trial yet (a child process alone may be a probe, not a trial)."""
    if not store.exists():
        return False
    try:
        with sqlite3.connect(store, timeout=0.1) as conn:
            return bool(conn.execute("select 1 from trials where state = 'RUNNING'").fetchone())
    except sqlite3.Error:
        return False


@pytest.mark.slow
def test_a_trial_killed_on_a_sample_rung_runs_again_once_from_its_first_rung(tmp_path):
    data = tmp_path / "rows.csv"
    frame = small_frame(20_000, seed=3)
    frame.to_csv(data, index=False)
    space = {"version": 1, "families": {"hist_gb": {"params": {
        "max_iter": {"kind": "fixed", "value": 300}, "learning_rate": {"kind": "float", "low": 0.02, "high": 0.3,
                                                                        "log": True}}}},
             "row_shares": list(ROW_SHARES)}
    space_file = tmp_path / "space.json"
    space_file.write_text(json.dumps(space))
    store = tmp_path / "rows.db"
    args = ["--store", str(store), "--jobs", "1", "-q"]
    run = subprocess.Popen([*TUNELAB, "run", str(data), "--target", "y", "--budget", "20s", "--study", "rows",
                            "--space", str(space_file), "--no-portfolio", *args],
                           stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 90
    while time.monotonic() < deadline and not (psutil.Process(run.pid).children() and _running(store)):
        time.sleep(0.02)  # the first trial is in the store and its process starts on the first rung
    assert psutil.Process(run.pid).children() and _running(store), "no trial started"
    run.send_signal(signal.SIGKILL)
    run.wait()
    resumed = subprocess.run([*TUNELAB, "resume", "rows", *args], capture_output=True, text=True, timeout=180)
    assert resumed.returncode == 0, resumed.stderr
    with sqlite3.connect(store) as conn:
        states = dict(conn.execute("select number, state from trials"))
        retries = conn.execute("select t.number, a.value_json from trials t join trial_user_attributes a "
                               "on a.trial_id = t.trial_id where a.key = 'tl_retry_of'").fetchall()
        first_steps = dict(conn.execute("select t.number, min(v.step) from trials t join trial_intermediate_values v "
                                        "on v.trial_id = t.trial_id group by t.number"))
        settings = json.loads(conn.execute("select settings_json from tl_study").fetchone()[0])
    assert settings["row_shares"] == pytest.approx(list(ROW_SHARES))
    assert states[0] == "FAIL"  # interrupted by the kill
    assert [int(json.loads(of)) for _, of in retries] == [0]  # re-queued once
    rerun = retries[0][0]
    assert first_steps[rerun] == 1  # it started again on the first rung


def test_the_space_file_keeps_its_ladder_and_run_can_turn_it_off(tmp_path, cli):
    data = tmp_path / "d.csv"
    small_frame(600).to_csv(data, index=False)
    space_file = tmp_path / "space.json"
    space_file.write_text(json.dumps({"version": 1, "families": {"linear": {"params": {}}},
                                      "row_shares": list(ROW_SHARES)}))
    store = tmp_path / "s.db"
    for study, extra in (("on", []), ("off", ["--rows-fidelity", "off"])):
        result = cli("run", str(data), "--target", "y", "--trials", "3", "--space", str(space_file),
                     "--study", study, "--store", str(store), "-q", *extra)
        assert result.code == 0, result.err
    with sqlite3.connect(store) as conn:
        settings = {name: json.loads(s) for name, s in conn.execute("select name, settings_json from tl_study")}
    assert settings["on"]["row_shares"] == pytest.approx(list(ROW_SHARES))
    assert "row_shares" not in settings["off"]


def test_an_unknown_rows_fidelity_is_refused_in_one_line(small_csv, cli, store_path):
    result = cli("run", str(small_csv), "--target", "y", "--rows-fidelity", "sometimes", "--store", str(store_path))
    assert result.code == 2 and "--rows-fidelity" in result.err and len(result.err.strip().splitlines()) == 1

