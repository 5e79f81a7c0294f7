"""Specification of the data-driven search-space builder (tunelab.space.build_space).

The builder's decisions depend on measured costs, which vary from machine to machine; the
tests below replace the cost probes with fixed figures so that each decision is checked against
the rule it follows, and take every other meta-feature from the real computation.
"""

from __future__ import annotations

import dataclasses
import json
import math
import warnings
from collections.abc import Mapping
from functools import cache
from typing import Any

import numpy as np
import optuna
import pandas as pd
import pytest
from sklearn import datasets as skdata

from tunelab.data import Dataset, prepare_frame
from tunelab.facts import MetaFeatures, compute_metafeatures, data_facts
from tunelab.models import FAMILY_NAMES, build_pipeline
from tunelab.models._families import MLP_RUNGS, mlp_rung_params
from tunelab.models._preprocess import build_preprocessor, signed_log1p
from tunelab.probes import SCALING_RULES, CostProbe, TransformProbe
from tunelab.space import SpaceSpec, build_space

CHEAP = {f: 0.001 for f in FAMILY_NAMES}  # seconds per fit on all rows: every family affordable


def _frame(n: int, p: int = 5, *, seed: int = 0, skewed: bool = False, minority: float = 0.5,
           task: str = "binary", circle: bool = False, noise: float = 0.5) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    X = rng.lognormal(sigma=1.5, size=(n, p)) if skewed else rng.normal(size=(n, p))
    signal = np.log(X[:, 0]) if skewed else X[:, 0]
    if circle:  # inside or outside a circle: no linear signal, an easy one for nearest neighbours
        signal = -(X[:, 0] ** 2 + X[:, 1] ** 2)
    frame = pd.DataFrame(X, columns=[f"x{i}" for i in range(p)])
    if task == "regression":
        frame["y"] = signal + noise * rng.normal(size=n)
    else:
        # threshold chosen so that the positive class is the ``minority`` share of the rows
        score = signal + noise * rng.normal(size=n)
        frame["y"] = np.where(score > np.quantile(score, 1 - minority), "pos", "neg")
    return frame


def _positive_skewed_target(n: int) -> pd.DataFrame:
    """A price-like target: above zero, effects multiply, long right tail (lognormal, skewness near 2)."""
    frame = _frame(n, task="regression", noise=0.0)
    frame["y"] = np.exp(0.8 * frame["y"] + 0.3 * np.random.default_rng(1).normal(size=n))
    return frame


def _with_costs(meta: MetaFeatures, seconds: Mapping[str, float]) -> MetaFeatures:
    """The same meta-features with every cost probe replaced by a fixed seconds-per-fit figure."""
    probes = {f: CostProbe(f, "fixed for the test", 100, s, s, SCALING_RULES[f]) for f, s in seconds.items()}
    return dataclasses.replace(meta, cost=probes)


@cache
def _data(kind: str) -> tuple[Dataset, MetaFeatures]:
    frames = {
        "small": lambda: _frame(1000),
        "medium": lambda: _frame(8000),
        "circle_small": lambda: _frame(1000, p=2, circle=True),
        "circle_medium": lambda: _frame(8000, p=2, circle=True),
        "large": lambda: _frame(30_000),
        "regression_small": lambda: _frame(1000, task="regression"),
        "regression_large": lambda: _frame(20_000, task="regression"),
        "wide": lambda: _frame(1000, p=200),
        "narrow": lambda: _frame(1000, p=4),
        "skewed": lambda: _frame(1000, skewed=True),
        "imbalanced": lambda: _frame(2000, minority=0.08),
        "few_rows_per_column": lambda: _frame(300, p=60),
        "tiny": lambda: _frame(200),
        "noisy": lambda: _frame(2000, noise=3.0),
        "clean": lambda: _frame(2000, noise=0.05),
        "positive_skewed_target": lambda: _positive_skewed_target(1000),
    }
    if kind == "digits":
        # scikit-learn's bundled handwritten digits (sklearn.datasets.load_digits): 1,797 rows,
        # 64 pixel columns, where nearest neighbours are known to do well.
        bunch = skdata.load_digits(as_frame=True)
        frame = bunch.frame.rename(columns={"target": "y"})
        dataset = prepare_frame(frame, "y", "multiclass")
    else:
        dataset = prepare_frame(frames[kind](), "y")
    meta = compute_metafeatures(dataset.X, dataset.y, dataset.task, dataset.roles, max_rows=1000,
                                time_cap_s=60.0, probe_rows=100)
    return dataset, meta


def _space(kind: str, *, budget: float | None = 600.0, costs: Mapping[str, float] = CHEAP,
           metric: str | None = None) -> SpaceSpec:
    dataset, meta = _data(kind)
    return build_space(data_facts(dataset, _with_costs(meta, costs), metric=metric), budget_seconds=budget)


def _mixed_dataset() -> Dataset:
    rng = np.random.default_rng(1)
    n = 600
    words = np.array(["red", "green", "blue", "small", "large", "cheap", "fast", "slow", "old", "new"])
    frame = pd.DataFrame({
        "num": rng.normal(size=n),
        "skew": rng.lognormal(sigma=2.0, size=n),
        "colour": rng.choice(["a", "b", "c"], n),
        "city": rng.choice([f"city{i}" for i in range(60)], n),
        "when": pd.date_range("2020-01-01", periods=n, freq="D").astype(str),
        "note": [" ".join(rng.choice(words, 6)) for _ in range(n)],
        "y": rng.choice(["p", "q"], n),
    })
    frame.loc[rng.random(n) < 0.1, "num"] = np.nan
    return prepare_frame(frame, "y")


# --------------------------------------------------------------------------- families


def test_svm_is_left_out_on_large_data_however_cheap() -> None:
    space = _space("large")
    assert "svm" not in space.families
    assert any(note.startswith("svm left out") and "rows" in note for note in space.notes)


def test_svm_is_kept_on_small_data_when_a_trial_is_a_small_share_of_the_budget() -> None:
    assert "svm" in _space("small").families


def test_svm_is_left_out_when_a_trial_would_take_a_large_share_of_the_budget() -> None:
    costly = dict(CHEAP, svm=10.0)  # 5 folds x 10 s against a 60 s budget
    space = _space("small", budget=60.0, costs=costly)
    assert "svm" not in space.families
    assert any(note.startswith("svm left out") and "% of the 60 s budget" in note for note in space.notes)


def test_knn_is_left_out_on_high_dimensional_data() -> None:
    space = _space("wide")  # 200 columns, signal in one of them: the 1-NN landmarker trails
    assert "knn" not in space.families
    assert any(note.startswith("knn left out") and "high-dimensional" in note for note in space.notes)


def test_knn_is_kept_on_high_dimensional_data_where_nearest_neighbours_do_well() -> None:
    space = _space("digits", metric="accuracy")  # 64 columns, yet 1-NN is the best landmarker
    assert "knn" in space.families
    assert "1-NN" in space.families["knn"].reason


def test_at_least_two_families_take_part_even_on_a_tiny_budget() -> None:
    space = _space("medium", budget=5.0, costs={f: 0.2 for f in FAMILY_NAMES})
    assert len(space.families) >= 2


def test_families_left_out_when_a_few_trials_of_each_no_longer_fit() -> None:
    plenty = _space("medium", budget=3600.0, costs={f: 0.5 for f in FAMILY_NAMES})
    tight = _space("medium", budget=30.0, costs={f: 0.5 for f in FAMILY_NAMES})
    assert len(tight.families) < len(plenty.families)
    assert any("ranked" in note for note in tight.notes)


def test_work_knobs_are_capped_so_a_trial_fits_in_a_quarter_of_the_budget() -> None:
    slow = dict(CHEAP, hist_gb=10.0, random_forest=10.0)  # per fit of 100 rounds / trees on all rows
    space = _space("small", budget=60.0, costs=slow)
    assert space.families["hist_gb"].params["max_iter"].high < 500
    assert "capped" in space.families["hist_gb"].params["max_iter"].reason
    roomy = _space("small", budget=3600.0, costs=slow)
    assert roomy.families["hist_gb"].params["max_iter"].high == 500


def test_when_the_budget_caps_boosting_rounds_the_step_size_floor_rises_so_rounds_times_step_reaches_12() -> None:
    # rounds x step of 12-20 matched the library default at equal cost on big-400k; 6 fell far
    # below (docs/experiments/big-tables.md): a capped search must not spend its trials down there.
    slow = dict(CHEAP, hist_gb=10.0, random_forest=10.0)
    capped = _space("small", budget=60.0, costs=slow).families["hist_gb"].params
    step, rounds = capped["learning_rate"], capped["max_iter"]
    assert rounds.high < 500 and step.low * rounds.high >= 12 - 1e-9 and step.high > step.low
    roomy = _space("small", budget=3600.0, costs=slow).families["hist_gb"].params
    assert roomy["learning_rate"].low == 0.01 and roomy["learning_rate"].high == 0.3  # uncapped: as before


def test_a_family_is_left_out_when_even_its_smallest_work_does_not_fit() -> None:
    space = _space("small", budget=60.0, costs=dict(CHEAP, extra_trees=100.0))
    assert "extra_trees" not in space.families
    assert any(note.startswith("extra_trees left out") for note in space.notes)


# --------------------------------------------------------------------------- ranges


def test_ranges_scale_with_the_row_count() -> None:
    small, medium = _space("circle_small"), _space("circle_medium")

    def high(space: SpaceSpec, name: str) -> float:
        spec = space.lookup(name)
        assert spec is not None, name
        return float(spec.high)  # type: ignore[arg-type]

    for name in ("hist_gb.min_samples_leaf", "hist_gb.max_leaf_nodes", "random_forest.min_samples_leaf",
                 "knn.n_neighbors"):
        assert high(medium, name) > high(small, name), name


def test_ridge_penalty_range_scales_with_the_rows() -> None:
    small, large = _space("regression_small"), _space("regression_large")
    ratio = large.families["linear"].params["alpha"].low / small.families["linear"].params["alpha"].low
    assert ratio == pytest.approx(20, rel=0.05)  # 20,000 / 1,000 rows, same folds


def test_feature_fractions_scale_with_the_column_count() -> None:
    narrow, wide = _space("narrow"), _space("wide")
    assert wide.families["random_forest"].params["max_features"].low < narrow.families[
        "random_forest"].params["max_features"].low
    # the prior centre follows the sqrt(p) rule (Hastie, Tibshirani and Friedman, The Elements of
    # Statistical Learning, 2nd ed., section 15.3; from memory)
    warm = next(w for w in wide.warm_starts if w["family"] == "random_forest")
    assert warm["random_forest.max_features"] == pytest.approx(1 / math.sqrt(200))


def test_boosting_draws_half_the_features_per_split_first_on_narrow_and_wide_tables() -> None:
    # benchmarks/boosting_feature_share.py: a share of 0.5 beat all features in five-fold CV on
    # each of ten open tables, few columns or many; the range still reaches every feature
    for name in ("narrow", "wide"):
        space = _space(name)
        share = space.families["hist_gb"].params["max_features"]
        assert (share.low, share.high) == (0.2, 1.0)
        warm = [w for w in space.warm_starts if w["family"] == "hist_gb"]
        assert warm and all(w["hist_gb.max_features"] == 0.5 for w in warm)


def test_penalty_range_moves_toward_strong_regularisation_with_few_rows_per_column() -> None:
    few = _space("few_rows_per_column").families["linear"].params["C"]
    many = _space("small").families["linear"].params["C"]
    assert few.high < many.high and few.low < many.low


# --------------------------------------------------------------------------- preprocessing


def test_log_map_is_the_prior_on_skewed_data_without_a_probe() -> None:
    space = _space("skewed")
    scaled = [f for f in ("linear", "svm", "knn", "mlp") if f in space.families]
    assert "linear" in scaled
    for family in scaled:
        spec = space.families[family].params["num_transform"]
        assert spec.choices == ("log", "standard", "quantile")
        warm = next(w for w in space.warm_starts if w["family"] == family)
        assert warm[f"{family}.num_transform"] == "log"


def test_the_transform_probe_orders_the_maps_and_says_so() -> None:
    dataset, meta = _data("skewed")
    probe = TransformProbe({"log": 0.80, "standard": 0.70, "quantile": 0.90}, "roc_auc", True, 1000, 3, 0.5)
    space = build_space(data_facts(dataset, _with_costs(meta, CHEAP), transform_probe=probe), budget_seconds=600.0)
    spec = space.families["linear"].params["num_transform"]
    assert spec.choices == ("quantile", "log", "standard")
    assert "quantile first by the linear probe on 1000 rows" in spec.reason
    warm = next(w for w in space.warm_starts if w["family"] == "linear")
    assert warm["linear.num_transform"] == "quantile"
    assert any("numeric map tried first" in note for note in space.notes)


def test_plain_scaling_is_the_prior_on_symmetric_data() -> None:
    assert _space("small").families["linear"].params["num_transform"].choices[0] == "standard"


def test_class_weight_is_searched_on_imbalanced_classes() -> None:
    space = _space("imbalanced")
    for family in ("linear", "hist_gb", "random_forest", "extra_trees", "svm"):
        assert space.families[family].params["class_weight"].choices == (None, "balanced"), family
    assert "class_weight" not in _space("small").families["linear"].params


def test_class_weight_is_not_searched_when_log_loss_scores_the_probabilities() -> None:
    space = _space("imbalanced", metric="log_loss")
    assert all("class_weight" not in family.params for family in space.families.values())
    assert any("class weights not searched" in note for note in space.notes)


# --------------------------------------------------------------------------- priors


def _warm(space: SpaceSpec, family: str, index: int = 0) -> dict[str, Any]:
    return [dict(w) for w in space.warm_starts if w["family"] == family][index]


def test_priors_lean_to_regularisation_on_a_noisy_target() -> None:
    noisy, clean = _space("noisy"), _space("clean")
    assert any(note.startswith("noisy target") for note in noisy.notes)
    assert any(note.startswith("clear signal") for note in clean.notes)
    first_noisy, first_clean = _warm(noisy, "hist_gb"), _warm(clean, "hist_gb")
    assert first_noisy["hist_gb.learning_rate"] < first_clean["hist_gb.learning_rate"]
    assert first_noisy["hist_gb.max_leaf_nodes"] < first_clean["hist_gb.max_leaf_nodes"]
    assert first_noisy["hist_gb.min_samples_leaf"] > first_clean["hist_gb.min_samples_leaf"]
    assert _warm(noisy, "random_forest")["random_forest.min_samples_leaf"] > _warm(
        clean, "random_forest")["random_forest.min_samples_leaf"]


def test_a_second_boosting_warm_start_hedges_the_regime_when_the_budget_allows() -> None:
    noisy = _space("noisy")
    assert _warm(noisy, "hist_gb", 1)["hist_gb.learning_rate"] == _warm(_space("clean"), "hist_gb")[
        "hist_gb.learning_rate"]
    assert noisy.warm_starts[-1]["family"] == "hist_gb"  # the hedge comes after every family's centre


def test_text_and_datetime_columns_get_their_preprocessing() -> None:
    dataset = _mixed_dataset()
    meta = compute_metafeatures(dataset.X, dataset.y, dataset.task, dataset.roles, max_rows=600, probe_rows=100)
    space = build_space(data_facts(dataset, _with_costs(meta, CHEAP)), budget_seconds=600.0)
    assert {"prep.text_features", "prep.text_components"} <= set(space.params)
    assert "6.0" in space.params["prep.text_features"].reason  # mean words per value of the text column
    text = "\n".join(space.notes)
    assert "datetime" in text and "one-hot" in text and "target-encoded" in text


# --------------------------------------------------------------------------- the boosting loss


def test_gamma_deviance_leads_for_a_positive_right_skewed_regression_target() -> None:
    loss = _space("positive_skewed_target").families["hist_gb"].params["loss"]
    assert loss.choices == ("gamma", "squared_error")  # squared error stays a choice: CV decides
    assert "right-skewed" in loss.reason and "log link" in loss.reason
    assert all(w["hist_gb.loss"] == "gamma" for w in _space("positive_skewed_target").warm_starts
               if w["family"] == "hist_gb")


def test_squared_error_alone_where_the_target_can_be_zero_or_negative_or_is_a_class() -> None:
    assert "loss" not in _space("regression_small").families["hist_gb"].params  # normal target: below zero too
    assert "loss" not in _space("skewed").families["hist_gb"].params  # classification


def test_a_gamma_config_builds_a_boosting_model_with_the_log_link() -> None:
    dataset, _ = _data("positive_skewed_target")
    config = {"family": "hist_gb", "hist_gb.loss": "gamma", "hist_gb.max_iter": 20}
    pipeline = build_pipeline(config, dataset.roles, {}, "regression")
    pipeline.fit(dataset.X, dataset.y)
    assert pipeline.named_steps["model"].loss == "gamma"
    assert (pipeline.predict(dataset.X) > 0).all()  # exp of the link: predictions stay above zero


# --------------------------------------------------------------------------- the MLP ladder


def test_mlp_is_left_out_when_only_a_few_trials_would_fit() -> None:
    space = _space("medium", budget=60.0, costs=dict(CHEAP, mlp=2.0))
    assert "mlp" not in space.families
    assert any(note.startswith("mlp left out") for note in space.notes)


def test_mlp_is_left_out_on_too_few_rows() -> None:
    space = _space("tiny")
    assert "mlp" not in space.families
    assert any(note.startswith("mlp left out") and "rows" in note for note in space.notes)


def test_mlp_ladder_starts_narrow_on_a_modest_budget() -> None:
    space = _space("medium", budget=600.0, costs=dict(CHEAP, mlp=0.5))
    assert space.families["mlp"].params["rung"].choices == ("narrow",)
    assert any("'wide' left out" in note and "budget" in note for note in space.notes)


def test_mlp_ladder_adds_the_wide_rung_with_rows_and_budget() -> None:
    space = _space("medium", budget=100_000.0, costs=dict(CHEAP, mlp=0.5))
    assert space.families["mlp"].params["rung"].choices == ("narrow", "wide")
    assert any("'very_wide' left out" in note and "rows" in note for note in space.notes)


def test_mlp_ladder_adds_the_very_wide_rung_only_on_many_rows_and_a_large_budget() -> None:
    space = _space("large", budget=1_000_000.0, costs=dict(CHEAP, mlp=0.5))
    assert space.families["mlp"].params["rung"].choices == ("narrow", "wide", "very_wide")
    modest = _space("large", budget=3600.0, costs=dict(CHEAP, mlp=20.0))
    assert "very_wide" not in modest.families["mlp"].params["rung"].choices


def test_mlp_warm_start_is_the_narrow_rung() -> None:
    warm = next(w for w in _space("medium", budget=100_000.0).warm_starts if w["family"] == "mlp")
    assert warm["mlp.rung"] == "narrow"


def test_mlp_rungs_map_to_width_depth_and_dropout_ranges() -> None:
    assert mlp_rung_params({"rung": "wide", "rung_width": 1.0, "rung_depth": 1.0, "rung_dropout": 0.0}) == {
        "hidden_width": 1500, "n_layers": 3, "dropout": 0.4}
    assert mlp_rung_params({"rung": "very_wide", "rung_width": 0.0, "rung_dropout": 1.0}) == {
        "hidden_width": 8000, "n_layers": 1, "dropout": pytest.approx(0.8)}
    low, high = MLP_RUNGS["narrow"][0]
    assert low <= mlp_rung_params({"rung": "narrow"})["hidden_width"] <= high
    assert mlp_rung_params({"hidden_width": 64}) == {}  # configs without a rung keep their own settings


def test_an_mlp_config_with_a_rung_builds_that_network() -> None:
    config = {"family": "mlp", "mlp.rung": "wide", "mlp.rung_width": 0.0, "mlp.rung_depth": 0.0,
              "mlp.rung_dropout": 1.0}
    model = build_pipeline(config, {"x": "numeric"}, {}, "binary").named_steps["model"]
    assert (model.hidden_width, model.n_layers, model.dropout, model.batch_norm) == (1200, 2, 0.5, True)


# --------------------------------------------------------------------------- the log transform


def test_signed_log_keeps_sign_and_zero() -> None:
    values = np.array([[-np.e + 1], [0.0], [np.e - 1]])
    np.testing.assert_allclose(signed_log1p(values).ravel(), [-1.0, 0.0, 1.0])


def test_log_numeric_transform_tames_a_long_tail() -> None:
    frame = pd.DataFrame({"x": np.random.default_rng(0).lognormal(sigma=2.0, size=500)})
    out = build_preprocessor({"x": "numeric"}, {}, style="scaled", task="binary",
                             numeric_transform="log").fit_transform(frame)
    column = np.asarray(out)[:, 0]
    assert abs(pd.Series(column).skew()) < abs(frame["x"].skew()) / 5


# --------------------------------------------------------------------------- the spec as a whole


def test_every_family_and_parameter_has_a_one_line_reason() -> None:
    dataset = _mixed_dataset()
    meta = compute_metafeatures(dataset.X, dataset.y, dataset.task, dataset.roles, max_rows=600, probe_rows=100)
    for space in (build_space(data_facts(dataset, _with_costs(meta, CHEAP)), budget_seconds=100_000.0),
                  _space("imbalanced")):
        assert space.family_reason
        for name, family in space.families.items():
            assert family.reason and "\n" not in family.reason, name
            for pname, spec in family.params.items():
                assert spec.reason and "\n" not in spec.reason, f"{name}.{pname}"
        for pname, spec in space.params.items():
            assert spec.reason and "\n" not in spec.reason, pname
        assert all(note and "\n" not in note for note in space.notes)


def test_every_family_left_out_is_explained() -> None:
    space = _space("wide", budget=30.0, costs={f: 0.5 for f in FAMILY_NAMES})
    for family in set(FAMILY_NAMES) - set(space.families):
        assert any(note.startswith(f"{family} left out: ") for note in space.notes), family


def test_the_spec_round_trips_through_json() -> None:
    for kind in ("imbalanced", "skewed", "large"):
        space = _space(kind, budget=100_000.0)
        again = SpaceSpec.from_json(space.to_json())
        assert again == space
        assert json.loads(again.to_json()) == json.loads(space.to_json())


def test_warm_starts_cover_the_families_and_lie_inside_their_ranges() -> None:
    space = _space("imbalanced", budget=100_000.0)
    first_per_family = list(dict.fromkeys(w["family"] for w in space.warm_starts))
    assert first_per_family == list(space.families)
    for warm in space.warm_starts:
        family = warm["family"]
        assert {k for k in warm if k != "family"} == {f"{family}.{p}" for p in space.families[family].params}
        for name, value in warm.items():
            if name == "family":
                continue
            dist = space.lookup(name).distribution()  # type: ignore[union-attr]
            assert dist is not None and dist._contains(dist.to_internal_repr(value)), name


def test_warm_starts_are_ordered_by_landmarker_evidence() -> None:
    # On the digits 1-NN is the best landmarker, so neighbours come before the linear model;
    # on a table with one linear signal among noise columns, 1-NN trails and kNN comes after it.
    digits = [w["family"] for w in _space("digits", metric="accuracy").warm_starts]
    assert digits.index("knn") < digits.index("linear")
    assert digits.index("svm") < digits.index("linear")
    linear = [w["family"] for w in _space("small").warm_starts]
    assert linear.index("linear") < linear.index("knn")


def test_knn_loses_its_place_when_log_loss_scores_its_vote_share_probabilities() -> None:
    assert "knn" in _space("digits", metric="accuracy").families
    space = _space("digits", metric="log_loss")
    assert "knn" not in space.families
    assert any(note.startswith("knn left out") and "log loss" in note for note in space.notes)


def test_cost_moves_an_expensive_family_back_in_the_warm_starts() -> None:
    cheap = [w["family"] for w in _space("small", budget=60.0).warm_starts]
    costly = [w["family"] for w in _space("small", budget=60.0, costs=dict(CHEAP, hist_gb=10.0)).warm_starts]
    assert costly.index("hist_gb") > cheap.index("hist_gb")


@pytest.mark.slow
def test_warm_starts_and_sampled_configs_build_and_fit() -> None:
    dataset, meta = _data("small")
    space = build_space(data_facts(dataset, _with_costs(meta, CHEAP)), budget_seconds=100_000.0)
    cardinality = dataset.cardinality
    study = optuna.create_study(sampler=optuna.samplers.RandomSampler(seed=0))
    optuna.logging.set_verbosity(optuna.logging.WARNING)
    configs: list[dict[str, Any]] = [dict(w) for w in space.warm_starts]
    configs += [space.sample(study.ask()) for _ in range(8)]
    rows = slice(0, 300)
    # what is under test is that each config builds a working pipeline, not how long it trains
    short = {"mlp.max_epochs": 3, "hist_gb.max_iter": 10, "random_forest.n_estimators": 10,
             "extra_trees.n_estimators": 10}
    for config in configs:
        config = {**config, **{k: v for k, v in short.items() if k in config}}
        pipeline = build_pipeline(config, dataset.roles, cardinality, dataset.task)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            pipeline.fit(dataset.X.iloc[rows], dataset.y[rows])
        assert pipeline.predict(dataset.X.iloc[:5]).shape == (5,)


def test_without_a_budget_costs_are_weighed_against_the_reference_budget() -> None:
    space = _space("small", budget=None)
    assert "reference" in space.family_reason


def test_a_family_too_slow_on_every_row_trains_on_a_row_sample_that_fits() -> None:
    # 30,000 rows, 60 s: 20 boosting rounds on every row would pass a third of the budget.
    space = _space("large", budget=60.0, costs=dict(CHEAP, hist_gb=300.0))
    rows = space.families["hist_gb"].params["rows"]
    assert rows.kind == "fixed" and 2_000 <= rows.value < 24_000
    assert "training rows of each fold" in space.families["hist_gb"].reason
    assert space.families["hist_gb"].params["max_iter"].high >= 20


def test_no_row_sample_when_the_sample_would_be_too_small_to_judge() -> None:
    space = _space("small", budget=60.0, costs=dict(CHEAP, extra_trees=100.0))
    assert "extra_trees" not in space.families
