"""Columns of one shared scale: detected, kept on one divisor, and the MLP let in.

Pixel grids and other like-unit tables lose information when every column is standardised on its
own; these tests pin down when tunelab calls a table "one scale" and what the builder does then.
"""

from __future__ import annotations

import dataclasses
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn import datasets as skdata

from tunelab.data import prepare_frame
from tunelab.data._shared_scale import SHARED_SCALE_MIN_COLUMNS, shares_one_scale
from tunelab.facts import compute_metafeatures, data_facts
from tunelab.models import FAMILY_NAMES, build_pipeline
from tunelab.models._preprocess import PooledScaler
from tunelab.probes import SCALING_RULES, CostProbe, numeric_map_choices
from tunelab.space import build_space


def _digits() -> pd.DataFrame:
    # scikit-learn's bundled handwritten digits (sklearn.datasets.load_digits): 8 x 8 pixel
    # intensities, every column counted in the same 0-16 unit.
    return skdata.load_digits(as_frame=True).frame.rename(columns={"target": "y"})


def _grid(n: int = 800, p: int = 24, *, seed: int = 0, stretch: float = 1.0) -> pd.DataFrame:
    """Counts in one unit on ``p`` columns; ``stretch`` rescales the first column (a different unit)."""
    rng = np.random.default_rng(seed)
    X = rng.poisson(lam=rng.uniform(1, 8, size=p), size=(n, p)).astype(float)
    X[:, 0] *= stretch
    frame = pd.DataFrame(X, columns=[f"c{i}" for i in range(p)])
    frame["y"] = np.where(X[:, 1] + X[:, 2] + rng.normal(size=n) > np.median(X[:, 1] + X[:, 2]), "a", "b")
    return frame


def test_a_pixel_grid_shares_one_scale() -> None:
    frame = _digits()
    assert shares_one_scale(frame.drop(columns="y"))


def test_columns_in_different_units_do_not() -> None:
    # scikit-learn's breast_cancer (sklearn.datasets.load_breast_cancer): areas in the thousands
    # beside smoothness near 0.1.
    bunch = skdata.load_breast_cancer(as_frame=True)
    assert not shares_one_scale(bunch.data)
    assert not shares_one_scale(_grid(stretch=1000.0).drop(columns="y"))


def test_a_few_columns_of_like_ranges_are_not_enough() -> None:
    few = _grid(p=SHARED_SCALE_MIN_COLUMNS - 1).drop(columns="y")
    assert not shares_one_scale(few)
    assert shares_one_scale(_grid(p=SHARED_SCALE_MIN_COLUMNS).drop(columns="y"))


def test_constant_and_missing_cells_do_not_break_the_check() -> None:
    frame = _grid().drop(columns="y")
    frame["blank"] = 0.0  # an always-empty pixel
    frame.iloc[::7, 3] = np.nan
    assert shares_one_scale(frame)


def test_the_pooled_map_centres_each_column_and_keeps_their_relative_spread() -> None:
    X = np.column_stack([np.arange(10.0), 3 * np.arange(10.0) + 5, np.full(10, 2.0)])
    out = PooledScaler().fit_transform(X)
    np.testing.assert_allclose(out.mean(axis=0), 0.0, atol=1e-12)
    std = out.std(axis=0)
    assert std[1] == pytest.approx(3 * std[0])  # one divisor: the ratio survives
    assert np.sqrt((out.var(axis=0)).mean()) == pytest.approx(1.0)


def test_the_pooled_map_leaves_constant_data_finite() -> None:
    out = PooledScaler().fit_transform(np.ones((5, 3)))
    assert np.isfinite(out).all()


def test_the_pooled_map_comes_first_only_where_columns_share_a_scale() -> None:
    assert numeric_map_choices(0.2, shared_scale=True) == ("pooled", "standard", "quantile")
    assert numeric_map_choices(3.0, shared_scale=True)[0] == "pooled"
    assert "pooled" not in numeric_map_choices(3.0)


def _space(frame: pd.DataFrame, *, mlp_seconds: float, budget: float) -> object:
    dataset = prepare_frame(frame, "y")
    meta = compute_metafeatures(dataset.X, dataset.y, dataset.task, dataset.roles, max_rows=500,
                                time_cap_s=30.0, probe_rows=100)
    costs = {f: 0.001 for f in FAMILY_NAMES} | {"mlp": mlp_seconds}
    probes = {f: CostProbe(f, "fixed for the test", 100, s, s, SCALING_RULES[f]) for f, s in costs.items()}
    return build_space(data_facts(dataset, dataclasses.replace(meta, cost=probes)), budget_seconds=budget)


def test_scaled_families_search_the_pooled_map_on_a_pixel_grid_and_say_why() -> None:
    space = _space(_digits(), mlp_seconds=0.001, budget=600.0)
    for family in ("linear", "mlp"):
        assert "pooled" in space.families[family].params["num_transform"].choices
        assert "share one scale" in space.families[family].params["num_transform"].reason
    assert any("share one scale" in note for note in space.notes)
    assert "columns share one scale" in space.families["mlp"].reason


def test_a_table_in_mixed_units_gets_no_pooled_map() -> None:
    space = _space(_grid(stretch=1000.0), mlp_seconds=0.001, budget=600.0)
    assert "pooled" not in space.families["linear"].params["num_transform"].choices


def test_the_mlp_may_take_a_larger_share_of_the_budget_on_one_scale() -> None:
    # The same table in one unit and with one column in another: across a sweep of MLP costs, the
    # one-unit table never leaves the MLP out where the mixed table keeps it, and keeps it somewhere
    # the mixed table does not (a trial between 6 % and 10 % of the budget).
    one_unit, mixed = _grid(), _grid(stretch=1000.0)
    kept_one = [("mlp" in _space(one_unit, mlp_seconds=s, budget=60.0).families) for s in np.geomspace(0.05, 5, 12)]
    kept_mixed = [("mlp" in _space(mixed, mlp_seconds=s, budget=60.0).families) for s in np.geomspace(0.05, 5, 12)]
    assert all(a or not b for a, b in zip(kept_one, kept_mixed))
    assert sum(kept_one) > sum(kept_mixed)


def test_a_pooled_map_pipeline_fits_and_predicts() -> None:
    dataset = prepare_frame(_digits(), "y", "multiclass")
    cardinality = dataset.cardinality
    pipeline = build_pipeline({"family": "linear", "linear.num_transform": "pooled"}, dataset.roles, cardinality,
                              dataset.task)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pipeline.fit(dataset.X.iloc[:600], dataset.y[:600])
    assert (pipeline.predict(dataset.X.iloc[600:900]) == dataset.y[600:900]).mean() > 0.85
