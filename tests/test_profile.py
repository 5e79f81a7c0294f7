"""Specification of the ``profile`` verb's logic (tunelab.ops._profile.profile_data)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer

from tunelab.errors import InputError
from tunelab.ops._profile import ProfileReport, built_space, profile_data, profile_metafeatures
from tunelab.space import SpaceSpec


@pytest.fixture(scope="module")
def breast_cancer_report(tmp_path_factory: pytest.TempPathFactory) -> ProfileReport:
    # scikit-learn's bundled Wisconsin breast-cancer data (sklearn.datasets.load_breast_cancer):
    # 569 rows, 30 numeric features, 212 malignant (0) and 357 benign (1), no missing values.
    frame = load_breast_cancer(as_frame=True).frame
    path = tmp_path_factory.mktemp("profile") / "breast_cancer.csv"
    frame.to_csv(path, index=False)
    return profile_data(path, "target", budget_seconds=60.0)


def test_profile_of_breast_cancer_matches_the_published_shape(breast_cancer_report: ProfileReport) -> None:
    report = breast_cancer_report
    assert (report.task, report.n_rows, len(report.columns)) == ("binary", 569, 30)
    assert list(report.classes) == [0, 1]
    assert all(c.role == "numeric" and c.missing_share == 0.0 for c in report.columns)
    assert report.meta.information.imbalance_ratio == pytest.approx(357 / 212)


def test_profile_reports_each_columns_cardinality(breast_cancer_report: ProfileReport) -> None:
    frame = load_breast_cancer(as_frame=True).frame
    for column in breast_cancer_report.columns:
        assert column.n_unique == frame[column.name].nunique(), column.name
        assert column.mean_tokens is None and column.treatment


def test_profile_builds_a_space_for_the_budget(breast_cancer_report: ProfileReport) -> None:
    space = breast_cancer_report.space
    assert len(space.families) >= 2 and space.warm_starts
    assert "60 s budget" in space.family_reason
    assert "mlp" not in space.families  # 569 rows, 455 per training fold: too few for the network


def test_profile_to_dict_is_plain_json(breast_cancer_report: ProfileReport) -> None:
    data = json.loads(json.dumps(breast_cancer_report.to_dict()))
    assert data["rows"] == 569 and data["task"] == "binary"
    assert {"simple", "statistical", "information", "landmarkers", "cost"} <= set(data["meta_features"])
    assert SpaceSpec.from_dict(data["space"]) == breast_cancer_report.space


def test_profile_shows_roles_tokens_and_missing_shares(tmp_path: Path) -> None:
    rng = np.random.default_rng(0)
    n = 300
    notes = [" ".join(rng.choice(["good", "bad", "fine", "late", "early"], k)) for k in rng.integers(2, 9, n)]
    frame = pd.DataFrame({
        "row_id": np.arange(n),
        "amount": rng.lognormal(size=n),
        "shop": rng.choice(["north", "south", "east"], n),
        "note": notes,
        "y": rng.normal(size=n),
    })
    frame.loc[:29, "amount"] = np.nan
    path = tmp_path / "mixed.csv"
    frame.to_csv(path, index=False)
    report = profile_data(path, "y")
    by_name = {c.name: c for c in report.columns}
    assert by_name["row_id"].role == "id" and "dropped" in by_name["row_id"].treatment
    assert by_name["amount"].missing_share == pytest.approx(0.1)
    assert by_name["shop"].role == "categorical" and by_name["shop"].n_unique == 3
    assert by_name["note"].role == "text"
    assert by_name["note"].mean_tokens == pytest.approx(np.mean([len(t.split()) for t in notes]))
    assert report.task == "regression" and "prep.text_components" in report.space.params


def test_profile_raises_the_same_input_errors_as_run(tmp_path: Path) -> None:
    path = tmp_path / "data.csv"
    pd.DataFrame({"a": [1, 2, 3], "b": [0, 1, 0]}).to_csv(path, index=False)
    with pytest.raises(InputError, match="target column 'c' is not in the data"):
        profile_data(path, "c")
    with pytest.raises(InputError):
        profile_data(tmp_path / "missing.csv", "b")
    with pytest.raises(InputError, match="unknown task"):
        profile_data(path, "b", task="ranking")


def test_large_data_is_profiled_on_a_landmarking_subsample() -> None:
    from tunelab.data import prepare_frame

    rng = np.random.default_rng(0)
    frame = pd.DataFrame(rng.normal(size=(25_000, 50)), columns=[f"x{i}" for i in range(50)])
    frame["y"] = np.where(frame["x0"] + rng.normal(size=len(frame)) > 0, "a", "b")
    dataset = prepare_frame(frame, "y")
    meta = profile_metafeatures(dataset)
    assert meta.simple.n_rows == 25_000
    assert meta.landmarkers.rows_used == 2000
    space = built_space(dataset, budget_seconds=600.0)
    assert "svm" not in space.families  # 25,000 rows: past the kernel SVM's row limit
