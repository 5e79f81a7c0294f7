"""A small torch multilayer perceptron behind the scikit-learn estimator contract.

The search treats the MLP like any other pipeline step: a trial's config is replayed with
``clone`` and ``set_params``, and the last step of a ``Pipeline`` receives the
``epoch_callback`` fit parameter through the usual ``<step>__epoch_callback`` routing.  The
callback is how the engine reports intermediate values and prunes a trial: it raises from
inside the callback, and ``fit`` lets that exception through untouched.

Design choices, and why:

* The input is already imputed, standardised and one-hot encoded upstream, so the estimator
  only turns whatever arrives (array, DataFrame, scipy sparse) into dense ``float32``.
* Every random draw (weight initialisation, inner validation split, batch order, dropout
  masks) comes from generators seeded from ``random_state``; global RNGs are neither seeded
  nor advanced.  Dropout masks are drawn by hand during training because ``nn.Dropout``
  can only use the global generator; at prediction time the network is a plain
  ``nn.Sequential`` in eval mode, so the fitted model pickles and runs on its own.
* ``torch`` is imported inside functions only, so importing tunelab (and ``tunelab --help``)
  stays fast.  This module is the only place in tunelab that imports torch.
* The thread count is set for the duration of ``fit``/``predict`` and put back afterwards,
  so the estimator leaves no process-wide setting behind.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import TYPE_CHECKING, Any

import numpy as np
import scipy.sparse as sp
from sklearn.base import BaseEstimator, ClassifierMixin, RegressorMixin
from sklearn.model_selection import train_test_split
from sklearn.utils import Tags, check_random_state
from sklearn.utils.multiclass import check_classification_targets
from sklearn.utils.validation import check_is_fitted, validate_data

if TYPE_CHECKING:
    import torch

EpochCallback = Callable[[int, float], None]

# Rows pushed through the network at once when predicting or scoring the validation split;
# bounds memory on large inputs without changing results.
_EVAL_CHUNK = 8192
_SEED_HIGH = 2**31 - 1


# --------------------------------------------------------------------------- parameters
def _is_int(value: Any) -> bool:
    return isinstance(value, numbers.Integral) and not isinstance(value, bool)


def _is_real(value: Any) -> bool:
    return (
        isinstance(value, numbers.Real)
        and not isinstance(value, bool)
        and math.isfinite(float(value))
    )


# name -> (accepts the value?, what a valid value looks like).  Declared once; the error
# messages are generated from the descriptions.
_PARAMETER_RULES: dict[str, tuple[Callable[[Any], bool], str]] = {
    "hidden_width": (lambda v: _is_int(v) and v >= 1, "an integer >= 1"),
    "n_layers": (lambda v: _is_int(v) and v >= 0, "an integer >= 0"),
    "dropout": (lambda v: _is_real(v) and 0.0 <= v < 1.0, "a number in [0, 1)"),
    "batch_norm": (lambda v: isinstance(v, (bool, np.bool_)), "True or False"),
    "learning_rate": (lambda v: _is_real(v) and v > 0.0, "a number > 0"),
    "weight_decay": (lambda v: _is_real(v) and v >= 0.0, "a number >= 0"),
    "batch_size": (lambda v: _is_int(v) and v >= 1, "an integer >= 1"),
    "optimizer": (lambda v: v in ("adam", "sgd"), "'adam' or 'sgd'"),
    "momentum": (lambda v: _is_real(v) and 0.0 <= v < 1.0, "a number in [0, 1)"),
    "max_epochs": (lambda v: _is_int(v) and v >= 1, "an integer >= 1"),
    "patience": (lambda v: _is_int(v) and v >= 1, "an integer >= 1"),
    "validation_fraction": (
        lambda v: _is_real(v) and 0.0 < v < 1.0,
        "a number strictly between 0 and 1",
    ),
    "n_threads": (lambda v: _is_int(v) and v >= 1, "an integer >= 1"),
}


def _check_parameters(estimator: _BaseTorchMLP) -> None:
    """Raise ``ValueError`` naming the first parameter whose value is not allowed."""
    name = type(estimator).__name__
    for param, (accepts, expected) in _PARAMETER_RULES.items():
        value = getattr(estimator, param)
        if not accepts(value):
            raise ValueError(f"{name}: {param} must be {expected}, got {value!r}.")
    if estimator.batch_norm and estimator.batch_size < 2:
        raise ValueError(
            f"{name}: batch_size must be >= 2 when batch_norm=True "
            f"(batch normalisation needs two rows per batch), got {estimator.batch_size}."
        )


# --------------------------------------------------------------------------- torch helpers
@contextmanager
def _torch_threads(n_threads: int) -> Iterator[None]:
    """Use ``n_threads`` intra-op threads inside the block, then restore the old count."""
    import torch

    previous = torch.get_num_threads()
    torch.set_num_threads(n_threads)
    try:
        yield
    finally:
        torch.set_num_threads(previous)


def _build_network(
    n_inputs: int,
    n_outputs: int,
    *,
    hidden_width: int,
    n_layers: int,
    dropout: float,
    batch_norm: bool,
    generator: torch.Generator,
) -> torch.nn.Sequential:
    """Blocks of Linear → BatchNorm1d → ReLU → Dropout, then a linear head.

    Linear layers are created without the default (global-RNG) initialisation and then
    initialised from ``generator``: He-uniform for layers followed by a ReLU, the usual
    ±1/sqrt(fan_in) range for the head, zero biases.
    """
    import torch
    from torch import nn

    layers: list[nn.Module] = []
    width_in = n_inputs
    for _ in range(n_layers):
        linear = nn.utils.skip_init(nn.Linear, width_in, hidden_width)
        nn.init.kaiming_uniform_(linear.weight, nonlinearity="relu", generator=generator)
        nn.init.zeros_(linear.bias)
        layers.append(linear)
        if batch_norm:
            layers.append(nn.BatchNorm1d(hidden_width))
        layers.append(nn.ReLU())
        if dropout > 0.0:
            layers.append(nn.Dropout(dropout))
        width_in = hidden_width
    head = nn.utils.skip_init(nn.Linear, width_in, n_outputs)
    bound = 1.0 / math.sqrt(width_in)
    with torch.no_grad():
        head.weight.uniform_(-bound, bound, generator=generator)
    nn.init.zeros_(head.bias)
    layers.append(head)
    return nn.Sequential(*layers)


def _forward_train(
    network: torch.nn.Sequential, x: torch.Tensor, generator: torch.Generator
) -> torch.Tensor:
    """Training-mode forward pass whose dropout masks come from ``generator``."""
    import torch
    from torch import nn

    for layer in network:
        if isinstance(layer, nn.Dropout):
            keep = torch.rand(x.shape, generator=generator) >= layer.p
            x = x * keep / (1.0 - layer.p)
        else:
            x = layer(x)
    return x


def _forward_eval(network: torch.nn.Sequential, x: torch.Tensor) -> torch.Tensor:
    """Eval-mode forward pass in chunks (no dropout, batch-norm running statistics)."""
    import torch

    network.eval()
    with torch.inference_mode():
        parts = [network(x[i : i + _EVAL_CHUNK]) for i in range(0, len(x), _EVAL_CHUNK)]
    return torch.cat(parts)


def _snapshot(network: torch.nn.Module) -> dict[str, torch.Tensor]:
    return {k: v.detach().clone() for k, v in network.state_dict().items()}


def _dense_float32(X: Any) -> np.ndarray:
    """Dense C-ordered float32 copy of an already validated array or sparse matrix."""
    if sp.issparse(X):
        X = X.toarray()
    return np.ascontiguousarray(X, dtype=np.float32)


# --------------------------------------------------------------------------- estimators
class _BaseTorchMLP(BaseEstimator):
    """Shared parameters, validation and training loop of the torch MLP estimators.

    Subclasses say how the target is encoded, which loss is minimised and how raw network
    outputs become predictions.
    """

    def __init__(
        self,
        *,
        hidden_width: int = 256,
        n_layers: int = 1,
        dropout: float = 0.1,
        batch_norm: bool = True,
        learning_rate: float = 1e-3,
        weight_decay: float = 1e-5,
        batch_size: int = 128,
        optimizer: str = "adam",
        momentum: float = 0.9,
        max_epochs: int = 100,
        patience: int = 10,
        validation_fraction: float = 0.1,
        random_state: int | np.random.RandomState | None = 0,
        n_threads: int = 1,
    ) -> None:
        self.hidden_width = hidden_width
        self.n_layers = n_layers
        self.dropout = dropout
        self.batch_norm = batch_norm
        self.learning_rate = learning_rate
        self.weight_decay = weight_decay
        self.batch_size = batch_size
        self.optimizer = optimizer
        self.momentum = momentum
        self.max_epochs = max_epochs
        self.patience = patience
        self.validation_fraction = validation_fraction
        self.random_state = random_state
        self.n_threads = n_threads

    # -- subclass hooks --------------------------------------------------------------
    def _validate_xy(self, X: Any, y: Any) -> tuple[Any, np.ndarray]:
        """Check ``X, y`` and record ``n_features_in_`` (and feature names)."""
        raise NotImplementedError

    def _encode_target(self, y: np.ndarray) -> np.ndarray:
        """Learn what the whole target needs (e.g. ``classes_``) and return it encoded."""
        raise NotImplementedError

    def _stratify_labels(self, y_encoded: np.ndarray) -> np.ndarray | None:
        """Labels to stratify the inner split on, or None for a plain shuffled split."""
        return None

    def _fit_target_scaling(self, y_train: np.ndarray) -> None:
        """Learn any target scaling from the inner training rows only."""

    def _n_outputs(self) -> int:
        raise NotImplementedError

    def _target_tensor(self, y_encoded: np.ndarray) -> torch.Tensor:
        """Encoded target rows as the tensor the loss expects (scaled if need be)."""
        raise NotImplementedError

    def _loss(self, output: torch.Tensor, target: torch.Tensor) -> torch.Tensor:
        raise NotImplementedError

    # -- fitting ---------------------------------------------------------------------
    def fit(
        self, X: Any, y: Any, epoch_callback: EpochCallback | None = None
    ) -> _BaseTorchMLP:
        """Train on ``X, y`` with early stopping on an inner, seeded validation split.

        Parameters
        ----------
        X
            Numeric features of shape (n_samples, n_features): array, DataFrame or scipy
            sparse matrix (densified; upstream encoding keeps these small).
        y
            Target of length n_samples.
        epoch_callback
            Called as ``epoch_callback(epoch, validation_loss)`` after every epoch, epochs
            counted from 1.  The loss is the one being minimised on the validation split
            (cross-entropy; MSE on the standardised target for regression); it is nan or
            inf when training diverges, and that epoch is the last.  Anything the callback
            raises propagates out of ``fit``, which is how a trial is pruned.

        Returns
        -------
        self
            The fitted estimator, with ``module_``, ``n_epochs_``, ``best_epoch_`` and
            ``validation_loss_curve_`` set.
        """
        import torch

        _check_parameters(self)
        X, y = self._validate_xy(X, y)
        X = _dense_float32(X)
        self._check_enough_rows(len(X))
        rng = check_random_state(self.random_state)
        split_seed = int(rng.randint(_SEED_HIGH))
        torch_seed = int(rng.randint(_SEED_HIGH))

        y_encoded = self._encode_target(y)
        train_idx, val_idx = self._inner_split(len(X), y_encoded, split_seed)
        self._fit_target_scaling(y_encoded[train_idx])

        with _torch_threads(self.n_threads):
            generator = torch.Generator().manual_seed(torch_seed)
            network = _build_network(
                X.shape[1],
                self._n_outputs(),
                hidden_width=self.hidden_width,
                n_layers=self.n_layers,
                dropout=float(self.dropout),
                batch_norm=bool(self.batch_norm),
                generator=generator,
            )
            curve, best_epoch = self._train(
                network,
                torch.tensor(X[train_idx]),
                self._target_tensor(y_encoded[train_idx]),
                torch.tensor(X[val_idx]),
                self._target_tensor(y_encoded[val_idx]),
                generator,
                epoch_callback,
            )
        network.eval()
        self.module_ = network
        self.validation_loss_curve_ = curve
        self.n_epochs_ = len(curve)
        self.best_epoch_ = best_epoch
        return self

    def _n_validation_rows(self, n_samples: int) -> int:
        return max(1, math.ceil(self.validation_fraction * n_samples))

    def _check_enough_rows(self, n_samples: int) -> None:
        if n_samples - self._n_validation_rows(n_samples) < 2:
            raise ValueError(
                f"{type(self).__name__} needs at least two training rows after holding out "
                f"validation_fraction={self.validation_fraction}, got n_samples = {n_samples}."
            )

    def _inner_split(
        self, n_samples: int, y_encoded: np.ndarray, seed: int
    ) -> tuple[np.ndarray, np.ndarray]:
        """Seeded train/validation row indices, stratified when every class allows it."""
        n_val = self._n_validation_rows(n_samples)
        indices = np.arange(n_samples)
        stratify = self._stratify_labels(y_encoded)
        if stratify is not None:
            counts = np.bincount(stratify)
            counts = counts[counts > 0]
            n_classes = len(counts)
            if counts.min() < 2 or n_val < n_classes or n_samples - n_val < n_classes:
                stratify = None
        train_idx, val_idx = train_test_split(
            indices, test_size=n_val, random_state=seed, stratify=stratify
        )
        return np.sort(train_idx), np.sort(val_idx)

    def _train(
        self,
        network: torch.nn.Sequential,
        x_train: torch.Tensor,
        t_train: torch.Tensor,
        x_val: torch.Tensor,
        t_val: torch.Tensor,
        generator: torch.Generator,
        epoch_callback: EpochCallback | None,
    ) -> tuple[list[float], int]:
        """Mini-batch training; returns the validation curve and the restored best epoch."""
        import torch

        if self.optimizer == "adam":
            optimiser: torch.optim.Optimizer = torch.optim.Adam(
                network.parameters(),
                lr=float(self.learning_rate),
                weight_decay=float(self.weight_decay),
            )
        else:
            optimiser = torch.optim.SGD(
                network.parameters(),
                lr=float(self.learning_rate),
                momentum=float(self.momentum),
                weight_decay=float(self.weight_decay),
            )
        n_train = len(x_train)
        batch_size = min(int(self.batch_size), n_train)
        # A trailing one-row batch cannot be batch-normalised in training mode; skip it.
        min_batch = 2 if self.batch_norm else 1

        curve: list[float] = []
        best_loss = math.inf
        best_state = _snapshot(network)
        best_epoch = 0
        epochs_since_best = 0
        for epoch in range(1, int(self.max_epochs) + 1):
            network.train()
            order = torch.randperm(n_train, generator=generator)
            for start in range(0, n_train, batch_size):
                batch = order[start : start + batch_size]
                if len(batch) < min_batch:
                    continue
                optimiser.zero_grad(set_to_none=True)
                output = _forward_train(network, x_train[batch], generator)
                self._loss(output, t_train[batch]).backward()
                optimiser.step()

            val_loss = float(self._loss(_forward_eval(network, x_val), t_val))
            curve.append(val_loss)
            if epoch_callback is not None:
                epoch_callback(epoch, val_loss)
            if not math.isfinite(val_loss):
                break  # diverged; further epochs cannot recover
            if val_loss < best_loss:
                best_loss, best_state, best_epoch = val_loss, _snapshot(network), epoch
                epochs_since_best = 0
            else:
                epochs_since_best += 1
                if epochs_since_best >= self.patience:
                    break

        if best_epoch == 0:
            raise ValueError(
                f"{type(self).__name__}: training diverged (validation loss {curve[-1]} "
                f"after epoch 1); lower learning_rate."
            )
        network.load_state_dict(best_state)
        return curve, best_epoch

    # -- prediction ------------------------------------------------------------------
    def _raw_output(self, X: Any) -> np.ndarray:
        """Network outputs for ``X`` as a float64 array of shape (n_samples, n_outputs)."""
        import torch

        check_is_fitted(self)
        X = validate_data(
            self, X, reset=False, accept_sparse=("csr", "csc", "coo"), dtype=np.float32
        )
        x = torch.tensor(_dense_float32(X))
        with _torch_threads(self.n_threads):
            output = _forward_eval(self.module_, x)
        return output.numpy().astype(np.float64)

    def __sklearn_is_fitted__(self) -> bool:
        return hasattr(self, "module_")

    def __sklearn_tags__(self) -> Tags:
        tags = super().__sklearn_tags__()
        tags.input_tags.sparse = True
        return tags


class TorchMLPClassifier(ClassifierMixin, _BaseTorchMLP):
    """Multilayer perceptron classifier trained with torch on the CPU.

    Minimises cross-entropy with mini-batch Adam or SGD with momentum, and stops early
    when the loss on a seeded, stratified inner validation split has not improved for
    ``patience`` epochs, keeping the best epoch's weights.

    Parameters
    ----------
    hidden_width
        Units in each hidden block.
    n_layers
        Number of hidden blocks (Linear → BatchNorm1d → ReLU → Dropout); 0 gives a
        multinomial logistic regression.
    dropout
        Probability of zeroing a hidden unit during training.
    batch_norm
        Whether each hidden block normalises its pre-activations.
    learning_rate, weight_decay
        Optimiser step size and L2 penalty.
    batch_size
        Rows per mini-batch.
    optimizer
        ``"adam"`` or ``"sgd"`` (SGD uses ``momentum``).
    momentum
        SGD momentum; ignored by Adam.
    max_epochs, patience
        Upper bound on epochs; epochs without validation improvement before stopping.
    validation_fraction
        Share of the training rows held out for early stopping.
    random_state
        Seeds initialisation, the inner split, batch order and dropout.  The same seed
        on the same data gives identical predictions on the CPU.
    n_threads
        Torch intra-op threads used while fitting and predicting.

    Attributes
    ----------
    classes_ : ndarray
        Class labels in sorted order; ``predict`` returns these.
    module_ : torch.nn.Sequential
        The trained network (eval mode), outputting one logit per class.
    n_epochs_ : int
        Epochs run before stopping.
    best_epoch_ : int
        Epoch whose weights were kept.
    validation_loss_curve_ : list of float
        Validation cross-entropy after each epoch.
    """

    def _validate_xy(self, X: Any, y: Any) -> tuple[Any, np.ndarray]:
        X, y = validate_data(
            self, X, y, accept_sparse=("csr", "csc", "coo"), dtype=np.float32
        )
        check_classification_targets(y)
        return X, y

    def _encode_target(self, y: np.ndarray) -> np.ndarray:
        classes, encoded = np.unique(y, return_inverse=True)
        if len(classes) < 2:
            raise ValueError(
                f"{type(self).__name__} needs at least two classes in y, got one class: "
                f"{classes[0]!r}."
            )
        self.classes_ = classes
        return encoded.astype(np.int64)

    def _n_outputs(self) -> int:
        return len(self.classes_)

    def _stratify_labels(self, y_encoded: np.ndarray) -> np.ndarray | None:
        return y_encoded

    def _target_tensor(self, y_encoded: np.ndarray) -> torch.Tensor:
        import torch

        return torch.tensor(y_encoded, dtype=torch.int64)

    def _loss(self, output: torch.Tensor, target: torch.Tensor) -> torch.Tensor:
        from torch.nn import functional

        return functional.cross_entropy(output, target)

    def predict_proba(self, X: Any) -> np.ndarray:
        """Class probabilities of shape (n_samples, n_classes), columns in ``classes_`` order."""
        logits = self._raw_output(X)
        logits -= logits.max(axis=1, keepdims=True)
        proba = np.exp(logits)
        proba /= proba.sum(axis=1, keepdims=True)
        return proba

    def predict(self, X: Any) -> np.ndarray:
        """Most probable class label for each row, as found in ``classes_``."""
        best = np.argmax(self._raw_output(X), axis=1)  # checks fitted before classes_
        return self.classes_[best]


class TorchMLPRegressor(RegressorMixin, _BaseTorchMLP):
    """Multilayer perceptron regressor trained with torch on the CPU.

    Minimises the mean squared error of the standardised target (mean and scale taken
    from the inner training split), so one learning rate suits targets of any unit;
    predictions are mapped back to the original scale.  Early stopping, seeding and the
    network are as in :class:`TorchMLPClassifier`.

    Parameters
    ----------
    **params
        The same constructor parameters, with the same meaning and defaults, as
        :class:`TorchMLPClassifier`.

    Attributes
    ----------
    y_mean_, y_scale_ : ndarray of shape (n_outputs,)
        Standardisation of the target learned on the inner training split.
    n_outputs_ : int
        Number of target columns (1 for a 1-d target; predictions are then 1-d).
    module_ : torch.nn.Sequential
        The trained network (eval mode), predicting the standardised target.
    n_epochs_, best_epoch_, validation_loss_curve_
        As in :class:`TorchMLPClassifier`; the loss is MSE on the standardised target.
    """

    def _validate_xy(self, X: Any, y: Any) -> tuple[Any, np.ndarray]:
        X, y = validate_data(
            self,
            X,
            y,
            accept_sparse=("csr", "csc", "coo"),
            dtype=np.float32,
            multi_output=True,
            y_numeric=True,
        )
        return X, np.asarray(y, dtype=np.float64)

    def _encode_target(self, y: np.ndarray) -> np.ndarray:
        self.n_outputs_ = 1 if y.ndim == 1 else y.shape[1]
        return y.reshape(len(y), -1)

    def _fit_target_scaling(self, y_train: np.ndarray) -> None:
        scale = y_train.std(axis=0)
        self.y_mean_ = y_train.mean(axis=0)
        self.y_scale_ = np.where(scale > 0.0, scale, 1.0)

    def _n_outputs(self) -> int:
        return self.n_outputs_

    def _target_tensor(self, y_encoded: np.ndarray) -> torch.Tensor:
        import torch

        scaled = (y_encoded - self.y_mean_) / self.y_scale_
        return torch.tensor(scaled, dtype=torch.float32)

    def _loss(self, output: torch.Tensor, target: torch.Tensor) -> torch.Tensor:
        from torch.nn import functional

        return functional.mse_loss(output, target)

    def predict(self, X: Any) -> np.ndarray:
        """Predicted target on the original scale; 1-d when fitted on a single output."""
        prediction = self._raw_output(X) * self.y_scale_ + self.y_mean_
        return prediction.ravel() if self.n_outputs_ == 1 else prediction

    def __sklearn_tags__(self) -> Tags:
        tags = super().__sklearn_tags__()
        tags.target_tags.multi_output = True
        return tags


__all__ = ["TorchMLPClassifier", "TorchMLPRegressor"]
