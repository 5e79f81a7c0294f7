"""The whole job from the shell: run → status → resume → export → predict, with --json for scripts."""

from __future__ import annotations

import json

import pandas as pd
import pytest

from conftest import small_frame


@pytest.fixture
def finished_study(cli, small_csv, store_path):
    result = cli("run", str(small_csv), "--target", "y", "--trials", "4", "--store", str(store_path),
                 "--study", "demo", "--json")
    assert result.code == 0, result.err
    return json.loads(result.out)


def test_run_reports_the_best_trial_as_json(finished_study):
    assert finished_study["study"] == "demo"
    assert finished_study["stop_reason"] == "trial count reached"
    assert finished_study["trials"]["complete"] + finished_study["trials"]["pruned"] == 4
    assert 0.5 < finished_study["best_value"] <= 1.0
    assert "family" in finished_study["best_config"]


def test_status_lists_every_study_one_line_each(cli, finished_study, store_path):
    result = cli("status", "--store", str(store_path), "--json")
    assert result.code == 0
    rows = json.loads(result.out)
    assert [r["name"] for r in rows] == ["demo"]
    assert rows[0]["counts"]["complete"] >= 1 and rows[0]["metric"] == "roc_auc"
    table = cli("status", "--store", str(store_path))
    assert "demo" in table.out and "roc_auc" in table.out


def test_status_of_one_study_shows_best_config_spread_and_budget(cli, finished_study, store_path):
    detail = json.loads(cli("status", "demo", "--store", str(store_path), "--json").out)
    assert detail["best_trial"]["value"] == pytest.approx(finished_study["best_value"])
    assert detail["best_trial"]["fold_std"] is not None
    assert len(detail["top"]) >= 1
    text = cli("status", "demo", "--store", str(store_path)).out
    assert "± " in text and "across folds" in text and "budget:" in text


def test_status_says_which_families_are_searched_and_how_trials_are_pruned(cli, finished_study, store_path):
    detail = json.loads(cli("status", "demo", "--store", str(store_path), "--json").out)
    assert "linear" in detail["families"]
    assert detail["pruning"] == "auto: halving (about 4 trials expected)"  # --trials 4: enough to rank
    assert "search: " in cli("status", "demo", "--store", str(store_path)).out


def test_resume_with_more_trials_continues_the_same_study(cli, finished_study, store_path):
    result = cli("resume", "demo", "--more-trials", "2", "--store", str(store_path), "--json")
    assert result.code == 0, result.err
    assert sum(json.loads(result.out)["trials"].values()) == 2
    detail = json.loads(cli("status", "demo", "--store", str(store_path), "--json").out)
    assert [w["kind"] for w in detail["workers"]] == ["run", "resume"]


def test_resume_when_the_budget_is_spent_says_so(cli, finished_study, store_path):
    result = cli("resume", "demo", "--store", str(store_path))
    assert result.code == 0
    assert "budget already spent" in result.out


def test_export_then_predict_writes_predictions_and_probabilities(cli, finished_study, store_path, tmp_path):
    model = tmp_path / "model.zip"
    exported = json.loads(cli("export", "demo", "--out", str(model), "--store", str(store_path), "--json").out)
    assert model.exists() and len(exported["sha256"]) == 64
    new_rows = tmp_path / "new.csv"
    small_frame(50, seed=9).drop(columns=["y"]).to_csv(new_rows, index=False)
    out = tmp_path / "preds.csv"
    result = cli("predict", str(model), str(new_rows), "--out", str(out))
    assert result.code == 0, result.err
    preds = pd.read_csv(out)
    assert list(preds.columns) == ["prediction", "proba_no", "proba_yes"]
    assert len(preds) == 50
    assert preds[["proba_no", "proba_yes"]].sum(axis=1).round(6).eq(1).all()


def test_predict_names_the_missing_columns(cli, finished_study, store_path, tmp_path):
    model = tmp_path / "model.zip"
    cli("export", "demo", "--out", str(model), "--store", str(store_path))
    rows = tmp_path / "partial.csv"
    small_frame(10).drop(columns=["y", "colour"]).to_csv(rows, index=False)
    result = cli("predict", str(model), str(rows), "--out", str(tmp_path / "p.csv"))
    assert result.code == 2
    assert "colour" in result.err and result.err.count("\n") == 1


def test_predict_refuses_an_altered_model_file(cli, finished_study, store_path, tmp_path):
    import zipfile

    model = tmp_path / "model.zip"
    cli("export", "demo", "--out", str(model), "--store", str(store_path))
    with zipfile.ZipFile(model) as archive:
        meta, payload = archive.read("meta.json"), bytearray(archive.read("pipeline.joblib"))
    payload[-10] ^= 0xFF
    with zipfile.ZipFile(model, "w") as archive:
        archive.writestr("meta.json", meta)
        archive.writestr("pipeline.joblib", bytes(payload))
    rows = tmp_path / "rows.csv"
    small_frame(10).to_csv(rows, index=False)
    result = cli("predict", str(model), str(rows), "--out", str(tmp_path / "p.csv"))
    assert result.code == 2 and "altered" in result.err


def test_the_store_location_comes_from_the_environment(cli, small_csv, tmp_path, monkeypatch):
    store = tmp_path / "env.db"
    monkeypatch.setenv("TUNELAB_STORE", str(store))
    assert cli("run", str(small_csv), "--target", "y", "--trials", "1", "-q").code == 0
    assert store.exists()


def test_regression_and_multiclass_tasks_are_inferred(cli, tmp_path, store_path):
    import numpy as np

    rng = np.random.default_rng(0)
    frame = pd.DataFrame({"a": rng.normal(size=150), "b": rng.normal(size=150)})
    frame["price"] = 3 * frame["a"] + rng.normal(scale=0.1, size=150)
    frame["kind"] = np.where(frame["a"] > 0.5, "x", np.where(frame["a"] < -0.5, "y", "z"))
    path = tmp_path / "r.csv"
    frame.to_csv(path, index=False)
    reg = json.loads(cli("run", str(path), "--target", "price", "--trials", "2", "--store", str(store_path),
                         "--json").out)
    assert reg["metric"] == "rmse"
    multi = json.loads(cli("run", str(path), "--target", "kind", "--trials", "2", "--store", str(store_path),
                           "--json").out)
    assert multi["metric"] == "log_loss"


def test_export_rebuilds_what_the_space_fixed_one_family_and_frozen_knobs(cli, small_csv, store_path, tmp_path):
    # A one-family space with a knob held fixed: trials never sample either, yet the exported
    # pipeline must be the family's, with the fixed value in place.
    from tunelab.models import load_pipeline, read_meta
    from tunelab.space import FamilySpec, ParamSpec, SpaceSpec, fixed

    space = tmp_path / "space.json"
    space.write_text(SpaceSpec(families={"hist_gb": FamilySpec({
        "learning_rate": fixed(0.137), "max_iter": fixed(20),
        "max_leaf_nodes": ParamSpec("int", low=4, high=16)})}).to_json(), encoding="utf-8")
    assert cli("run", str(small_csv), "--target", "y", "--trials", "3", "--space", str(space),
               "--store", str(store_path), "--study", "fixed", "-q").code == 0
    model = tmp_path / "fixed.zip"
    assert cli("export", "fixed", "--out", str(model), "--store", str(store_path)).code == 0
    meta = read_meta(model)
    assert meta["config"]["family"] == "hist_gb" and meta["config"]["hist_gb.learning_rate"] == 0.137
    estimator = load_pipeline(model, meta).named_steps["model"]
    assert type(estimator).__name__ == "HistGradientBoostingClassifier" and estimator.learning_rate == 0.137
