"""`run --learn-from STUDY`: an earlier study's best configs run first on new data, fitted to its space."""

from __future__ import annotations

from pathlib import Path

import pytest

from conftest import small_frame
from tunelab.space import FamilySpec, ParamSpec, SpaceSpec, carry_config, carry_configs, fixed

NEW_SPACE = SpaceSpec(
    params={"prep.numeric": ParamSpec("categorical", choices=("scale", "quantile"))},
    families={
        "hist_gb": FamilySpec({"learning_rate": ParamSpec("float", 0.01, 0.3, log=True),
                               "max_leaf_nodes": ParamSpec("int", 4, 31, log=True),
                               "l2_regularization": fixed(0.0)}),
        "linear": FamilySpec({"C": ParamSpec("float", 1e-3, 10.0, log=True)}),
    },
)


def test_numbers_move_to_the_nearest_value_the_new_range_allows() -> None:
    earlier = {"family": "hist_gb", "hist_gb.learning_rate": 0.5, "hist_gb.max_leaf_nodes": 63.0}
    assert carry_config(NEW_SPACE, earlier) == {"family": "hist_gb", "hist_gb.learning_rate": 0.3,
                                                "hist_gb.max_leaf_nodes": 31}


def test_values_inside_the_new_range_are_kept_as_they_were() -> None:
    earlier = {"family": "linear", "linear.C": 0.25, "prep.numeric": "quantile"}
    assert carry_config(NEW_SPACE, earlier) == earlier


def test_a_family_the_new_space_left_out_is_not_carried() -> None:
    assert carry_config(NEW_SPACE, {"family": "svm", "svm.C": 1.0}) is None


def test_what_the_new_space_lacks_is_left_to_the_sampler_or_the_space() -> None:
    earlier = {"family": "hist_gb", "prep.numeric": "log", "hist_gb.max_features": 0.5,
               "hist_gb.l2_regularization": 3.0, "hist_gb.learning_rate": 0.05}
    # "log" is no choice here, max_features is not searched, l2 is held fixed by the new space
    assert carry_config(NEW_SPACE, earlier) == {"family": "hist_gb", "hist_gb.learning_rate": 0.05}


def test_configs_that_land_on_the_same_point_count_once_and_the_limit_holds() -> None:
    earlier = [{"family": "linear", "linear.C": 50.0}, {"family": "linear", "linear.C": 80.0},
               {"family": "svm"}, {"family": "linear", "linear.C": 1.0}, {"family": "hist_gb"}]
    assert carry_configs(NEW_SPACE, earlier, limit=2) == [{"family": "linear", "linear.C": 10.0},
                                                          {"family": "linear", "linear.C": 1.0}]


@pytest.fixture
def two_quarters(tmp_path: Path) -> tuple[Path, Path]:
    q3, q4 = tmp_path / "q3.csv", tmp_path / "q4.csv"
    small_frame(seed=3).to_csv(q3, index=False)
    small_frame(seed=4).to_csv(q4, index=False)
    return q3, q4


def test_the_earlier_best_configs_run_first_and_are_marked_with_their_source(two_quarters, store_path) -> None:
    from tunelab.engine import Budget
    from tunelab.ops import RunRequest, run_study
    from tunelab.ops._learn import LEARNED_ATTR
    from tunelab.store import Store

    q3, q4 = two_quarters
    run_study(RunRequest(q3, "y", Budget(trials=4), store=str(store_path), study="q3"))
    run_study(RunRequest(q4, "y", Budget(trials=4), store=str(store_path), study="q4", learn_from=("q3",)))

    import optuna

    with Store.open(str(store_path)) as store:
        earlier = optuna.load_study(study_name="q3", storage=store.optuna_storage())
        later = optuna.load_study(study_name="q4", storage=store.optuna_storage())
    learned = [t for t in later.trials if t.user_attrs.get(LEARNED_ATTR) == "q3"]
    assert 1 <= len(learned) <= 3
    assert [t.number for t in learned] == list(range(len(learned)))  # queued ahead of everything else
    assert learned[0].params.get("family", "hist_gb") == earlier.best_trial.params.get("family", "hist_gb")

    from tunelab.ops._status import study_detail

    shown = {t.number: t.origin for t in study_detail("q4", str(store_path), top=10).top}
    assert {shown[t.number] for t in learned if t.number in shown} <= {"from q3"}
    assert "from q3" in shown.values()  # status says which configs came from the earlier study


def test_status_tells_carried_prior_retried_and_searched_configs_apart() -> None:
    from tunelab.store import origin_of as trial_origin

    assert trial_origin({"tl_warm_start": True, "tl_learned_from": "q3"}) == "from q3"
    assert trial_origin({"tl_warm_start": True}) == "prior"
    assert trial_origin({"tl_retry_of": 7}) == "retry of 7"
    assert trial_origin({}) == "search"


def test_learning_from_a_study_that_is_not_there_is_a_one_line_error(cli, small_csv, store_path) -> None:
    result = cli("run", str(small_csv), "--target", "y", "--trials", "2", "--store", str(store_path),
                 "--learn-from", "last-quarter")
    assert result.code == 2
    assert "no study named 'last-quarter'" in result.err
    assert "Traceback" not in result.err


def test_learning_across_kinds_of_task_is_refused(cli, small_csv, store_path) -> None:
    from tunelab.engine import Budget
    from tunelab.ops import create_objective_study
    from tunelab.store import Store

    create_objective_study("branin", NEW_SPACE, Budget(trials=1), store=str(store_path))
    result = cli("run", str(small_csv), "--target", "y", "--trials", "2", "--store", str(store_path),
                 "--learn-from", "branin")
    assert result.code == 2
    assert "study 'branin' has task objective; this data has task binary" in result.err
    with Store.open(str(store_path)) as store:
        assert store.study_names() == {"branin"}  # refused before the new study was written


def test_a_study_with_no_complete_trial_has_nothing_to_teach(cli, small_csv, store_path) -> None:
    import optuna

    from tunelab.store import Store

    with Store.open(str(store_path), create=True) as store:
        store.create_study(name="fresh", now=0.0, data_path="fresh.csv", data_sha256="", fingerprint="",
                           target="y", task="binary", metric="roc_auc", direction="maximize", seed=0,
                           budget_wall=60.0, budget_cpu=None, budget_trials=None, settings={},
                           space_json=NEW_SPACE.to_json(), space_reason="test")
        optuna.create_study(storage=store.optuna_storage(), study_name="fresh", direction="maximize")
    result = cli("run", str(small_csv), "--target", "y", "--trials", "2", "--store", str(store_path),
                 "--learn-from", "fresh")
    assert result.code == 2
    assert "study 'fresh' has no complete trial to learn from" in result.err
