"""Model families: turning a sampled config into a scikit-learn pipeline.

Each family knows its estimator for classification and regression and the preprocessing style
it needs.  Config keys are ``<family>.<param>``; ``prep.*`` keys tune preprocessing.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from typing import Any

from sklearn.pipeline import Pipeline

from tunelab.errors import InputError
from tunelab.models._preprocess import build_preprocessor
from tunelab.models._row_cap import ROWS_KEY


@dataclass(frozen=True)
class Family:
    """How to build one family's estimator, and what preprocessing it wants."""

    name: str
    style: str  # "tree", "scaled" (sparse allowed) or "dense_scaled"
    make: Callable[[Mapping[str, Any], str, int, int], Any]


def _linear(p: Mapping[str, Any], task: str, seed: int, threads: int) -> Any:
    from sklearn.linear_model import LogisticRegression, Ridge

    if task == "regression":
        return Ridge(alpha=float(p.get("alpha", 1.0)), random_state=seed)
    return LogisticRegression(C=float(p.get("C", 1.0)), max_iter=int(p.get("max_iter", 300)),
                              class_weight=p.get("class_weight"), random_state=seed)


def _forest(extra: bool) -> Callable[[Mapping[str, Any], str, int, int], Any]:
    def make(p: Mapping[str, Any], task: str, seed: int, threads: int) -> Any:
        from sklearn import ensemble

        name = ("ExtraTrees" if extra else "RandomForest") + ("Regressor" if task == "regression" else "Classifier")
        kwargs: dict[str, Any] = dict(
            n_estimators=int(p.get("n_estimators", 200)),
            max_features=float(p.get("max_features", 0.5)),
            min_samples_leaf=int(p.get("min_samples_leaf", 1)),
            n_jobs=threads, random_state=seed,
        )
        if task != "regression":
            kwargs["class_weight"] = p.get("class_weight")
        return getattr(ensemble, name)(**kwargs)

    return make


def _hist_gb(p: Mapping[str, Any], task: str, seed: int, threads: int) -> Any:
    from sklearn.ensemble import HistGradientBoostingClassifier, HistGradientBoostingRegressor

    kwargs: dict[str, Any] = dict(
        learning_rate=float(p.get("learning_rate", 0.1)),
        max_iter=int(p.get("max_iter", 200)),
        max_leaf_nodes=int(p.get("max_leaf_nodes", 31)),
        min_samples_leaf=int(p.get("min_samples_leaf", 20)),
        l2_regularization=float(p.get("l2_regularization", 0.0)),
        max_features=float(p.get("max_features", 1.0)),
        early_stopping=False, random_state=seed,
    )
    if task == "regression":
        return HistGradientBoostingRegressor(loss=p.get("loss", "squared_error"), **kwargs)
    return HistGradientBoostingClassifier(class_weight=p.get("class_weight"), **kwargs)


def _knn(p: Mapping[str, Any], task: str, seed: int, threads: int) -> Any:
    from sklearn.neighbors import KNeighborsClassifier, KNeighborsRegressor

    cls = KNeighborsRegressor if task == "regression" else KNeighborsClassifier
    return cls(n_neighbors=int(p.get("n_neighbors", 15)), weights=p.get("weights", "distance"), n_jobs=threads)


def _svm(p: Mapping[str, Any], task: str, seed: int, threads: int) -> Any:
    from sklearn.svm import SVC, SVR

    if task == "regression":
        from sklearn.compose import TransformedTargetRegressor
        from sklearn.preprocessing import StandardScaler

        # SVR's epsilon tube (0.1) and C are in the target's units: on a price in thousands the tube
        # is nothing and C = 1 flattens the fit. On a standardised target both mean the same on every
        # table, and predictions come back in the target's units.
        return TransformedTargetRegressor(regressor=SVR(C=float(p.get("C", 1.0)), gamma=p.get("gamma", "scale")),
                                          transformer=StandardScaler())
    return SVC(C=float(p.get("C", 1.0)), gamma=p.get("gamma", "scale"), probability=True,
               class_weight=p.get("class_weight"), random_state=seed)


# The MLP ladder (common practice, no source): rung -> (hidden units, hidden layers, dropout),
# each a (low, high) range.  A config that names ``rung`` places itself inside the rung's ranges
# with ``rung_width``, ``rung_depth`` and ``rung_dropout`` in [0, 1] (width on a log scale), so one
# search space holds networks whose sizes differ twentyfold without mixing their ranges.
MLP_RUNGS: dict[str, tuple[tuple[int, int], tuple[int, int], tuple[float, float]]] = {
    "narrow": ((100, 500), (1, 1), (0.0, 0.2)),
    "wide": ((1200, 1500), (2, 3), (0.4, 0.5)),
    "very_wide": ((8000, 10000), (1, 1), (0.6, 0.8)),
}


def mlp_rung_params(p: Mapping[str, Any]) -> dict[str, Any]:
    """Hidden width, layer count and dropout for a config that names an MLP ``rung`` (else empty)."""
    if "rung" not in p:
        return {}
    if p["rung"] not in MLP_RUNGS:
        raise InputError(f"unknown MLP rung '{p['rung']}'", f"rungs are: {', '.join(MLP_RUNGS)}")
    (w_lo, w_hi), (l_lo, l_hi), (d_lo, d_hi) = MLP_RUNGS[p["rung"]]

    def at(key: str) -> float:
        return min(1.0, max(0.0, float(p.get(key, 0.5))))

    return {
        "hidden_width": int(round(w_lo * (w_hi / w_lo) ** at("rung_width"))),
        "n_layers": int(round(l_lo + (l_hi - l_lo) * at("rung_depth"))),
        "dropout": float(d_lo + (d_hi - d_lo) * at("rung_dropout")),
    }


def _mlp(p: Mapping[str, Any], task: str, seed: int, threads: int) -> Any:
    from tunelab.models import _mlp as mlp  # torch is imported only when an MLP is built

    cls = mlp.TorchMLPRegressor if task == "regression" else mlp.TorchMLPClassifier
    keys = ("hidden_width", "n_layers", "dropout", "batch_norm", "learning_rate", "weight_decay", "batch_size",
            "optimizer", "max_epochs", "patience")
    kwargs = {k: p[k] for k in keys if k in p}
    kwargs.update(mlp_rung_params(p))
    return cls(random_state=seed, n_threads=threads, **kwargs)


# The one registry of families, in the one order every other package lists them: the space builder
# decides and breaks ranking ties in it, the cost probes time it, the generic space keeps it.
FAMILIES: dict[str, Family] = {
    "hist_gb": Family("hist_gb", "tree", _hist_gb),
    "random_forest": Family("random_forest", "tree", _forest(extra=False)),
    "extra_trees": Family("extra_trees", "tree", _forest(extra=True)),
    "linear": Family("linear", "scaled", _linear),
    "svm": Family("svm", "scaled", _svm),
    "mlp": Family("mlp", "dense_scaled", _mlp),
    "knn": Family("knn", "dense_scaled", _knn),
}


def preload(families: Iterable[str], task: str) -> None:
    """Import every module the given families need, once, in the parent process.

    Trials run in forked children: what the parent imported is shared, what it did not is
    imported again by every child (seconds each on a busy machine).
    """
    for name in families:
        if name in FAMILIES:
            FAMILIES[name].make({}, task, 0, 1)


def family_params(config: Mapping[str, Any], family: str) -> dict[str, Any]:
    """The ``<family>.*`` entries of a config, without the prefix."""
    prefix = family + "."
    return {k[len(prefix):]: v for k, v in config.items() if k.startswith(prefix)}


def build_pipeline(
    config: Mapping[str, Any],
    roles: Mapping[str, str],
    cardinality: Mapping[str, int],
    task: str,
    *,
    seed: int = 0,
    n_threads: int = 1,
) -> Pipeline:
    """The full pipeline (preprocessing + model) for one config.

    The last step is named ``model`` so fit parameters route as ``model__<name>``.
    """
    family_name = config.get("family", "hist_gb")
    if family_name not in FAMILIES:
        raise InputError(f"unknown model family '{family_name}'", f"families are: {', '.join(FAMILIES)}")
    family = FAMILIES[family_name]
    params = family_params(config, family_name)
    params.pop(ROWS_KEY, None)  # how many rows to train on is the caller's business (see _row_cap)
    preprocess = build_preprocessor(
        roles, cardinality, style=family.style, task=task,
        numeric_transform=str(params.get("num_transform", "standard")),
        text_features=int(config.get("prep.text_features", 5000)),
        text_components=int(config.get("prep.text_components", 32)),
        seed=seed,
    )
    return Pipeline([("prep", preprocess), ("model", family.make(params, task, seed, n_threads))])
