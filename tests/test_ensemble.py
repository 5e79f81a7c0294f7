"""Ensemble selection over the search's out-of-fold predictions (Caruana et al. 2004, 2006)."""

from __future__ import annotations

import json
import sqlite3
import zipfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from tunelab.evaluation import METRICS
from tunelab.insight import plan_ensemble
from tunelab.insight._ensemble import select


@pytest.fixture(scope="module")
def searched(tmp_path_factory):
    """A finished study of 24 unpruned trials whose held-out predictions are kept."""
    from conftest import small_frame
    from tunelab.engine import Budget
    from tunelab.ops import RunRequest, run_study

    folder = tmp_path_factory.mktemp("ensemble")
    data = folder / "small.csv"
    small_frame(400).to_csv(data, index=False)
    store = folder / "e.db"
    run_study(RunRequest(data=data, target="y", budget=Budget(trials=24), store=str(store), study="e",
                         pruning="off", jobs=1))
    return store, data


def test_every_complete_trial_keeps_its_held_out_predictions_as_plain_float32_arrays(searched):
    from tunelab.store import Store

    store, _ = searched
    with Store.open(str(store)) as st:
        record = st.get_study("e")
        kept = st.predictions(record)
        complete = [t.number for t in st.trials(record) if t.state == "complete"]
        trials, size = st.predictions_size(record)
    assert sorted(kept) == sorted(complete) and trials == len(complete)
    assert all(len(folds) == 5 and all(a.dtype == np.float32 and a.ndim == 1 for a in folds) for folds in kept.values())
    assert size == 4 * 400 * len(complete)  # rows x one column (two classes) x 4 bytes, per trial


def test_the_ensembles_out_of_fold_score_matches_scikit_learns_recomputation_from_the_stored_arrays(searched):
    # Reference library: scikit-learn (PyPI), sklearn.metrics.roc_auc_score, on the weighted average
    # of the stored arrays over the judged folds' held-out rows.
    from sklearn.metrics import roc_auc_score

    from tunelab.data import load_dataset
    from tunelab.evaluation import make_folds
    from tunelab.ops._ensemble import ensemble_plan
    from tunelab.store import Store

    store, data = searched
    with Store.open(str(store)) as st:
        record = st.get_study("e")
        dataset = load_dataset(data, "y", None)
        found = ensemble_plan(st, record, dataset, max_members=10)
        kept = st.predictions(record)
    assert found is not None
    folds = make_folds(dataset.y, dataset.task, record.seed, record.settings.get("n_folds"))
    judged = [f - 1 for f in found.folds]
    truth = np.concatenate([dataset.y[folds[f][1]] for f in judged])
    blended = sum(w * np.concatenate([kept[n][f] for f in judged]) for n, w in found.members)
    positive = sorted(np.unique(dataset.y))[1]
    assert found.oof_score == pytest.approx(roc_auc_score(truth == positive, blended), abs=1e-9)
    assert sum(w for _, w in found.members) == pytest.approx(1.0)


def test_greedy_weights_approach_inverse_variance_weights_for_two_independent_unbiased_regressors():
    # Known answer: two unbiased forecasts with independent errors of variance s1^2 and s2^2 combine
    # best with weights proportional to 1/s^2 (Bates & Granger 1969, "The combination of forecasts",
    # Operational Research Quarterly 20(4)): with s1 = 1, s2 = 2 the first gets 4/5.  Greedy
    # selection adds members one at a time, so its weights come in steps of 1/(additions); with 2
    # initial and up to 25 added the step is at most 1/3 at the start and 1/27 at the end, so the
    # tolerance is 0.05 (a step, plus the sampling error of 20,000 rows).
    rng = np.random.default_rng(0)
    truth = rng.normal(size=20_000)
    first = truth + rng.normal(scale=1.0, size=truth.size)
    second = truth + rng.normal(scale=2.0, size=truth.size)
    weights = select({0: first.astype(np.float32), 1: second.astype(np.float32)}, truth, [], METRICS["rmse"])
    assert weights[0] == pytest.approx(0.8, abs=0.05)
    assert weights[1] == pytest.approx(0.2, abs=0.05)


def test_a_plan_judges_the_ensemble_cross_fitted_against_the_best_single_trial():
    # Three noisy copies of the truth: their average beats each alone, on rows selection never saw.
    rng = np.random.default_rng(1)
    y_folds = [rng.normal(size=300) for _ in range(4)]
    predictions = {n: [(y + rng.normal(scale=1.0, size=y.size)).astype(np.float32) for y in y_folds]
                   for n in range(3)}
    found = plan_ensemble(predictions, {0: 1.0, 1: 1.0, 2: 1.0}, y_folds, [], METRICS["rmse"])
    assert found is not None and found.folds == (2, 3, 4) and len(found.members) == 3
    assert found.gain > 0 and found.worth_it and found.score < found.single  # rmse: lower is better


def test_kept_probabilities_a_rounding_step_past_one_are_scored_not_refused():
    # float32 storage and blending put a probability at 1.0000000186 in a real run, and
    # scikit-learn's log_loss raises for any value above 1 (its own check; reference library).
    rng = np.random.default_rng(2)
    y_folds = [rng.integers(0, 2, size=200) for _ in range(4)]
    past_one = np.float32(1.0000001)
    predictions = {n: [np.where(y == 1, past_one, np.float32(0.3 + 0.1 * n)).astype(np.float32) for y in y_folds]
                   for n in range(3)}
    found = plan_ensemble(predictions, {0: 0.5, 1: 0.5, 2: 0.5}, y_folds, [0, 1], METRICS["log_loss"])
    assert found is not None and np.isfinite(found.score) and found.score >= 0


def test_an_exported_ensembles_probabilities_never_pass_one_when_its_weights_round_past_one():
    from sklearn.dummy import DummyClassifier

    from tunelab.models import WeightedEnsemble

    X, y = np.zeros((3, 1)), np.array([0, 1, 1])
    members = [DummyClassifier(strategy="constant", constant=1).fit(X, y) for _ in range(5)]
    weights = [18, 18, 15, 1, 6]  # normalised, these sum to 1 + 2e-16 added in this order
    proba = WeightedEnsemble.of_fitted(members, weights).predict_proba(X)
    assert proba.max() <= 1.0 and proba[:, 1] == pytest.approx(1.0)


def test_export_writes_one_estimator_that_round_trips_and_says_what_it_holds(searched, tmp_path, cli):
    store, data = searched
    model = tmp_path / "ensemble.zip"
    result = cli("export", "e", "--store", str(store), "--out", str(model), "--ensemble", "--max-members", "3",
                 "--json")
    assert result.code == 0, result.err
    shipped = json.loads(result.out)
    assert shipped["chosen_by"] == "ensemble" and 2 <= len(shipped["members"]) <= 3
    with zipfile.ZipFile(model) as archive:
        meta = json.loads(archive.read("meta.json"))
    assert [m["trial"] for m in meta["ensemble"]["members"]] == [m["trial"] for m in shipped["members"]]
    assert sum(m["weight"] for m in meta["ensemble"]["members"]) == pytest.approx(1.0)
    out = tmp_path / "preds.csv"
    assert cli("predict", str(model), str(data), "--out", str(out)).code == 0
    preds = pd.read_csv(out)
    assert set(preds["prediction"]) <= {"yes", "no"}
    assert np.allclose(preds[["proba_no", "proba_yes"]].sum(axis=1), 1.0)


def test_a_single_trial_model_file_written_the_old_way_still_predicts(searched, tmp_path, cli):
    store, data = searched
    model = tmp_path / "single.zip"
    assert cli("export", "e", "--store", str(store), "--out", str(model), "--single").code == 0
    with zipfile.ZipFile(model) as archive:
        assert "ensemble" not in json.loads(archive.read("meta.json"))
    assert cli("predict", str(model), str(data), "--out", str(tmp_path / "p.csv")).code == 0


def test_a_damaged_prediction_array_is_refused_in_one_line(searched, tmp_path, cli):
    import shutil

    store, _ = searched
    copy = tmp_path / "damaged.db"
    for suffix in ("", "-wal", "-shm"):
        if Path(f"{store}{suffix}").exists():
            shutil.copy(f"{store}{suffix}", f"{copy}{suffix}")
    with sqlite3.connect(copy) as conn:
        (row_id, blob) = conn.execute("select id, data from tl_prediction limit 1").fetchone()
        damaged = bytearray(blob)
        damaged[len(damaged) // 2] ^= 0xFF
        conn.execute("update tl_prediction set data = ? where id = ?", (bytes(damaged), row_id))
    result = cli("export", "e", "--store", str(copy), "--out", str(tmp_path / "m.zip"), "--ensemble")
    assert result.code == 2
    lines = [ln for ln in result.err.strip().splitlines() if ln]
    assert len(lines) == 1 and "are damaged" in lines[0] and "Traceback" not in result.err


@pytest.mark.parametrize(("gain", "advice"), [(0.002, "ship it with --ensemble"),
                                              (0.0001, "within fold noise, not worth it"),
                                              (-0.001, "not worth it")])
def test_exports_ensemble_advice_uses_the_same_fold_noise_bar_as_the_default(gain, advice, capsys):
    # The demo once printed "would have added +0.0001444 (fold noise 0.00015): ship it with --ensemble".
    from types import SimpleNamespace

    from tunelab._render import print_export

    result = SimpleNamespace(predict_ms_per_1000=15.0, refit_seconds=0.1, members=[], chosen_by="best",
                             path="m.zip", trial=3, family="linear", metric="roc_auc", score=0.73,
                             rows_words="all 3,000 rows", sha256="0" * 64,
                             plan={"gain": gain, "noise": 0.00015, "worth_it": gain > 0.00015})
    print_export(result)
    assert capsys.readouterr().out.strip().splitlines()[-1].endswith(f": {advice}")
