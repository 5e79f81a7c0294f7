"""A sensible fixed search space for any tabular dataset (no meta-feature priors)."""

from __future__ import annotations

from collections.abc import Mapping

from tunelab.models import FAMILY_NAMES
from tunelab.space._spec import FamilySpec, ParamSpec, SpaceSpec


def _f(low: float, high: float, log: bool = False, reason: str = "") -> ParamSpec:
    return ParamSpec("float", low=low, high=high, log=log, reason=reason)


def _i(low: int, high: int, log: bool = False, reason: str = "") -> ParamSpec:
    return ParamSpec("int", low=low, high=high, log=log, reason=reason)


def _c(*choices: object, reason: str = "") -> ParamSpec:
    return ParamSpec("categorical", choices=tuple(choices), reason=reason)


def default_families(task: str) -> dict[str, FamilySpec]:
    """The generic families and ranges used when no priors are applied."""
    linear = {"num_transform": _c("standard", "quantile", reason="a quantile map helps linear models on skewed inputs")}
    if task == "regression":
        linear["alpha"] = _f(1e-4, 1e3, log=True, reason="ridge penalty over seven decades")
    else:
        linear["C"] = _f(1e-4, 1e3, log=True, reason="inverse penalty over seven decades")
    forest = {
        "n_estimators": _i(50, 400, log=True, reason="more trees help less and less; cost grows linearly"),
        "max_features": _f(0.1, 1.0, reason="share of features tried at each split"),
        "min_samples_leaf": _i(1, 32, log=True, reason="leaf size controls variance"),
    }
    hist_gb = {
        "learning_rate": _f(0.01, 0.3, log=True, reason="step size, searched on a log scale"),
        "max_iter": _i(50, 500, log=True, reason="boosting rounds"),
        "max_leaf_nodes": _i(8, 128, log=True, reason="tree size"),
        "min_samples_leaf": _i(5, 100, log=True, reason="leaf size controls variance"),
        "l2_regularization": _f(1e-6, 10.0, log=True, reason="leaf value shrinkage"),
        "max_features": _f(0.3, 1.0, reason="share of features per split"),
    }
    generic = {
        "hist_gb": FamilySpec(hist_gb, "strong default for tabular data"),
        "random_forest": FamilySpec(forest, "robust, little tuning needed"),
        "extra_trees": FamilySpec(dict(forest), "lower variance than random forest on noisy data"),
        "linear": FamilySpec(linear, "fast baseline, good with many sparse features"),
    }
    return {name: generic[name] for name in FAMILY_NAMES if name in generic}  # in the registry's order


def default_space(task: str, roles: Mapping[str, str]) -> SpaceSpec:
    """The fixed generic space: four families, text settings only when text columns exist."""
    params: dict[str, ParamSpec] = {}
    if "text" in roles.values():
        params["prep.text_features"] = _i(500, 20000, log=True, reason="TF-IDF vocabulary size")
        params["prep.text_components"] = _i(8, 128, log=True, reason="SVD components of the text for tree models")
    families = default_families(task)
    # Cheap first, so even a short box ends with a finished trial; then the strong default.
    penalty = "linear.alpha" if task == "regression" else "linear.C"
    warm = (
        {"family": "linear", "linear.num_transform": "standard", penalty: 1.0},
        {"family": "hist_gb", **{f"hist_gb.{k}": v for k, v in {
            "learning_rate": 0.1, "max_iter": 100, "max_leaf_nodes": 31, "min_samples_leaf": 20,
            "l2_regularization": 1e-6, "max_features": 1.0}.items()}},
    )
    return SpaceSpec(params=params, families=families, warm_starts=warm,
                     family_reason="generic space: all four families, no priors")
