"""`run --learn-nearest K`: learn from the earlier studies whose data looks most like the new data.

Method: the meta-learning warm start of Feurer, Springenberg & Hutter (2015, AAAI; from memory):
nearest datasets by L1 distance between meta-feature vectors, their best configurations first.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from conftest import small_frame
from tunelab.facts import meta_distance, similarity_vector


def _vector(frame: pd.DataFrame, target: str, path: Path) -> dict[str, float]:
    from tunelab.data import load_dataset
    from tunelab.ops._profile import profile_metafeatures

    frame.to_csv(path, index=False)
    return similarity_vector(profile_metafeatures(load_dataset(path, target, None)))


def test_every_entry_lies_between_zero_and_one_and_a_dataset_is_at_distance_zero_from_itself(tmp_path) -> None:
    vector = _vector(small_frame(), "y", tmp_path / "a.csv")
    assert vector and all(0.0 <= v <= 1.0 for v in vector.values())
    assert meta_distance(vector, vector) == 0.0


def test_the_distance_is_a_mean_over_shared_entries_symmetric_and_none_when_nothing_is_shared() -> None:
    a, b = {"log_rows": 0.5, "class_balance": 1.0}, {"log_rows": 0.3, "skewness": 0.2}
    assert meta_distance(a, b) == pytest.approx(0.2) == meta_distance(b, a)
    assert meta_distance({"log_rows": 0.5}, {"skewness": 0.1}) is None


def test_half_of_an_open_dataset_is_nearest_to_its_other_half(tmp_path) -> None:
    # Open data shipped in PyPI packages: scikit-learn `load_breast_cancer` (569 rows, 30 numeric
    # columns) and statsmodels `datasets.fair` (6,366 rows, 8 columns; affairs > 0 as the target).
    # The second half of breast cancer must find its first half nearer than the other binary table.
    from sklearn.datasets import load_breast_cancer
    from statsmodels.datasets import fair

    cancer = load_breast_cancer(as_frame=True).frame.sample(frac=1.0, random_state=0)
    first, second = cancer.iloc[: len(cancer) // 2], cancer.iloc[len(cancer) // 2:]
    affairs = fair.load_pandas().data.assign(affairs=lambda d: (d["affairs"] > 0).astype(int))
    v_first = _vector(first, "target", tmp_path / "first.csv")
    v_second = _vector(second, "target", tmp_path / "second.csv")
    v_fair = _vector(affairs, "affairs", tmp_path / "fair.csv")
    assert meta_distance(v_second, v_first) < meta_distance(v_second, v_fair)


@pytest.fixture
def store_with_two_studies(tmp_path: Path, store_path: Path) -> Path:
    """Two earlier binary studies: 'q3' on data like the new quarter, 'cancer' on a different table."""
    from sklearn.datasets import load_breast_cancer

    from tunelab.engine import Budget
    from tunelab.ops import RunRequest, run_study

    q3, cancer = tmp_path / "q3.csv", tmp_path / "cancer.csv"
    small_frame(seed=3).to_csv(q3, index=False)
    load_breast_cancer(as_frame=True).frame.to_csv(cancer, index=False)
    run_study(RunRequest(q3, "y", Budget(trials=3), store=str(store_path), study="q3"))
    run_study(RunRequest(cancer, "target", Budget(trials=3), store=str(store_path), study="cancer"))
    return store_path


@pytest.mark.slow
def test_the_nearest_study_is_chosen_its_best_configs_run_first_and_the_user_is_told(
        cli, tmp_path, store_with_two_studies) -> None:
    import optuna

    from tunelab.ops._learn import LEARNED_ATTR
    from tunelab.store import Store

    q4 = tmp_path / "q4.csv"
    small_frame(seed=4).to_csv(q4, index=False)
    result = cli("run", str(q4), "--target", "y", "--trials", "4", "--store", str(store_with_two_studies),
                 "--study", "q4", "--learn-nearest", "1")
    assert result.code == 0, result.err
    assert "learning from study 'q3' (nearest data, distance" in result.out + result.err
    assert "'cancer'" not in result.out + result.err
    with Store.open(str(store_with_two_studies)) as store:
        later = optuna.load_study(study_name="q4", storage=store.optuna_storage())
        assert "similarity" in store.get_study("q4").settings  # so later data can find this study too
    sources = [t.user_attrs.get(LEARNED_ATTR) for t in later.trials]
    assert sources[0] == "q3" and "cancer" not in sources


def test_with_no_earlier_study_to_compare_the_search_runs_cold_and_says_so(cli, small_csv, store_path) -> None:
    result = cli("run", str(small_csv), "--target", "y", "--trials", "2", "--store", str(store_path),
                 "--learn-nearest", "2")
    assert result.code == 0, result.err
    assert "no earlier binary study in this store has meta-features to compare" in result.out + result.err


def test_a_study_searched_with_a_space_file_stores_no_meta_features_and_is_no_candidate(
        cli, small_csv, store_path, tmp_path) -> None:
    from tunelab.ops._learn import nearest_studies
    from tunelab.space import FamilySpec, ParamSpec, SpaceSpec
    from tunelab.store import Store

    space = tmp_path / "space.json"
    space.write_text(SpaceSpec(families={"linear": FamilySpec(
        {"C": ParamSpec("float", 1e-2, 10.0, log=True)})}).to_json())
    assert cli("run", str(small_csv), "--target", "y", "--trials", "2", "--store", str(store_path),
               "--study", "hand-made", "--space", str(space)).code == 0
    with Store.open(str(store_path)) as store:
        assert "similarity" not in store.get_study("hand-made").settings
        assert nearest_studies(store, {"log_rows": 0.4}, "binary", 3) == []


def test_a_negative_count_is_refused(cli, small_csv, store_path) -> None:
    result = cli("run", str(small_csv), "--target", "y", "--trials", "2", "--store", str(store_path),
                 "--learn-nearest", "-1")
    assert result.code == 2
    assert not store_path.exists()


def _earlier_study(store_path: Path, name: str, vector: dict[str, float], task: str = "binary") -> None:
    """A study record with a stored meta-feature vector and one complete trial, without a search."""
    import optuna

    from tunelab.store import Store

    with Store.open(str(store_path), create=True) as store:
        store.create_study(name=name, now=0.0, data_path=f"{name}.csv", data_sha256="", fingerprint="",
                           target="y", task=task, metric="roc_auc", direction="maximize", seed=0,
                           budget_wall=60.0, budget_cpu=None, budget_trials=None,
                           settings={"similarity": vector}, space_json="{}", space_reason="test")
        study = optuna.create_study(storage=store.optuna_storage(), study_name=name, direction="maximize")
        study.add_trial(optuna.trial.create_trial(params={}, distributions={}, value=0.8))


def test_profile_lists_the_earlier_studies_most_like_the_data(cli, small_csv, store_path, tmp_path) -> None:
    import json

    own = _vector(pd.read_csv(small_csv), "y", tmp_path / "copy.csv")
    _earlier_study(store_path, "unlike", {key: 1.0 - value for key, value in own.items()})
    _earlier_study(store_path, "alike", own)
    _earlier_study(store_path, "regression-one", own, task="regression")
    result = cli("profile", str(small_csv), "--target", "y", "--store", str(store_path), "--json")
    assert result.code == 0, result.err
    similar = json.loads(result.out)["similar_studies"]
    assert [s["study"] for s in similar] == ["alike", "unlike"]  # same task only, nearest first
    assert similar[0]["distance"] == pytest.approx(0.0, abs=1e-9)
    shown = cli("profile", str(small_csv), "--target", "y", "--store", str(store_path)).out
    assert "earlier binary studies like this data" in shown and "alike (0.00)" in shown


def test_profile_without_a_store_says_nothing_of_earlier_studies_and_creates_none(cli, small_csv, tmp_path) -> None:
    missing = tmp_path / "none-yet.db"
    result = cli("profile", str(small_csv), "--target", "y", "--store", str(missing))
    assert result.code == 0, result.err
    assert "earlier" not in result.out
    assert not missing.exists()
