"""Specification of the torch MLP estimators (tunelab.models._mlp)."""

from __future__ import annotations

import pickle
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
import torch
from sklearn.base import clone
from sklearn.datasets import load_digits, make_classification, make_regression
from sklearn.metrics import accuracy_score, r2_score
from sklearn.model_selection import train_test_split
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.utils.estimator_checks import parametrize_with_checks

from tunelab.models._mlp import TorchMLPClassifier, TorchMLPRegressor

# Small settings so that most tests fit in well under a second.
FAST = dict(hidden_width=32, max_epochs=20, patience=5, batch_size=64)


class PruneTrial(Exception):
    """Stands in for the exception the engine raises to prune a trial."""


@pytest.fixture(scope="module")
def three_classes() -> tuple[np.ndarray, np.ndarray]:
    X, y = make_classification(
        n_samples=300, n_features=10, n_informative=6, n_classes=3, random_state=0
    )
    return X, y


# --------------------------------------------------------------------------- determinism
def test_same_seed_and_data_give_identical_probabilities(three_classes):
    X, y = three_classes
    first = TorchMLPClassifier(random_state=3, **FAST).fit(X, y).predict_proba(X)
    second = TorchMLPClassifier(random_state=3, **FAST).fit(X, y).predict_proba(X)
    np.testing.assert_array_equal(first, second)


def test_different_seed_gives_different_probabilities(three_classes):
    X, y = three_classes
    first = TorchMLPClassifier(random_state=3, **FAST).fit(X, y).predict_proba(X)
    second = TorchMLPClassifier(random_state=4, **FAST).fit(X, y).predict_proba(X)
    assert not np.array_equal(first, second)


def test_fit_leaves_global_random_state_and_thread_count_alone(three_classes):
    X, y = three_classes
    torch_state, numpy_state = torch.get_rng_state(), np.random.get_state()
    threads = torch.get_num_threads()
    TorchMLPClassifier(n_threads=1, **FAST).fit(X, y)
    assert torch.equal(torch.get_rng_state(), torch_state)
    assert np.array_equal(np.random.get_state()[1], numpy_state[1])
    assert torch.get_num_threads() == threads


# --------------------------------------------------------------------------- contract
def test_clone_get_params_set_params_round_trip():
    estimator = TorchMLPRegressor(hidden_width=64, optimizer="sgd", momentum=0.5)
    params = estimator.get_params()
    assert params["hidden_width"] == 64 and params["optimizer"] == "sgd"
    assert clone(estimator).get_params() == params
    rebuilt = TorchMLPRegressor().set_params(**params)
    assert rebuilt.get_params() == params


def test_clone_of_fitted_estimator_is_unfitted(three_classes):
    X, y = three_classes
    fitted = TorchMLPClassifier(**FAST).fit(X, y)
    fresh = clone(fitted)
    assert not hasattr(fresh, "module_") and not hasattr(fresh, "classes_")
    assert fresh.get_params() == fitted.get_params()


def test_pickled_model_predicts_the_same(three_classes):
    X, y = three_classes
    fitted = TorchMLPClassifier(**FAST).fit(X, y)
    restored = pickle.loads(pickle.dumps(fitted))
    np.testing.assert_array_equal(restored.predict_proba(X), fitted.predict_proba(X))


@pytest.mark.parametrize(
    ("params", "message"),
    [
        ({"optimizer": "rmsprop"}, "optimizer must be 'adam' or 'sgd', got 'rmsprop'"),
        ({"hidden_width": 0}, "hidden_width must be an integer >= 1"),
        ({"n_layers": 1.5}, "n_layers must be an integer >= 0"),
        ({"dropout": 1.0}, r"dropout must be a number in \[0, 1\)"),
        ({"learning_rate": 0.0}, "learning_rate must be a number > 0"),
        ({"validation_fraction": 0.0}, "validation_fraction must be a number strictly"),
        ({"batch_size": 1}, "batch_size must be >= 2 when batch_norm=True"),
    ],
)
def test_invalid_parameter_raises_value_error_naming_it(three_classes, params, message):
    X, y = three_classes
    with pytest.raises(ValueError, match=message):
        TorchMLPClassifier(**params).fit(X, y)


def test_network_layout_follows_parameters(three_classes):
    X, y = three_classes
    model = TorchMLPClassifier(
        hidden_width=16, n_layers=2, dropout=0.2, batch_norm=True, max_epochs=1
    ).fit(X, y)
    layout = [type(layer).__name__ for layer in model.module_]
    block = ["Linear", "BatchNorm1d", "ReLU", "Dropout"]
    assert layout == block + block + ["Linear"]
    assert model.module_[0].in_features == 10 and model.module_[-1].out_features == 3

    plain = TorchMLPClassifier(n_layers=1, dropout=0.0, batch_norm=False, max_epochs=1)
    layout = [type(layer).__name__ for layer in plain.fit(X, y).module_]
    assert layout == ["Linear", "ReLU", "Linear"]


# --------------------------------------------------------------------------- epoch callback
def test_epoch_callback_is_routed_through_a_pipeline(three_classes):
    X, y = three_classes
    seen: list[tuple[int, float]] = []
    pipe = Pipeline([("scale", StandardScaler()), ("mlp", TorchMLPClassifier(**FAST))])
    pipe.fit(X, y, mlp__epoch_callback=lambda epoch, loss: seen.append((epoch, loss)))
    model = pipe.named_steps["mlp"]
    assert [epoch for epoch, _ in seen] == list(range(1, model.n_epochs_ + 1))
    assert [loss for _, loss in seen] == model.validation_loss_curve_
    assert all(isinstance(loss, float) for loss in model.validation_loss_curve_)


def test_exception_raised_in_callback_propagates_out_of_fit(three_classes):
    X, y = three_classes
    calls: list[int] = []

    def prune_at_third_epoch(epoch: int, loss: float) -> None:
        calls.append(epoch)
        if epoch == 3:
            raise PruneTrial(f"pruned at epoch {epoch}")

    pipe = Pipeline([("scale", StandardScaler()), ("mlp", TorchMLPClassifier(**FAST))])
    with pytest.raises(PruneTrial, match="pruned at epoch 3"):
        pipe.fit(X, y, mlp__epoch_callback=prune_at_third_epoch)
    assert calls == [1, 2, 3]


# --------------------------------------------------------------------------- early stopping
def test_early_stopping_restores_the_best_epoch(three_classes):
    X, y = three_classes
    stopped = TorchMLPClassifier(hidden_width=32, max_epochs=200, patience=3).fit(X, y)
    curve = stopped.validation_loss_curve_
    assert stopped.n_epochs_ == len(curve) < 200
    assert stopped.best_epoch_ == int(np.argmin(curve)) + 1
    assert stopped.n_epochs_ == stopped.best_epoch_ + 3

    # Training for exactly best_epoch_ epochs follows the same seeded path, so it must
    # end with the weights the early-stopped model restored.
    replay = TorchMLPClassifier(
        hidden_width=32, max_epochs=stopped.best_epoch_, patience=1000
    ).fit(X, y)
    np.testing.assert_array_equal(replay.predict_proba(X), stopped.predict_proba(X))


def test_divergence_stops_training_and_keeps_the_last_finite_epoch(three_classes):
    X, y = three_classes
    wild = dict(optimizer="sgd", learning_rate=1e3, batch_norm=False, **FAST)
    model = TorchMLPClassifier(**wild).fit(X, y)
    assert not np.isfinite(model.validation_loss_curve_[-1])
    assert model.best_epoch_ < model.n_epochs_ < FAST["max_epochs"]
    assert np.isfinite(model.predict_proba(X)).all()


def test_divergence_in_the_first_epoch_raises_with_a_hint(three_classes):
    X, y = three_classes
    wild = dict(optimizer="sgd", learning_rate=1e10, batch_norm=False, **FAST)
    with pytest.raises(ValueError, match="training diverged.*lower learning_rate"):
        TorchMLPClassifier(**wild).fit(X, y)


# --------------------------------------------------------------------------- classification
def test_string_labels_are_predicted_as_given(three_classes):
    X, y = three_classes
    names = np.array(["cat", "dog", "owl"])  # sorted, so name i stands for code i
    labels = pd.Series(names[y], dtype="string")  # pandas' string dtype
    by_name = TorchMLPClassifier(**FAST).fit(pd.DataFrame(X), labels)
    by_code = TorchMLPClassifier(**FAST).fit(X, y)
    assert list(by_name.classes_) == ["cat", "dog", "owl"]
    np.testing.assert_array_equal(by_name.predict(X), names[by_code.predict(X)])
    proba = by_name.predict_proba(X)
    np.testing.assert_array_equal(proba, by_code.predict_proba(X))
    assert proba.shape == (300, 3)
    np.testing.assert_allclose(proba.sum(axis=1), 1.0, rtol=0, atol=1e-12)


def test_dataframe_sparse_and_array_inputs_give_the_same_model(three_classes):
    X, y = three_classes
    X = X.astype(np.float32)
    from_array = TorchMLPClassifier(**FAST).fit(X, y).predict_proba(X)
    from_frame = TorchMLPClassifier(**FAST).fit(pd.DataFrame(X), y).predict_proba(X)
    from_sparse = TorchMLPClassifier(**FAST).fit(sp.csr_matrix(X), y)
    np.testing.assert_array_equal(from_frame, from_array)
    np.testing.assert_array_equal(from_sparse.predict_proba(sp.csr_matrix(X)), from_array)


def test_sgd_with_momentum_learns(three_classes):
    X, y = three_classes
    model = TorchMLPClassifier(optimizer="sgd", learning_rate=0.05, **FAST).fit(X, y)
    assert model.score(X, y) > 0.8  # common practice, no source: well above 1/3 chance


# --------------------------------------------------------------------------- regression
def test_regression_recovers_a_linear_signal():
    X, y = make_regression(n_samples=800, n_features=8, noise=5.0, random_state=0)
    X_train, X_test, y_train, y_test = train_test_split(X, y, random_state=0)
    model = TorchMLPRegressor(random_state=0).fit(X_train, y_train)
    # Sanity check: a linear signal with small noise should be fitted almost perfectly
    # (common practice, no source).
    assert r2_score(y_test, model.predict(X_test)) > 0.9


def test_regression_predictions_are_on_the_original_scale():
    X, y = make_regression(n_samples=400, n_features=4, noise=1.0, random_state=1)
    shifted = TorchMLPRegressor(**FAST).fit(X, 1000.0 * y + 50_000.0)
    unit = TorchMLPRegressor(**FAST).fit(X, y)
    # The target is standardised before training, so the loss and weights are identical.
    assert shifted.validation_loss_curve_ == pytest.approx(unit.validation_loss_curve_)
    np.testing.assert_allclose(
        shifted.predict(X), 1000.0 * unit.predict(X) + 50_000.0, rtol=1e-6
    )
    assert unit.predict(X).shape == (400,)


# --------------------------------------------------------------------------- external check
def test_digits_test_accuracy_reaches_095():
    # External check: scikit-learn's bundled digits data (sklearn.datasets.load_digits,
    # 1797 8x8 images, 10 classes).  Small MLPs reach about 0.97 test accuracy on it (from
    # memory); 0.95 leaves room for seed-to-seed spread.
    X, y = load_digits(return_X_y=True)
    X_train, X_test, y_train, y_test = train_test_split(
        X, y, test_size=0.25, stratify=y, random_state=0
    )
    pipe = Pipeline(
        [
            ("scale", StandardScaler()),
            ("mlp", TorchMLPClassifier(hidden_width=256, n_layers=1, max_epochs=60)),
        ]
    )
    pipe.fit(X_train, y_train)
    assert accuracy_score(y_test, pipe.predict(X_test)) >= 0.95


# --------------------------------------------------------------------------- packaging
def test_importing_the_module_does_not_import_torch():
    code = "import sys, tunelab.models._mlp; sys.exit('torch' in sys.modules)"
    repo_root = Path(__file__).resolve().parents[1]
    result = subprocess.run([sys.executable, "-c", code], cwd=repo_root, check=False)
    assert result.returncode == 0


# --------------------------------------------------------------------------- scikit-learn
# The library's own estimator checks (sklearn.utils.estimator_checks), with a configuration
# small enough to stay quick yet strong enough for its score thresholds.
@parametrize_with_checks(
    [
        TorchMLPClassifier(hidden_width=64, learning_rate=3e-3, max_epochs=40),
        TorchMLPRegressor(hidden_width=64, learning_rate=3e-3, max_epochs=40),
    ]
)
def test_passes_scikit_learn_estimator_checks(estimator, check):
    check(estimator)
